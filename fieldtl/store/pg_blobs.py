"""The team server's audio: content-named blobs in PostgreSQL (``audio_blobs``), and each client's
cache of them.

A take's audio is written in the same transaction as the take row naming it (a blob already there
is not sent again), so a committed take always has its audio, a rolled-back write leaves none,
and one ``pg_dump`` holds the whole team store. The database checks each blob against its name
(SHA-256). A client reads audio through files: :func:`fetch` copies a blob in slices under a
temporary name, checks its SHA-256, then renames it: to the content name in the client's cache
folder (so a file there is always whole and right), or, for a check-out, straight into the
device's own store. The cache is this client's alone
(``DATA_DIR/team-cache/<digest of the server's host, port and database>``), never the folder of
the device's own store, whose clean-up removes audio its own takes do not name.

Values go as bound parameters, in binary (``%b``), from the file mapped into memory (not read into
a copy): a take is at most the store's ``max_take_bytes`` (200 MB by default), held once in the
driver's buffer while it is sent, and read back in slices of :data:`SLICE_BYTES`.
"""

from __future__ import annotations

import hashlib
import mmap
import os
from collections.abc import Iterable, Mapping
from pathlib import Path

from fieldtl.errors import StoreError
from fieldtl.store.files import incoming_name, leftover_files

CACHE_FOLDER = "team-cache"
SLICE_BYTES = 8 * 1024 * 1024          # one read of a blob: bounded memory however long the take
STAGED = "fieldtl_staged_blobs"        # a push's audio, sent before it takes the write lock


def cache_dir_for(url: str, data_dir: Path) -> Path:
    """The default cache folder of the server at ``url`` in this device's data folder."""
    from psycopg import Error
    from psycopg.conninfo import conninfo_to_dict

    try:
        parts = conninfo_to_dict(url)
    except Error:         # an unparsable URL is refused when connecting, with its own message
        parts = {"host": url}
    where = f"{parts.get('host', '')}:{parts.get('port', '')}/{parts.get('dbname', '')}"
    return data_dir / CACHE_FOLDER / hashlib.sha256(where.encode("utf-8")).hexdigest()[:16]


def present(db, names: Iterable[str]) -> set[str]:
    """Which of ``names`` the server holds."""
    return {r[0] for r in db.execute("SELECT file_name FROM audio_blobs WHERE file_name = ANY(?)", (list(names),))}


def put(db, files: Mapping[str, Path]) -> None:
    """Store each checked file (content name → file) the server lacks, in the caller's write transaction."""
    for name in sorted(set(files) - present(db, files)):
        _send(db, "audio_blobs", name, files[name])


def stage(db, files: Mapping[str, tuple[Path, str]]) -> None:
    """Send a push's audio (content name → (file, SHA-256)) the server lacks into a table of this
    transaction only, before the write lock is taken: other writers do not wait for the upload.
    A file that no longer matches its SHA-256 is refused (StoreError) and nothing is sent."""
    db.connection.execute(f"CREATE TEMPORARY TABLE {STAGED} (file_name TEXT PRIMARY KEY, size_bytes BIGINT "
                          "NOT NULL, data BYTEA NOT NULL) ON COMMIT DROP")
    for name in sorted(set(files) - present(db, files)):
        _send(db, STAGED, name, *files[name])


def keep_staged(db, needed: Iterable[str], files: Mapping[str, tuple[Path, str]]) -> None:
    """Under the write lock: store the staged audio of ``needed`` (the takes being added); any the
    server lacks now (staged as present, then removed by a clean) is sent again from ``files``."""
    needed = sorted(set(needed))
    db.execute(f"INSERT INTO audio_blobs (file_name, size_bytes, data) SELECT file_name, size_bytes, data "
               f"FROM {STAGED} WHERE file_name = ANY(?) ON CONFLICT (file_name) DO NOTHING", (needed,))
    for name in sorted(set(needed) - present(db, needed)):
        _send(db, "audio_blobs", name, *files[name])


def fetch(db, file_name: str, sha256: str, target: Path) -> bool:
    """Copy the blob to ``target`` (via a temporary name, SHA-256 checked); False if the server lacks it."""
    row = db.execute("SELECT size_bytes FROM audio_blobs WHERE file_name = ?", (file_name,)).fetchone()
    if row is None:
        return False
    partial = target.parent / incoming_name()
    digest = hashlib.sha256()
    try:
        with open(partial, "xb") as handle:
            for start in range(0, int(row[0]), SLICE_BYTES):
                piece = db.connection.execute("SELECT substring(data FROM %s FOR %s) FROM audio_blobs "
                                              "WHERE file_name = %s", (start + 1, SLICE_BYTES, file_name),
                                              binary=True).fetchone()[0]
                digest.update(piece)
                handle.write(piece)
            handle.flush()
            os.fsync(handle.fileno())
        if digest.hexdigest() != sha256:
            raise StoreError(f"{file_name}: the team server's audio does not match its SHA-256; nothing was kept")
        os.replace(partial, target)
    except OSError as exc:
        raise StoreError(f"cannot keep the team server's audio on this device ({exc.strerror or exc})") from None
    finally:
        partial.unlink(missing_ok=True)
    return True


def remove_unused(db) -> tuple[str, ...]:
    """Delete the blobs no take names (call in a write transaction); returns their names."""
    return tuple(sorted(r[0] for r in db.execute(
        "DELETE FROM audio_blobs b WHERE NOT EXISTS (SELECT 1 FROM takes t WHERE t.file_name = b.file_name) "
        "RETURNING file_name")))


def clear_cache(cache_dir: Path, used: set[str], *, stale_s: float) -> None:
    """Remove cached copies of audio no take names, and unfinished fetches older than ``stale_s``."""
    for path in leftover_files(cache_dir, used, stale_s=stale_s):
        path.unlink(missing_ok=True)


def _send(db, table: str, name: str, path: Path, sha256: str | None = None) -> None:
    """Insert the file as the blob ``name`` into ``table`` (ours: audio_blobs or the staging table),
    refusing it first if ``sha256`` is given and the file no longer matches it. The file is mapped,
    not read into memory: the driver's buffer holds the one copy sent."""
    try:
        with open(path, "rb") as handle, mmap.mmap(handle.fileno(), 0, access=mmap.ACCESS_READ) as mapped:
            data = memoryview(mapped)
            try:
                if sha256 is not None and hashlib.sha256(data).hexdigest() != sha256:
                    raise StoreError(f"{path.name}: the audio file no longer matches its SHA-256; nothing was sent")
                db.connection.execute(f"INSERT INTO {table} (file_name, size_bytes, data) VALUES (%s, %s, %b)",
                                      (name, len(data), data))
            finally:
                data.release()
    except (OSError, ValueError) as exc:        # ValueError: an empty file cannot be mapped
        raise StoreError(f"{path.name}: cannot read the audio ({getattr(exc, 'strerror', None) or exc}); "
                         "nothing was sent") from None
