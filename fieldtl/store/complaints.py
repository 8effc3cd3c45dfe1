"""Complaint files in the store: an anonymous reference, the rooms, recording periods, the diary,
and a separation test of this store linked to it.

A period is kept as its noise-record JSON (fieldtl.noise.export.record_to_json): levels and
spectra only, never the recordings. Short event clips exist only for a period whose clips were
switched on; they live in a folder of that period, which deleting the period (or the complaint)
removes with it.
"""

from __future__ import annotations

import json
import shutil
import sqlite3
from dataclasses import dataclass
from pathlib import Path

from fieldtl import validate
from fieldtl.errors import InputError, StoreError
from fieldtl.noise.settings import zone
from fieldtl.store.connection import Database
from fieldtl.store.schema import utc_now
from fieldtl.validate import echo

CLIPS_FOLDER = "clips"
MAX_RECORD_CHARS = 50_000_000         # one period's JSON: a week of 1-minute intervals is about 10 MB
MAX_DIARY_CHARS = validate.MAX_FILE_BYTES


@dataclass(frozen=True, slots=True)
class Complaint:
    id: int
    reference: str             # anonymous: no names needed
    rooms: str
    time_zone: str
    test_id: int | None        # the separation test (a test of this store), if linked
    diary_csv: str             # the diary as CSV text (time, heard, disturbance)
    created_at: str
    updated_at: str


@dataclass(frozen=True, slots=True)
class StoredPeriod:
    id: int
    complaint_id: int
    name: str
    record_json: str
    keep_clips: bool
    created_at: str


_COMPLAINT_COLUMNS = "id, reference, rooms, time_zone, test_id, diary_csv, created_at, updated_at"
_PERIOD_COLUMNS = "id, complaint_id, name, record, keep_clips, created_at"


def _complaint(row: tuple) -> Complaint:
    return Complaint(*row)


def _period(row: tuple) -> StoredPeriod:
    return StoredPeriod(row[0], row[1], row[2], row[3], bool(row[4]), row[5])


