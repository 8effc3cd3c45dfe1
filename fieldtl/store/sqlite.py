"""The project store: one SQLite database beside a folder of content-addressed audio files.

Every write is one ``BEGIN IMMEDIATE ... COMMIT`` transaction (rolled back on any error), the
journal is WAL with ``synchronous=FULL``, and an audio file is written, flushed to disk and
renamed into place *before* the row naming it commits: a committed take always has its file,
whatever happens to the process. A killed writer can leave at most an unreferenced file, which
:meth:`Store.clean_files` removes. (The team server, fieldtl.store.postgres, keeps its audio in
PostgreSQL instead, and its clients cache it outside this folder.)

One Store may be shared between threads (Streamlit's ``st.cache_resource``): a lock serialises
its use of the connection. Several processes may open the same database at once.
"""

from __future__ import annotations

import sqlite3
import tempfile
from collections.abc import Mapping
from contextlib import AbstractContextManager
from dataclasses import replace
from pathlib import Path
from typing import Any

from fieldtl.audio.ingest import open_recording
from fieldtl.errors import InputError, StoreError
from fieldtl.store import rows
from fieldtl.store.connection import Database
from fieldtl.store.errors import refuse_stale
from fieldtl.store.files import (STALE_INCOMING_S, WHOLE_READ_ROLES, check_audio_file, incoming_name, placed_files,
                                 remove_unused, write_durably)
from fieldtl.store.complaints import CLIPS_FOLDER, ComplaintRows
from fieldtl.store.measurements import MeasurementRows
from fieldtl.store.schema import (Project, ProjectSnapshot, TakeRecord, TestRecord, TestSetup, check_project_texts,
                                  check_recording_name, check_take_fields, utc_now)
from fieldtl.store.survey_view import check_snapshot, check_test_texts, missing_roles, survey_from_records
from fieldtl.survey import Survey
from fieldtl.validate import echo

AUDIO_FOLDER = "audio"
DEFAULT_MAX_TAKE_BYTES = 200 * 1024 * 1024


