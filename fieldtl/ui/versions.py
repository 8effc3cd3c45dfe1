"""Optimistic checks for the app's settings forms: the version of a test a session last drew.

A form is drawn in one script run and submitted in a later one; the test may have been changed
by someone else in between (another tester on a team server, another browser tab). The page
passes the version it drew (the test's updated_at) to ``Store.update_test``, which refuses a
stale edit with a clear message instead of overwriting the other change.
"""

from __future__ import annotations

import streamlit as st

from fieldtl.store import TestRecord

_PREFIX = "fieldtl.drawn_version."      # our own Session State keys, one per test


def drawn(test: TestRecord) -> str:
    """The test's version when this session last drew it (now, on a first draw); remembers this run's."""
    key = f"{_PREFIX}{test.id}"
    before = st.session_state.get(key, test.updated_at)
    st.session_state[key] = test.updated_at
    return before


def forget(test_id: int) -> None:
    """After this session's own save: the next draw starts from the saved version."""
    st.session_state.pop(f"{_PREFIX}{test_id}", None)
