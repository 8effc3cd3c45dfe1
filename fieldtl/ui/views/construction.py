"""Construction check: what the declared wall or floor should give, beside what was measured."""

import pandas as pd
import streamlit as st

from fieldtl.construction.predict import predict
from fieldtl.errors import FieldTLError
from fieldtl.report.client import EXPLANATION, UNCONFIRMED_MARK
from fieldtl.store import declared_construction
from fieldtl.ui import cached, chart, common, gate, progress


def _one_decimal(spectrum) -> list[str]:
    return ["" if v is None else f"{v:.1f}" for v in spectrum.rounded(1)]


gate.require_access()
with common.fenced():
    store = cached.store()
    project, test = common.require_test()
    st.title("Construction check")
    common.heading(project, test)
    try:
        construction = declared_construction(test.setup, "declared build-up")
    except FieldTLError as exc:
        st.error(common.md(exc))
        st.stop()
    if construction is None:
        st.info("Enter the declared build-up in Test set-up to compare it with the measurement.")
        st.page_link("views/setup.py", label="Go to Test set-up", icon="📐")
        common.cautions()
        st.stop()

    prediction = predict(construction)
    st.write(f"**{common.md(construction.name)}**")
    st.write(f"Predicted Rw {prediction.rating.single_number_db} dB; surface mass "
             f"{prediction.surface_mass_kg_m2:.0f} kg/m², critical frequency {prediction.critical_frequency_hz:.0f} Hz"
             + (f", mass-air-mass resonance {prediction.mass_air_mass_resonance_hz:.0f} Hz"
                if prediction.mass_air_mass_resonance_hz else "") + ".")
    st.caption(common.md(prediction.method))
    check = None
    progress.wait_until_measured(test.id)    # a bar while the background measurer is on this test's takes
    try:
        check = cached.assessment(store.survey_for_test(test.id)).construction_check
    except FieldTLError as exc:
        st.caption(f"No measured R' yet: {common.md(exc)}")
    if check is not None:
        st.altair_chart(chart.construction_chart(check), width="stretch")
        st.caption(f"Per band, {len(check.gap_db.nominal_hz)} bands (the table scrolls down):")
        st.dataframe(pd.DataFrame({"Hz": [f"{f:g}" for f in check.gap_db.nominal_hz],
                                   "R predicted": _one_decimal(check.predicted_db),
                                   "R' measured": _one_decimal(check.measured_db),
                                   "gap": _one_decimal(check.gap_db)}), hide_index=True)
        for finding in check.findings:
            st.warning(f"**Check**: {common.md(finding.message)} *What to do:* {common.md(finding.action)}")
    else:
        st.caption(f"Per band, {len(prediction.r_db.nominal_hz)} bands (the table scrolls down):")
        st.dataframe(pd.DataFrame({"Hz": [f"{f:g}" for f in prediction.r_db.nominal_hz],
                                   "R predicted": _one_decimal(prediction.r_db)}), hide_index=True)
    with st.expander("What the prediction leaves out"):
        for note in prediction.notes:
            st.write(f"- {common.md(note)}")
        if any(note.endswith(UNCONFIRMED_MARK) for note in prediction.notes):
            st.write(common.md(EXPLANATION))
    common.cautions()
