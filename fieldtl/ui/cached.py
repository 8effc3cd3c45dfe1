"""The only file with cache decorators: the store handle, its background measurer, and cached core calls.

Take measurements are kept in the store (fieldtl.testrun), so they survive a restart; the
assessment on top of them is cheap and also cached per server process here.
"""

from __future__ import annotations

import importlib
import os
import sys
import threading
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
# What measuring a new take imports (scipy.signal and the analysis, about 1.3 s): a restarted app
# reads every stored take from the store and would otherwise pay it on the first new take. The
# Takes page starts this import in the background once it is drawn (prepare_measuring). Nothing
# else is imported ahead: an import in a background thread holds the interpreter, and importing
# the Results and Report pages' modules that way made the first Takes page after a restart 2-4
# times slower (2.6-4.2 s against 0.7-1.1 s, measured in Chromium at a phone's size).
MEASURING_MODULES = ("fieldtl.analysis.levels", "fieldtl.analysis.decay", "fieldtl.analysis.interrupted",
                     "fieldtl.audio.calibration")
_measuring_import = {"started": False}
_measuring_lock = threading.Lock()


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
    return handle, BackgroundMeasurer(handle, every_test=True)


def prepare_measuring() -> None:
    """Import what measuring a new take needs now, in the background, without waiting for a pause:
    the Takes page calls this once it is drawn, as a take may arrive at any moment there."""
    with _measuring_lock:
        if _measuring_import["started"] or all(name in sys.modules for name in MEASURING_MODULES):
            return
        _measuring_import["started"] = True
    threading.Thread(target=_import_all, args=(MEASURING_MODULES,), name="fieldtl-imports-measuring",
                     daemon=True).start()


def _import_all(names: tuple[str, ...]) -> None:
    for name in names:
        try:
            importlib.import_module(name)
        except Exception:  # noqa: BLE001 - only a head start: measuring reports any problem itself
            return


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
