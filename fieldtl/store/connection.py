"""The store's SQLite database: where it lives, opening it (WAL journal, full sync, foreign keys,
migrations) and its read and write transactions."""

from __future__ import annotations

import os
import sqlite3
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import platformdirs

from fieldtl.errors import StoreError
from fieldtl.store.schema import migrate

DATABASE_NAME = "fieldtl.sqlite3"
BUSY_TIMEOUT_S = 10.0


def default_data_dir() -> Path:
    """FIELDTL_DATA_DIR if set, else the user's data folder for fieldtl (platformdirs)."""
    configured = os.environ.get("FIELDTL_DATA_DIR")
    return Path(configured) if configured else Path(platformdirs.user_data_dir("fieldtl", appauthor=False))


def default_database_path() -> Path:
    return default_data_dir() / DATABASE_NAME


class Database:
    """One connection shared between threads: a lock serialises its transactions."""

    def __init__(self, database: str, *, name: str) -> None:
        self.name = name
        self._connection, self.applied_migrations = connect(database, name=name)
        self._lock = threading.RLock()

    def close(self) -> None:
        with self._lock:
            self._connection.close()

    @contextmanager
    def write(self) -> Iterator[sqlite3.Connection]:
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
    def read(self) -> Iterator[sqlite3.Connection]:
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


def connect(database: str, *, name: str) -> tuple[sqlite3.Connection, tuple[str, ...]]:
    """An autocommit connection to ``database`` (a path or ":memory:") and the migrations it applied.

    Raises StoreError naming ``name`` if the file cannot be opened, is busy beyond the timeout,
    or is not a usable fieldtl database.
    """
    try:
        connection = sqlite3.connect(database, timeout=BUSY_TIMEOUT_S, isolation_level=None,
                                     check_same_thread=False)
    except (OSError, sqlite3.Error) as exc:
        raise StoreError(f"{name}: cannot open the store ({exc})") from None
    try:
        connection.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
        connection.execute("PRAGMA foreign_keys = ON")
        if database != ":memory:":
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
    return connection, applied


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
