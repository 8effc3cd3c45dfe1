"""Working offline: check a team-server project out to the local SQLite store, and push it back.

:func:`check_out` copies the project (tests, takes, audio) into the local store as a new project
and writes a check-out record beside the local database (``checkouts/<local project id>.json``:
which server and project, each test's settings and band levels as they were, and each take's
server copy with its fields as they were). :func:`checked_out_projects` lists those records.

:func:`push` sends the local project back in ONE server transaction, all of it or none;
:func:`preview_push` says, reading only, what it would do:

* takes are immutable and content-addressed: a take added here is added to the server's test
  unless that test already holds the same audio (merged by SHA-256);
* a take's corrections (role, position, decay method, channel, left out) made here go to the
  server when the server's copy is unchanged since the check-out; a take removed here is removed
  on the server (the audit records who) when the server's copy is unchanged;
* a test's settings (its setup and pasted band levels) changed here go to the server when the
  server's copy is still as checked out;
* anything changed on both sides differently (settings, a take's fields, a take removed on one
  side and changed on the other) is part of that test's :class:`SettingsConflict`, listed as
  :class:`FieldDifference` lines: nothing is pushed until each such test is resolved with
  ``resolve={local test id: "mine" | "server"}`` ("server" takes the server's version of the
  test here too: its settings, its takes' fields and removals; takes added here are still sent);
* tests made offline are added; a test deleted on the server meanwhile is added again.

The audio goes in the same transaction (fieldtl.store.pg_blobs): what the server lacks is sent
first, before the transaction takes the write lock (other writers do not wait for the upload),
and is kept under the lock with the rows. A push killed half-way leaves the server exactly as it
was, audio included (the transaction rolls back); it can simply be repeated. Check-out copies
the audio from the server's database straight into this device's store (SHA-256 checked).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fieldtl.errors import FieldTLError, InputError, StoreError
from fieldtl.store import pg_blobs, rows
from fieldtl.store.files import place_file
from fieldtl.store.offline_plan import (FieldDifference, SettingsConflict, TestWork, plan, settings_of,
                                        take_fields_of)
from fieldtl.store.offline_record import (CheckoutRecord, list_records, read_record, record_folder,
                                          write_record)
from fieldtl.store.postgres import READ, WRITE, ServerStore
from fieldtl.store.schema import check_take_fields, utc_now
from fieldtl.store.sqlite import Store
from fieldtl.validate import clean, echo

__all__ = ["CheckoutRecord", "FieldDifference", "PushPreview", "PushResult", "SettingsConflict", "check_out",
           "checked_out_projects", "preview_push", "push"]
RESOLUTIONS = ("mine", "server")


class SentNotUpdatedHere(StoreError):
    """A push reached the server (committed) but updating this device afterwards failed: nothing is
    lost, and a repeated push shows the same choices again and brings the server's version here."""


@dataclass(frozen=True, slots=True)
class PushPreview:
    """What a push would do now (nothing was sent): conflicts to resolve, and counts of the rest."""

    conflicts: tuple[SettingsConflict, ...]
    tests_to_add: int
    tests_to_update: int           # settings written to the server
    takes_to_add: int
    takes_to_update: int           # corrections written to the server
    takes_to_remove: int           # removed here, unchanged on the server


@dataclass(frozen=True, slots=True)
class PushResult:
    pushed: bool                   # False: unresolved conflicts, nothing was sent
    conflicts: tuple[SettingsConflict, ...]
    takes_added: int
    tests_added: int
    tests_updated: int
    takes_updated: int = 0
    takes_removed: int = 0


def checked_out_projects(local: Store) -> tuple[CheckoutRecord, ...]:
    """This device's projects that were checked out from a team server, most recent check-out first."""
    return list_records(local)


