"""The only file with cache decorators: the store handle, its background measurer, and cached core calls.

Take measurements are kept in the store (fieldtl.testrun), so they survive a restart; the
assessment on top of them is cheap and also cached per server process here.
"""

from __future__ import annotations

import contextlib
import importlib
import os
import sys
import threading
import time
from collections.abc import Iterator
from pathlib import Path

import streamlit as st

from fieldtl.assess import Assessment
from fieldtl.measure_cache import analysis_version
from fieldtl.store import Store
from fieldtl.store.location import open_store
from fieldtl.store.survey_import import import_survey
from fieldtl.survey import Survey, load_survey
from fieldtl.testrun import (
    BackgroundMeasurer,
    TestTakes,
    assess_survey,
    measure_test_takes,
    store_cache,
)
from fieldtl.ui import login

DEMO_SURVEY = Path(__file__).resolve().parents[2] / "sample_audio" / "survey.toml"
DEMO_PROJECT = "Invented demo: Brackenfold House (a fictional building)"
# What measuring a new take imports (scipy.signal and the analysis, about 1.3 s; a restarted app
# reads every stored take from the store and would otherwise pay it on the first new take), then
# what the Results and Report pages import (charts, tables, the PDF writer; about 2 s together):
# loaded by a background thread once the takes are measured, so neither waits on a first visit.
MEASURING_MODULES = ("fieldtl.analysis.levels", "fieldtl.analysis.decay", "fieldtl.analysis.interrupted",
                     "fieldtl.audio.calibration")
LATER_MODULES = (*MEASURING_MODULES, "fieldtl.ui.chart", "fieldtl.report.export", "fieldtl.report.pdf")


def _release(opened: tuple[Store, BackgroundMeasurer]) -> None:
    opened[1].stop()


@st.cache_resource(on_release=_release)
def _opened() -> tuple[Store, BackgroundMeasurer]:
    """One store handle per server process (the Store serialises its connection with a lock), and
    one background thread measuring every stored test's takes, most recently changed project first."""
    handle = open_store()         # FIELDTL_STORE_URL's team server, else the SQLite store in the data folder
    handle.clean_files()          # orphan audio and stale .incoming-*/.part leftovers of earlier runs
    handle.measurements.forget_other_versions(analysis_version())
    if not handle.list_projects() and DEMO_SURVEY.is_file() and not os.environ.get("FIELDTL_NO_DEMO"):
        project = handle.create_project(DEMO_PROJECT, client="Invented client (demo data)",
                                        address="Invented address, not a real place", engineer="Demo")
        import_survey(handle, load_survey(DEMO_SURVEY), project_id=project.id)
    measurer = BackgroundMeasurer(handle, every_test=True)
    threading.Thread(target=_load_later_modules, args=(measurer,), name="fieldtl-imports", daemon=True).start()
    return handle, measurer


def _load_later_modules(measurer: BackgroundMeasurer) -> None:
    while not measurer.idle():          # the analysis first: it is what the first pages wait for
        time.sleep(0.5)
    for name in LATER_MODULES:
        _wait_until_quiet()             # an import holds the interpreter: never while a page is drawn
        try:
            importlib.import_module(name)
        except Exception:  # noqa: BLE001 - only a head start: the page importing it reports any problem
            return


def prepare_measuring() -> None:
    """Import what measuring a new take needs now, in the background, without waiting for a pause:
    the Takes page calls this once it is drawn, as a take may arrive at any moment there."""
    with _activity:
        if _runs["measuring_started"] or all(name in sys.modules for name in MEASURING_MODULES):
            return
        _runs["measuring_started"] = True
    threading.Thread(target=_import_all, args=(MEASURING_MODULES,), name="fieldtl-imports-measuring",
                     daemon=True).start()


def _import_all(names: tuple[str, ...]) -> None:
    for name in names:
        try:
            importlib.import_module(name)
        except Exception:  # noqa: BLE001 - only a head start: measuring reports any problem itself
            return


# Page runs in progress and when the last one ended: the background imports wait for a pause
# (measured: importing during the first Takes page after a restart made it 2-4 times slower).
QUIET_S = 2.0
_activity = threading.Condition()
_runs = {"active": 0, "ended": time.monotonic(), "measuring_started": False}


@contextlib.contextmanager
def page_run() -> Iterator[None]:
    """Mark a page body as running (``common.fenced`` wraps every page in it)."""
    with _activity:
        _runs["active"] += 1
    try:
        yield
    finally:
        with _activity:
            _runs["active"] -= 1
            _runs["ended"] = time.monotonic()
            _activity.notify_all()


def _wait_until_quiet() -> None:
    """Return once no page is running and none has ended in the last QUIET_S seconds."""
    with _activity:
        while True:
            idle_s = time.monotonic() - _runs["ended"]
            if _runs["active"] == 0 and idle_s >= QUIET_S:
                return
            _activity.wait(timeout=max(QUIET_S - idle_s, 0.05) if _runs["active"] == 0 else None)


def store() -> Store:
    """The store the pages use: with a team server, the signed-in account's handle (its roles apply)."""
    return login.account_store() if login.server_configured() else _opened()[0]


def server_store() -> Store:
    """The process's own store handle (a team server's: signs accounts in; no roles apply to it)."""
    return _opened()[0]


def measurer() -> BackgroundMeasurer:
    return _opened()[1]


def measured_takes(test_id: int) -> TestTakes:
    """Every take of the test measured (read from the store; a new take is measured now and kept)."""
    return measure_test_takes(store(), test_id)


@st.cache_data(max_entries=32, show_spinner="Analysing the takes…")
def assessment(survey: Survey) -> Assessment:
    """The core path of `fieldtl assess` on a stored test's survey (files are content-addressed)."""
    return assess_survey(survey, cache=store_cache(store()))
