"""Session State keys of our own and typed accessors (never widget keys: those vanish with widgets).

The open project and test also live in the page address (``?project=3&test=7``), so a reload or
a shared link opens the same place, and in a small file beside the store naming the last test
opened, so a fresh visit opens it. :func:`restore` reads both; it runs only after the access gate.
"""

from __future__ import annotations

import json
import logging
import os
from collections.abc import Callable

import streamlit as st

from fieldtl.store import default_data_dir

PROJECT_ID = "fieldtl.project_id"
TEST_ID = "fieldtl.test_id"
ACCESS_OK = "fieldtl.access_ok"
RESTORED = "fieldtl.place_restored"                 # the address or last test was read this session
STORED_UPLOADS = "fieldtl.stored_upload_ids"       # uploader file ids already written to the store
STORED_RECORDINGS = "fieldtl.stored_recording_ids" # recorder take ids already written to the store
PROJECT_PARAM, TEST_PARAM = "project", "test"      # the page address's query parameters
LAST_TEST_FILE = "last-test.json"                  # beside the store: {"project": id, "test": id}
_ID_DIGITS = 12                                    # an id in the address: at most this many digits

_LOG = logging.getLogger("fieldtl.ui")


def project_id() -> int | None:
    return st.session_state.get(PROJECT_ID)


def test_id() -> int | None:
    return st.session_state.get(TEST_ID)


def open_project(project_id_: int | None) -> None:
    if st.session_state.get(PROJECT_ID) != project_id_:
        st.session_state[TEST_ID] = None
    st.session_state[PROJECT_ID] = project_id_
    write_address()


def open_test(test_id_: int | None) -> None:
    changed = st.session_state.get(TEST_ID) != test_id_
    st.session_state[TEST_ID] = test_id_
    write_address()
    if changed and test_id_ is not None and project_id() is not None:
        _remember_last(project_id(), test_id_)


def remembered(key: str) -> set[str]:
    """A set kept for the session (ids of uploads and recordings already stored)."""
    return st.session_state.setdefault(key, set())


def write_address() -> None:
    """Put the open project and test into the page address (only when it differs)."""
    wanted = {k: str(v) for k, v in ((PROJECT_PARAM, project_id()), (TEST_PARAM, test_id())) if v is not None}
    if st.query_params.to_dict() != wanted:
        st.query_params.from_dict(wanted)


def _id_param(name: str) -> int | None:
    text = st.query_params.get(name)
    if text is None or not text.isdigit() or len(text) > _ID_DIGITS:
        return None
    return int(text)


def restore(test_exists: Callable[[int, int | None], bool]) -> None:
    """On a session's first run past the gate, open the project and test the address names (or,
    without one, the last test used); on every run, put the open ones into the address.

    ``test_exists(project_id, test_id)`` says whether the project (and the test, unless None) is
    in the store; an address naming anything else is ignored. Call only after the access gate.
    """
    if st.session_state.get(RESTORED):       # later runs: the session is the truth, the address follows it
        write_address()
        return
    st.session_state[RESTORED] = True
    wanted_project, wanted_test = _id_param(PROJECT_PARAM), _id_param(TEST_PARAM)
    if wanted_project is None and project_id() is None:
        wanted_project, wanted_test = _last_used()
    if wanted_project is not None and (wanted_project, wanted_test) != (project_id(), test_id()):
        if test_exists(wanted_project, wanted_test):
            st.session_state[PROJECT_ID], st.session_state[TEST_ID] = wanted_project, wanted_test
        elif test_exists(wanted_project, None):
            st.session_state[PROJECT_ID], st.session_state[TEST_ID] = wanted_project, None
    write_address()


def _last_used() -> tuple[int | None, int | None]:
    try:
        data = json.loads(open(default_data_dir() / LAST_TEST_FILE, encoding="utf-8").read(1000))
        project, test = data["project"], data["test"]
    except (OSError, ValueError, KeyError, TypeError):
        return None, None
    if not all(isinstance(v, int) and not isinstance(v, bool) and v > 0 for v in (project, test)):
        return None, None
    return project, test


def _remember_last(project: int, test: int) -> None:
    """Write the last test used beside the store (atomically); a failure only loses this convenience."""
    path = default_data_dir() / LAST_TEST_FILE
    partial = path.with_name(path.name + f".{os.getpid()}.tmp")
    try:
        partial.write_text(json.dumps({"project": project, "test": test}), encoding="utf-8")
        os.replace(partial, path)
    except OSError:
        _LOG.warning("could not remember the last test used in %s", path.parent)
        partial.unlink(missing_ok=True)
