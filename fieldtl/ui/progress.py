"""While the background measurer still analyses a test's takes: a progress bar in place of what needs them.

The page above the bar is already shown; the bar advances as takes are measured (Streamlit sends
each update while the script runs) and goes when the test is ready. Leaving the page stops the
wait, not the measuring.
"""

from __future__ import annotations

import time

import streamlit as st

from fieldtl.ui import cached

POLL_S = 0.2


def wait_until_measured(test_id: int) -> None:
    """Return once the test's takes are measured, showing how far the measurer is meanwhile."""
    measurer = cached.measurer()
    measurer.prioritise(test_id)
    status = measurer.pending(test_id)
    if status is None:
        return
    bar = st.empty()
    while status is not None:
        done, total = status
        bar.progress(done / total if total else 0.0,
                     text=f"Analysing the recordings: {done} of {total or '…'} done; the results follow here.")
        time.sleep(POLL_S)
        status = measurer.pending(test_id)
    bar.empty()
