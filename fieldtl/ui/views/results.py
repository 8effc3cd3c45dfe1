"""Results: what to redo before leaving the site, the verdict, single numbers, chart and band table."""

import pandas as pd
import streamlit as st

from fieldtl.naming import grouped_by_take
from fieldtl.report.client import compared_value
from fieldtl.report.export import band_columns
from fieldtl.ui import chart, common, gate
from fieldtl.ui.verdict_text import finding_line, site_line, site_list

gate.require_access()
with common.fenced():
    project, test = common.require_test()
    st.title("Results")
    common.heading(project, test)
    assessment = common.assessment_of(test)
    if assessment is None:
        st.page_link("views/takes.py", label="Go to Takes", icon="🎙️")
        common.cautions()
        st.stop()

    titles = list(common.take_names_of(test).values())
    groups = grouped_by_take(assessment.findings, titles)
    check_codes = {f.code for f in assessment.construction_check.findings} if assessment.construction_check else set()
    to_redo = site_list(groups, check_codes)
    st.subheader("Before you leave the site")
    if to_redo:
        for group in to_redo:
            st.markdown(f"- {site_line(group)}")
    else:
        st.success("Done: nothing to re-record. The checks found no take to redo.")

    verdict = assessment.verdict
    st.subheader("Verdict")
    if verdict is not None:
        show = {"pass": st.success, "fail": st.error, "undecided": st.warning}[verdict.outcome]
        bound = {"lower": " (a lower bound)", "upper": " (an upper bound)"}.get(verdict.bound, "")
        formed = compared_value(assessment)
        show(f"**{verdict.outcome.upper()}** against {common.md(verdict.requirement)}: compared value "
             f"{common.md(formed)}{bound}, expanded uncertainty U = {verdict.expanded_uncertainty_db:.1f} dB")
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
                     "C or CI": "" if first is None else f"{first:+d}", "Ctr": "" if second is None else f"{second:+d}",
                     "bound": {"lower": "at least", "upper": "at most"}.get(rating.bound or "", "")})
    st.table(pd.DataFrame(rows).set_index("Rating"))   # a plain table: five short columns fit a phone
    if verdict is not None:
        st.caption(f"The verdict compares {common.md(compared_value(assessment))}, from this table: the whole-dB "
                   "rating plus the whole-dB term, as requirements are written.")
    st.caption(f"Uncertainty table values: {common.md(assessment.uncertainty_note)}")

    st.subheader("Chart")
    figure = chart.rating_chart(assessment)
    if figure is not None:
        st.altair_chart(figure, width="stretch")
        st.caption("Line with points: measured; dashed: the shifted reference curve; orange bars: the "
                   "unfavourable deviations that set the rating; blue-grey whiskers: ± the ISO 12999-1 standard "
                   "uncertainty of each band, as named in the legend.")

    st.subheader("Band values")
    columns = band_columns(assessment)
    shown = ["D", "DnT", "R_prime"] if assessment.test_type == "airborne" else ["L_prime_n", "L_prime_nT"]
    table = {"Hz": [f"{f:g}" for f in assessment.result.nominal_hz]}
    for name in shown:
        if name in columns:
            table[common.column_title(name)] = ["" if v is None else f"{v:.1f}" for v in columns[name].rounded(1)]
    table["limit"] = ["bound" if flag else "" for flag in assessment.result.limited]
    st.table(pd.DataFrame(table).set_index("Hz"))    # every band shown: nothing to scroll on a phone

    with st.expander(f"All findings ({len(assessment.findings)}), per take and kind"):
        if not groups:
            st.write("No quality findings.")
        for group in groups:
            st.markdown(f"- {finding_line(group, with_action=True)}")
    common.cautions()
