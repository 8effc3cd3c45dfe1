"""The shape of stored data: the row values passed out of the store, their checks, and the migrations.

Migrations are named functions applied in order, each inside the same transaction as the row
recording its name in ``schema_migrations``; ``PRAGMA user_version`` counts the applied ones.
A second migration is one more function appended to :data:`MIGRATIONS`; a function, once
released, is never edited or reordered.
"""

from __future__ import annotations

import json
import sqlite3
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from datetime import datetime, timezone
from typing import Any

from fieldtl import validate
from fieldtl.errors import InputError, StoreError
from fieldtl.survey import DECAY_METHODS, ROLES_BY_TYPE, Geometry
from fieldtl.uncertainty import parse_requirement
from fieldtl.validate import CALIBRATOR_DB, CHANNEL, LAB_RATING_DB, POSITION, SWEEP_HZ, SWEEP_S, echo

TEST_TYPES: tuple[str, ...] = ("airborne", "impact")
CALIBRATION_ROLES: tuple[str, ...] = ("calibration", "calibration_after")
TAKE_SOURCES: tuple[str, ...] = ("upload", "recorder")
UNCERTAINTY_SITUATIONS: tuple[str, ...] = ("A", "B", "C")       # ISO 12999-1 situations
MAX_PASTED_CHARS = validate.MAX_FILE_BYTES   # pasted band levels, declared build-up: as a survey's files
MAX_SETTINGS_CHARS = 2 * MAX_PASTED_CHARS    # a test's settings object, as JSON
RECORDING_NAME_CHARS = 2 * validate.NAME_CHARS   # a recording's file name, as the survey allows it
CONSTRUCTION_SETTING = "construction_toml"   # settings key: the declared build-up, construction-file TOML
REPORT_SETTING = "report_details"            # settings key: the report page's details, texts only
REPORT_DETAIL_CHARS: dict[str, int] = {"organisation": validate.NAME_CHARS, "engineer": validate.NAME_CHARS,
                                       "measurement_date": validate.NAME_CHARS, "instruments": validate.NOTE_CHARS,
                                       "positions_description": validate.NOTE_CHARS, "notes": validate.NOTE_CHARS}


def take_roles(test_type: str) -> tuple[str, ...]:
    """Roles a take of this test type may have: the survey roles plus the calibrator checks."""
    return ROLES_BY_TYPE[test_type] + CALIBRATION_ROLES


def utc_now() -> str:
    """Timestamp stored in every row: ISO 8601, UTC, microseconds (orders rows made in one second)."""
    return datetime.now(timezone.utc).isoformat(timespec="microseconds")


# --- row values ------------------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class Project:
    id: int
    name: str
    client: str
    address: str
    engineer: str
    created_at: str
    updated_at: str


@dataclass(frozen=True, slots=True)
class TestSetup:
    """What the engineer enters for one test; checked on construction (InputError, one line).

    Does not check that the requirement's descriptor suits the test type (the verdict does).
    """

    __test__ = False          # not a pytest test class, whatever its name

    title: str
    test_type: str
    receiving_volume_m3: float
    separating_area_m2: float | None = None
    source_volume_m3: float | None = None
    construction: str = ""
    requirement: str | None = None
    element_lab_rw_db: float | None = None
    uncertainty_situation: str = "B"
    calibrator_db: float = 94.0
    settings: Mapping[str, Any] = field(default_factory=dict, hash=False)   # JSON object: app choices

    def __post_init__(self) -> None:
        """The same checks as a survey file's [test] table (fieldtl.survey), plus the settings."""
        where = f"test {echo(self.title)}" if isinstance(self.title, str) else "test"
        check_text(self.title, f"{where} title", max_chars=validate.NAME_CHARS)
        check_text(self.construction, f"{where} construction", max_chars=validate.NOTE_CHARS)
        validate.choice(self.test_type, TEST_TYPES, f"{where} type")
        try:
            Geometry(self.receiving_volume_m3, self.separating_area_m2, self.source_volume_m3)
        except InputError as exc:
            raise InputError(f"{where} {exc}") from None
        if self.element_lab_rw_db is not None:
            validate.number(self.element_lab_rw_db, f"{where} element_lab_rw_db", low=LAB_RATING_DB[0],
                            high=LAB_RATING_DB[1], unit=" dB")
        if self.requirement is not None:
            check_text(self.requirement, f"{where} requirement", max_chars=validate.REQUIREMENT_CHARS)
            try:
                parse_requirement(self.requirement)
            except InputError as exc:
                raise InputError(f"{where}: {exc}") from None
        validate.choice(self.uncertainty_situation, UNCERTAINTY_SITUATIONS, f"{where} uncertainty situation")
        validate.number(self.calibrator_db, f"{where} calibrator_db", low=CALIBRATOR_DB[0], high=CALIBRATOR_DB[1],
                        unit=" dB")
        check_settings(self.settings, f"{where} settings")


