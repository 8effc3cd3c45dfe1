"""While the background measurer still analyses a test's takes: a progress bar in place of what needs them.

The page above the bar is already shown; the bar advances as takes are measured (Streamlit sends
each update while the script runs) and goes when the test is ready. Leaving the page stops the
wait, not the measuring.
"""

from __future__ import annotations

import time
from collections.abc import Callable

import streamlit as st

from fieldtl.ui import cached

POLL_S = 0.2


def wait_until_measured(test_id: int) -> None:
    """Return once the test's takes are measured, showing how far the measuring is meanwhile: first the
    warm-up child of `fieldtl app` (fieldtl.warmup), then this process's background measurer."""
    watch = cached.warm_up()
    if watch is not None:
        _show_while(lambda: watch.pending(test_id))
        if watch.measured(test_id):
            return                  # in the store: the page reads it (this process's measurer only re-reads it)
    measurer = cached.measurer()
    if measurer is None:            # the child ended without this test: the page measures it
        return
    measurer.prioritise(test_id)
    _show_while(lambda: measurer.pending(test_id))


def _show_while(pending: Callable[[], tuple[int, int] | None]) -> None:
    status = pending()
    if status is None:
        return
    bar = st.empty()
    while status is not None:
        done, total = status
        bar.progress(done / total if total else 0.0,
                     text=f"Analysing the recordings: {done} of {total or '…'} done; the results follow here.")
        time.sleep(POLL_S)
        status = pending()
    bar.empty()
