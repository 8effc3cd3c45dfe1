"""The project store: one SQLite database beside a folder of content-addressed audio files.

Every write is one ``BEGIN IMMEDIATE ... COMMIT`` transaction (rolled back on any error), the
journal is WAL with ``synchronous=FULL``, and an audio file is written, flushed to disk and
renamed into place *before* the row naming it commits: a committed take always has its file,
whatever happens to the process. A killed writer can leave at most an unreferenced file, which
:meth:`Store.prune_audio` removes.

One Store may be shared between threads (Streamlit's ``st.cache_resource``): a lock serialises
its use of the connection. Several processes may open the same database at once.
"""

from __future__ import annotations

import json
import os
import sqlite3
import tempfile
import threading
import time
import tomllib
import uuid
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import platformdirs

from fieldtl.audio.ingest import file_sha256, iter_blocks, open_recording
from fieldtl.construction import Construction, construction_from_dict
from fieldtl.errors import InputError, StoreError
from fieldtl.store.schema import (Project, TakeRecord, TestRecord, TestSetup, check_take_fields, check_text,
                                  migrate, utc_now)
from fieldtl.survey import (REQUIRED_ROLES, ROLES_BY_TYPE, CalibrationSpec, Geometry, Survey, TakeSpec,
                            read_band_levels_csv)

DATABASE_NAME = "fieldtl.sqlite3"
AUDIO_FOLDER = "audio"
DEFAULT_MAX_TAKE_BYTES = 200 * 1024 * 1024
BUSY_TIMEOUT_S = 10.0
STALE_INCOMING_S = 3600.0          # an unfinished upload older than this belongs to a dead process
_INCOMING_PREFIX = ".incoming-"
_SWEEP_KEYS = ("sweep_start_hz", "sweep_stop_hz", "sweep_length_s")
_TEST_COLUMNS = ("title", "test_type", "separating_area_m2", "receiving_volume_m3", "source_volume_m3",
                 "construction", "requirement", "element_lab_rw_db", "uncertainty_situation", "calibrator_db",
                 "settings")
_TAKE_COLUMNS = ("test_id", "role", "speaker", "method", "channel", "sweep_start_hz", "sweep_stop_hz",
                 "sweep_length_s", "file_name", "original_name", "sha256", "sample_rate_hz", "frames",
                 "duration_s", "source", "recorder_settings", "excluded", "created_at")


def default_data_dir() -> Path:
    """FIELDTL_DATA_DIR if set, else the user's data folder for fieldtl (platformdirs)."""
    configured = os.environ.get("FIELDTL_DATA_DIR")
    return Path(configured) if configured else Path(platformdirs.user_data_dir("fieldtl", appauthor=False))


def default_database_path() -> Path:
    return default_data_dir() / DATABASE_NAME


@dataclass(frozen=True, slots=True)
class ProjectSnapshot:
    """A project with all its tests and takes, read in one transaction (export and copy)."""

    project: Project
    tests: tuple[TestRecord, ...]
    takes: tuple[TakeRecord, ...]


@dataclass(frozen=True, slots=True)
class CheckedAudio:
    """What reading a whole audio file showed, and the content name it is stored under."""

    sha256: str
    file_name: str
    sample_rate_hz: int
    frames: int
    channels: int
    duration_s: float


