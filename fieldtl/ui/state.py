"""Session State keys of our own and typed accessors (never widget keys: those vanish with widgets)."""

from __future__ import annotations

import streamlit as st

PROJECT_ID = "fieldtl.project_id"
TEST_ID = "fieldtl.test_id"
ACCESS_OK = "fieldtl.access_ok"
STORED_UPLOADS = "fieldtl.stored_upload_ids"       # uploader file ids already written to the store
STORED_RECORDINGS = "fieldtl.stored_recording_ids" # recorder take ids already written to the store


def project_id() -> int | None:
    return st.session_state.get(PROJECT_ID)


def test_id() -> int | None:
    return st.session_state.get(TEST_ID)


def open_project(project_id_: int | None) -> None:
    if st.session_state.get(PROJECT_ID) != project_id_:
        st.session_state[TEST_ID] = None
    st.session_state[PROJECT_ID] = project_id_


def open_test(test_id_: int | None) -> None:
    st.session_state[TEST_ID] = test_id_


def remembered(key: str) -> set[str]:
    """A set kept for the session (ids of uploads and recordings already stored)."""
    return st.session_state.setdefault(key, set())
