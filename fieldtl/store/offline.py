"""Working offline: check a team-server project out to the local SQLite store, and push it back.

:func:`check_out` copies the project (tests, takes, audio) into the local store as a new project
and writes a check-out record beside the local database (``checkouts/<local project id>.json``:
which server and project, and each test's settings and band levels as they were).

:func:`push` sends the local project back in ONE server transaction, all of it or none:

* takes are immutable and content-addressed, so they merge by the audio's SHA-256: a local take
  whose audio the server's test lacks is added; one it has already is left as it is;
* a test's settings (its setup and pasted band levels) changed locally are written to the server
  when the server's copy is still as checked out; changed on both sides to different values,
  they are a :class:`SettingsConflict`: nothing is pushed until each one is resolved with
  ``resolve={local test id: "mine" | "server"}`` ("server" also updates the local copy);
* tests made offline are added; nothing is ever deleted on the server by a push.

A push killed half-way leaves the server as it was (the transaction rolls back; audio files
placed for it are unreferenced until ``clean_files``); it can simply be repeated.
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Mapping
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from fieldtl.errors import InputError, StoreError
from fieldtl.store import rows
from fieldtl.store.files import place_file, write_durably
from fieldtl.store.postgres import WRITE, ServerStore
from fieldtl.store.schema import TestRecord, utc_now
from fieldtl.store.sqlite import Store
from fieldtl.validate import echo

RECORD_FOLDER = "checkouts"
RESOLUTIONS = ("mine", "server")


@dataclass(frozen=True, slots=True)
class SettingsConflict:
    local_test_id: int
    title: str
    fields: tuple[str, ...]        # setup fields and/or band_levels_csv that differ

    def message(self) -> str:
        return (f"test {echo(self.title)}: {', '.join(self.fields)} changed here and on the server; "
                "choose which to keep")


@dataclass(frozen=True, slots=True)
class PushResult:
    pushed: bool                   # False: unresolved conflicts, nothing was sent
    conflicts: tuple[SettingsConflict, ...]
    takes_added: int
    tests_added: int
    tests_updated: int


def check_out(server: ServerStore, project_id: int, local: Store) -> int:
    """Copy the server's project into ``local`` (a file-backed store); returns the local project id."""
    folder = _record_folder(local)
    snapshot = server.snapshot(project_id)             # the account must be able to read it
    files: dict[str, Path] = {}
    try:
        for take in snapshot.takes:
            if take.file_name not in files:
                files[take.file_name] = _copy_checked(server.take_path(take), local.incoming_path(), take.sha256)
        copy = local.add_project_copy(snapshot, files)
    finally:
        for path in files.values():
            path.unlink(missing_ok=True)
    local_tests = local.snapshot(copy.id).tests         # inserted in the snapshot's order
    record = {"server": server.name, "server_project_id": project_id, "checked_out_at": utc_now(),
              "tests": {str(mine.id): {"server_test_id": theirs.id, "base": _settings(theirs)}
                        for mine, theirs in zip(local_tests, snapshot.tests, strict=True)}}
    _write_record(folder / f"{copy.id}.json", record)
    return copy.id


def push(local: Store, server: ServerStore, local_project_id: int, *,
         resolve: Mapping[int, str] | None = None) -> PushResult:
    """Send the local project's changes to the server in one transaction (see the module text)."""
    resolve = dict(resolve or {})
    for choice in resolve.values():
        if choice not in RESOLUTIONS:
            raise InputError(f"push: a conflict is resolved with 'mine' or 'server', got {echo(choice)}")
    record_path = _record_folder(local) / f"{local_project_id}.json"
    record = _read_record(record_path)
    if record["server"] != server.name:
        raise InputError(f"push: project {local_project_id} was checked out from {record['server']}, "
                         f"not {server.name}")
    mine = local.snapshot(local_project_id)
    server_project = int(record["server_project_id"])
    old_bases = {k: v["base"] for k, v in record["tests"].items()}
    incoming: dict[str, Path] = {}
    placed: list[Path] = []
    keep_server: list[tuple[int, TestRecord]] = []
    try:
        for take in mine.takes:             # copied before the transaction: it only renames them
            if take.file_name not in incoming:
                incoming[take.file_name] = _copy_checked(local.take_path(take), server.incoming_path(), take.sha256)
        with server._guard("push", "project", server_project, WRITE), server._write() as db:
            server._project(db, server_project)
            conflicts, work = _plan(db, mine, record, resolve)
            if conflicts:
                return PushResult(False, tuple(conflicts), 0, 0, 0)
            try:
                for name, path in incoming.items():
                    if place_file(server.audio_dir, path, name):
                        placed.append(server.audio_dir / name)
                counts = _apply(db, mine, record, work, server_project, keep_server)
                # The new tests' server ids go to the record before COMMIT: should the process die after
                # COMMIT, a repeated push finds them instead of adding them twice (bases stay until after).
                _write_record(record_path, record | {"tests": {k: v | {"base": old_bases.get(k, v["base"])}
                                                        for k, v in record["tests"].items()}})
            except BaseException:
                for placed_path in placed:   # still under the write lock: nobody else can refer to them yet
                    placed_path.unlink(missing_ok=True)
                raise
    finally:
        for incoming_path in incoming.values():
            incoming_path.unlink(missing_ok=True)
    for local_id, server_test in keep_server:     # the user chose the server's settings: take them here too
        local.set_band_levels(local_id, server_test.band_levels_csv)
        local.update_test(local_id, server_test.setup)
    _write_record(record_path, record)
    return PushResult(True, (), *counts)


