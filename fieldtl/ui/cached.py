"""The only file with cache decorators: the store handle, its background measurer, and cached core calls.

Take measurements are kept in the store (fieldtl.testrun), so they survive a restart; the
assessment on top of them is cheap and also cached per server process here.
"""

from __future__ import annotations

import sys
import threading

import streamlit as st

from fieldtl import warmup
from fieldtl.assess import Assessment
from fieldtl.measure_cache import analysis_version
from fieldtl.store import Store
from fieldtl.store.location import open_store
from fieldtl.survey import Survey
from fieldtl.testrun import (
    BackgroundMeasurer,
    TestTakes,
    assess_survey,
    measure_test_takes,
    store_cache,
)
from fieldtl.ui import login

# What measuring a new take imports (scipy.signal and the analysis, about 1.3 s): a restarted app
# reads every stored take from the store and would otherwise pay it on the first new take. The
# Takes page starts this import in the background once it is drawn (prepare_measuring), after the
# Results page's own modules (its chart with altair, the client wording: about 0.45 s), as "See
# the results" is the tap that most often follows: Results opened at once then waits only for its
# own imports, where it had shared the interpreter with the analysis import. Nothing else is
# imported ahead: an import in a background thread holds the interpreter, and importing the
# Results and Report pages' modules from the first page on made the first Takes page after a
# restart 2-4 times slower (2.6-4.2 s against 0.7-1.1 s, measured in Chromium at a phone's size).
RESULTS_MODULES = ("fieldtl.ui.chart", "fieldtl.report.client", "fieldtl.report.export", "fieldtl.ui.verdict_text")
MEASURING_MODULES = ("fieldtl.analysis.levels", "fieldtl.analysis.decay", "fieldtl.analysis.interrupted",
                     "fieldtl.audio.calibration")
_measuring_import = {"started": False}
_measuring_lock = threading.Lock()


class _Opened:
    """The store handle and the background measurer, which starts once the warm-up child (if any) has ended."""

    def __init__(self, handle: Store, watch: warmup.Watch | None) -> None:
        self.store = handle
        self.watch = watch
        self._measurer: BackgroundMeasurer | None = None
        self._stopped = False
        self._lock = threading.Lock()
        if watch is None:
            self._start()
        else:
            watch.when_finished(self._start)

    def _start(self) -> None:
        if self.watch is not None and self.watch.measured_all():
            return          # every test's rows are in the store: pages read them (a new take is measured there)
        with self._lock:
            if not self._stopped:
                self._measurer = BackgroundMeasurer(self.store, every_test=True)

    def measurer(self) -> BackgroundMeasurer | None:
        with self._lock:
            return self._measurer

    def stop(self) -> None:
        with self._lock:
            self._stopped = True
            if self._measurer is not None:
                self._measurer.stop()


def _release(opened: _Opened) -> None:
    opened.stop()


@st.cache_resource(on_release=_release)
def _opened() -> _Opened:
    """One store handle per server process (the Store serialises its connection with a lock), and
    one background thread measuring every stored test's takes, most recently changed project first.

    `fieldtl app` starts a warm-up child (fieldtl.warmup) that imports the demo on a first start and
    measures the takes while the server boots: the store is opened here once its import is done,
    and this process's measurer starts when the child has ended without going through every test
    (it then finds the rows, or measures what is left)."""
    watch = None if login.server_configured() else warmup.server_watch()
    importing = watch is not None and not watch.wait_imported()
    handle = open_store()         # FIELDTL_STORE_URL's team server, else the SQLite store in the data folder
    handle.clean_files()          # orphan audio and stale .incoming-*/.part leftovers of earlier runs
    handle.measurements.forget_other_versions(analysis_version())
    if not importing:             # a child still importing after IMPORT_WAIT_S imports it alone
        warmup.import_demo(handle)
    return _Opened(handle, watch)


def prepare_measuring() -> None:
    """Import what the Results page and measuring a new take need now, in the background, without
    waiting for a pause: the Takes page calls this once it is drawn, as a take may arrive at any
    moment there (and the Results page is one tap away)."""
    names = RESULTS_MODULES + MEASURING_MODULES
    with _measuring_lock:
        if _measuring_import["started"] or all(name in sys.modules for name in names):
            return
        _measuring_import["started"] = True
    threading.Thread(target=warmup.import_ahead, args=(names,), name="fieldtl-imports-measuring", daemon=True).start()


def store() -> Store:
    """The store the pages use: with a team server, the signed-in account's handle (its roles apply)."""
    return login.account_store() if login.server_configured() else _opened().store


def server_store() -> Store:
    """The process's own store handle (a team server's: signs accounts in; no roles apply to it)."""
    return _opened().store


def measurer() -> BackgroundMeasurer | None:
    """This process's background measurer; None while the warm-up child is still measuring, and when
    it has measured every test."""
    return _opened().measurer()


def warm_up() -> warmup.Watch | None:
    """The warm-up child `fieldtl app` started, if any (its progress, per test)."""
    return _opened().watch


def measured_takes(test_id: int) -> TestTakes:
    """Every take of the test measured (read from the store; a new take is measured now and kept)."""
    return measure_test_takes(store(), test_id)


@st.cache_data(max_entries=32, show_spinner="Analysing the takes…")
def assessment(survey: Survey) -> Assessment:
    """The core path of `fieldtl assess` on a stored test's survey (files are content-addressed)."""
    return assess_survey(survey, cache=store_cache(store()))
