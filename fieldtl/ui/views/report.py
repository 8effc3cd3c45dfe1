"""Report and export: the PDF report, and every band value as CSV and JSON."""

import dataclasses

import streamlit as st

from fieldtl.errors import FieldTLError
from fieldtl.report.export import assessment_to_csv, assessment_to_json, json_text
from fieldtl.ui import cached, common, gate, review, versions

REPORT_SETTING = "report_details"

gate.require_access()
with common.fenced():
    store = cached.store()
    project, test = common.require_test()
    st.title("Report and export")
    common.heading(project, test)
    assessment = common.assessment_of(test)          # takes named by file name and positions throughout
    if assessment is None:
        st.page_link("views/takes.py", label="Go to Takes", icon="🎙️")
        common.cautions()
        st.stop()

    saved = test.setup.settings.get(REPORT_SETTING, {})
    drawn_version = versions.drawn(test)          # a stale edit of the details is refused
    with st.form("report-details"):
        organisation = common.text_field("Organisation", saved.get("organisation", ""), limit=common.NAME_CHARS)
        engineer = common.text_field("Engineer / operator", saved.get("engineer", project.engineer),
                                     limit=common.NAME_CHARS)
        measurement_date = common.text_field("Date of measurement", saved.get("measurement_date", ""),
                                             limit=common.DATE_CHARS)
        instruments = common.text_field("Instruments (one per line, with serial numbers)", saved.get("instruments", ""),
                                        limit=common.NOTE_CHARS, area=True)
        positions = common.text_field("Positions and conditions", saved.get("positions_description", ""),
                                      limit=common.NOTE_CHARS, area=True)
        notes = common.text_field("Notes", saved.get("notes", ""), limit=common.NOTE_CHARS, area=True)
        if st.form_submit_button("Save details"):
            details = {"organisation": organisation, "engineer": engineer, "measurement_date": measurement_date,
                       "instruments": instruments, "positions_description": positions, "notes": notes}
            try:
                test = store.update_test(test.id, dataclasses.replace(
                    test.setup, settings={**test.setup.settings, REPORT_SETTING: details}),
                    expected_updated_at=drawn_version)
                versions.forget(test.id)
            except FieldTLError as exc:
                st.error(common.md(exc))
            else:
                saved = details
                st.success("Details saved with the test.")

    stem = f"fieldtl-test-{test.id}"
    if st.button("Make the PDF report"):
        # imported here: the PDF writer loads matplotlib, which the page itself does not need
        from fieldtl.report.pdf import ReportDetails, assessment_to_pdf

        details = ReportDetails(project=project.name, client=project.client, site_address=project.address,
                                engineer=saved.get("engineer", project.engineer),
                                organisation=saved.get("organisation", ""),
                                measurement_date=saved.get("measurement_date", ""),
                                instruments=saved.get("instruments", ""),
                                positions_description=saved.get("positions_description", ""),
                                notes=saved.get("notes", ""))
        with st.spinner("Writing the report…"):
            st.session_state["fieldtl.report_pdf"] = (test.id, assessment_to_pdf(assessment, details=details))
    made = st.session_state.get("fieldtl.report_pdf")
    if made is not None and made[0] == test.id:
        common.download_button("Download the PDF report", made[1], file_name=f"{stem}.pdf", mime="application/pdf")
    common.download_button("Download band values (CSV)", assessment_to_csv(assessment), file_name=f"{stem}.csv",
                           mime="text/csv")
    common.download_button("Download everything (JSON)", json_text(assessment_to_json(assessment)),
                           file_name=f"{stem}.json", mime="application/json")
    review.draw(test.id)          # team server only: sign-offs and who changed what
    common.cautions()
