"""The only file with cache decorators: cached wrappers around core calls, and the store handle."""

from __future__ import annotations

import os
from pathlib import Path

import streamlit as st

from fieldtl.assess import Assessment, assess
from fieldtl.audio.calibration import Calibration
from fieldtl.findings import Finding
from fieldtl.measure import calibrate_file, measure_survey, measure_take
from fieldtl.qa import TakeSummary
from fieldtl.store import Store, default_database_path
from fieldtl.store.survey_import import import_survey
from fieldtl.survey import Survey, TakeSpec, load_survey

DEMO_SURVEY = Path(__file__).resolve().parents[2] / "sample_audio" / "survey.toml"
DEMO_PROJECT = "Invented demo: Brackenfold House (a fictional building)"


@st.cache_resource
def store() -> Store:
    """One store handle per server process (the Store serialises its connection with a lock)."""
    path = default_database_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    handle = Store.open(path)
    handle.clean_files()          # orphan audio and stale .incoming-*/.part leftovers of earlier runs
    if not handle.list_projects() and DEMO_SURVEY.is_file() and not os.environ.get("FIELDTL_NO_DEMO"):
        project = handle.create_project(DEMO_PROJECT, client="Invented client (demo data)",
                                        address="Invented address, not a real place", engineer="Demo")
        import_survey(handle, load_survey(DEMO_SURVEY), project_id=project.id)
    return handle


@st.cache_data(max_entries=512, show_spinner=False)
def take_measurement(spec: TakeSpec, level_offset_db: float) -> tuple[TakeSummary, tuple[Finding, ...]]:
    """Band levels or decay of one stored take (files are content-addressed, so the path is the content)."""
    return measure_take(spec, level_offset_db=level_offset_db)


@st.cache_data(max_entries=64, show_spinner=False)
def calibration(file: Path, channel: int, reference_db: float) -> Calibration:
    return calibrate_file(file, channel, reference_db)


def _measure_take(spec: TakeSpec, *, level_offset_db: float, progress: object = None) -> tuple[TakeSummary, tuple[Finding, ...]]:
    return take_measurement(spec, level_offset_db)


@st.cache_data(max_entries=32, show_spinner="Analysing the takes…")
def assessment(survey: Survey) -> Assessment:
    measured = measure_survey(survey, take_measurer=_measure_take, calibrator=calibration)
    return assess(survey, measured.takes, calibrated=measured.calibrated, findings=measured.findings)