def check_out(server: ServerStore, project_id: int, local: Store) -> int:
    """Copy the server's project into ``local`` (a file-backed store); returns the local project id."""
    folder = record_folder(local)
    snapshot = server.snapshot(project_id)             # the account must be able to read it
    files: dict[str, Path] = {}
    try:
        for take in snapshot.takes:
            if take.file_name not in files:
                files[take.file_name] = server.copy_audio(take, local.incoming_path())
        copy = local.add_project_copy(snapshot, files)
    finally:
        for path in files.values():
            path.unlink(missing_ok=True)
    copied = local.snapshot(copy.id)                    # inserted in the snapshot's order
    linked = dict(zip((t.id for t in copied.takes), snapshot.takes, strict=True))
    tests = {}
    for mine, theirs in zip(copied.tests, snapshot.tests, strict=True):
        takes = {str(t.id): {"server_take_id": linked[t.id].id, "base": take_fields_of(linked[t.id])}
                 for t in copied.takes if t.test_id == mine.id}
        tests[str(mine.id)] = {"server_test_id": theirs.id, "base": settings_of(theirs), "takes": takes}
    write_record(folder / f"{copy.id}.json", {"server": server.name, "server_project_id": project_id,
                                               "checked_out_at": utc_now(), "tests": tests})
    return copy.id


def preview_push(local: Store, server: ServerStore, local_project_id: int, *,
                 resolve: Mapping[int, str] | None = None) -> PushPreview:
    """What :func:`push` would do with these choices, reading only (an account that can read the project)."""
    resolve = _checked(resolve)
    record = _record(local, server, local_project_id)
    mine = local.snapshot(local_project_id)
    server_project = int(record["server_project_id"])
    with server._guard("read", "project", server_project, READ), server._read() as db:
        server._project(db, server_project)
        conflicts, work = plan(db, mine, record, resolve)
    return PushPreview(tuple(conflicts), *_counts(work))


def push(local: Store, server: ServerStore, local_project_id: int, *,
         resolve: Mapping[int, str] | None = None) -> PushResult:
    """Send the local project's changes to the server in one transaction (see the module text)."""
    resolve = _checked(resolve)
    record = _record(local, server, local_project_id)
    record_path = record_folder(local) / f"{local_project_id}.json"
    mine = local.snapshot(local_project_id)
    server_project = int(record["server_project_id"])
    audio = {t.file_name: (local.take_path(t), t.sha256) for t in mine.takes}
    with server._guard("push", "project", server_project, WRITE), \
            server._write(before_lock=lambda db: pg_blobs.stage(db, audio)) as db:
        server._project(db, server_project)
        conflicts, work = plan(db, mine, record, resolve)
        if conflicts:
            return PushResult(False, tuple(conflicts), 0, 0, 0)
        pg_blobs.keep_staged(db, {t.file_name for w in work for t in w.server_adds}, audio)
        _apply_on_server(db, work, server_project)
        # The new tests' server ids go to the record before COMMIT: should the process die after
        # COMMIT, a repeated push finds them instead of adding them twice (their takes then merge by
        # content); every other entry stays as it was until the push is done.
        write_record(record_path, record | {"tests": record["tests"] | {
            str(w.test.id): {"server_test_id": w.server_test_id, "base": settings_of(w.test), "takes": {}}
            for w in work if w.server_test is None}})
    try:                    # the server has committed: what fails now fails only on this device
        _apply_here(local, server, work)
        for w in work:
            base = settings_of(w.server_test if w.settings == "server" and w.server_test else w.test)
            record["tests"][str(w.test.id)] = {"server_test_id": w.server_test_id, "base": base, "takes": w.links}
        write_record(record_path, record)
    except (FieldTLError, OSError) as exc:
        raise SentNotUpdatedHere(f"sent to the team server, but this device's copy was not brought up to date "
                                 f"({clean(str(exc), 160)}); push again to bring it here") from None
    tests_added, tests_updated, takes_added, takes_updated, takes_removed = _counts(work)
    return PushResult(True, (), takes_added, tests_added, tests_updated, takes_updated, takes_removed)


