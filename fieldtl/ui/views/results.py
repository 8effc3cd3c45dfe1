"""Results: verdict, single numbers, chart, band table and what to redo, readable on a phone."""

import pandas as pd
import streamlit as st

from fieldtl.errors import FieldTLError
from fieldtl.report.export import band_columns, grouped_findings
from fieldtl.report.plot import assessment_figure
from fieldtl.ui import cached, common, gate

gate.require_access()
with common.fenced():
    store = cached.store()
    project, test = common.require_test()
    st.title("Results")
    common.heading(project, test)
    try:
        survey = store.survey_for_test(test.id)
        assessment = cached.assessment(survey)
    except FieldTLError as exc:
        st.warning(common.md(exc))
        st.page_link("views/takes.py", label="Go to Takes", icon="🎙️")
        common.cautions()
        st.stop()

    verdict = assessment.verdict
    if verdict is not None:
        show = {"pass": st.success, "fail": st.error, "undecided": st.warning}[verdict.outcome]
        bound = {"lower": " (lower bound)", "upper": " (upper bound)"}.get(verdict.bound, "")
        show(f"**{verdict.outcome.upper()}** · {common.md(verdict.requirement)} · measured "
             f"{verdict.value_db:.1f} dB{bound}, U = {verdict.expanded_uncertainty_db:.1f} dB")
        with st.expander("How this was decided"):
            st.write(common.md(verdict.statement))
    else:
        st.info("No verdict: enter a requirement in Test set-up (or see the findings below).")

    st.subheader("Single numbers")
    rows = []
    for rating in assessment.ratings:
        terms = rating.adaptation_terms_db
        first, second = terms.get("C", terms.get("CI")), terms.get("Ctr")
        rows.append({"Rating": rating.descriptor, "dB": rating.single_number_db,
                     "C / CI": "" if first is None else f"{first:+d}", "Ctr": "" if second is None else f"{second:+d}",
                     "bound": {"lower": "≥", "upper": "≤"}.get(rating.bound or "", "")})
    st.table(pd.DataFrame(rows).set_index("Rating"))   # a plain table: five short columns fit a phone
    st.caption(f"Uncertainty table values: {common.md(assessment.uncertainty_note)}")

    st.subheader("Chart")
    st.pyplot(assessment_figure(assessment))

    st.subheader("Band values")
    columns = band_columns(assessment)
    shown = ["D", "DnT", "R_prime"] if assessment.test_type == "airborne" else ["L_prime_n", "L_prime_nT"]
    table = {"Hz": [f"{f:g}" for f in assessment.result.nominal_hz]}
    for name in shown:
        if name in columns:
            table[name.replace("_prime", "'")] = list(columns[name].rounded(1))
    table["limit"] = ["bound" if flag else "" for flag in assessment.result.limited]
    st.dataframe(pd.DataFrame(table), hide_index=True, height=36 * (len(table["Hz"]) + 1))

    st.subheader("What to check or redo")
    groups = grouped_findings(assessment.findings)
    if not groups:
        st.success("No quality findings.")
    for finding, count, bands in groups:
        icon = {"error": "🛑", "warning": "⚠️", "info": "ℹ️"}.get(finding.severity, "•")
        more = f" (+{count - 1} more bands)" if count > 1 else ""
        with st.expander(f"{icon} {finding.code.replace('_', ' ')}{more}"):
            st.write(common.md(finding.message))
            if finding.action:
                st.write(f"**What to do:** {common.md(finding.action)}")
    common.cautions()
