"""Page 1 of the test report: the title block, the verdict and the cautions box (the single-number
table between them is in :mod:`fieldtl.report.pdf_tables`). The noise-record report uses the same
cautions box."""

from __future__ import annotations

from typing import TYPE_CHECKING

from fpdf import FPDF, XPos, YPos

from fieldtl.assess import Assessment
from fieldtl.report.client import compared_value
from fieldtl.report.pdf_method import TEST_TYPES
from fieldtl.report.pdf_page import FONT, field, heading, paragraph, safe

if TYPE_CHECKING:
    from fieldtl.report.pdf import ReportDetails

_CAUTION_FILL = (242, 242, 242)


def title_block(pdf: FPDF, assessment: Assessment, details: ReportDetails) -> None:
    pdf.set_text_color(27, 79, 114)
    paragraph(pdf, "Field sound insulation test report", size=10, bold=True)
    pdf.set_text_color(0, 0, 0)
    paragraph(pdf, assessment.title or "(untitled test)", size=16, bold=True, height_mm=7.5)
    pdf.ln(1.5)
    for label, value in (("Project", details.project), ("Client", details.client),
                         ("Site address", details.site_address), ("Date of measurement", details.measurement_date),
                         ("Engineer / operator", details.engineer), ("Organisation", details.organisation)):
        field(pdf, label, value)
    field(pdf, "Test", TEST_TYPES[assessment.test_type])


def cautions_box(pdf: FPDF, cautions: tuple[str, ...]) -> None:
    pdf.ln(2.5)
    pdf.set_fill_color(*_CAUTION_FILL)
    pdf.set_font(FONT, "B", 9)
    pdf.multi_cell(0, 5, "Cautions", fill=True, padding=(1, 2, 0, 2), align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)
    pdf.set_font(FONT, "", 8.5)
    for caution in cautions:
        pdf.multi_cell(0, 4.2, safe(f"• {caution}"), fill=True, padding=(0.5, 2, 0.5, 2),
                       align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)


def verdict_block(pdf: FPDF, assessment: Assessment) -> None:
    heading(pdf, "Verdict")
    verdict = assessment.verdict
    if verdict is None:
        missing = next((f for f in assessment.findings if f.code == "verdict_not_possible"), None)
        paragraph(pdf, f"No verdict: {missing.message}." if missing else "No requirement entered, so no verdict.",
                  size=10, bold=True)
        return
    bound = {"lower": ", a lower bound", "upper": ", an upper bound"}.get(verdict.bound, "")
    paragraph(pdf, f"{verdict.outcome.upper()} against the requirement {verdict.requirement} dB "
                   f"(value {verdict.value_db:.0f} dB{bound})", size=11, bold=True, height_mm=6)
    paragraph(pdf, f"Compared value: {compared_value(assessment)}, the whole-dB rating plus the whole-dB term as "
                   f"the single-number table below shows them. Expanded uncertainty U = "
                   f"{verdict.expanded_uncertainty_db:.1f} dB (k = {verdict.coverage_factor:.2f}, ISO 12999-1). "
                   "How the decision was made is set out under Method.", size=9)
