"""The store loses nothing: a writer killed with SIGKILL, two writers at once, threads sharing one store.

Checks are SQLite's own (PRAGMA integrity_check) and hashlib's SHA-256 of every file a committed
take names; the writer is tests/data/store_writer.py run as a separate process.
"""

import hashlib
import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from fieldtl.store import MIGRATIONS, Store

WRITER = Path(__file__).parent / "data" / "store_writer.py"
ROOT = Path(__file__).resolve().parents[1]
pytestmark = pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs POSIX signals")


def start_writer(database, worker, count, *extra):
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(filter(None, [str(ROOT), os.environ.get("PYTHONPATH")])))
    return subprocess.Popen([sys.executable, str(WRITER), str(database), str(worker), str(count), *map(str, extra)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def read_line(process):
    line = process.stdout.readline()
    if not line:
        raise AssertionError(f"writer ended early: {process.wait()} {process.stderr.read()}")
    return line.strip()


def assert_consistent(database):
    """integrity_check passes and every committed take's file exists with the bytes its SHA-256 names."""
    raw = sqlite3.connect(database)
    assert raw.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    assert raw.execute("PRAGMA foreign_key_check").fetchall() == []
    raw.close()
    with Store.open(database) as store:
        takes = [t for p in store.list_projects() for t in store.snapshot(p.id).takes]
        for take in takes:
            assert hashlib.sha256(store.take_path(take).read_bytes()).hexdigest() == take.sha256
    return takes


@pytest.mark.parametrize("commits_before_kill", [3, 12])
def test_writer_killed_mid_way_leaves_a_sound_store(tmp_path, commits_before_kill):
    database = tmp_path / "fieldtl.sqlite3"
    writer = start_writer(database, 1, 10_000)
    committed = [read_line(writer) for _ in range(commits_before_kill)]
    os.kill(writer.pid, signal.SIGKILL)                   # mid-way: the writer is busy with the next take
    assert writer.wait(timeout=30) == -signal.SIGKILL
    assert all(line.startswith("committed ") for line in committed)

    takes = assert_consistent(database)
    ids = {t.id for t in takes}
    assert {int(line.split()[1]) for line in committed} <= ids          # nothing reported committed is lost
    with Store.open(database) as store:                  # and the store takes new writes
        store.clean_files(stale_s=0.0)          # a killed upload may have left an unfinished file
        assert sorted(p.name for p in store.audio_dir.iterdir()) == sorted({t.file_name for t in takes})
        test_id = takes[0].test_id
        extra = store.add_take(test_id, data=store.take_path(takes[0]).read_bytes(), original_name="after.wav",
                               role="receiving")
        assert store.get_take(extra.id) == extra
    assert len(assert_consistent(database)) == len(takes) + 1


def test_two_writers_at_once_lose_nothing(tmp_path):
    database, count = tmp_path / "fieldtl.sqlite3", 25
    go = tmp_path / "go"
    writers = [start_writer(database, worker, count, go) for worker in (1, 2)]
    for writer in writers:
        assert read_line(writer) == "ready"
    go.touch()                                            # both open a new database at the same moment
    for writer in writers:
        out, err = writer.communicate(timeout=120)
        assert writer.returncode == 0, err
        assert out.count("committed ") == count
    takes = assert_consistent(database)
    assert len(takes) == 2 * count
    assert len({t.test_id for t in takes}) == 2
    with Store.open(database) as store:
        assert store.schema_state() == (len(MIGRATIONS), tuple(m.__name__ for m in MIGRATIONS))   # each applied once
        assert len(store.list_projects()) == 2


def test_threads_sharing_one_store_lose_nothing(tmp_path):
    # Streamlit shares one cached Store between sessions' threads; its lock serialises the connection.
    from concurrent.futures import ThreadPoolExecutor
    with Store.open(tmp_path / "fieldtl.sqlite3") as store:
        with ThreadPoolExecutor(max_workers=4) as pool:
            created = list(pool.map(lambda i: store.create_project(f"Thread project {i}").id, range(40)))
        assert len(set(created)) == 40
        assert sorted(p.id for p in store.list_projects()) == sorted(created)