@dataclass(frozen=True, slots=True)
class TestRecord:
    __test__ = False

    id: int
    project_id: int
    setup: TestSetup
    band_levels_csv: str | None
    created_at: str
    updated_at: str


@dataclass(frozen=True, slots=True)
class TakeRecord:
    """One stored recording: what it is, where its bytes are, and what its header said."""

    id: int
    test_id: int
    role: str
    speaker: int                    # loudspeaker or tapping-machine position, 1-based
    method: str | None              # decays only: impulse | interrupted | sweep
    channel: int                    # 0-based channel analysed
    file_name: str                  # content-addressed: <sha256><.wav|.flac> (a file, or a team server blob)
    original_name: str
    sha256: str
    sample_rate_hz: int
    frames: int
    duration_s: float
    source: str                     # upload | recorder
    recorder_settings: Mapping[str, Any] | None = field(hash=False)   # what the browser applied
    excluded: bool
    created_at: str
    sweep_start_hz: float | None = None
    sweep_stop_hz: float | None = None
    sweep_length_s: float | None = None


@dataclass(frozen=True, slots=True)
class ProjectSnapshot:
    """A project with all its tests and takes, read in one transaction (export and copy)."""

    project: Project
    tests: tuple[TestRecord, ...]
    takes: tuple[TakeRecord, ...]


def check_take_fields(test_type: str, *, role: Any, speaker: Any, method: Any, channel: Any, source: Any,
                      recorder_settings: Any, sweep: Mapping[str, Any], where: str) -> None:
    """What a take says about itself fits its test, checked as a survey's [[recording]] is:
    role, position, decay method, channel (0-based here), sweep, origin."""
    validate.choice(role, take_roles(test_type), f"{where}: role (for {test_type} tests)")
    validate.number(speaker, f"{where}: position", low=POSITION[0], high=POSITION[1], integer=True)
    validate.number(channel, f"{where}: channel (0-based)", low=CHANNEL[0] - 1, high=CHANNEL[1] - 1, integer=True)
    if role == "decay":
        validate.choice(method, DECAY_METHODS, f"{where}: decay method")
    elif method is not None:
        raise InputError(f"{where}: method applies to decay takes only")
    for key, (low, high), unit in (("sweep_start_hz", SWEEP_HZ, " Hz"), ("sweep_stop_hz", SWEEP_HZ, " Hz"),
                                   ("sweep_length_s", SWEEP_S, " s")):
        if sweep.get(key) is not None:
            validate.number(sweep[key], f"{where}: {key}", low=low, high=high, unit=unit)
    if method == "sweep" and any(v is None for v in sweep.values()):
        raise InputError(f"{where}: a sweep decay needs sweep_start_hz, sweep_stop_hz and sweep_length_s "
                         "(the sweep that was played)")
    if method != "sweep" and any(v is not None for v in sweep.values()):
        raise InputError(f"{where}: sweep settings apply to sweep decays only")
    validate.choice(source, TAKE_SOURCES, f"{where}: source")
    if recorder_settings is not None:
        check_json_object(recorder_settings, f"{where} recorder settings")


def check_text(value: Any, what: str, *, max_chars: int, empty: bool = True) -> None:
    """:func:`fieldtl.validate.text`, and storable as UTF-8 (no lone surrogates)."""
    validate.text(value, what, max_chars=max_chars, empty=empty)
    try:
        value.encode("utf-8")
    except UnicodeEncodeError:
        raise InputError(f"{what}: text holds characters that cannot be stored (lone surrogates)") from None


