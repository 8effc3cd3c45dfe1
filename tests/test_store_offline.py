"""Working offline: check a server project out to a local SQLite store, change both sides, push back.

Runs against the real PostgreSQL server scripts/test starts (FIELDTL_TEST_PG_URL). Checks are
hashlib.sha256 (FIPS 180-4) of every stored file, the rows each side holds, and PostgreSQL's own
lock table (pg_locks / pg_stat_activity) to stop a push half-way before killing it.
"""

import hashlib
import os
import signal
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path

import pytest
from test_store import AIRBORNE, wav_bytes
from test_store_backends import pg_url  # noqa: F401 - the fresh-schema fixture
from team_seed import PASSWORD, seed_team

from fieldtl.store import Store, offline
from fieldtl.errors import StoreError
from fieldtl.store.errors import PermissionDenied
from fieldtl.store.location import open_store
from fieldtl.store.offline import FieldDifference, check_out, push

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture
def site(pg_url, tmp_path):  # noqa: F811
    """ann owns a project with tests A and B (two takes on A); tom tests, rita reviews; tom's laptop store."""
    with open_store(pg_url) as server:        # its audio in the database; this process's cache in FIELDTL_DATA_DIR
        ann, project = seed_team(server, "Invented project")
        a = ann.create_test(project.id, AIRBORNE)
        b = ann.create_test(project.id, replace(AIRBORNE, title="Invented room C to room D"))
        for hz in (300.0, 310.0):
            ann.add_take(a.id, data=wav_bytes(frequency_hz=hz), original_name=f"s{hz:.0f}.wav", role="source")
        with Store.open(tmp_path / "laptop" / "fieldtl.sqlite3") as laptop:
            yield dict(server=server, ann=ann, tom=server.login("tom", PASSWORD), rita=server.login("rita", PASSWORD),
                       project=project, a=a, b=b, laptop=laptop, url=pg_url, tmp=tmp_path)


def _server_state(store, project_id):
    snapshot = store.snapshot(project_id)
    for take in snapshot.takes:
        assert hashlib.sha256(store.take_path(take).read_bytes()).hexdigest() == take.sha256
    return snapshot


def _blobs(store):
    """The audio the server holds (its audio_blobs table), by content name."""
    with store._database.read() as db:
        return {r[0] for r in db.execute("SELECT file_name FROM audio_blobs")}


def _local_test(laptop, local_project, title):
    return next(t for t in laptop.list_tests(local_project) if t.setup.title == title)