class Store:
    """Projects, tests and takes; open with :meth:`Store.open`, close with :meth:`close` or ``with``."""

    def __init__(self, connection: sqlite3.Connection, *, name: str, audio_dir: Path, max_take_bytes: int,
                 scratch: tempfile.TemporaryDirectory[str] | None, applied: tuple[str, ...]) -> None:
        self._connection = connection
        self._lock = threading.RLock()
        self._scratch = scratch
        self.name = name
        self.audio_dir = audio_dir
        self.max_take_bytes = max_take_bytes
        self.applied_migrations = applied          # names applied when this Store opened the database

    @classmethod
    def open(cls, path: str | Path, *, audio_dir: Path | None = None,
             max_take_bytes: int = DEFAULT_MAX_TAKE_BYTES) -> Store:
        """Open (creating and migrating if needed) the database at ``path``, or ``":memory:"``.

        Audio goes to ``audio_dir``, by default ``audio/`` beside the database; an in-memory
        store without ``audio_dir`` keeps its audio in a temporary folder removed on close.
        """
        memory = str(path) == ":memory:"
        scratch = None
        if memory:
            name = "in-memory store"
            if audio_dir is None:
                scratch = tempfile.TemporaryDirectory(prefix="fieldtl-audio-")
                audio_dir = Path(scratch.name)
        else:
            database = Path(path)
            name = database.name
            audio_dir = database.parent / AUDIO_FOLDER if audio_dir is None else audio_dir
        try:
            if not memory:
                database.parent.mkdir(parents=True, exist_ok=True)
            Path(audio_dir).mkdir(parents=True, exist_ok=True)
            connection = sqlite3.connect(":memory:" if memory else str(database), timeout=BUSY_TIMEOUT_S,
                                         isolation_level=None, check_same_thread=False)
        except (OSError, sqlite3.Error) as exc:
            raise StoreError(f"{name}: cannot open the store ({exc})") from None
        try:
            connection.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
            connection.execute("PRAGMA foreign_keys = ON")
            if not memory:
                _use_write_ahead_log(connection, name)
            connection.execute("PRAGMA synchronous = FULL")
            applied = migrate(connection, source_name=name)
        except sqlite3.OperationalError as exc:          # busy beyond the timeout, read-only, disk full
            connection.close()
            raise StoreError(f"{name}: cannot open the store ({exc})") from None
        except sqlite3.DatabaseError as exc:             # not a database, or a damaged one
            connection.close()
            raise StoreError(f"{name}: not a usable fieldtl database ({exc})") from None
        except BaseException:
            connection.close()
            raise
        return cls(connection, name=name, audio_dir=Path(audio_dir), max_take_bytes=max_take_bytes,
                   scratch=scratch, applied=applied)

    def close(self) -> None:
        with self._lock:
            self._connection.close()
            if self._scratch is not None:
                self._scratch.cleanup()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # --- transactions ------------------------------------------------------------------------------

    @contextmanager
    def _write(self) -> Iterator[sqlite3.Connection]:
        """One write transaction: the write lock is taken at BEGIN, released at COMMIT or ROLLBACK."""
        with self._lock:
            try:
                self._connection.execute("BEGIN IMMEDIATE")
            except sqlite3.Error as exc:
                raise StoreError(f"{self.name}: cannot start writing ({exc})") from None
            try:
                yield self._connection
                self._connection.execute("COMMIT")
            except BaseException as exc:
                if self._connection.in_transaction:      # SQLite may already have rolled back (disk full)
                    self._connection.execute("ROLLBACK")
                if isinstance(exc, sqlite3.Error):
                    raise StoreError(f"{self.name}: write failed and was undone ({exc})") from None
                raise

    @contextmanager
    def _read(self) -> Iterator[sqlite3.Connection]:
        """One read transaction: every query inside sees the same committed state."""
        with self._lock:
            try:
                self._connection.execute("BEGIN")
            except sqlite3.Error as exc:
                raise StoreError(f"{self.name}: cannot read ({exc})") from None
            try:
                yield self._connection
            except sqlite3.Error as exc:
                raise StoreError(f"{self.name}: read failed ({exc})") from None
            finally:
                if self._connection.in_transaction:
                    self._connection.execute("COMMIT")

    def schema_state(self) -> tuple[int, tuple[str, ...]]:
        """(PRAGMA user_version, names recorded in schema_migrations in the order applied)."""
        with self._read() as db:
            version = db.execute("PRAGMA user_version").fetchone()[0]
            names = tuple(r[0] for r in db.execute("SELECT name FROM schema_migrations ORDER BY rowid"))
        return version, names

    # --- projects ----------------------------------------------------------------------------------

    def create_project(self, name: str, *, client: str = "", address: str = "", engineer: str = "") -> Project:
        _check_project_texts(name=name, client=client, address=address, engineer=engineer)
        now = utc_now()
        with self._write() as db:
            cursor = db.execute("INSERT INTO projects (name, client, address, engineer, created_at, updated_at) "
                                "VALUES (?, ?, ?, ?, ?, ?)", (name, client, address, engineer, now, now))
        return Project(cursor.lastrowid, name, client, address, engineer, now, now)

    def update_project(self, project_id: int, *, name: str | None = None, client: str | None = None,
                       address: str | None = None, engineer: str | None = None) -> Project:
        """Change the given fields (None keeps a field as it is)."""
        with self._write() as db:
            current = self._project(db, project_id)
            changed = replace(current, **{k: v for k, v in dict(name=name, client=client, address=address,
                                                                  engineer=engineer).items() if v is not None},
                              updated_at=utc_now())
            _check_project_texts(name=changed.name, client=changed.client, address=changed.address,
                                 engineer=changed.engineer)
            db.execute("UPDATE projects SET name = ?, client = ?, address = ?, engineer = ?, updated_at = ? "
                       "WHERE id = ?", (changed.name, changed.client, changed.address, changed.engineer,
                                        changed.updated_at, project_id))
        return changed

    def get_project(self, project_id: int) -> Project:
        with self._read() as db:
            return self._project(db, project_id)

    def list_projects(self) -> tuple[Project, ...]:
        """Every project, most recently changed first."""
        with self._read() as db:
            rows = db.execute("SELECT * FROM projects ORDER BY updated_at DESC, id DESC").fetchall()
        return tuple(_project_from_row(r) for r in rows)

    def delete_project(self, project_id: int) -> None:
        """Delete the project with its tests and takes; audio files stay until :meth:`prune_audio`."""
        with self._write() as db:
            self._project(db, project_id)
            db.execute("DELETE FROM projects WHERE id = ?", (project_id,))

    # --- tests -------------------------------------------------------------------------------------

    def create_test(self, project_id: int, setup: TestSetup) -> TestRecord:
        now = utc_now()
        with self._write() as db:
            self._project(db, project_id)
            cursor = db.execute(f"INSERT INTO tests (project_id, {', '.join(_TEST_COLUMNS)}, created_at, updated_at) "
                                f"VALUES ({', '.join('?' * (len(_TEST_COLUMNS) + 3))})",
                                (project_id, *_setup_values(setup), now, now))
            _touch_project(db, project_id, now)
        return TestRecord(cursor.lastrowid, project_id, setup, None, now, now)

    def update_test(self, test_id: int, setup: TestSetup) -> TestRecord:
        """Replace the test's setup; a new test type must still admit every stored take's role."""
        now = utc_now()
        with self._write() as db:
            current = self._test(db, test_id)
            if setup.test_type != current.setup.test_type:
                for take in self._takes(db, test_id):
                    check_take_fields(setup.test_type, **_take_fields(take), where=f"test {setup.title!r}: "
                                      f"take {take.original_name!r}")
            db.execute(f"UPDATE tests SET {', '.join(c + ' = ?' for c in _TEST_COLUMNS)}, updated_at = ? "
                       "WHERE id = ?", (*_setup_values(setup), now, test_id))
            _touch_project(db, current.project_id, now)
        return replace(current, setup=setup, updated_at=now)

    def get_test(self, test_id: int) -> TestRecord:
        with self._read() as db:
            return self._test(db, test_id)

    def list_tests(self, project_id: int) -> tuple[TestRecord, ...]:
        """The project's tests in the order they were created."""
        with self._read() as db:
            self._project(db, project_id)
            rows = db.execute("SELECT * FROM tests WHERE project_id = ? ORDER BY id", (project_id,)).fetchall()
        return tuple(_test_from_row(r) for r in rows)

    def delete_test(self, test_id: int) -> None:
        """Delete the test and its takes; audio files stay until :meth:`prune_audio`."""
        with self._write() as db:
            test = self._test(db, test_id)
            db.execute("DELETE FROM tests WHERE id = ?", (test_id,))
            _touch_project(db, test.project_id, utc_now())

    def set_band_levels(self, test_id: int, csv_text: str | None) -> TestRecord:
        """Store pasted sound-level-meter band levels (checked as survey.read_band_levels_csv does), or clear them."""
        now = utc_now()
        with self._write() as db:
            test = self._test(db, test_id)
            if csv_text is not None:
                check_text(csv_text, f"test {test.setup.title!r} band levels")
                columns = read_band_levels_csv(csv_text, source_name=f"test {test.setup.title!r} band levels")
                wrong = [c.label for c in columns if c.role not in ROLES_BY_TYPE[test.setup.test_type]]
                if wrong:
                    raise InputError(f"test {test.setup.title!r} band levels: column {wrong[0]!r} does not "
                                     f"belong in {test.setup.test_type} tests")
            db.execute("UPDATE tests SET band_levels_csv = ?, updated_at = ? WHERE id = ?", (csv_text, now, test_id))
            _touch_project(db, test.project_id, now)
        return replace(test, band_levels_csv=csv_text, updated_at=now)

    # --- takes -------------------------------------------------------------------------------------

    def add_take(self, test_id: int, *, data: bytes, original_name: str, role: str, speaker: int = 1,
                 method: str | None = None, channel: int = 0, source: str = "upload",
                 recorder_settings: Mapping[str, Any] | None = None, sweep_start_hz: float | None = None,
                 sweep_stop_hz: float | None = None, sweep_length_s: float | None = None) -> TakeRecord:
        """Check the audio (header and every sample), store it by content and record the take.

        Bad audio raises InputError naming ``original_name`` and leaves no row and no file.
        Does not analyse the audio (levels, clipping): that is the calculator's job.
        """
        check_text(original_name, "recording name")
        sweep = dict(sweep_start_hz=sweep_start_hz, sweep_stop_hz=sweep_stop_hz, sweep_length_s=sweep_length_s)
        fields = dict(role=role, speaker=speaker, method=method, channel=channel, source=source,
                      recorder_settings=recorder_settings, sweep=sweep)
        check_take_fields(self.get_test(test_id).setup.test_type, **fields, where=original_name)
        if len(data) > self.max_take_bytes:
            raise InputError(f"{original_name}: {len(data) / 1e6:.0f} MB is more than the "
                             f"{self.max_take_bytes / 1e6:.0f} MB allowed per recording")
        incoming = self.incoming_path()
        try:
            _write_durably(incoming, data)
            audio = check_audio_file(incoming, channel=channel, shown_name=original_name)
            row = dict(test_id=test_id, role=role, speaker=speaker, method=method, channel=channel, **sweep,
                       file_name=audio.file_name, original_name=original_name, sha256=audio.sha256,
                       sample_rate_hz=audio.sample_rate_hz, frames=audio.frames, duration_s=audio.duration_s,
                       source=source, recorder_settings=recorder_settings, excluded=False, created_at=utc_now())
            with self._write() as db:
                test = self._test(db, test_id)            # as it is now, under the write lock
                check_take_fields(test.setup.test_type, **fields, where=original_name)
                created = self._place_file(incoming, audio.file_name)
                try:
                    take_id = _insert_take(db, row)
                    _touch_project(db, test.project_id, row["created_at"])
                except BaseException:
                    if created:          # still under the write lock: nobody else can refer to it yet
                        (self.audio_dir / audio.file_name).unlink(missing_ok=True)
                    raise
        finally:
            incoming.unlink(missing_ok=True)
        return TakeRecord(id=take_id, **row)

    def get_take(self, take_id: int) -> TakeRecord:
        with self._read() as db:
            return self._take(db, take_id)

    def list_takes(self, test_id: int) -> tuple[TakeRecord, ...]:
        """The test's takes, excluded ones too, in the order they were added."""
        with self._read() as db:
            self._test(db, test_id)
            return self._takes(db, test_id)

    def set_take_excluded(self, take_id: int, excluded: bool) -> TakeRecord:
        with self._write() as db:
            take = self._take(db, take_id)
            db.execute("UPDATE takes SET excluded = ? WHERE id = ?", (int(bool(excluded)), take_id))
            _touch_project(db, self._test(db, take.test_id).project_id, utc_now())
        return replace(take, excluded=bool(excluded))

    def set_take_channel(self, take_id: int, channel: int) -> TakeRecord:
        """Analyse another channel of the take's file (0-based); InputError if the file has no such channel."""
        take = self.get_take(take_id)
        open_recording(self.take_path(take), channel=channel)   # raises for a channel the file does not have
        with self._write() as db:
            db.execute("UPDATE takes SET channel = ? WHERE id = ?", (int(channel), take_id))
            _touch_project(db, self._test(db, take.test_id).project_id, utc_now())
        return replace(take, channel=int(channel))

    def delete_take(self, take_id: int) -> None:
        """Delete the take's row; its audio file may be shared by content and stays until :meth:`prune_audio`."""
        with self._write() as db:
            take = self._take(db, take_id)
            db.execute("DELETE FROM takes WHERE id = ?", (take_id,))
            _touch_project(db, self._test(db, take.test_id).project_id, utc_now())

    def take_path(self, take: TakeRecord) -> Path:
        """Absolute path of the take's audio file."""
        return (self.audio_dir / take.file_name).resolve()

    def prune_audio(self, *, stale_incoming_s: float = STALE_INCOMING_S) -> int:
        """Remove audio files no take refers to, and unfinished uploads older than ``stale_incoming_s``.

        Runs under the write lock, so no other process can be placing a file meanwhile.
        Returns the number of files removed.
        """
        removed = 0
        with self._write() as db:
            used = {r[0] for r in db.execute("SELECT DISTINCT file_name FROM takes")}
            for path in self.audio_dir.iterdir():
                if not path.is_file() or path.name in used:
                    continue
                if path.name.startswith(_INCOMING_PREFIX):
                    if time.time() - path.stat().st_mtime < stale_incoming_s:
                        continue
                path.unlink(missing_ok=True)
                removed += 1
        return removed

    # --- the calculator's view ---------------------------------------------------------------------

    def missing_roles(self, test_id: int) -> tuple[str, ...]:
        """Roles the test type requires that neither an included take nor a band-level column provides."""
        with self._read() as db:
            test = self._test(db, test_id)
            takes = self._takes(db, test_id)
        return _missing_roles(test, takes)

    def survey_for_test(self, test_id: int) -> Survey:
        """The stored test as the Survey the calculator measures: included takes with absolute paths.

        Raises InputError naming the test if a required role is missing or the calibration takes
        are ambiguous; StoreError if a take's audio file has gone from the audio folder.
        """
        with self._read() as db:
            test = self._test(db, test_id)
            takes = tuple(t for t in self._takes(db, test_id) if not t.excluded)
        setup, where = test.setup, f"test {test.setup.title!r}"
        missing = _missing_roles(test, takes)
        if missing:
            raise InputError(f"{where}: no included take with role {', '.join(missing)} "
                             f"(an {setup.test_type} test needs {', '.join(REQUIRED_ROLES[setup.test_type])})")
        for take in takes:
            if not self.take_path(take).is_file():
                raise StoreError(f"{where}: the audio of {take.original_name!r} ({take.file_name}) is missing "
                                 "from the audio folder")
        specs = tuple(TakeSpec(file=self.take_path(t), role=t.role,  # type: ignore[arg-type]
                               speaker=t.speaker, channel=t.channel, method=t.method,
                               **{k: getattr(t, k) for k in _SWEEP_KEYS})
                      for t in takes if t.role not in ("calibration", "calibration_after"))
        columns = () if test.band_levels_csv is None else read_band_levels_csv(
            test.band_levels_csv, source_name=f"{where} band levels")
        return Survey(title=setup.title, test_type=setup.test_type,  # type: ignore[arg-type]
                      geometry=Geometry(receiving_volume_m3=setup.receiving_volume_m3,
                                        separating_area_m2=setup.separating_area_m2,
                                        source_volume_m3=setup.source_volume_m3),
                      source_name=setup.title, takes=specs, band_columns=columns,
                      calibration=self._calibration(takes, setup, where), requirement=setup.requirement,
                      construction=setup.construction or None, uncertainty_situation=setup.uncertainty_situation,
                      element_lab_rw_db=setup.element_lab_rw_db,
                      declared_construction=declared_construction(setup, where))

    def _calibration(self, takes: tuple[TakeRecord, ...], setup: TestSetup, where: str) -> CalibrationSpec | None:
        before = [t for t in takes if t.role == "calibration"]
        after = [t for t in takes if t.role == "calibration_after"]
        for role, found in (("calibration", before), ("calibration_after", after)):
            if len(found) > 1:
                raise InputError(f"{where}: {len(found)} included takes with role {role}; exclude all but one")
        if not before:
            if after:
                raise InputError(f"{where}: a calibration_after take needs a calibration take at the start")
            return None
        if after and after[0].channel != before[0].channel:
            raise InputError(f"{where}: the calibration takes use different channels "
                             f"({before[0].channel + 1} and {after[0].channel + 1})")
        return CalibrationSpec(file=self.take_path(before[0]), reference_db=setup.calibrator_db,
                               file_after=self.take_path(after[0]) if after else None, channel=before[0].channel)

    # --- whole projects (archives) -----------------------------------------------------------------

    def snapshot(self, project_id: int) -> ProjectSnapshot:
        with self._read() as db:
            project = self._project(db, project_id)
            tests = tuple(_test_from_row(r) for r in db.execute(
                "SELECT * FROM tests WHERE project_id = ? ORDER BY id", (project_id,)))
            takes = tuple(take for test in tests for take in self._takes(db, test.id))
        return ProjectSnapshot(project, tests, takes)

    def add_project_copy(self, snapshot: ProjectSnapshot, files: Mapping[str, Path]) -> Project:
        """Store ``snapshot`` as a NEW project (new ids), in one transaction; never overwrites.

        ``files`` maps each take's file_name to a file received at an :meth:`incoming_path`;
        those files are moved into place. Ids in the snapshot only link its takes to its tests;
        timestamps are kept, except the project's updated_at, which becomes now. The audio is
        assumed checked by the caller (see :func:`check_audio_file`).
        """
        project = replace(snapshot.project, updated_at=utc_now())
        _check_project_texts(name=project.name, client=project.client, address=project.address,
                             engineer=project.engineer)
        test_types = {t.id: t.setup.test_type for t in snapshot.tests}
        for take in snapshot.takes:
            where = f"take {take.original_name!r}"
            if take.test_id not in test_types:
                raise InputError(f"{where}: belongs to no test of the project")
            check_take_fields(test_types[take.test_id], **_take_fields(take), where=where)
            if take.file_name not in files:
                raise InputError(f"{where}: no audio file {take.file_name}")
        with self._write() as db:
            created: list[Path] = []
            try:
                cursor = db.execute("INSERT INTO projects (name, client, address, engineer, created_at, updated_at) "
                                    "VALUES (?, ?, ?, ?, ?, ?)", (project.name, project.client, project.address,
                                                                  project.engineer, project.created_at,
                                                                  project.updated_at))
                project_id = cursor.lastrowid
                new_test_ids = {}
                for test in snapshot.tests:
                    new_test_ids[test.id] = db.execute(
                        f"INSERT INTO tests (project_id, {', '.join(_TEST_COLUMNS)}, band_levels_csv, created_at, "
                        f"updated_at) VALUES ({', '.join('?' * (len(_TEST_COLUMNS) + 4))})",
                        (project_id, *_setup_values(test.setup), test.band_levels_csv, test.created_at,
                         test.updated_at)).lastrowid
                for name, path in files.items():
                    if self._place_file(path, name):
                        created.append(self.audio_dir / name)
                for take in snapshot.takes:
                    row = {c: getattr(take, c) for c in _TAKE_COLUMNS}
                    _insert_take(db, row | {"test_id": new_test_ids[take.test_id]})
            except BaseException:
                for path in created:     # still under the write lock: nobody else can refer to them yet
                    path.unlink(missing_ok=True)
                raise
        return replace(project, id=project_id)

    def incoming_path(self) -> Path:
        """A fresh name in the audio folder for a file being received (same disk, so renames are atomic)."""
        return self.audio_dir / f"{_INCOMING_PREFIX}{uuid.uuid4().hex}"

    # --- internals ---------------------------------------------------------------------------------

    def _place_file(self, incoming: Path, file_name: str) -> bool:
        """Move a checked file to its content name (inside a write transaction); False if it was there."""
        target = self.audio_dir / file_name
        if target.is_file() and target.stat().st_size == incoming.stat().st_size:
            incoming.unlink()
            return False
        os.replace(incoming, target)
        _fsync_folder(self.audio_dir)
        return True

    def _project(self, db: sqlite3.Connection, project_id: int) -> Project:
        row = db.execute("SELECT * FROM projects WHERE id = ?", (project_id,)).fetchone()
        if row is None:
            raise InputError(f"{self.name}: no project with id {project_id}")
        return _project_from_row(row)

    def _test(self, db: sqlite3.Connection, test_id: int) -> TestRecord:
        row = db.execute("SELECT * FROM tests WHERE id = ?", (test_id,)).fetchone()
        if row is None:
            raise InputError(f"{self.name}: no test with id {test_id}")
        return _test_from_row(row)

    def _take(self, db: sqlite3.Connection, take_id: int) -> TakeRecord:
        row = db.execute("SELECT * FROM takes WHERE id = ?", (take_id,)).fetchone()
        if row is None:
            raise InputError(f"{self.name}: no take with id {take_id}")
        return _take_from_row(row)

    def _takes(self, db: sqlite3.Connection, test_id: int) -> tuple[TakeRecord, ...]:
        return tuple(_take_from_row(r) for r in db.execute(
            "SELECT * FROM takes WHERE test_id = ? ORDER BY id", (test_id,)))


