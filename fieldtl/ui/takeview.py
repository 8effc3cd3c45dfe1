"""The Takes page's list: one light, read-only card per take (what it is, used or left out, what it
showed), and one place to change a chosen take (use, correct, channel, remove with undo).

A card is a bordered container with one block of markdown, no widgets: a phone draws thirty takes
at once. The widgets exist once, for the take chosen in "Take to change" (the newest by default;
a take just stored is chosen for it).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import streamlit as st

from fieldtl.checklist import background_level_db, describe_take
from fieldtl.errors import FieldTLError
from fieldtl.naming import renamed_text
from fieldtl.store import Store, TakeRecord, TestRecord
from fieldtl.testrun import TestTakes
from fieldtl.ui import cached, common, progress, takelist

CHOSEN = "edit-take"            # the selectbox of the take to change (its value: a take id)
CARD_KEY = "take-card-"         # + take id: each card's container (the page's CSS class st-key-take-card-<id>)


def choose(take_id: int) -> None:
    """Make ``take_id`` the take to change (call before the list is drawn in this run)."""
    st.session_state[CHOSEN] = take_id


def draw(store: Store, test: TestRecord, takes: Sequence[TakeRecord], titles: Mapping[int, str],
         names: Mapping[str, str], *, editable: bool = True) -> None:
    """The takes as cards, newest first, and (``editable``) the one place to change the take chosen."""
    included = [t for t in takes if not t.excluded]
    st.subheader(f"Takes so far ({len(included)} used, {len(takes) - len(included)} left out)")
    # What comes and goes (undo lines, the bar, a calibration problem) sits in containers that are
    # always drawn, so the place to change a take keeps its position and stays open after a change.
    with st.container():
        _undo_rows(store, test)
    with st.container():
        progress.wait_until_measured(test.id)
        with st.spinner("Reading the takes…"):
            measured = cached.measured_takes(test.id)      # the store's calibration rule, each take measured once
        if measured.calibration_problem:
            st.error(common.md(common.plain_roles(renamed_text(measured.calibration_problem, names))))
    if takes and editable:
        _change_area(store, test, takes, titles, names)
    lines = _card_lines(test, takes, included, measured, titles, names)
    for take in reversed(takes):                         # the newest first
        with st.container(border=True, key=f"{CARD_KEY}{take.id}"):
            text, problem = lines[take.id]
            st.markdown(text)
            if problem:
                st.error(problem)


def _undo_rows(store: Store, test: TestRecord) -> None:
    pending = takelist.removed()
    if not pending:
        return
    gone = {t.id: t for t in store.list_takes(test.id) if t.id in pending}
    for take_id, was_excluded in list(pending.items()):
        take = gone.get(take_id)
        if take is None:
            pending.pop(take_id)
            continue
        left, right = st.columns([3, 1], vertical_alignment="center")
        left.write(f"Removed {common.md(take.original_name)}; it is deleted when you leave this page.")
        if right.button("Undo", key=f"undo-remove-{take_id}"):
            store.set_take_excluded(take_id, was_excluded)
            pending.pop(take_id)
            st.rerun()


def _card_lines(test: TestRecord, takes: Sequence[TakeRecord], included: Sequence[TakeRecord],
                measured: TestTakes, titles: Mapping[int, str], names: Mapping[str, str]) -> dict[int, tuple[str, str]]:
    """Take id → (the card's markdown, a one-line problem or ""): title, used or left out, findings."""
    setup = test.setup
    calibrated = measured.calibration is not None
    outcomes = measured.outcomes
    background = background_level_db([outcomes[t.id].summary for t in included
                                      if t.id in outcomes and outcomes[t.id].summary is not None])
    lines = {}
    for take in takes:
        use = "**left out**" if take.excluded else "used"
        kind = "recorded" if take.source == "recorder" else "uploaded"
        head = f"**{common.md(titles[take.id])}**  \n{use} · channel {take.channel + 1} · {kind}"
        outcome, shown, problem = outcomes.get(take.id), "", ""
        if outcome is not None and outcome.summary is None:
            problem = common.md(renamed_text(outcome.problem or "", names))
        elif outcome is not None:
            shown = describe_take(outcome.summary, outcome.findings, background_db=background, calibrated=calibrated)
        elif calibrated and take.role == "calibration" and not take.excluded:
            shown = f"calibration offset {measured.offset_db:.2f} dB ({setup.calibrator_db:g} dB calibrator)"
        lines[take.id] = (head + (f"  \n:small[{common.md(shown)}]" if shown else ""), problem)
    return lines


def _change_area(store: Store, test: TestRecord, takes: Sequence[TakeRecord], titles: Mapping[int, str],
                 names: Mapping[str, str]) -> None:
    """Use or leave out, correct, change the channel of, or remove the take chosen by file name."""
    by_id = {t.id: t for t in takes}
    if st.session_state.get(CHOSEN) not in by_id:
        st.session_state.pop(CHOSEN, None)              # removed (or another test's): the newest instead
    with st.expander("Use, correct, change channel or remove a take", key="change-take"):
        take_id = st.selectbox("Take to change", [t.id for t in reversed(takes)], key=CHOSEN,
                               format_func=lambda i: titles.get(i, str(i)))
        take = by_id[take_id]
        keep = st.toggle("Use this take", value=not take.excluded, key=f"use-take-{take.id}")
        if keep == take.excluded:
            store.set_take_excluded(take.id, not keep)
            st.rerun()
        takelist.correction_form(store, take, test.setup.test_type)
        if take.source == "upload":
            chosen = int(st.number_input("Channel", min_value=1, max_value=16, value=take.channel + 1,
                                         key=f"channel-take-{take.id}")) - 1
            if chosen != take.channel:
                try:
                    store.set_take_channel(take.id, chosen)
                except FieldTLError as exc:
                    st.error(common.md(renamed_text(str(exc), names)))
                else:
                    st.rerun()
        if st.button("Remove this take", key=f"remove-take-{take.id}"):
            takelist.removed()[take.id] = take.excluded
            store.set_take_excluded(take.id, True)
            st.rerun()