def _apply(db: Any, mine: Any, record: dict[str, Any], work: list[tuple[TestRecord, TestRecord | None, str]],
           server_project: int, keep_server: list[tuple[int, TestRecord]]) -> tuple[int, int, int]:
    """Write the planned changes in the push's transaction; returns (takes added, tests added, tests updated)."""
    added_takes = added_tests = updated = 0
    now = utc_now()
    for test, server_test, action in work:
        if server_test is None:
            server_id = rows.insert_test(db, server_project, test)
            record["tests"][str(test.id)] = {"server_test_id": server_id, "base": _settings(test)}
            added_tests += 1
        else:
            server_id = server_test.id
            if action == "mine":
                db.execute(f"UPDATE tests SET {', '.join(c + ' = ?' for c in rows.TEST_COLUMNS)}, "
                           "band_levels_csv = ?, updated_at = ? WHERE id = ?",
                           (*rows.setup_values(test.setup), test.band_levels_csv, now, server_id))
                updated += 1
            elif action == "server":
                keep_server.append((test.id, server_test))
            record["tests"][str(test.id)]["base"] = _settings(server_test if action == "server" else test)
        have = {r[0] for r in db.execute("SELECT sha256 FROM takes WHERE test_id = ?", (server_id,))}
        for take in (t for t in mine.takes if t.test_id == test.id and t.sha256 not in have):
            rows.insert_take(db, {c: getattr(take, c) for c in rows.TAKE_COLUMNS} | {"test_id": server_id})
            have.add(take.sha256)
            added_takes += 1
    rows.touch_project(db, server_project, now)
    return added_takes, added_tests, updated


def _plan(db: Any, mine: Any, record: dict[str, Any], resolve: Mapping[int, str]
          ) -> tuple[list[SettingsConflict], list[tuple[TestRecord, TestRecord | None, str]]]:
    """What to do with each local test: (test, its server copy or None to add it, action)."""
    conflicts, work = [], []
    for test in mine.tests:
        entry = record["tests"].get(str(test.id))
        row = None if entry is None else db.execute("SELECT * FROM tests WHERE id = ? AND project_id = ?",
                                                    (entry["server_test_id"], record["server_project_id"])).fetchone()
        if row is None:              # made offline, or deleted on the server meanwhile: added, never lost
            work.append((test, None, "add"))
            continue
        server_test = rows.row_to_test(row)
        base, local_now, server_now = entry["base"], _settings(test), _settings(server_test)
        if local_now == base or local_now == server_now:
            action = "none"
        elif server_now == base:
            action = "mine"
        elif test.id in resolve:
            action = resolve[test.id]
        else:
            differ = tuple(k for k in local_now if local_now[k] != server_now[k])
            conflicts.append(SettingsConflict(test.id, test.setup.title, differ))
            continue
        work.append((test, server_test, action))
    return conflicts, work


def _settings(test: TestRecord) -> dict[str, Any]:
    """A test's settings as JSON values: the setup's fields and the pasted band levels."""
    values = asdict(test.setup) | {"settings": dict(test.setup.settings), "band_levels_csv": test.band_levels_csv}
    return json.loads(json.dumps(values))


def _copy_checked(source: Path, target: Path, sha256: str) -> Path:
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


def _record_folder(local: Store) -> Path:
    if local.folder is None:
        raise InputError("check-out: the local store must be a database file, not an in-memory store")
    folder = local.folder / RECORD_FOLDER
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def _read_record(path: Path) -> dict[str, Any]:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"push: project {path.stem} of the local store was not checked out from a server") from None
    except (OSError, ValueError) as exc:
        raise StoreError(f"{path.name}: unreadable check-out record ({exc})") from None


def _write_record(path: Path, record: Mapping[str, Any]) -> None:
    partial = path.with_suffix(".part")
    write_durably(partial, json.dumps(record, ensure_ascii=False, indent=1).encode("utf-8"))
    os.replace(partial, path)