# --- rows ↔ values ---------------------------------------------------------------------------------

def _project_from_row(row: sqlite3.Row | tuple[Any, ...]) -> Project:
    return Project(*row)


def _test_from_row(row: tuple[Any, ...]) -> TestRecord:
    (test_id, project_id, title, test_type, area, receiving, source, construction, requirement, lab_rw,
     situation, calibrator_db, band_levels_csv, settings, created_at, updated_at) = row
    setup = TestSetup(title=title, test_type=test_type, receiving_volume_m3=receiving, separating_area_m2=area,
                      source_volume_m3=source, construction=construction, requirement=requirement,
                      element_lab_rw_db=lab_rw, uncertainty_situation=situation, calibrator_db=calibrator_db,
                      settings=json.loads(settings))
    return TestRecord(test_id, project_id, setup, band_levels_csv, created_at, updated_at)


def _take_from_row(row: tuple[Any, ...]) -> TakeRecord:
    values = dict(zip(("id", *_TAKE_COLUMNS), row, strict=True))
    settings = values["recorder_settings"]
    return TakeRecord(**values | {"recorder_settings": None if settings is None else json.loads(settings),
                                  "excluded": bool(values["excluded"])})


def _setup_values(setup: TestSetup) -> tuple[Any, ...]:
    values = [getattr(setup, c) for c in _TEST_COLUMNS]
    values[-1] = json.dumps(dict(setup.settings), ensure_ascii=False, allow_nan=False)
    return tuple(values)


