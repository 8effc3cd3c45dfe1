"""The store's takes measured while the app's server starts: a child process of ``fieldtl app``.

``fieldtl app`` replaces itself with the Streamlit server (``os.execve``). Just before, :func:`start`
forks a child that opens the SQLite store, imports the invented demo into an empty store (the only
place it is imported when the child runs), then measures every stored test's takes into the store's
per-take cache, most recently changed project first, exactly as the app's background measurer
does (:func:`fieldtl.testrun.measure_test_takes`). The server boots on the other core meanwhile;
its pages and its own measurer then read the rows instead of measuring (on a first start the
demo's 31 takes took about 2 s of imports and analysis once the first page had appeared).

Two pipes tie the child to the server (the process ``fieldtl app`` became, so its parent):

* the child reports on one: ``imported`` once the demo is in the store (or none was needed), then
  ``tests <id> ...`` (what it will measure), ``take <test id> <done> <total>`` per take and
  ``end <test id>`` per test. Its end closes when it exits or dies, which the server reads as
  finished; the server then reaps it (:class:`Watch`).
* the server holds the write end of the other and never writes: when the server exits in any
  way (SIGKILL included) the child reads end-of-file and exits at once.

The child stays in the app's process group (Ctrl+C in a terminal and a signal to the group end it
quietly), writes nothing to the terminal, and any failure only ends it: the app imports the demo
and measures what is left itself, and its pages report a take's problem in one line.
"""

from __future__ import annotations

import functools
import importlib
import os
import signal
import threading
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from fieldtl.store import Store

ENV_VAR = "FIELDTL_WARMUP"          # "<child pid>:<fd of its reports>:<fd it waits on>", set by `fieldtl app`
DEMO_SURVEY = Path(__file__).resolve().parents[1] / "sample_audio" / "survey.toml"
DEMO_PROJECT = "Invented demo: Brackenfold House (a fictional building)"
# What measuring imports (scipy.signal and the analysis, about 1 s of computing).
ANALYSIS_MODULES = ("fieldtl.testrun", "fieldtl.analysis.levels", "fieldtl.analysis.decay",
                    "fieldtl.analysis.interrupted", "fieldtl.audio.calibration")
IMPORT_WAIT_S = 120.0               # the server's longest wait for the child's demo import

Report = Callable[[str], None]


def wants_demo(store: Store) -> bool:
    """An empty store, the demo's files at hand and FIELDTL_NO_DEMO not set."""
    return not store.list_projects() and DEMO_SURVEY.is_file() and not os.environ.get("FIELDTL_NO_DEMO")


def import_demo(store: Store) -> bool:
    """The invented demo as a project of the store if :func:`wants_demo`; whether it was imported."""
    if not wants_demo(store):
        return False
    from fieldtl.store.survey_import import import_survey
    from fieldtl.survey import load_survey

    project = store.create_project(DEMO_PROJECT, client="Invented client (demo data)",
                                   address="Invented address, not a real place", engineer="Demo")
    import_survey(store, load_survey(DEMO_SURVEY), project_id=project.id)
    return True


def warm(database: Path, report: Report) -> None:
    """Open the store at ``database``, import the demo into it if empty, measure every test's takes.

    A test that cannot be measured is skipped (the app's pages report it); ``report`` gets the lines
    described in the module's docstring.
    """
    from fieldtl.store import Store

    store = Store.open(database)
    try:
        if wants_demo(store):
            # The demo's files are written (and synced) while the analysis is imported alongside:
            # about 0.5 s each, mostly waiting on the disk against mostly computing.
            threading.Thread(target=import_ahead, args=(ANALYSIS_MODULES,), daemon=True).start()
            import_demo(store)
        report("imported")
        tests = []
        for project in store.list_projects():
            try:
                tests += [t.id for t in store.list_tests(project.id)]
            except Exception:  # noqa: BLE001, S112 - that project's pages report it; the others go on
                continue
        report("tests " + " ".join(map(str, tests)))
        for test_id in tests:
            _measure_test(store, test_id, report)
    finally:
        store.close()


def _measure_test(store: Store, test_id: int, report: Report) -> None:
    """The test's used takes on threads as `fieldtl assess` measures them (fieldtl.measure), then every
    take as the Takes page reads it (left-out ones too; the others are in the store by then)."""
    from fieldtl.measure import measure_survey
    from fieldtl.testrun import measure_test_takes, store_cache

    shown = [0]                     # never backwards: the second pass counts from 0 again, at once

    def take_done(done: int, total: int) -> None:
        shown[0] = max(shown[0], done)
        report(f"take {test_id} {shown[0]} {total}")

    try:
        takes = store.list_takes(test_id)
        levels = sum(t.role not in ("calibration", "calibration_after") for t in takes)
        cache = store_cache(store, takes)
        lock, counted = threading.Lock(), [0]

        def measured(*args: object, **options: object) -> object:
            result = cache.take(*args, **options)
            with lock:
                counted[0] += 1
                take_done(counted[0], levels)
            return result

        measure_survey(store.survey_for_test(test_id), take_measurer=measured, calibrator=cache.calibration)
    except Exception:  # noqa: BLE001, S110 - what could not be measured is measured and reported below
        pass
    try:
        measure_test_takes(store, test_id, on_take=take_done)
    except Exception:  # noqa: BLE001, S110 - the page measures it again and says what is wrong
        pass
    report(f"end {test_id}")


def import_ahead(names: tuple[str, ...]) -> None:
    """Import ``names`` now (run in a background thread); one that fails is left to its first real use."""
    for name in names:
        try:
            importlib.import_module(name)
        except Exception:  # noqa: BLE001, S112 - only a head start: that use reports any problem itself
            continue