class Store:
    """Projects, tests and takes; open with :meth:`Store.open`, close with :meth:`close` or ``with``."""

    def __init__(self, database: Database, *, folder: Path | None, audio_dir: Path, max_take_bytes: int,
                 scratch: tempfile.TemporaryDirectory[str] | None) -> None:
        self._database = database
        self._write, self._read = database.write, database.read
        self._scratch = scratch
        self.name = database.name
        self.folder = folder                       # the database's folder; None in memory
        self.audio_dir = audio_dir
        self.max_take_bytes = max_take_bytes
        self.applied_migrations = database.applied_migrations   # applied when this Store opened the database
        self.measurements = MeasurementRows(database)      # take measurements by content (fieldtl.testrun)
        # complaint files (fieldtl.noise) live in this device's SQLite store only, not on a team server
        self.complaints = (ComplaintRows(database, clips_dir=(folder or audio_dir) / CLIPS_FOLDER)
                           if isinstance(database, Database) else None)

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
        except OSError as exc:
            raise StoreError(f"{name}: cannot open the store ({exc})") from None
        return cls(Database(":memory:" if memory else str(database), name=name),
                   folder=None if memory else database.parent, audio_dir=Path(audio_dir),
                   max_take_bytes=max_take_bytes, scratch=scratch)

    def close(self) -> None:
        self._database.close()
        if self._scratch is not None:
            self._scratch.cleanup()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def schema_state(self) -> tuple[int, tuple[str, ...]]:
        """(PRAGMA user_version, names recorded in schema_migrations in the order applied)."""
        with self._read() as db:
            version = db.execute("PRAGMA user_version").fetchone()[0]
            names = tuple(r[0] for r in db.execute("SELECT name FROM schema_migrations ORDER BY rowid"))
        return version, names

    # --- projects ----------------------------------------------------------------------------------

    def create_project(self, name: str, *, client: str = "", address: str = "", engineer: str = "") -> Project:
        check_project_texts(name=name, client=client, address=address, engineer=engineer)
        now = utc_now()
        project = Project(0, name, client, address, engineer, now, now)
        with self._write() as db:
            return replace(project, id=rows.insert_project(db, project))

    def update_project(self, project_id: int, *, name: str | None = None, client: str | None = None,
                       address: str | None = None, engineer: str | None = None) -> Project:
        """Change the given fields (None keeps a field as it is)."""
        with self._write() as db:
            current = self._project(db, project_id)
            changed = replace(current, **{k: v for k, v in dict(name=name, client=client, address=address,
                                                                  engineer=engineer).items() if v is not None},
                              updated_at=utc_now())
            check_project_texts(name=changed.name, client=changed.client, address=changed.address,
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
            found = db.execute("SELECT * FROM projects ORDER BY updated_at DESC, id DESC").fetchall()
        return tuple(rows.row_to_project(r) for r in found)

    def delete_project(self, project_id: int) -> None:
        """Delete the project with its tests and takes; audio files stay until :meth:`clean_files`."""
        with self._write() as db:
            self._project(db, project_id)
            db.execute("DELETE FROM projects WHERE id = ?", (project_id,))

    # --- tests -------------------------------------------------------------------------------------

    def create_test(self, project_id: int, setup: TestSetup) -> TestRecord:
        """A new test; its declared construction (settings) must parse, as the calculator will read it."""
        now = utc_now()
        check_test_texts(setup, None, f"test {echo(setup.title)}")
        test = TestRecord(0, project_id, setup, None, now, now)
        with self._write() as db:
            self._project(db, project_id)
            test = replace(test, id=rows.insert_test(db, project_id, test))
            rows.touch_project(db, project_id, now)
        return test

    def update_test(self, test_id: int, setup: TestSetup, *, expected_updated_at: str | None = None) -> TestRecord:
        """Replace the test's setup; a new test type must still admit every stored take and band column.

        ``expected_updated_at`` (the updated_at of the copy being edited) refuses a stale edit with
        StaleEditError when the test changed meanwhile (optimistic check; nothing is overwritten).
        """
        now = utc_now()
        where = f"test {echo(setup.title)}"
        with self._write() as db:
            current = self._test(db, test_id)
            refuse_stale(where, current.updated_at, expected_updated_at)
            check_test_texts(setup, current.band_levels_csv, where)
            if setup.test_type != current.setup.test_type:
                for take in self._takes(db, test_id):
                    check_take_fields(setup.test_type, **rows.take_fields(take),
                                      where=f"{where}: take {echo(take.original_name)}")
            db.execute(f"UPDATE tests SET {', '.join(c + ' = ?' for c in rows.TEST_COLUMNS)}, updated_at = ? "
                       "WHERE id = ?", (*rows.setup_values(setup), now, test_id))
            rows.touch_project(db, current.project_id, now)
        return replace(current, setup=setup, updated_at=now)

    def get_test(self, test_id: int) -> TestRecord:
        with self._read() as db:
            return self._test(db, test_id)

    def list_tests(self, project_id: int) -> tuple[TestRecord, ...]:
        """The project's tests in the order they were created."""
        with self._read() as db:
            self._project(db, project_id)
            found = db.execute("SELECT * FROM tests WHERE project_id = ? ORDER BY id", (project_id,)).fetchall()
        return tuple(rows.row_to_test(r) for r in found)

    def set_band_levels(self, test_id: int, csv_text: str | None, *,
                        expected_updated_at: str | None = None) -> TestRecord:
        """Store pasted sound-level-meter band levels (checked as survey.read_band_levels_csv does), or
        clear them; ``expected_updated_at`` refuses a stale edit as :meth:`update_test` does."""
        now = utc_now()
        with self._write() as db:
            test = self._test(db, test_id)
            refuse_stale(f"test {echo(test.setup.title)}", test.updated_at, expected_updated_at)
            check_test_texts(test.setup, csv_text, f"test {echo(test.setup.title)}")
            db.execute("UPDATE tests SET band_levels_csv = ?, updated_at = ? WHERE id = ?", (csv_text, now, test_id))
            rows.touch_project(db, test.project_id, now)
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
        check_recording_name(original_name)
        sweep = dict(sweep_start_hz=sweep_start_hz, sweep_stop_hz=sweep_stop_hz, sweep_length_s=sweep_length_s)
        fields = dict(role=role, speaker=speaker, method=method, channel=channel, source=source,
                      recorder_settings=recorder_settings, sweep=sweep)
        check_take_fields(self.get_test(test_id).setup.test_type, **fields, where=original_name)
        if len(data) > self.max_take_bytes:
            raise InputError(f"{original_name}: {len(data) / 1e6:.0f} MB is more than the "
                             f"{self.max_take_bytes / 1e6:.0f} MB allowed per recording")
        incoming = self.incoming_path()
        try:
            write_durably(incoming, data)
            audio = check_audio_file(incoming, channel=channel, shown_name=original_name,
                                     read_whole=role in WHOLE_READ_ROLES)
            row = dict(test_id=test_id, role=role, speaker=speaker, method=method, channel=channel, **sweep,
                       file_name=audio.file_name, original_name=original_name, sha256=audio.sha256,
                       sample_rate_hz=audio.sample_rate_hz, frames=audio.frames, duration_s=audio.duration_s,
                       source=source, recorder_settings=recorder_settings, excluded=False, created_at=utc_now())
            with self._write() as db:
                test = self._test(db, test_id)            # as it is now, under the write lock
                check_take_fields(test.setup.test_type, **fields, where=original_name)
                with self._placed(db, {audio.file_name: incoming}):
                    take_id = rows.insert_take(db, row)
                    rows.touch_project(db, test.project_id, row["created_at"])
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
            rows.touch_project(db, self._test(db, take.test_id).project_id, utc_now())
        return replace(take, excluded=bool(excluded))

    def set_take_channel(self, take_id: int, channel: int) -> TakeRecord:
        """Analyse another channel of the take's file (0-based); InputError if the file has no such channel."""
        take = self.get_take(take_id)
        open_recording(self.take_path(take), channel=channel)   # raises for a channel the file does not have
        with self._write() as db:
            db.execute("UPDATE takes SET channel = ? WHERE id = ?", (int(channel), take_id))
            rows.touch_project(db, self._test(db, take.test_id).project_id, utc_now())
        return replace(take, channel=int(channel))

    def update_take(self, take_id: int, *, role: str, speaker: int, method: str | None = None,
                    sweep_start_hz: float | None = None, sweep_stop_hz: float | None = None,
                    sweep_length_s: float | None = None) -> TakeRecord:
        """Correct the take's role, position and decay method (checked as a new take's are)."""
        fields = dict(role=role, speaker=speaker, method=method, sweep_start_hz=sweep_start_hz,
                      sweep_stop_hz=sweep_stop_hz, sweep_length_s=sweep_length_s)
        with self._write() as db:
            changed = replace(self._take(db, take_id), **fields)
            test = self._test(db, changed.test_id)
            check_take_fields(test.setup.test_type, **rows.take_fields(changed), where=changed.original_name)
            db.execute(f"UPDATE takes SET {', '.join(k + ' = ?' for k in fields)} WHERE id = ?",
                       (*fields.values(), take_id))
            rows.touch_project(db, test.project_id, utc_now())
        return changed

    def delete_take(self, take_id: int) -> None:
        """Delete the take's row; its audio file may be shared by content and stays until :meth:`clean_files`."""
        with self._write() as db:
            take = self._take(db, take_id)
            db.execute("DELETE FROM takes WHERE id = ?", (take_id,))
            rows.touch_project(db, self._test(db, take.test_id).project_id, utc_now())

    def take_path(self, take: TakeRecord) -> Path:
        """Absolute path of the take's audio file."""
        return (self.audio_dir / take.file_name).resolve()

    def clean_files(self, *, stale_s: float = STALE_INCOMING_S) -> tuple[Path, ...]:
        """Remove audio files no take refers to, and ``.incoming-*`` / ``*.part`` leftovers older
        than ``stale_s`` in the audio folder and the database's folder; returns what was removed.

        Runs under the write lock, so no other process can be placing a file meanwhile; a file
        any take refers to is never removed, nor any file not named like the store's own.
        """
        with self._write() as db:
            return remove_unused(db, self.audio_dir, stale_s=stale_s,
                                 other_folders=() if self.folder is None else (self.folder,))

    # --- the calculator's view ---------------------------------------------------------------------

    def missing_roles(self, test_id: int) -> tuple[str, ...]:
        """Roles the test type requires that neither an included take nor a band-level column provides."""
        with self._read() as db:
            test = self._test(db, test_id)
            takes = self._takes(db, test_id)
        return missing_roles(test, takes)

    def survey_for_test(self, test_id: int) -> Survey:
        """The stored test as the Survey the calculator measures: included takes with absolute paths.

        Raises InputError naming the test if a required role is missing or the calibration takes
        are ambiguous; StoreError if a take's audio file has gone from the audio folder.
        """
        with self._read() as db:
            test = self._test(db, test_id)
            takes = tuple(t for t in self._takes(db, test_id) if not t.excluded)
        survey = survey_from_records(test, takes, self.take_path)
        for take in takes:
            if not self.take_path(take).is_file():
                raise StoreError(f"test {echo(test.setup.title)}: the audio of {echo(take.original_name)} "
                                 f"({take.file_name}) is missing from the audio folder")
        return survey

    # --- whole projects (archives) -----------------------------------------------------------------

    def snapshot(self, project_id: int) -> ProjectSnapshot:
        with self._read() as db:
            project = self._project(db, project_id)
            tests = tuple(rows.row_to_test(r) for r in db.execute(
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
        check_snapshot(snapshot, files)
        with self._write() as db, self._placed(db, files):
            project_id = rows.insert_project(db, project)
            new_test_ids = {test.id: rows.insert_test(db, project_id, test) for test in snapshot.tests}
            for take in snapshot.takes:
                row = {c: getattr(take, c) for c in rows.TAKE_COLUMNS}
                rows.insert_take(db, row | {"test_id": new_test_ids[take.test_id]})
        return replace(project, id=project_id)

    def incoming_path(self) -> Path:
        """A fresh name in the audio folder for a file being received (same disk, so renames are atomic)."""
        return self.audio_dir / incoming_name()

    # --- internals ---------------------------------------------------------------------------------

    def _placed(self, db: Any, files: Mapping[str, Path]) -> AbstractContextManager[None]:
        """Keep checked audio (content name → received file) for the rows written in the block."""
        return placed_files(self.audio_dir, files)

    def _project(self, db: sqlite3.Connection, project_id: int) -> Project:
        row = db.execute("SELECT * FROM projects WHERE id = ?", (project_id,)).fetchone()
        if row is None:
            raise InputError(f"{self.name}: no project with id {project_id}")
        return rows.row_to_project(row)

    def _test(self, db: sqlite3.Connection, test_id: int) -> TestRecord:
        row = db.execute("SELECT * FROM tests WHERE id = ?", (test_id,)).fetchone()
        if row is None:
            raise InputError(f"{self.name}: no test with id {test_id}")
        return rows.row_to_test(row)

    def _take(self, db: sqlite3.Connection, take_id: int) -> TakeRecord:
        row = db.execute("SELECT * FROM takes WHERE id = ?", (take_id,)).fetchone()
        if row is None:
            raise InputError(f"{self.name}: no take with id {take_id}")
        return rows.row_to_take(row)

    def _takes(self, db: sqlite3.Connection, test_id: int) -> tuple[TakeRecord, ...]:
        return tuple(rows.row_to_take(r) for r in db.execute(
            "SELECT * FROM takes WHERE test_id = ? ORDER BY id", (test_id,)))