def _insert_take(db: sqlite3.Connection, row: Mapping[str, Any]) -> int:
    values = dict(row)
    settings = values["recorder_settings"]
    values["recorder_settings"] = None if settings is None else json.dumps(dict(settings), ensure_ascii=False,
                                                                           allow_nan=False)
    values["excluded"] = int(bool(values["excluded"]))
    cursor = db.execute(f"INSERT INTO takes ({', '.join(_TAKE_COLUMNS)}) "
                        f"VALUES ({', '.join('?' * len(_TAKE_COLUMNS))})", tuple(values[c] for c in _TAKE_COLUMNS))
    return int(cursor.lastrowid)


def _take_fields(take: TakeRecord) -> dict[str, Any]:
    return dict(role=take.role, speaker=take.speaker, method=take.method, channel=take.channel,
                source=take.source, recorder_settings=take.recorder_settings,
                sweep={k: getattr(take, k) for k in _SWEEP_KEYS})


def _touch_project(db: sqlite3.Connection, project_id: int, now: str) -> None:
    db.execute("UPDATE projects SET updated_at = ? WHERE id = ?", (now, project_id))


def _check_project_texts(**texts: Any) -> None:
    for key, value in texts.items():
        check_text(value, f"project {key}")
    if not texts["name"].strip():
        raise InputError("project name: must not be empty")