def test_offline_edits_on_both_sides_merge_and_a_settings_conflict_is_shown(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local = check_out(tom, site["project"].id, laptop)
    local_a = _local_test(laptop, local, AIRBORNE.title)
    assert len(laptop.list_takes(local_a.id)) == 2
    # offline on site: a new take, a settings change on A, a new test with its take
    laptop.add_take(local_a.id, data=wav_bytes(frequency_hz=400.0), original_name="site.wav", role="receiving")
    laptop.update_test(local_a.id, replace(AIRBORNE, settings={"chosen": "on site"}))
    new_test = laptop.create_test(local, replace(AIRBORNE, title="Made offline"))
    laptop.add_take(new_test.id, data=wav_bytes(frequency_hz=500.0), original_name="new.wav", role="source")
    # meanwhile in the office: a take and a different settings change on A, a settings change on B
    ann.add_take(site["a"].id, data=wav_bytes(frequency_hz=600.0), original_name="office.wav", role="background")
    ann.update_test(site["a"].id, replace(AIRBORNE, settings={"chosen": "in the office"}))
    office_b = ann.update_test(site["b"].id, replace(site["b"].setup, settings={"office": 1}))

    before = _server_state(ann, site["project"].id)
    refused = push(laptop, tom, local)
    assert not refused.pushed and [c.local_test_id for c in refused.conflicts] == [local_a.id]
    assert refused.conflicts[0].differences == (FieldDifference("app setting chosen", "on site", "in the office"),)
    assert "changed here and on the server; choose which to keep" in refused.conflicts[0].message()
    assert _server_state(ann, site["project"].id).tests == before.tests                  # nothing sent
    assert _server_state(ann, site["project"].id).takes == before.takes

    done = push(laptop, tom, local, resolve={local_a.id: "mine"})
    assert (done.pushed, done.takes_added, done.tests_added, done.tests_updated) == (True, 2, 1, 1)
    after = _server_state(ann, site["project"].id)
    by_title = {t.setup.title: t for t in after.tests}
    assert by_title[AIRBORNE.title].setup.settings == {"chosen": "on site"}
    assert by_title["Invented room C to room D"] == office_b                                # the office's edit kept
    names = sorted(t.original_name for t in after.takes if t.test_id == site["a"].id)
    assert names == ["office.wav", "s300.wav", "s310.wav", "site.wav"]                     # merged by content
    assert [t.original_name for t in after.takes if t.test_id == by_title["Made offline"].id] == ["new.wav"]
    again = push(laptop, tom, local)
    assert (again.pushed, again.takes_added, again.tests_added, again.tests_updated) == (True, 0, 0, 0)
    audit = ann.audit_for_test(site["a"].id)
    assert ("tom", "insert", "takes") in [(e.user_name, e.action, e.table_name) for e in audit]


def test_choosing_the_server_settings_updates_the_laptop(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local = check_out(tom, site["project"].id, laptop)
    local_b = _local_test(laptop, local, "Invented room C to room D")
    laptop.update_test(local_b.id, replace(site["b"].setup, settings={"mine": 1}))
    ann.update_test(site["b"].id, replace(site["b"].setup, settings={"theirs": 1}))
    assert [c.local_test_id for c in push(laptop, tom, local).conflicts] == [local_b.id]
    assert push(laptop, tom, local, resolve={local_b.id: "server"}).pushed
    assert laptop.get_test(local_b.id).setup.settings == {"theirs": 1}
    assert ann.get_test(site["b"].id).setup.settings == {"theirs": 1}
    assert push(laptop, tom, local).conflicts == ()


def test_a_push_that_reached_the_server_but_not_this_device_says_so(site, monkeypatch):
    """The server commits first; should updating the laptop then fail, the error must not claim that
    nothing was sent, and a repeated push brings the server's version here."""
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local = check_out(tom, site["project"].id, laptop)
    local_a = _local_test(laptop, local, AIRBORNE.title)
    local_b = _local_test(laptop, local, "Invented room C to room D")
    laptop.add_take(local_a.id, data=wav_bytes(frequency_hz=420.0), original_name="late.wav", role="receiving")
    laptop.update_test(local_b.id, replace(site["b"].setup, settings={"mine": 1}))
    ann.update_test(site["b"].id, replace(site["b"].setup, settings={"theirs": 1}))

    def disk_full(*args, **kwargs):
        raise StoreError("fieldtl.sqlite3: cannot write (disk full)")

    monkeypatch.setattr(offline, "_apply_here", disk_full)
    with pytest.raises(offline.SentNotUpdatedHere, match=r"^sent to the team server, but this device's copy"):
        push(laptop, tom, local, resolve={local_b.id: "server"})
    assert "late.wav" in {t.original_name for t in ann.list_takes(site["a"].id)}     # it was sent
    assert laptop.get_test(local_b.id).setup.settings == {"mine": 1}                 # not brought here
    monkeypatch.undo()
    assert [c.local_test_id for c in push(laptop, tom, local).conflicts] == [local_b.id]   # the same choice again
    assert push(laptop, tom, local, resolve={local_b.id: "server"}).pushed
    assert laptop.get_test(local_b.id).setup.settings == {"theirs": 1}
    assert [t.original_name for t in ann.list_takes(site["a"].id)].count("late.wav") == 1   # not sent twice


def test_a_reviewer_can_check_out_but_not_push(site):
    rita, laptop = site["rita"], site["laptop"]
    local = check_out(rita, site["project"].id, laptop)
    local_a = _local_test(laptop, local, AIRBORNE.title)
    laptop.add_take(local_a.id, data=wav_bytes(frequency_hz=700.0), original_name="r.wav", role="receiving")
    before = _server_state(site["ann"], site["project"].id)
    with pytest.raises(PermissionDenied, match="reviewer role .* may not push$"):
        push(laptop, rita, local)
    assert _server_state(site["ann"], site["project"].id) == before


PUSHER = """
import sys
from fieldtl.store import Store
from fieldtl.store.location import open_store
from fieldtl.store.offline import push
url, laptop_path, project = sys.argv[1:4]
with open_store(url) as server, Store.open(laptop_path) as laptop:
    push(laptop, server.login("tom", "%s"), int(project))
print("pushed", flush=True)
""" % PASSWORD


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs POSIX signals")
def test_a_push_killed_half_way_changes_nothing_and_can_be_repeated(site):
    import psycopg
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local = check_out(tom, site["project"].id, laptop)
    local_a = _local_test(laptop, local, AIRBORNE.title)
    for n in range(20):
        laptop.add_take(local_a.id, data=wav_bytes(seconds=0.05, frequency_hz=800.0 + 10 * n),
                        original_name=f"k{n}.wav", role="receiving")
    before = _server_state(ann, site["project"].id)
    blobs_before = _blobs(ann)
    with psycopg.connect(site["url"]) as blocker, psycopg.connect(site["url"], autocommit=True) as watcher:
        # Hold the project row: the push inserts every take, then waits to touch the project.
        blocker.execute("SELECT 1 FROM projects WHERE id = %s FOR NO KEY UPDATE", (site["project"].id,))
        env = dict(os.environ, PYTHONPATH=str(ROOT))
        env["FIELDTL_DATA_DIR"] = str(site["tmp"] / "pusher")          # the pusher's own cache
        writer = subprocess.Popen([sys.executable, "-c", PUSHER, site["url"], str(laptop.folder / "fieldtl.sqlite3"),
                                   str(local)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
        deadline = time.monotonic() + 60
        while watcher.execute("SELECT count(*) FROM pg_stat_activity WHERE wait_event_type = 'Lock' "
                              "AND query LIKE 'UPDATE projects%'").fetchone()[0] == 0:
            assert writer.poll() is None, writer.stderr.read()
            assert time.monotonic() < deadline, "the push never reached the project row"
            time.sleep(0.01)
        inserted = watcher.execute("SELECT count(*) FROM pg_locks WHERE locktype = 'advisory' AND granted").fetchone()
        assert inserted[0] == 1                                    # the push holds the write lock, mid-way
        assert _blobs(ann) == blobs_before                         # its audio is not visible outside it
        os.kill(writer.pid, signal.SIGKILL)
        assert writer.wait(timeout=30) == -signal.SIGKILL
        blocker.rollback()                                         # let the dead push's transaction end
    assert _server_state(ann, site["project"].id) == before        # none of it
    assert _blobs(ann) == blobs_before                             # not even its audio
    done = push(laptop, tom, local)                                # and it can be repeated
    assert done.pushed and done.takes_added == 20
    assert len(_blobs(ann)) == len(blobs_before) + 20
    assert len(_server_state(ann, site["project"].id).takes) == len(before.takes) + 20