class ComplaintRows:
    """The complaint tables of one store (thread-safe through the store's connection lock)."""

    def __init__(self, database: Database, *, clips_dir: Path) -> None:
        self._database = database
        self.clips_dir = clips_dir

    # --- complaints ---------------------------------------------------------------------------------

    def create(self, reference: str, *, rooms: str = "", time_zone: str = "UTC") -> Complaint:
        reference, rooms, time_zone = _texts(reference, rooms, time_zone)
        zone(time_zone)
        now = utc_now()
        with self._database.write() as db:
            new_id = db.execute("INSERT INTO complaints (reference, rooms, time_zone, diary_csv, created_at, "
                                "updated_at) VALUES (?, ?, ?, '', ?, ?) RETURNING id",
                                (reference, rooms, time_zone, now, now)).fetchone()[0]
            return self._get(db, int(new_id))

    def update(self, complaint_id: int, *, reference: str, rooms: str, time_zone: str, test_id: int | None,
               diary_csv: str) -> Complaint:
        reference, rooms, time_zone = _texts(reference, rooms, time_zone)
        zone(time_zone)
        if len(diary_csv) > MAX_DIARY_CHARS:
            raise InputError(f"diary: longer than {MAX_DIARY_CHARS:,} characters")
        with self._database.write() as db:
            self._get(db, complaint_id)
            if test_id is not None and db.execute("SELECT 1 FROM tests WHERE id = ?", (test_id,)).fetchone() is None:
                raise InputError(f"test {echo(test_id)} is not in this store")
            db.execute("UPDATE complaints SET reference = ?, rooms = ?, time_zone = ?, test_id = ?, diary_csv = ?, "
                       "updated_at = ? WHERE id = ?", (reference, rooms, time_zone, test_id, diary_csv, utc_now(),
                                                        complaint_id))
            return self._get(db, complaint_id)

    def get(self, complaint_id: int) -> Complaint:
        with self._database.read() as db:
            return self._get(db, complaint_id)

    def list(self) -> tuple[Complaint, ...]:
        with self._database.read() as db:
            rows = db.execute(f"SELECT {_COMPLAINT_COLUMNS} FROM complaints ORDER BY id").fetchall()
        return tuple(_complaint(r) for r in rows)

    def delete(self, complaint_id: int) -> None:
        """The complaint, its periods and every clip of them."""
        with self._database.write() as db:
            self._get(db, complaint_id)
            periods = [r[0] for r in db.execute("SELECT id FROM complaint_periods WHERE complaint_id = ?",
                                                (complaint_id,))]
            db.execute("DELETE FROM complaints WHERE id = ?", (complaint_id,))
        for period_id in periods:
            self._remove_clips(period_id)

    # --- periods ------------------------------------------------------------------------------------

    def add_period(self, complaint_id: int, name: str, *, record_json: str, keep_clips: bool) -> StoredPeriod:
        """Keep a period's record JSON (strict JSON, checked here) under ``name``."""
        (name,) = _texts(name)
        if len(record_json) > MAX_RECORD_CHARS:
            raise InputError(f"period {echo(name)}: the record is larger than {MAX_RECORD_CHARS:,} characters")
        try:
            document = json.loads(record_json, parse_constant=_refuse)
        except (ValueError, TypeError):
            raise InputError(f"period {echo(name)}: the record is not strict JSON") from None
        if not isinstance(document, dict) or document.get("kind") != "noise_record":
            raise InputError(f"period {echo(name)}: not a noise record")
        with self._database.write() as db:
            self._get(db, complaint_id)
            row = db.execute(f"INSERT INTO complaint_periods (complaint_id, name, record, keep_clips, created_at) "
                             f"VALUES (?, ?, ?, ?, ?) RETURNING {_PERIOD_COLUMNS}",
                             (complaint_id, name, record_json, int(keep_clips), utc_now())).fetchone()
        return _period(row)

    def periods(self, complaint_id: int) -> tuple[StoredPeriod, ...]:
        with self._database.read() as db:
            rows = db.execute(f"SELECT {_PERIOD_COLUMNS} FROM complaint_periods WHERE complaint_id = ? ORDER BY id",
                              (complaint_id,)).fetchall()
        return tuple(_period(r) for r in rows)

    def delete_period(self, period_id: int) -> None:
        """The period's row and its clips folder (its audio): nothing of it is left."""
        with self._database.write() as db:
            cursor = db.execute("DELETE FROM complaint_periods WHERE id = ?", (period_id,))
            if cursor.rowcount == 0:
                raise InputError(f"period {echo(period_id)} is not in this store")
        self._remove_clips(period_id)

    def clips_folder(self, period_id: int) -> Path:
        """Where a period's clips are kept (fieldtl.noise.clips writes them there)."""
        return self.clips_dir / f"period-{int(period_id)}"

    def _remove_clips(self, period_id: int) -> None:
        folder = self.clips_folder(period_id)
        try:
            shutil.rmtree(folder)
        except FileNotFoundError:
            pass
        except OSError as exc:
            raise StoreError(f"period {period_id}: its clips could not all be removed ({exc.strerror})") from None

    def _get(self, db: sqlite3.Connection, complaint_id: int) -> Complaint:
        row = db.execute(f"SELECT {_COMPLAINT_COLUMNS} FROM complaints WHERE id = ?", (complaint_id,)).fetchone()
        if row is None:
            raise InputError(f"complaint {echo(complaint_id)} is not in this store")
        return _complaint(row)


def _texts(*values: str) -> tuple[str, ...]:
    """Each value as one line of at most NAME_CHARS characters; an empty reference or name is refused."""
    checked = []
    for value in values:
        if not isinstance(value, str) or len(value) > validate.NAME_CHARS:
            raise InputError(f"{echo(value)}: must be text of at most {validate.NAME_CHARS} characters")
        checked.append(" ".join(value.split()))
    if not checked[0]:
        raise InputError("a complaint's reference and a period's name cannot be empty")
    return tuple(checked)


def _refuse(name: str) -> None:
    raise ValueError(name)
