"""The team server's store: the same Store on PostgreSQL, with accounts, per-project roles, sign-offs
and an audit of every change.

``ServerStore.open("postgresql://...")`` is the server's own handle (the `fieldtl` command on the
server: create accounts, grant roles, see everything). :meth:`ServerStore.login` gives an
account's handle, sharing the pool: every Store method then checks the account's role on the
project it touches, inside the same transaction as the read or write, and raises
PermissionDenied (a StoreError, one line) when the role does not allow it:

* owner: everything on the project, and grants roles on it;
* tester: reads, adds and changes tests and takes;
* reviewer: reads and signs tests off, changes nothing else.

An account sees only the projects it has a role on, and owns the projects it creates. Each write
records the account in the transaction (``fieldtl.user``), and triggers write the audit rows.

Audio is kept in the database itself, content-addressed (``audio_blobs``, fieldtl.store.pg_blobs),
in the same transaction as the take rows naming it: a ``postgresql://`` URL and an account are all
a device needs, one ``pg_dump`` holds everything, and a push is atomic with its audio. The
analysis reads recordings from files, so :meth:`ServerStore.take_path` returns this client's
cached copy (``cache_dir``, by default ``DATA_DIR/team-cache/<digest of the server>``), fetched
and checked on first use; it is never the folder of the device's own SQLite store.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from contextvars import ContextVar
from dataclasses import dataclass
from pathlib import Path, PurePath, PurePosixPath
from typing import Any

from fieldtl.errors import StoreError
from fieldtl.store import pg_blobs
from fieldtl.store.connection import default_data_dir
from fieldtl.store.errors import PermissionDenied
from fieldtl.store.files import STALE_INCOMING_S, place_file
from fieldtl.store.measurements import MeasurementRows
from fieldtl.store.offline_record import copy_checked
from fieldtl.store.pg_accounts import MIN_PASSWORD_CHARS, Account, AccountRules, Member  # noqa: F401 - re-exported
from fieldtl.store.pg_database import PgDatabase, Session
from fieldtl.store.pg_schema import PROJECT_ROLES
from fieldtl.store.schema import Project, TakeRecord, check_text, utc_now
from fieldtl.store.sqlite import DEFAULT_MAX_TAKE_BYTES, Store
from fieldtl.validate import NOTE_CHARS, echo

READ = frozenset(PROJECT_ROLES)
WRITE = frozenset({"owner", "tester"})
OWNER = frozenset({"owner"})
SIGN = frozenset({"owner", "reviewer"})

# What each inherited Store method needs: (what its first argument names, roles allowed).
RULES: dict[str, tuple[str, frozenset[str]]] = {
    "update_project": ("project", OWNER), "get_project": ("project", READ), "delete_project": ("project", OWNER),
    "create_test": ("project", WRITE), "list_tests": ("project", READ), "snapshot": ("project", READ),
    "update_test": ("test", WRITE), "get_test": ("test", READ), "set_band_levels": ("test", WRITE),
    "add_take": ("test", WRITE), "list_takes": ("test", READ), "missing_roles": ("test", READ),
    "survey_for_test": ("test", READ), "get_take": ("take", READ), "set_take_excluded": ("take", WRITE),
    "set_take_channel": ("take", WRITE), "update_take": ("take", WRITE), "delete_take": ("take", WRITE),
}
_PROJECT_OF = {"project": "SELECT id FROM projects WHERE id = ?",
               "test": "SELECT project_id FROM tests WHERE id = ?",
               "take": "SELECT t.project_id FROM takes k JOIN tests t ON t.id = k.test_id WHERE k.id = ?"}
_NEED: ContextVar[tuple[str, str, int, frozenset[str]] | None] = ContextVar("fieldtl_store_need", default=None)


@dataclass(frozen=True, slots=True)
class AuditEntry:
    changed_at: str            # ISO 8601, UTC
    user_name: str
    action: str                # insert | update | delete
    table_name: str
    row_id: int | None
    detail: dict[str, Any]


@dataclass(frozen=True, slots=True)
class SignOff:
    test_id: int
    user_name: str
    note: str
    signed_at: str


class PgMeasurementRows(MeasurementRows):
    def put(self, key: str, *, sha256: str, analysis_version: str, settings_json: str, measurement_json: str) -> None:
        with self._database.write() as db:
            db.execute("INSERT INTO take_measurements (key, sha256, analysis_version, settings, measurement, "
                       "created_at) VALUES (?, ?, ?, ?, ?, ?) ON CONFLICT (key) DO UPDATE SET "
                       "sha256 = EXCLUDED.sha256, analysis_version = EXCLUDED.analysis_version, "
                       "settings = EXCLUDED.settings, measurement = EXCLUDED.measurement, "
                       "created_at = EXCLUDED.created_at",
                       (key, sha256, analysis_version, settings_json, measurement_json, utc_now()))


class ServerStore(AccountRules, Store):
    """A Store on PostgreSQL; ``account`` None is the server's own handle (no role checks)."""

    def __init__(self, database: PgDatabase, *, cache_dir: Path, max_take_bytes: int,
                 account: Account | None, owns_database: bool) -> None:
        # audio_dir (the Store's name): where this client's files of the server's audio are, its cache
        super().__init__(database, folder=None, audio_dir=cache_dir, max_take_bytes=max_take_bytes, scratch=None)  # type: ignore[arg-type]
        self.cache_dir = cache_dir
        self.account = account
        self._owns_database = owns_database
        self.measurements = PgMeasurementRows(database)   # type: ignore[arg-type]
        self._write, self._read = self._checked_write, self._checked_read   # type: ignore[method-assign]

    @classmethod
    def open(cls, url: str | Path, *, cache_dir: Path | None = None,   # type: ignore[override]
             max_take_bytes: int = DEFAULT_MAX_TAKE_BYTES) -> ServerStore:
        """Connect (creating and migrating the schema if needed); the audio read from the server is
        cached in ``cache_dir``, by default ``team-cache/<digest of the server>`` in the user's data
        folder (FIELDTL_DATA_DIR)."""
        cache_dir = pg_blobs.cache_dir_for(str(url), default_data_dir()) if cache_dir is None else Path(cache_dir)
        try:
            cache_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StoreError(f"cannot make the folder for the team server's audio ({exc.strerror or exc})") from None
        return cls(PgDatabase(str(url)), cache_dir=cache_dir, max_take_bytes=max_take_bytes, account=None,
                   owns_database=True)

    def close(self) -> None:
        if self._owns_database:
            super().close()

    def schema_state(self) -> tuple[int, tuple[str, ...]]:
        """(number of migrations applied, their names in the order applied)."""
        with self._read() as db:
            names = tuple(r[0] for r in db.execute("SELECT name FROM schema_migrations ORDER BY applied_at, name"))
        return len(names), names

    # --- what an account sees (accounts and roles: fieldtl.store.pg_accounts) -----------------------

    def list_projects(self) -> tuple[Project, ...]:
        """The projects this account has a role on (all for the server handle and admins)."""
        if self.account is None or self.account.is_admin:
            return super().list_projects()
        with self._read() as db:
            found = db.execute("SELECT p.* FROM projects p JOIN project_roles r ON r.project_id = p.id "
                               "WHERE r.user_id = ? ORDER BY p.updated_at DESC, p.id DESC",
                               (self.account.id,)).fetchall()
        return tuple(Project(*r) for r in found)

    def take_path(self, take: TakeRecord) -> Path:
        """This client's copy of the take's audio, fetched from the server on first use (an account
        needs a role on the take's project); StoreError if the server lacks it."""
        path = self.cache_dir / take.file_name
        if not path.is_file():
            self._fetch(take, path)
        return path.resolve()

    def copy_audio(self, take: TakeRecord, target: Path) -> Path:
        """Write the take's audio to the new file ``target`` (SHA-256 checked), from this client's
        cached copy when there, else straight from the server (a check-out keeps no second copy)."""
        cached = self.cache_dir / take.file_name
        if cached.is_file():
            return copy_checked(cached, target, take.sha256)
        self._fetch(take, target)
        return target

    def clean_files(self, *, stale_s: float = STALE_INCOMING_S) -> tuple[PurePath, ...]:   # type: ignore[override]
        """Remove the audio no take names from the server (under the write lock; returned as
        ``audio_blobs/<name>``), then this client's cached copies of audio no take names and its
        unfinished fetches older than ``stale_s``."""
        self._require_admin("remove unused audio")
        with self._write() as db:
            removed = pg_blobs.remove_unused(db)
            used = {r[0] for r in db.execute("SELECT DISTINCT file_name FROM takes")}
        pg_blobs.clear_cache(self.cache_dir, used, stale_s=stale_s)
        return tuple(PurePosixPath("audio_blobs", name) for name in removed)

    # --- review ------------------------------------------------------------------------------------

    def sign_off(self, test_id: int, note: str = "") -> SignOff:
        """Record that this account (a reviewer or owner of the project) signs the test off."""
        check_text(note, "sign-off note", max_chars=NOTE_CHARS)
        name = "(server)" if self.account is None else self.account.name
        signed = SignOff(test_id, name, note, utc_now())
        token = _NEED.set(("sign off", "test", test_id, SIGN))
        try:
            with self._write() as db:
                self._test(db, test_id)
                db.execute("INSERT INTO sign_offs (test_id, user_name, note, signed_at) VALUES (?, ?, ?, ?)",
                           (test_id, name, note, signed.signed_at))
        finally:
            _NEED.reset(token)
        return signed

    def sign_offs(self, test_id: int) -> tuple[SignOff, ...]:
        with self._guard("read", "test", test_id, READ), self._read() as db:
            found = db.execute("SELECT test_id, user_name, note, signed_at FROM sign_offs WHERE test_id = ? "
                               "ORDER BY id", (test_id,)).fetchall()
        return tuple(SignOff(*r) for r in found)

    def audit_for_test(self, test_id: int) -> tuple[AuditEntry, ...]:
        """Every recorded change of the test and its takes and sign-offs, oldest first."""
        with self._guard("read", "test", test_id, READ), self._read() as db:
            found = db.execute("SELECT to_char(changed_at AT TIME ZONE 'UTC', 'YYYY-MM-DD\"T\"HH24:MI:SS.US\"Z\"'), "
                               "user_name, action, table_name, row_id, detail FROM audit WHERE test_id = ? "
                               "ORDER BY id", (test_id,)).fetchall()
        return tuple(AuditEntry(*r) for r in found)

    # --- internals ---------------------------------------------------------------------------------

    def _fetch(self, take: TakeRecord, target: Path) -> None:
        """The take's audio from the server to ``target``; the record is trusted only as far as the
        account's role on the take's project (checked in the same read)."""
        with self._guard("read the audio of", "take", take.id, READ), self._read() as db:
            if not pg_blobs.fetch(db, take.file_name, take.sha256, target):
                raise StoreError(f"the audio of {echo(take.original_name)} is missing from the team server")

    @contextmanager
    def _guard(self, what: str, kind: str, ident: int, roles: frozenset[str]) -> Iterator[None]:
        token = _NEED.set((what, kind, ident, roles))
        try:
            yield
        finally:
            _NEED.reset(token)

    @contextmanager
    def _placed(self, db: Session, files: Mapping[str, Path]) -> Iterator[None]:   # type: ignore[override]
        """The audio goes into the rows' transaction (a rollback takes it back); the received files
        then become this client's cached copies (content-named, so right whether or not it commits)."""
        pg_blobs.put(db, files)
        yield
        for name, path in files.items():
            place_file(self.cache_dir, path, name)

    @contextmanager
    def _checked_write(self, *, before_lock: Callable[[Session], None] | None = None) -> Iterator[Session]:
        """A write transaction as this account; ``before_lock`` (a push's upload) runs once the role
        is checked, before the write lock is taken; the role is checked again under the lock."""
        def prepare(db: Session) -> None:
            name = "(server)" if self.account is None else self.account.name
            user_id = "" if self.account is None else str(self.account.id)
            db.execute("SELECT set_config('fieldtl.user', ?, true), set_config('fieldtl.user_id', ?, true)",
                       (name, user_id))
            if before_lock is not None:
                self._check_role(db)
                before_lock(db)

        with self._database.write(before_lock=prepare) as db:   # type: ignore[attr-defined]
            self._check_role(db)
            yield db

    @contextmanager
    def _checked_read(self) -> Iterator[Session]:
        with self._database.read() as db:    # type: ignore[attr-defined]
            self._check_role(db)
            yield db

    def _check_role(self, db: Session) -> None:
        need = _NEED.get()
        if need is None or self.account is None or self.account.is_admin:
            return
        what, kind, ident, roles = need
        found = db.execute(_PROJECT_OF[kind], (int(ident),)).fetchone()
        if found is None:
            return                    # the store's own lookup then says there is no such row
        row = db.execute("SELECT role FROM project_roles WHERE project_id = ? AND user_id = ?",
                         (found[0], self.account.id)).fetchone()
        if row is None or row[0] not in roles:
            held = "no role" if row is None else f"the {row[0]} role"
            raise PermissionDenied(f"account {echo(self.account.name)} has {held} on project {found[0]} and "
                                   f"may not {what.replace('_', ' ')}")

def _guarded(name: str, kind: str, roles: frozenset[str]) -> Any:
    base = getattr(Store, name)

    @functools.wraps(base)
    def method(self: ServerStore, ident: int, *args: Any, **kwargs: Any) -> Any:
        token = _NEED.set((name, kind, ident, roles))
        try:
            return base(self, ident, *args, **kwargs)
        finally:
            _NEED.reset(token)
    return method


for _name, (_kind, _roles) in RULES.items():
    setattr(ServerStore, _name, _guarded(_name, _kind, _roles))
