"""The store's PostgreSQL database: a connection pool, migrations, and the read and write
transactions the store's statements run in (the same statements as SQLite's).

Writes are serialised by one transaction-level advisory lock, taken first: the store checks
what it is about to change and then changes it inside one transaction (a take must suit its
test's type, a stale settings edit is refused), which SQLite's ``BEGIN IMMEDIATE`` makes safe
and this lock makes safe here. Write transactions are short (audio is checked before the
transaction starts, and a push sends its audio before it takes the lock), so many testers adding
takes at once queue for milliseconds and none is lost. Reads run in REPEATABLE READ, READ ONLY transactions: every
query of one read sees one committed state, and readers never wait for writers.

Parameters are always bound: the store writes ``?`` and this module hands psycopg ``%s``.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any

from fieldtl.errors import StoreError
from fieldtl.store.pg_schema import SHARED_BODIES, TEAM_BODIES
from fieldtl.store.schema import MIGRATIONS, utc_now

WRITE_LOCK_KEY = 0x6669656C64746C      # "fieldtl": one advisory lock for every write transaction
POOL_MAX_SIZE = 20
CONNECT_TIMEOUT_S = 10.0


def _driver() -> tuple[Any, Any]:
    """psycopg and psycopg_pool, imported only when a server store is opened."""
    try:
        import psycopg
        import psycopg_pool
    except ImportError:
        raise StoreError("a postgresql:// store needs the psycopg and psycopg_pool packages "
                         "(pip install 'fieldtl[team]')") from None
    return psycopg, psycopg_pool


def shown_url(url: str) -> str:
    """The URL without a password, for messages."""
    head, sep, tail = url.partition("@")
    if not sep:
        return url[:80]
    scheme, _, credentials = head.partition("://")
    return f"{scheme}://{credentials.split(':')[0]}@{tail}"[:80]


class Session:
    """One transaction's connection, speaking the store's ``?`` parameters."""

    def __init__(self, connection: Any) -> None:
        self.connection = connection

    def execute(self, sql: str, params: Sequence[Any] = ()) -> Any:
        # The store's statements hold no literal '?' or '%': every '?' is a parameter.
        return self.connection.execute(sql.replace("?", "%s"), tuple(params))


class PgDatabase:
    """A pool of connections to one PostgreSQL database (thread-safe); migrated when opened."""

    def __init__(self, url: str, *, max_size: int = POOL_MAX_SIZE) -> None:
        psycopg, psycopg_pool = _driver()
        self.name = shown_url(url)
        self._errors = psycopg.Error
        try:                  # one plain connection first: an unreachable server is named at once
            psycopg.connect(url, connect_timeout=int(CONNECT_TIMEOUT_S)).close()
        except psycopg.Error as exc:
            raise StoreError(f"{self.name}: cannot open the store ({_first_line(exc)})") from None
        try:
            self._pool = psycopg_pool.ConnectionPool(url, min_size=1, max_size=max_size, open=True,
                                                     kwargs={"autocommit": True}, timeout=CONNECT_TIMEOUT_S)
            self._pool.wait(timeout=CONNECT_TIMEOUT_S)
        except (psycopg.Error, psycopg_pool.PoolTimeout) as exc:
            raise StoreError(f"{self.name}: cannot open the store ({_first_line(exc)})") from None
        try:
            self.applied_migrations = self._migrate()
        except BaseException:
            self._pool.close()
            raise

    def close(self) -> None:
        self._pool.close()

    @contextmanager
    def write(self, *, before_lock: Callable[[Session], None] | None = None) -> Iterator[Session]:
        """One write transaction, holding the store's write lock until COMMIT or ROLLBACK;
        ``before_lock`` runs first in the same transaction (a push sends its audio there)."""
        with self._transaction("write failed and was undone") as session:
            if before_lock is not None:
                before_lock(session)
            session.execute("SELECT pg_advisory_xact_lock(?)", (WRITE_LOCK_KEY,))
            yield session

    @contextmanager
    def read(self) -> Iterator[Session]:
        """One read transaction: every query inside sees the same committed state."""
        with self._transaction("read failed") as session:
            session.execute("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ, READ ONLY")
            yield session

    @contextmanager
    def _transaction(self, failure: str) -> Iterator[Session]:
        try:
            with self._pool.connection() as connection, connection.transaction():
                yield Session(connection)
        except self._errors as exc:
            raise StoreError(f"{self.name}: {failure} ({_first_line(exc)})") from None

    def _migrate(self) -> tuple[str, ...]:
        """Apply the migrations this database lacks, in one transaction; returns the names applied.

        The shared migrations must have been applied in this fieldtl's order, and the team
        migrations in theirs; a database made by another version is refused, not changed.
        """
        shared = [m.__name__ for m in MIGRATIONS]
        missing = [name for name in shared if name not in SHARED_BODIES]
        if missing:
            raise StoreError(f"{self.name}: migration {', '.join(missing)} has no PostgreSQL body "
                             "(fieldtl/store/pg_schema.py)")
        applied_now: list[str] = []
        with self.write() as db:
            db.execute("CREATE TABLE IF NOT EXISTS schema_migrations (name TEXT PRIMARY KEY, applied_at TEXT NOT NULL)")
            applied = [r[0] for r in db.execute("SELECT name FROM schema_migrations ORDER BY applied_at, name")]
            for known, bodies in ((shared, SHARED_BODIES), (list(TEAM_BODIES), TEAM_BODIES)):
                done = [name for name in applied if name in bodies or name[:4] == known[0][:4]]
                if done != known[: len(done)]:
                    raise StoreError(f"{self.name}: migrations {', '.join(done)} do not match this version "
                                     "of fieldtl (made by a newer or different version?)")
                for name in known[len(done):]:
                    for statement in bodies[name]:
                        db.connection.execute(statement)          # DDL: no parameters
                    db.execute("INSERT INTO schema_migrations (name, applied_at) VALUES (?, ?)", (name, utc_now()))
                    applied_now.append(name)
        return tuple(applied_now)


def _first_line(exc: BaseException) -> str:
    return (str(exc).strip().splitlines() or [type(exc).__name__])[0][:200]
