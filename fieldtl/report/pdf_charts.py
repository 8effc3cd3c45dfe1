"""Charts placed in the reports: a matplotlib figure as a centred PNG under its heading, the test's
chart and the construction check (prediction beside the field result)."""

from __future__ import annotations

import dataclasses
import io

from fpdf import FPDF
from matplotlib.figure import Figure

from fieldtl.assess import Assessment
from fieldtl.report.pdf_page import heading, paragraph
from fieldtl.report.plot import assessment_figure, construction_figure

_CHART_WIDTH_MM = 150.0


def chart(pdf: FPDF, assessment: Assessment) -> None:
    if not assessment.ratings:
        heading(pdf, "Chart")
        paragraph(pdf, "No single number could be formed, so there is no chart.")
        return
    # The title block already names the test; drawing the chart without it also keeps user text
    # away from matplotlib's mathtext parser (a title like "$\frac$" would fail to render).
    figure(pdf, "Chart", assessment_figure(dataclasses.replace(assessment, title="")))


def figure(pdf: FPDF, title: str, drawn: Figure) -> None:
    buffer = io.BytesIO()
    drawn.savefig(buffer, format="png", dpi=200)
    width_in, height_in = drawn.get_size_inches()
    height_mm = _CHART_WIDTH_MM * height_in / width_in
    heading(pdf, title, keep_with_mm=height_mm)
    pdf.image(buffer, x=(pdf.w - _CHART_WIDTH_MM) / 2, w=_CHART_WIDTH_MM, h=height_mm)


def construction_check(pdf: FPDF, assessment: Assessment) -> None:
    """Predicted R of the declared build-up beside the measured R' (only when one was declared)."""
    check = assessment.construction_check
    if check is None:
        return
    measured = "could not be rated" if check.measured_rating is None else \
        f"R'w = {check.measured_rating.single_number_db} dB"
    figure(pdf, "Construction check", construction_figure(check))
    paragraph(pdf, f"The declared build-up predicts Rw = {check.predicted_rating.single_number_db} dB; the field "
                   f"measurement {measured}; mean band gap {check.mean_gap_db:+.1f} dB (prediction minus field). "
                   "The prediction is a simple model of the element alone (no flanking); its findings are "
                   "listed with the other findings.", size=8.5)