def _missing_roles(test: TestRecord, takes: tuple[TakeRecord, ...]) -> tuple[str, ...]:
    present = {t.role for t in takes if not t.excluded}
    if test.band_levels_csv is not None:
        present |= {c.role for c in read_band_levels_csv(test.band_levels_csv, source_name=test.setup.title)}
    return tuple(r for r in REQUIRED_ROLES[test.setup.test_type] if r not in present)


def _use_write_ahead_log(connection: sqlite3.Connection, name: str) -> None:
    """Switch to WAL, retrying while another process holds the lock.

    The switch needs an exclusive lock, and SQLite reports a busy database at once (without its
    busy handler) or leaves the mode unchanged; two processes opening a new database meet this.
    """
    deadline = time.monotonic() + BUSY_TIMEOUT_S
    while True:
        try:
            mode = connection.execute("PRAGMA journal_mode = WAL").fetchone()[0]
        except sqlite3.OperationalError:
            if time.monotonic() > deadline:
                raise
            mode = None
        if mode is not None and mode.lower() == "wal":
            return
        if time.monotonic() > deadline:
            raise StoreError(f"{name}: the database cannot use a write-ahead log (journal mode {mode})")
        time.sleep(0.02)


# --- files -----------------------------------------------------------------------------------------

def check_audio_file(path: Path, *, channel: int, shown_name: str) -> CheckedAudio:
    """Open the file as the calculator will and read every sample once; errors name ``shown_name``.

    Does not judge the signal (levels, clipping, silence): those are findings of the calculator.
    """
    try:
        recording = open_recording(path, channel=channel)
        for _ in iter_blocks(recording):
            pass
    except InputError as exc:
        raise InputError(str(exc).replace(str(path), shown_name).replace(path.name, shown_name)) from None
    sha256 = file_sha256(path)
    suffix = ".flac" if recording.format == "FLAC" else ".wav"
    return CheckedAudio(sha256=sha256, file_name=sha256 + suffix, sample_rate_hz=recording.sample_rate_hz,
                        frames=recording.frames, channels=recording.channels, duration_s=recording.duration_s)


def _write_durably(path: Path, data: bytes) -> None:
    with open(path, "xb") as handle:
        handle.write(data)
        handle.flush()
        os.fsync(handle.fileno())


def _fsync_folder(folder: Path) -> None:
    """Make a rename inside ``folder`` durable (POSIX); a no-op where folders cannot be opened."""
    try:
        descriptor = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(descriptor)
    except OSError:
        pass
    finally:
        os.close(descriptor)


CONSTRUCTION_SETTING = "construction_toml"   # settings key: the declared build-up, construction-file TOML


def declared_construction(setup: TestSetup, where: str) -> Construction | None:
    """The declared build-up kept in the test's settings, parsed as a construction file."""
    text = setup.settings.get(CONSTRUCTION_SETTING)
    if not text:
        return None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{where}: declared construction is not valid TOML ({exc})") from None
    return construction_from_dict(data, source_name=f"{where} construction")