def check_recording_name(value: Any, what: str = "recording name") -> None:
    check_text(value, what, max_chars=RECORDING_NAME_CHARS, empty=False)


def check_project_texts(*, name: Any, client: Any, address: Any, engineer: Any) -> None:
    """A project's texts: the name (not empty), client and engineer as names; the address a note."""
    check_text(name, "project name", max_chars=validate.NAME_CHARS, empty=False)
    check_text(client, "project client", max_chars=validate.NAME_CHARS)
    check_text(engineer, "project engineer", max_chars=validate.NAME_CHARS)
    check_text(address, "project address", max_chars=validate.NOTE_CHARS)


def check_settings(value: Any, what: str) -> None:
    """A test's settings: a JSON object of bounded size whose known keys hold what the app writes."""
    check_json_object(value, what)
    if CONSTRUCTION_SETTING in value:
        check_text(value[CONSTRUCTION_SETTING], f"{what} {CONSTRUCTION_SETTING}", max_chars=MAX_PASTED_CHARS)
    if REPORT_SETTING in value:
        details = value[REPORT_SETTING]
        if not isinstance(details, Mapping):
            raise InputError(f"{what} {REPORT_SETTING} must be a JSON object, got {validate.type_name(details)}")
        for key, text in details.items():
            if key not in REPORT_DETAIL_CHARS:
                raise InputError(f"{what} {REPORT_SETTING}: unknown key {echo(key)}")
            check_text(text, f"{what} {REPORT_SETTING} {key}", max_chars=REPORT_DETAIL_CHARS[key])
    if len(json.dumps(dict(value), ensure_ascii=False)) > MAX_SETTINGS_CHARS:
        raise InputError(f"{what}: more than the {MAX_SETTINGS_CHARS} characters allowed")


