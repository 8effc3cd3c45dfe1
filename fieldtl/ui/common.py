"""Bits every page shares: the open project/test guard, plain-word role names, the caution footer."""

from __future__ import annotations

import streamlit as st

from fieldtl.cautions import CAUTIONS
from fieldtl.store import Project, TestRecord
from fieldtl.ui import cached, state

ROLE_NAMES: dict[str, str] = {
    "source": "Source room level (loudspeaker on)",
    "receiving": "Receiving room level (loudspeaker on)",
    "impact": "Receiving room level (tapping machine on)",
    "background": "Background noise (receiving room, source off)",
    "decay": "Reverberation decay (receiving room)",
    "source_corner": "Source room corner (small room)",
    "receiving_corner": "Receiving room corner (small room)",
    "calibration": "Calibrator tone (start)",
    "calibration_after": "Calibrator tone (end)",
}
METHOD_NAMES: dict[str, str] = {"impulse": "Impulse (balloon, clapper, starter pistol)",
                                "interrupted": "Noise switched off", "sweep": "Sweep played by fieldtl"}


_MARKDOWN_SPECIALS = "\\`*_{}[]()<>#+-.!|~$:"


def md(text: object) -> str:
    """User-entered text made literal for Streamlit's markdown (labels, captions, messages)."""
    return "".join("\\" + c if c in _MARKDOWN_SPECIALS else c for c in str(text))


def open_project() -> Project | None:
    project_id = state.project_id()
    if project_id is None:
        return None
    try:
        return cached.store().get_project(project_id)
    except Exception:   # deleted in another tab: forget it
        state.open_project(None)
        return None


def require_test() -> tuple[Project, TestRecord]:
    """The open project and test, or a pointer to where to choose them (and stop the page)."""
    project = open_project()
    test_id = state.test_id()
    test = None
    if project is not None and test_id is not None:
        test = next((t for t in cached.store().list_tests(project.id) if t.id == test_id), None)
    if project is None or test is None:
        st.info("Open a project and a test first.")
        st.page_link("pages/projects.py", label="Go to Projects", icon="📁")
        cautions()
        st.stop()
    return project, test


def heading(project: Project, test: TestRecord) -> None:
    st.caption(f"{md(project.name)} · {md(test.setup.title)} · {test.setup.test_type}")


def cautions() -> None:
    st.divider()
    for text in CAUTIONS:
        st.caption(f"⚠️ {text}")