def _apply_on_server(db: Any, work: list[TestWork], server_project: int) -> None:
    """Write the planned changes in the push's transaction."""
    now = utc_now()
    for w in work:
        if w.server_test is None:
            w.server_test_id = rows.insert_test(db, server_project, w.test)
        elif w.settings == "mine":
            db.execute(f"UPDATE tests SET {', '.join(c + ' = ?' for c in rows.TEST_COLUMNS)}, "
                       "band_levels_csv = ?, updated_at = ? WHERE id = ?",
                       (*rows.setup_values(w.test.setup), w.test.band_levels_csv, now, w.server_test_id))
        test_type = (w.test if w.settings == "mine" or w.server_test is None else w.server_test).setup.test_type
        for take, server_take_id in w.server_updates:
            check_take_fields(test_type, **rows.take_fields(take), where=f"take {echo(take.original_name)}")
            db.execute("UPDATE takes SET role = ?, speaker = ?, method = ?, channel = ?, excluded = ?, "
                       "sweep_start_hz = ?, sweep_stop_hz = ?, sweep_length_s = ? WHERE id = ? AND test_id = ?",
                       (take.role, take.speaker, take.method, take.channel, int(take.excluded), take.sweep_start_hz,
                        take.sweep_stop_hz, take.sweep_length_s, server_take_id, w.server_test_id))
        for server_take_id in w.server_removals:
            db.execute("DELETE FROM takes WHERE id = ? AND test_id = ?", (server_take_id, w.server_test_id))
        for take in w.server_adds:
            check_take_fields(test_type, **rows.take_fields(take), where=f"take {echo(take.original_name)}")
            row = {c: getattr(take, c) for c in rows.TAKE_COLUMNS} | {"test_id": w.server_test_id}
            w.links[str(take.id)]["server_take_id"] = rows.insert_take(db, row)
        if w.server_test is not None and test_type != w.server_test.setup.test_type:   # every take must suit it
            for row in db.execute("SELECT * FROM takes WHERE test_id = ?", (w.server_test_id,)).fetchall():
                take = rows.row_to_take(row)
                check_take_fields(test_type, **rows.take_fields(take),
                                  where=f"test {echo(w.test.setup.title)}: take {echo(take.original_name)}")
    rows.touch_project(db, server_project, now)


def _apply_here(local: Store, server: ServerStore, work: list[TestWork]) -> None:
    """Where the user chose the server's version: take it here too, in one local transaction."""
    restores = [(w, take) for w in work for take in w.local_restores]
    files: dict[str, Path] = {}
    try:
        for _, take in restores:
            if take.file_name not in files:
                files[take.file_name] = server.copy_audio(take, local.incoming_path())
        with local._write() as db:
            for w in work:
                if w.settings == "server" and w.server_test is not None:
                    theirs = w.server_test
                    db.execute(f"UPDATE tests SET {', '.join(c + ' = ?' for c in rows.TEST_COLUMNS)}, "
                               "band_levels_csv = ?, updated_at = ? WHERE id = ?",
                               (*rows.setup_values(theirs.setup), theirs.band_levels_csv, utc_now(), w.test.id))
                for local_id, theirs_take in w.local_updates:
                    db.execute("UPDATE takes SET role = ?, speaker = ?, method = ?, channel = ?, excluded = ?, "
                               "sweep_start_hz = ?, sweep_stop_hz = ?, sweep_length_s = ? WHERE id = ?",
                               (theirs_take.role, theirs_take.speaker, theirs_take.method, theirs_take.channel,
                                int(theirs_take.excluded), theirs_take.sweep_start_hz, theirs_take.sweep_stop_hz,
                                theirs_take.sweep_length_s, local_id))
                for local_id in w.local_removals:
                    db.execute("DELETE FROM takes WHERE id = ?", (local_id,))
            for name, path in files.items():
                place_file(local.audio_dir, path, name)
            for w, take in restores:
                row = {c: getattr(take, c) for c in rows.TAKE_COLUMNS} | {"test_id": w.test.id}
                w.links[str(rows.insert_take(db, row))] = {"server_take_id": take.id, "base": take_fields_of(take)}
    finally:
        for path in files.values():
            path.unlink(missing_ok=True)


def _counts(work: list[TestWork]) -> tuple[int, int, int, int, int]:
    """(tests added, tests' settings updated, takes added, takes updated, takes removed) on the server."""
    return (sum(w.server_test is None for w in work),
            sum(w.server_test is not None and w.settings == "mine" for w in work),
            sum(len(w.server_adds) for w in work), sum(len(w.server_updates) for w in work),
            sum(len(w.server_removals) for w in work))


def _checked(resolve: Mapping[int, str] | None) -> dict[int, str]:
    resolve = dict(resolve or {})
    for choice in resolve.values():
        if choice not in RESOLUTIONS:
            raise InputError(f"push: a conflict is resolved with 'mine' or 'server', got {echo(choice)}")
    return resolve


def _record(local: Store, server: ServerStore, local_project_id: int) -> dict[str, Any]:
    record = read_record(record_folder(local) / f"{local_project_id}.json")
    if record["server"] != server.name:
        raise InputError(f"push: project {local_project_id} was checked out from {echo(record['server'])}, "
                         f"not {echo(server.name)}")
    return record