def check_json_object(value: Any, what: str) -> None:
    """A mapping that survives JSON unchanged (string keys, finite numbers, lists, nested objects)."""
    if not isinstance(value, Mapping):
        raise InputError(f"{what}: expected a JSON object, got {type(value).__name__}")
    try:
        text = json.dumps(dict(value), allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{what}: not storable as JSON ({exc})") from None
    except RecursionError:
        raise InputError(f"{what}: nested too deeply") from None
    if json.loads(text) != value:
        raise InputError(f"{what}: does not survive JSON unchanged (use string keys and lists, not tuples)")


# --- migrations ------------------------------------------------------------------------------------

Migration = Callable[[sqlite3.Connection], None]


def m0001_create_tables(connection: sqlite3.Connection) -> None:
    """Projects, tests and takes; deleting a project or test deletes its rows below it."""
    statements = (
        """CREATE TABLE projects (
            id INTEGER PRIMARY KEY,
            name TEXT NOT NULL,
            client TEXT NOT NULL DEFAULT '',
            address TEXT NOT NULL DEFAULT '',
            engineer TEXT NOT NULL DEFAULT '',
            created_at TEXT NOT NULL,
            updated_at TEXT NOT NULL)""",
        """CREATE TABLE tests (
            id INTEGER PRIMARY KEY,
            project_id INTEGER NOT NULL REFERENCES projects(id) ON DELETE CASCADE,
            title TEXT NOT NULL,
            test_type TEXT NOT NULL CHECK (test_type IN ('airborne', 'impact')),
            separating_area_m2 REAL CHECK (separating_area_m2 > 0),
            receiving_volume_m3 REAL NOT NULL CHECK (receiving_volume_m3 > 0),
            source_volume_m3 REAL CHECK (source_volume_m3 > 0),
            construction TEXT NOT NULL DEFAULT '',
            requirement TEXT,
            element_lab_rw_db REAL,
            uncertainty_situation TEXT NOT NULL DEFAULT 'B' CHECK (uncertainty_situation IN ('A', 'B', 'C')),
            calibrator_db REAL NOT NULL DEFAULT 94.0,
            band_levels_csv TEXT,
            settings TEXT NOT NULL DEFAULT '{}' CHECK (json_valid(settings)),
            created_at TEXT NOT NULL,
            updated_at TEXT NOT NULL)""",
        "CREATE INDEX tests_project ON tests(project_id)",
        """CREATE TABLE takes (
            id INTEGER PRIMARY KEY,
            test_id INTEGER NOT NULL REFERENCES tests(id) ON DELETE CASCADE,
            role TEXT NOT NULL CHECK (role IN ('source', 'receiving', 'background', 'decay', 'source_corner',
                                               'receiving_corner', 'impact', 'calibration', 'calibration_after')),
            speaker INTEGER NOT NULL DEFAULT 1 CHECK (speaker >= 1),
            method TEXT CHECK (method IN ('impulse', 'interrupted', 'sweep')),
            channel INTEGER NOT NULL DEFAULT 0 CHECK (channel >= 0),
            sweep_start_hz REAL,
            sweep_stop_hz REAL,
            sweep_length_s REAL,
            file_name TEXT NOT NULL,
            original_name TEXT NOT NULL,
            sha256 TEXT NOT NULL CHECK (length(sha256) = 64),
            sample_rate_hz INTEGER NOT NULL,
            frames INTEGER NOT NULL,
            duration_s REAL NOT NULL,
            source TEXT NOT NULL CHECK (source IN ('upload', 'recorder')),
            recorder_settings TEXT CHECK (recorder_settings IS NULL OR json_valid(recorder_settings)),
            excluded INTEGER NOT NULL DEFAULT 0 CHECK (excluded IN (0, 1)),
            created_at TEXT NOT NULL)""",
        "CREATE INDEX takes_test ON takes(test_id)",
        "CREATE INDEX takes_file ON takes(file_name)",
    )
    for statement in statements:
        connection.execute(statement)


def m0002_take_measurements(connection: sqlite3.Connection) -> None:
    """What each take's audio measured, keyed by its content and analysis settings (fieldtl.testrun).

    ``key`` digests the audio's SHA-256, the settings and the analysis version; a row is never
    tied to a take (two takes of the same audio with the same settings share it), so deleting a
    take leaves it, and :meth:`Store.clean_files` removes rows of other analysis versions.
    """
    connection.execute("""CREATE TABLE take_measurements (
            key TEXT PRIMARY KEY CHECK (length(key) = 64),
            sha256 TEXT NOT NULL CHECK (length(sha256) = 64),
            analysis_version TEXT NOT NULL,
            settings TEXT NOT NULL CHECK (json_valid(settings)),
            measurement TEXT NOT NULL CHECK (json_valid(measurement)),
            created_at TEXT NOT NULL)""")
    connection.execute("CREATE INDEX take_measurements_sha256 ON take_measurements(sha256)")


def m0003_complaints(connection: sqlite3.Connection) -> None:
    """Complaint files (fieldtl.store.complaints): a reference, rooms, zone, diary and a linked test;
    their recording periods kept as noise-record JSON (no audio). Deleting a complaint deletes its
    periods; deleting the linked test only unlinks it."""
    connection.execute("""CREATE TABLE complaints (
            id INTEGER PRIMARY KEY,
            reference TEXT NOT NULL,
            rooms TEXT NOT NULL DEFAULT '',
            time_zone TEXT NOT NULL,
            test_id INTEGER REFERENCES tests(id) ON DELETE SET NULL,
            diary_csv TEXT NOT NULL DEFAULT '',
            created_at TEXT NOT NULL,
            updated_at TEXT NOT NULL)""")
    connection.execute("""CREATE TABLE complaint_periods (
            id INTEGER PRIMARY KEY,
            complaint_id INTEGER NOT NULL REFERENCES complaints(id) ON DELETE CASCADE,
            name TEXT NOT NULL,
            record TEXT NOT NULL CHECK (json_valid(record)),
            keep_clips INTEGER NOT NULL CHECK (keep_clips IN (0, 1)),
            created_at TEXT NOT NULL)""")
    connection.execute("CREATE INDEX complaint_periods_complaint ON complaint_periods(complaint_id)")


def m0004_background_corner_role(connection: sqlite3.Connection) -> None:
    """Takes may have the role background_corner (the background at one low-frequency corner).

    SQLite cannot change a CHECK constraint, so the takes table is rebuilt with the same columns,
    rows and indexes (no table refers to takes, so nothing cascades).
    """
    connection.execute(f"""CREATE TABLE takes_new (
            id INTEGER PRIMARY KEY,
            test_id INTEGER NOT NULL REFERENCES tests(id) ON DELETE CASCADE,
            role TEXT NOT NULL CHECK (role IN ({STORED_ROLE_LIST})),
            speaker INTEGER NOT NULL DEFAULT 1 CHECK (speaker >= 1),
            method TEXT CHECK (method IN ('impulse', 'interrupted', 'sweep')),
            channel INTEGER NOT NULL DEFAULT 0 CHECK (channel >= 0),
            sweep_start_hz REAL,
            sweep_stop_hz REAL,
            sweep_length_s REAL,
            file_name TEXT NOT NULL,
            original_name TEXT NOT NULL,
            sha256 TEXT NOT NULL CHECK (length(sha256) = 64),
            sample_rate_hz INTEGER NOT NULL,
            frames INTEGER NOT NULL,
            duration_s REAL NOT NULL,
            source TEXT NOT NULL CHECK (source IN ('upload', 'recorder')),
            recorder_settings TEXT CHECK (recorder_settings IS NULL OR json_valid(recorder_settings)),
            excluded INTEGER NOT NULL DEFAULT 0 CHECK (excluded IN (0, 1)),
            created_at TEXT NOT NULL)""")
    connection.execute("INSERT INTO takes_new SELECT * FROM takes")
    connection.execute("DROP TABLE takes")
    connection.execute("ALTER TABLE takes_new RENAME TO takes")
    connection.execute("CREATE INDEX takes_test ON takes(test_id)")
    connection.execute("CREATE INDEX takes_file ON takes(file_name)")


# every role a stored take may have since m0004 (a released migration keeps this text unchanged)
STORED_ROLE_LIST = ("'source', 'receiving', 'background', 'decay', 'source_corner', 'receiving_corner', "
                    "'impact', 'background_corner', 'calibration', 'calibration_after'")

MIGRATIONS: tuple[Migration, ...] = (m0001_create_tables, m0002_take_measurements, m0003_complaints,
                                     m0004_background_corner_role)
SCHEMA_VERSION = len(MIGRATIONS)


def migrate(connection: sqlite3.Connection, *, source_name: str) -> tuple[str, ...]:
    """Apply the migrations this database lacks, in one transaction; returns the names applied.

    The connection must be in autocommit mode (isolation_level None). BEGIN IMMEDIATE takes the
    write lock first, so two processes opening a new database apply each migration once.
    """
    connection.execute("BEGIN IMMEDIATE")
    try:
        connection.execute("CREATE TABLE IF NOT EXISTS schema_migrations ("
                            "name TEXT PRIMARY KEY, applied_at TEXT NOT NULL)")
        applied = [row[0] for row in connection.execute("SELECT name FROM schema_migrations ORDER BY rowid")]
        known = [m.__name__ for m in MIGRATIONS]
        if applied != known[: len(applied)]:
            raise StoreError(f"{source_name}: migrations {', '.join(applied)} do not match this version of "
                             "fieldtl (made by a newer or different version?)")
        version = connection.execute("PRAGMA user_version").fetchone()[0]
        if version != len(applied):
            raise StoreError(f"{source_name}: schema version {version} disagrees with "
                             f"{len(applied)} recorded migrations")
        pending = MIGRATIONS[len(applied):]
        for number, migration in enumerate(pending, start=len(applied) + 1):
            migration(connection)
            connection.execute("INSERT INTO schema_migrations (name, applied_at) VALUES (?, ?)",
                               (migration.__name__, utc_now()))
            connection.execute(f"PRAGMA user_version = {number:d}")
        connection.execute("COMMIT")
    except BaseException:
        if connection.in_transaction:
            connection.execute("ROLLBACK")
        raise
    return tuple(m.__name__ for m in pending)