def start(database: Path) -> str | None:
    """Fork the warm-up child for the SQLite store at ``database``; the value of ENV_VAR for the server,
    or None where a child cannot be forked (the app then measures everything itself).

    Call from a single-threaded process that next replaces itself with the server: the ends the
    server keeps are made inheritable across ``execve``.
    """
    if not hasattr(os, "fork"):
        return None
    life_read, life_write = os.pipe()
    report_read, report_write = os.pipe()
    try:
        pid = os.fork()
    except OSError:
        for fd in (life_read, life_write, report_read, report_write):
            os.close(fd)
        return None
    if pid == 0:                                                    # the child: never returns
        os.close(life_write)
        os.close(report_read)
        _child(database, life_read, report_write)
    os.close(life_read)
    os.close(report_write)
    os.set_inheritable(life_write, True)        # held by the server until it exits; the child waits on it
    os.set_inheritable(report_read, True)
    return f"{pid}:{report_read}:{life_write}"


def _child(database: Path, life_fd: int, report_fd: int) -> None:
    try:
        signal.signal(signal.SIGINT, signal.SIG_DFL)                # Ctrl+C: gone, no traceback
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
        quiet = os.open(os.devnull, os.O_WRONLY)
        os.dup2(quiet, 1)
        os.dup2(quiet, 2)
        threading.Thread(target=_exit_with_server, args=(life_fd,), daemon=True).start()

        def report(line: str) -> None:
            os.write(report_fd, line.encode() + b"\n")

        warm(database, report)
    except BaseException:  # noqa: BLE001, S110 - only a head start: the app measures what is left
        pass
    finally:
        os._exit(0)


def _exit_with_server(life_fd: int) -> None:
    while os.read(life_fd, 1):                  # nobody writes: returns b"" once the server has gone
        pass
    os._exit(0)


class Watch:
    """The server's view of the warm-up child: its reports read in a thread, the child reaped at the end."""

    def __init__(self, pid: int, report_fd: int) -> None:
        self._pid = pid
        self._lines = os.fdopen(report_fd, "rb")
        self._changed = threading.Condition()
        self._imported = False
        self._ending = False                    # the child has gone; what waited for it runs now
        self._finished = False
        self._tests: set[int] | None = None     # what the child measures, once it has said
        self._ended: set[int] = set()
        self._status: dict[int, tuple[int, int]] = {}
        self._on_finish: list[Callable[[], None]] = []
        threading.Thread(target=self._read, name="fieldtl-warmup-watch", daemon=True).start()

    def wait_imported(self, timeout_s: float = IMPORT_WAIT_S) -> bool:
        """Wait until the child has imported the demo or has ended; False if it is still importing."""
        with self._changed:
            return self._changed.wait_for(lambda: self._imported or self._ending, timeout=timeout_s)

    def pending(self, test_id: int) -> tuple[int, int] | None:
        """(takes done, takes to measure) while the child is still to finish this test; else None."""
        with self._changed:
            if self._ending or test_id in self._ended or (self._tests is not None and test_id not in self._tests):
                return None
            return self._status.get(test_id, (0, 0))

    def measured(self, test_id: int) -> bool:
        """The child went through this test (its takes are in the store, or failed in a way the page reports)."""
        with self._changed:
            return test_id in self._ended

    def measured_all(self) -> bool:
        """The child went through every test it listed."""
        with self._changed:
            return self._tests is not None and self._tests <= self._ended

    def finished(self) -> bool:
        """The child has ended, been reaped, and what waited for it has run."""
        with self._changed:
            return self._finished

    def when_finished(self, action: Callable[[], None]) -> None:
        """Run ``action`` once the child has ended (now, if it has)."""
        with self._changed:
            if not self._ending:
                self._on_finish.append(action)
                return
        action()

    def _read(self) -> None:
        try:
            for raw in self._lines:
                self._take(raw.decode("ascii", "replace").split())
        except (OSError, ValueError):
            pass
        finally:
            self._lines.close()
            try:
                os.waitpid(self._pid, 0)            # reap it: the server is its parent
            except OSError:
                pass
            with self._changed:
                self._ending = True
                actions, self._on_finish = self._on_finish, []
                self._changed.notify_all()
            for action in actions:
                action()
            with self._changed:
                self._finished = True
                self._changed.notify_all()

    def _take(self, words: list[str]) -> None:
        with self._changed:
            if words == ["imported"]:
                self._imported = True
            elif words[:1] == ["tests"]:
                self._tests = {int(w) for w in words[1:]}
            elif words[:1] == ["take"] and len(words) == 4:
                self._status[int(words[1])] = (int(words[2]), int(words[3]))
            elif words[:1] == ["end"] and len(words) == 2:
                self._ended.add(int(words[1]))
            self._changed.notify_all()


@functools.lru_cache(maxsize=1)
def server_watch() -> Watch | None:
    """The warm-up `fieldtl app` started for this server process (ENV_VAR), once; None if there is none.

    Both of the server's pipe ends stop being inherited here, so no process the server starts could
    keep the child waiting after the server has gone."""
    fields = os.environ.pop(ENV_VAR, "").split(":")
    if len(fields) != 3 or not all(f.isdigit() for f in fields):
        return None
    pid, report_fd, life_fd = map(int, fields)
    try:
        for fd in (report_fd, life_fd):
            os.set_inheritable(fd, False)
    except OSError:
        return None
    return Watch(pid, report_fd)
