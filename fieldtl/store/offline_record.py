"""The check-out records beside a local store (``checkouts/<local project id>.json``), and copying
audio between stores with its content checked."""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fieldtl.errors import InputError, StoreError
from fieldtl.store.files import write_durably

RECORD_FOLDER = "checkouts"


@dataclass(frozen=True, slots=True)
class CheckoutRecord:
    """A project of this device's store that was checked out from a team server."""

    local_project_id: int
    server: str                 # the server's name as the store shows it (no password)
    server_project_id: int
    checked_out_at: str         # ISO 8601, UTC


def record_folder(local: Any, *, create: bool = True) -> Path:
    if local.folder is None:
        raise InputError("check-out: the local store must be a database file, not an in-memory store")
    folder = local.folder / RECORD_FOLDER
    if create:
        folder.mkdir(parents=True, exist_ok=True)
    return folder


def list_records(local: Any) -> tuple[CheckoutRecord, ...]:
    """Every check-out record of ``local`` whose local project still exists, newest first."""
    if local.folder is None:
        return ()
    folder = record_folder(local, create=False)
    existing = {p.id for p in local.list_projects()}
    found = []
    for path in folder.glob("*.json") if folder.is_dir() else ():
        if not path.stem.isdigit() or int(path.stem) not in existing:
            continue
        record = read_record(path)
        found.append(CheckoutRecord(int(path.stem), str(record["server"]), int(record["server_project_id"]),
                                    str(record["checked_out_at"])))
    return tuple(sorted(found, key=lambda r: (r.checked_out_at, r.local_project_id), reverse=True))


def read_record(path: Path) -> dict[str, Any]:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"push: project {path.stem} of the local store was not checked out from a server") from None
    except (OSError, ValueError) as exc:
        raise StoreError(f"{path.name}: unreadable check-out record ({exc})") from None


def write_record(path: Path, record: Mapping[str, Any]) -> None:
    partial = path.with_suffix(".part")
    write_durably(partial, json.dumps(record, ensure_ascii=False, indent=1).encode("utf-8"))
    os.replace(partial, path)


def copy_checked(source: Path, target: Path, sha256: str) -> Path:
    """Copy an audio file for another store, refusing one whose content is not what its row names."""
    digest = hashlib.sha256()
    try:
        with source.open("rb") as reading, target.open("wb") as writing:
            for block in iter(lambda: reading.read(1 << 20), b""):
                digest.update(block)
                writing.write(block)
            writing.flush()
            os.fsync(writing.fileno())
    except OSError as exc:
        target.unlink(missing_ok=True)
        raise StoreError(f"{source.name}: cannot copy the audio ({exc.strerror or exc})") from None
    if digest.hexdigest() != sha256:
        target.unlink(missing_ok=True)
        raise StoreError(f"{source.name}: the audio file no longer matches its SHA-256; nothing was copied")
    return target
