"""Bits every page shares: the error fence, text bounds, the open project/test guard, plain-word
role names, the caution footer."""

from __future__ import annotations

import contextlib
import logging
import re
from collections.abc import Iterator

import streamlit as st

from fieldtl import validate
from fieldtl.assess import Assessment
from fieldtl.cautions import CAUTIONS
from fieldtl.errors import FieldTLError
from fieldtl.naming import renamed_assessment, renamed_text, take_names
from fieldtl.report.client import client_assessment
from fieldtl.store import Project, TestRecord
from fieldtl.ui import cached, gate, progress, state

_LOG = logging.getLogger("fieldtl.ui")

# Longest user texts typed into the app's forms (characters). Streamlit counts and stops typing at
# these (see ``text_field``); names, requirements and notes use the store's own bounds
# (fieldtl.validate), so nothing typed is refused on saving.
NAME_CHARS = validate.NAME_CHARS               # project, client, engineer, organisation, test title
REQUIREMENT_CHARS = validate.REQUIREMENT_CHARS # "DnT,w + Ctr >= 45" and its kin
ADDRESS_CHARS = 200
DATE_CHARS = 40
NOTE_CHARS = validate.NOTE_CHARS               # construction in words, instruments, positions, notes
BAND_TABLE_CHARS = 50_000 # pasted band levels: 21 bands x 30 columns of "123.4," fit many times


@contextlib.contextmanager
def fenced() -> Iterator[None]:
    """Run a page body so that an error of one project's data shows as one line, not a traceback.

    Streamlit's own stop and rerun signals are not Exceptions and pass through. The full
    traceback goes to the server's log only.
    """
    try:
        yield
    except FieldTLError as exc:
        st.error(md(exc))
        cautions()
    except Exception as exc:   # noqa: BLE001 - the fence exists to catch what nothing else did
        _LOG.exception("page error")
        st.error(f"This page could not show the open project ({type(exc).__name__}). "
                 "Other projects are not affected; try another test or project.")
        cautions()


def text_field(label: str, value: str = "", *, limit: int, area: bool = False, **options: object) -> str:
    """A text input (or area) of at most ``limit`` characters, with a line saying so when text reaches it.

    Streamlit stops typing at ``max_chars`` and cuts longer values on the server too. A stored
    text already longer (from an older archive) keeps its length rather than being cut on save.
    """
    most = max(limit, len(value))
    widget = st.text_area if area else st.text_input
    text = widget(label, value, max_chars=most, **options)
    if len(text) >= most and text != value:
        st.caption(f"{label}: {most} characters, the most allowed; anything longer was cut.")
    return text


def download_button(label: str, data: object, **options: object) -> None:
    """A download of project data, drawn only for a session that passed the access gate."""
    if gate.passed():
        st.download_button(label, data, **options)

ROLE_NAMES: dict[str, str] = {
    "source": "Source room level (loudspeaker on)",
    "receiving": "Receiving room level (loudspeaker on)",
    "impact": "Receiving room level (tapping machine on)",
    "background": "Background noise (receiving room, source off)",
    "decay": "Reverberation decay (receiving room)",
    "source_corner": "Source room corner (small room)",
    "receiving_corner": "Receiving room corner (small room)",
    "background_corner": "Background noise in a receiving room corner (small room, source off)",
    "calibration": "Calibrator tone (start)",
    "calibration_after": "Calibrator tone (end)",
}


def column_title(name: str) -> str:
    """A band column's key as printed: "R_prime" → "R'", "L_prime_nT" → "L'nT" (no underscores)."""
    return name.replace("_prime_", "'").replace("_prime", "'").replace("_", " ")


def position_label(test_type: str) -> str:
    return "Tapping-machine position" if test_type == "impact" else "Loudspeaker position"


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
        st.page_link("views/projects.py", label="Go to Projects", icon="📁")
        cautions()
        st.stop()
    return project, test


def take_names_of(test: TestRecord) -> dict[str, str]:
    """Stored file name → the take's name people know, for every take of the test."""
    return take_names(cached.store().list_takes(test.id), test_type=test.setup.test_type)


def missing_words(test: TestRecord) -> str:
    """What the test still needs before results, in the role picker's words ("" when nothing)."""
    missing = cached.store().missing_roles(test.id)
    return "; ".join(ROLE_NAMES.get(role, role) for role in missing)


def plain_roles(text: str) -> str:
    """Role codes in a core message ("role calibration_after", "a decay take") in the role picker's words."""
    codes = "|".join(sorted(map(re.escape, ROLE_NAMES), key=len, reverse=True))
    text = re.sub(rf"\brole ({codes})\b", lambda m: f"kind '{ROLE_NAMES[m.group(1)]}'", text)
    return re.sub(rf"\b({codes}) takes?\b", lambda m: f"'{ROLE_NAMES[m.group(1)]}' take", text)


def assessment_of(test: TestRecord) -> Assessment | None:
    """The test's assessment with takes named as people know them; None (after a message) when it
    cannot be computed yet. Errors name the take, never its storage name."""
    still = missing_words(test)
    if still:
        st.warning(f"Results need at least one take of each kind. Still needed: {still}.")
        return None
    progress.wait_until_measured(test.id)      # the background measurer may still be on this test's takes
    names = take_names_of(test)
    try:
        assessment = cached.assessment(cached.store().survey_for_test(test.id))
    except FieldTLError as exc:
        st.warning(md(plain_roles(renamed_text(str(exc), names))))
        return None
    return client_assessment(renamed_assessment(assessment, names))


def heading(project: Project, test: TestRecord) -> None:
    st.caption(f"{md(project.name)} · {md(test.setup.title)} · {test.setup.test_type}")


def cautions() -> None:
    st.divider()
    for text in CAUTIONS:
        st.caption(f"⚠️ {text}")
