"""The store's table of take measurements: JSON texts under a key, written and read in one transaction.

The store does not interpret these texts: :mod:`fieldtl.testrun` makes the key (audio content,
analysis settings, analysis version) and the JSON, and reads them back strictly. Rows are keyed by
content, not by take, so two takes of the same audio with the same settings share one row and a
survey folder measured by ``fieldtl assess`` uses the same rows as the app.
"""

from __future__ import annotations

from fieldtl.store.connection import Database
from fieldtl.store.schema import utc_now


class MeasurementRows:
    """``take_measurements`` rows of one store (thread-safe through the store's connection lock)."""

    def __init__(self, database: Database) -> None:
        self._database = database

    def get(self, key: str) -> str | None:
        """The measurement JSON kept under ``key``, or None."""
        with self._database.read() as db:
            row = db.execute("SELECT measurement FROM take_measurements WHERE key = ?", (key,)).fetchone()
        return None if row is None else row[0]

    def put(self, key: str, *, sha256: str, analysis_version: str, settings_json: str, measurement_json: str) -> None:
        """Keep (or replace) the measurement under ``key``."""
        with self._database.write() as db:
            db.execute("INSERT OR REPLACE INTO take_measurements (key, sha256, analysis_version, settings, "
                       "measurement, created_at) VALUES (?, ?, ?, ?, ?, ?)",
                       (key, sha256, analysis_version, settings_json, measurement_json, utc_now()))

    def keys(self, sha256: str | None = None) -> frozenset[str]:
        """Keys of every row, or of the rows of one audio content."""
        with self._database.read() as db:
            if sha256 is None:
                found = db.execute("SELECT key FROM take_measurements").fetchall()
            else:
                found = db.execute("SELECT key FROM take_measurements WHERE sha256 = ?", (sha256,)).fetchall()
        return frozenset(r[0] for r in found)

    def forget_other_versions(self, analysis_version: str) -> int:
        """Remove rows made by another analysis version (they can never match again); returns how many."""
        with self._database.write() as db:
            cursor = db.execute("DELETE FROM take_measurements WHERE analysis_version != ?", (analysis_version,))
        return cursor.rowcount
