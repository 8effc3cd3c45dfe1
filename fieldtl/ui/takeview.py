"""The Takes page's list: what each take showed, with use, channel, correction, removal and undo."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import streamlit as st

from fieldtl.checklist import background_level_db, describe_take
from fieldtl.errors import FieldTLError
from fieldtl.naming import renamed_text
from fieldtl.store import Store, TakeRecord, TestRecord
from fieldtl.ui import cached, common, progress, takelist


def draw(store: Store, test: TestRecord, takes: Sequence[TakeRecord], titles: Mapping[int, str],
         names: Mapping[str, str]) -> None:
    setup = test.setup
    included = [t for t in takes if not t.excluded]
    st.subheader(f"Takes so far ({len(included)} used, {len(takes) - len(included)} left out)")
    pending = takelist.removed()
    if pending:
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
    progress.wait_until_measured(test.id)
    with st.spinner("Reading the takes…"):
        measured = cached.measured_takes(test.id)      # the store's calibration rule, each take measured once
    if measured.calibration_problem:
        st.error(common.md(common.plain_roles(renamed_text(measured.calibration_problem, names))))
    offset_db = measured.offset_db
    calibrated = measured.calibration is not None
    summaries: dict[int, object] = {take_id: FieldTLError(o.problem) if o.summary is None else (o.summary, o.findings)
                                    for take_id, o in measured.outcomes.items()}
    background = background_level_db([summaries[t.id][0] for t in included if isinstance(summaries.get(t.id), tuple)])
    for take in reversed(takes):
        with st.container(border=True):
            left_out = " · **left out**" if take.excluded else ""
            st.write(f"**{common.md(titles[take.id])}**{left_out}")
            result = summaries.get(take.id)
            if isinstance(result, FieldTLError):
                st.error(common.md(renamed_text(str(result), names)))
            elif result is not None:
                st.caption(common.md(describe_take(result[0], result[1], background_db=background,
                                                   calibrated=calibrated)))
            elif calibrated and take.role == "calibration" and not take.excluded:
                st.caption(f"calibration offset {offset_db:.2f} dB ({setup.calibrator_db:g} dB calibrator)")
            keep = st.toggle("Use this take", value=not take.excluded, key=f"use-take-{take.id}")
            if keep == take.excluded:
                store.set_take_excluded(take.id, not keep)
                st.rerun()
            with st.expander("Correct, change channel or remove"):
                takelist.correction_form(store, take, setup.test_type)
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
                    pending[take.id] = take.excluded
                    store.set_take_excluded(take.id, True)
                    st.rerun()
