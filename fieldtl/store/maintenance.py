"""`fieldtl store clean` on either store: audio no take refers to, unfinished uploads and exports,
and kept measurements of an earlier analysis version.

A SQLite store is named by its folder (``--data-dir``); a team server by its URL (``--store``, or
FIELDTL_STORE_URL when no folder is given): its audio is in its database, and the cache of it in
the data folder this fieldtl uses (``--data-dir``, default FIELDTL_DATA_DIR or the user's data
folder) is cleared too. Both remove audio under the store's write lock, so no upload can be
placing any meanwhile.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path, PurePath

from fieldtl.errors import InputError
from fieldtl.store.connection import DATABASE_NAME, default_data_dir
from fieldtl.store.location import STORE_URL_VARIABLE, check_store_url
from fieldtl.store.sqlite import Store
from fieldtl.validate import file_label


@dataclass(frozen=True, slots=True)
class CleanResult:
    removed: tuple[PurePath, ...]  # files removed (a team server's: audio_blobs/<name>)
    forgotten: int                # kept measurements of another analysis version removed
    where: str                    # the store as messages name it: its folder, or the server's URL without password


def clean_store(*, analysis_version: str, data_dir: Path | None = None, store_url: str | None = None) -> CleanResult:
    """Clean the SQLite store in ``data_dir`` or the team server at ``store_url`` (see the module text)."""
    if store_url is None and data_dir is None:
        store_url = os.environ.get(STORE_URL_VARIABLE, "").strip() or None
    folder = (data_dir or default_data_dir()).expanduser()
    if store_url is not None:
        check_store_url(store_url, "--store")
        from fieldtl.store.pg_blobs import cache_dir_for
        from fieldtl.store.postgres import ServerStore     # psycopg only when a server is cleaned

        with ServerStore.open(store_url, cache_dir=cache_dir_for(store_url, folder)) as server:
            removed = server.clean_files()
            forgotten = server.measurements.forget_other_versions(analysis_version)
            return CleanResult(removed, forgotten, server.name)
    if not (folder / DATABASE_NAME).is_file():
        raise InputError(f"{file_label(folder)}: no fieldtl store in this folder ({DATABASE_NAME} not found)")
    with Store.open(folder / DATABASE_NAME) as store:
        removed = store.clean_files()
        forgotten = store.measurements.forget_other_versions(analysis_version)
    return CleanResult(removed, forgotten, str(folder))
