"""Which store to open: a ``postgresql://`` URL is the team server, anything else a SQLite file.

``FIELDTL_STORE_URL`` names the team server for every fieldtl process (``fieldtl app --store``
sets it for the app); without it the embedded SQLite store in the user's data folder is used.
"""

from __future__ import annotations

import os
from pathlib import Path

from fieldtl.errors import InputError
from fieldtl.store.connection import default_database_path
from fieldtl.store.sqlite import Store

STORE_URL_VARIABLE = "FIELDTL_STORE_URL"
SERVER_SCHEMES = ("postgresql://", "postgres://")


def is_server_url(location: str | Path) -> bool:
    return isinstance(location, str) and location.startswith(SERVER_SCHEMES)


def configured_location() -> str | Path:
    """FIELDTL_STORE_URL when set (it must be a postgresql:// URL), else the default SQLite database."""
    configured = os.environ.get(STORE_URL_VARIABLE, "").strip()
    if not configured:
        return default_database_path()
    check_store_url(configured, STORE_URL_VARIABLE)
    return configured


def check_store_url(url: str, what: str) -> None:
    if not is_server_url(url):
        raise InputError(f"{what}: expected a postgresql://user@host/database URL, got {url[:40]!r}")


def open_store(location: str | Path | None = None, *, audio_dir: Path | None = None,
               cache_dir: Path | None = None) -> Store:
    """The store at ``location`` (a postgresql:// URL or a SQLite path; None: :func:`configured_location`).

    ``audio_dir`` is a SQLite store's audio folder; ``cache_dir`` this client's cache of a team
    server's audio (which the server keeps in its database). A server store is the server's own
    handle; the app logs accounts in on it (ServerStore.login).
    """
    location = configured_location() if location is None else location
    if is_server_url(location):
        if audio_dir is not None:
            raise InputError("a team server keeps its audio in its database: give no audio folder for it")
        from fieldtl.store.postgres import ServerStore     # psycopg only when a server is used
        return ServerStore.open(str(location), cache_dir=cache_dir)
    if cache_dir is not None:
        raise InputError("a team-server cache folder applies to a postgresql:// store only")
    return Store.open(location, audio_dir=audio_dir)
