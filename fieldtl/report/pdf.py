"""Assessment → a printable PDF report for a client (fpdf2), usually three or four A4 pages.

Page 1: the test, the verdict with the value it compares and its uncertainty, the single numbers
and the cautions. Then the chart, the per-band table, the findings, the construction check, the
test details and the method (standards, clauses and rules applied). The cautions are repeated in
small type in every page footer. The core's texts carry no internal notes; a value the tool
assumed is marked (:func:`fieldtl.findings.unconfirmed`), and the method section says once what
the mark means (:func:`fieldtl.report.client.client_assessment`).

Every string reaches the page as plain text (:mod:`fieldtl.report.pdf_page`). The sections are
drawn by :mod:`~fieldtl.report.pdf_front` (page 1), :mod:`~fieldtl.report.pdf_tables`,
:mod:`~fieldtl.report.pdf_charts` and :mod:`~fieldtl.report.pdf_method`.
"""

from __future__ import annotations

from dataclasses import dataclass

from fieldtl import __version__
from fieldtl.assess import Assessment
from fieldtl.errors import InputError
from fieldtl.report.client import client_assessment
from fieldtl.report.pdf_charts import chart, construction_check
from fieldtl.report.pdf_front import cautions_box, title_block, verdict_block
from fieldtl.report.pdf_method import details_section, method
from fieldtl.report.pdf_page import ReportPdf, paragraph, safe
from fieldtl.report.pdf_tables import band_table, findings_table, single_numbers


@dataclass(frozen=True, slots=True)
class ReportDetails:
    """What the calculator does not know and the report prints: free text typed by the user.

    ``instruments`` is one line per instrument (microphone, calibrator, ... with serial numbers);
    a single string is split at its line breaks. Nothing here is checked for plausibility.
    """

    project: str = ""
    client: str = ""
    site_address: str = ""
    engineer: str = ""
    organisation: str = ""
    measurement_date: str = ""          # as the user wrote it, e.g. "2025-03-14"
    instruments: tuple[str, ...] = ()
    positions_description: str = ""
    notes: str = ""

    def __post_init__(self) -> None:
        lines = self.instruments.splitlines() if isinstance(self.instruments, str) else self.instruments
        object.__setattr__(self, "instruments", tuple(lines))
        for name in ("project", "client", "site_address", "engineer", "organisation", "measurement_date",
                     "positions_description", "notes"):
            if not isinstance(getattr(self, name), str):
                raise InputError(f"report details: {name} must be text, got {type(getattr(self, name)).__name__}")
        if not all(isinstance(line, str) for line in self.instruments):
            raise InputError("report details: instruments must be lines of text")


def assessment_to_pdf(assessment: Assessment, *, details: ReportDetails | None = None) -> bytes:
    """The PDF report of one test, as bytes. Does not compute anything and does not write files."""
    details = details or ReportDetails()
    assessment = client_assessment(assessment)     # the unconfirmed mark explained once (method section)
    pdf = ReportPdf(assessment.cautions)
    pdf.set_title(safe(assessment.title))
    pdf.set_creator(f"fieldtl {__version__}")
    pdf.start()
    title_block(pdf, assessment, details)       # page 1: the test, verdict, single numbers, cautions
    verdict_block(pdf, assessment)
    single_numbers(pdf, assessment)
    cautions_box(pdf, assessment.cautions)
    pdf.add_page()
    chart(pdf, assessment)
    band_table(pdf, assessment)
    findings_table(pdf, assessment)
    construction_check(pdf, assessment)
    details_section(pdf, assessment, details)
    method(pdf, assessment)
    pdf.ln(3)
    paragraph(pdf, f"Produced with fieldtl {__version__}. End of report.", size=8)
    return bytes(pdf.output())
