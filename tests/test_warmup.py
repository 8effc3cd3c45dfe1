"""The warm-up child of `fieldtl app` (fieldtl.warmup): the demo imported once, every take measured
into the store before the server's pages ask, its reports read and the child reaped by the server,
and a failing warm-up quiet, changing nothing.

The launcher below does what `fieldtl app` does around it (fork the child, then execve), with a
small stand-in for the Streamlit server, so these tests need no browser.
"""

import json
import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from fieldtl import measure_cache, warmup
from fieldtl.store import Store
from fieldtl.testrun import measure_test_takes

LAUNCHER = """
import os, sys
from pathlib import Path
from fieldtl import warmup
value = warmup.start(Path(sys.argv[1]))
env = dict(os.environ)
env[warmup.ENV_VAR] = value
os.execve(sys.executable, [sys.executable, "-c", sys.argv[2]], env)
"""

SERVER = """
import json, os, time
from fieldtl import warmup
watch = warmup.server_watch()
imported = watch.wait_imported(120)
deadline = time.monotonic() + 300
while not watch.finished() and time.monotonic() < deadline:
    time.sleep(0.05)
try:
    os.waitpid(-1, os.WNOHANG)
    children_left = True
except ChildProcessError:
    children_left = False
from fieldtl.errors import StoreError
from fieldtl.store import Store
try:
    store = Store.open(os.environ["DATABASE"])
    tests = [t.id for p in store.list_projects() for t in store.list_tests(p.id)]
except StoreError:
    tests = []
print(json.dumps({"imported": imported, "finished": watch.finished(), "children_left": children_left,
                  "measured": [watch.measured(t) for t in tests],
                  "measured_all": watch.measured_all(), "env_left": warmup.ENV_VAR in os.environ}))
"""


def launch(database: Path, **env_changes: str | None) -> tuple[dict, str]:
    env = {**os.environ, "DATABASE": str(database)}
    for name, value in env_changes.items():
        if value is None:
            env.pop(name, None)
        else:
            env[name] = value
    done = subprocess.run([sys.executable, "-c", LAUNCHER, str(database), SERVER], capture_output=True, text=True,
                          env=env, timeout=600, check=False)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout), done.stderr


def analysed_files(monkeypatch) -> list[str]:
    """measure_take and calibrate_file wrapped to record which files are really analysed from now on."""
    files: list[str] = []
    take, calibrate = measure_cache.measure_take, measure_cache.calibrate_file

    def counted_take(spec, **options):
        files.append(spec.file.name)
        return take(spec, **options)

    def counted_calibration(file, channel, reference_db):
        files.append(file.name)
        return calibrate(file, channel, reference_db)

    monkeypatch.setattr(measure_cache, "measure_take", counted_take)
    monkeypatch.setattr(measure_cache, "calibrate_file", counted_calibration)
    return files


@pytest.mark.slow
def test_the_warm_up_imports_the_demo_once_and_leaves_every_take_measured(tmp_path, monkeypatch):
    database = tmp_path / "store" / "fieldtl.sqlite3"
    database.parent.mkdir()
    seen, errors = launch(database, FIELDTL_NO_DEMO=None)
    assert errors == ""
    assert seen == {"imported": True, "finished": True, "children_left": False, "measured": [True],
                    "measured_all": True, "env_left": False}
    store = Store.open(database)
    try:
        warmup.import_demo(store)                      # what the server does after the child's import: nothing
        projects = store.list_projects()
        assert [p.name for p in projects] == [warmup.DEMO_PROJECT]
        (test,) = store.list_tests(projects[0].id)
        files = analysed_files(monkeypatch)
        measured = measure_test_takes(store, test.id)   # what the Takes page and the app's measurer read
        assert files == []                             # nothing left to analyse
        assert measured.calibration is not None and measured.calibration_problem is None
        takes = [t for t in store.list_takes(test.id) if t.role not in ("calibration", "calibration_after")]
        assert len(measured.outcomes) == len(takes) > 20
        assert all(o.summary is not None for o in measured.outcomes.values())
    finally:
        store.close()


@pytest.mark.slow
def test_a_warm_up_on_a_store_with_a_project_imports_no_demo(tmp_path):
    database = tmp_path / "fieldtl.sqlite3"
    store = Store.open(database)
    store.create_project("Flat 4, party wall")
    store.close()
    seen, errors = launch(database, FIELDTL_NO_DEMO=None)
    assert (seen["imported"], seen["finished"], seen["measured"], errors) == (True, True, [], "")
    store = Store.open(database)
    try:
        assert [p.name for p in store.list_projects()] == ["Flat 4, party wall"]
    finally:
        store.close()


def test_a_failing_warm_up_prints_nothing_and_changes_nothing(tmp_path):
    database = tmp_path / "fieldtl.sqlite3"
    database.write_bytes(b"not a database\n" * 100)
    seen, errors = launch(database, FIELDTL_NO_DEMO=None)         # the child's stderr is this run's
    # The server's wait for the import ends with the child (it does not wait IMPORT_WAIT_S), then it
    # goes on alone: the store's own error is what the app's pages show.
    assert (seen["imported"], seen["finished"], seen["children_left"], errors) == (True, True, False, "")
    assert database.read_bytes() == b"not a database\n" * 100


def test_the_server_follows_the_childs_reports():
    """The report lines of the module docstring, written by hand into a pipe."""
    read_fd, write_fd = os.pipe()
    ran = []
    # Not this process's child: the reaping finds nothing, which the watch accepts.
    watch = warmup.Watch(os.getpid(), read_fd)
    watch.when_finished(lambda: ran.append("measurer started"))

    def say(text: str) -> None:
        os.write(write_fd, text.encode())

    assert not watch.wait_imported(timeout_s=0.05)
    assert watch.pending(5) == (0, 0)                   # still importing: every test waits
    say("imported\ntests 5 6\ntake 5 3 10\n")
    assert watch.wait_imported(timeout_s=5)
    wait_for(lambda: watch.pending(5) == (3, 10))
    assert watch.pending(7) is None                     # not one of the child's tests: the page measures it
    assert watch.pending(6) == (0, 0) and not watch.measured(5)
    say("end 5\n")
    wait_for(lambda: watch.measured(5))
    assert watch.pending(5) is None and watch.pending(6) == (0, 0) and ran == []
    assert not watch.measured_all()
    os.close(write_fd)                                  # the child ends (or dies) before test 6
    wait_for(watch.finished)
    assert watch.pending(6) is None and not watch.measured(6) and not watch.measured_all()
    assert ran == ["measurer started"]
    watch.when_finished(lambda: ran.append("later"))   # after the end: at once
    assert ran == ["measurer started", "later"]


def test_without_the_variable_there_is_no_watch(monkeypatch):
    monkeypatch.delenv(warmup.ENV_VAR, raising=False)
    warmup.server_watch.cache_clear()
    assert warmup.server_watch() is None
    for value in ("123:notanfd:4", "123:4", "123:998:999"):          # 998, 999: no such open files here
        monkeypatch.setenv(warmup.ENV_VAR, value)
        warmup.server_watch.cache_clear()
        assert warmup.server_watch() is None
    warmup.server_watch.cache_clear()


def wait_for(condition, timeout_s: float = 10.0) -> None:
    deadline = time.monotonic() + timeout_s
    while not condition():
        assert time.monotonic() < deadline, "timed out"
        time.sleep(0.01)


@pytest.mark.slow
def test_the_app_imports_and_measures_itself_when_the_warm_up_died_first(tmp_path, monkeypatch):
    """The child gone before its first report (a pipe closed at once): the app's own path takes over."""
    import streamlit as st

    from fieldtl.ui import cached

    read_fd, write_fd = os.pipe()
    os.close(write_fd)
    life_read, life_write = os.pipe()
    os.close(life_read)
    # Not our child: nothing to reap.
    monkeypatch.setenv(warmup.ENV_VAR, f"{os.getpid()}:{read_fd}:{life_write}")
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "app"))
    monkeypatch.delenv("FIELDTL_NO_DEMO", raising=False)
    warmup.server_watch.cache_clear()
    st.cache_resource.clear()
    try:
        store = cached.store()
        assert [p.name for p in store.list_projects()] == [warmup.DEMO_PROJECT]
        (test,) = store.list_tests(store.list_projects()[0].id)
        wait_for(lambda: cached.measurer() is not None)
        wait_for(lambda: cached.measurer().idle(), timeout_s=300)
        files = analysed_files(monkeypatch)
        measured = measure_test_takes(store, test.id)
        assert files == [] and all(o.summary is not None for o in measured.outcomes.values())
    finally:
        st.cache_resource.clear()
        warmup.server_watch.cache_clear()
        os.close(life_write)
