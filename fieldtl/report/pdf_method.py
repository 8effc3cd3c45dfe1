"""The test report's closing sections: the test details (geometry, construction, instruments,
positions) and the method (standards, clauses and rules applied, the decision, the uncertainty)."""

from __future__ import annotations

from collections import Counter
from typing import TYPE_CHECKING

from fpdf import FPDF

from fieldtl.assess import Assessment
from fieldtl.insulation import AirborneResult
from fieldtl.report.export import uncertainty_columns
from fieldtl.report.pdf_page import bullets, field, heading, number, paragraph

if TYPE_CHECKING:
    from fieldtl.report.pdf import ReportDetails

_STANDARDS = {
    "airborne": "ISO 16283-1:2014 + Amd 1:2017 (field airborne insulation), ISO 717-1:2020 (single numbers), "
                "ASTM E336 with ASTM E413 (NIC, NNIC, ASTC)",
    "impact": "ISO 16283-2 (field impact insulation), ISO 717-2:2020 (single numbers), "
              "ASTM E1007 with ASTM E989 (AIIC, NISR)",
}
TEST_TYPES = {"airborne": "Airborne sound insulation between rooms",
              "impact": "Impact sound insulation of a floor (tapping machine)"}
_ROLE_NAMES = {"source": "source-room", "receiving": "receiving-room", "source_corner": "source-room corner",
               "receiving_corner": "receiving-room corner", "impact": "receiving-room"}
_BAND_U_NAMES = {"u_iso12999": "ISO 12999-1:2020 table value", "u_spread": "this test's own spread"}


def details_section(pdf: FPDF, assessment: Assessment, details: ReportDetails) -> None:
    heading(pdf, "Test details")
    field(pdf, "Test", f"{TEST_TYPES[assessment.test_type]}; input {assessment.source_name}")
    field(pdf, "Geometry", _geometry_text(assessment))
    field(pdf, "Construction", assessment.construction or "")
    field(pdf, "Levels", "calibrated, dB re 20 µPa" if assessment.calibrated else
          "not calibrated: dB re full scale. Level differences and ratings hold only if every recording "
          "used the same gain; absolute levels (L1, L2, B) are not sound pressure levels")
    field(pdf, "Instruments", "\n".join(details.instruments))
    field(pdf, "Positions", "\n".join(_position_counts(assessment)))
    if details.positions_description.strip():
        field(pdf, "", details.positions_description)
    if details.notes.strip():
        field(pdf, "Notes", details.notes)


def _geometry_text(assessment: Assessment) -> str:
    used = assessment.result.separating_area_m2 if isinstance(assessment.result, AirborneResult) else None
    used_text = "" if used is None else f"S used for R' = {used:.2f} m²"
    geometry = assessment.geometry
    if geometry is None:
        return "; ".join(filter(None, [used_text, "entered room volumes and area not given to the report"]))
    parts = [f"V receiving = {number(geometry.receiving_volume_m3)} m³"]
    if geometry.source_volume_m3 is not None:
        parts.append(f"V source = {number(geometry.source_volume_m3)} m³")
    if geometry.separating_area_m2 is not None:
        parts.append(f"S entered = {number(geometry.separating_area_m2)} m²")
    if used_text:
        parts.append(used_text)
    if assessment.element_lab_rw_db is not None:
        parts.append(f"declared laboratory Rw of the element = {number(assessment.element_lab_rw_db)} dB")
    return "; ".join(parts)


def _position_counts(assessment: Assessment) -> list[str]:
    """Microphone positions per role and loudspeaker / tapping position, then background and decays."""
    impact = assessment.test_type == "impact"
    source_word = "Tapping-machine position" if impact else "Loudspeaker position"
    counts = Counter((t.speaker, t.role) for t in assessment.takes if t.role in _ROLE_NAMES)
    lines = []
    for speaker in sorted({s for s, _ in counts}):
        parts = [f"{counts[speaker, role]} {name}" for role, name in _ROLE_NAMES.items() if counts[speaker, role]]
        lines.append(f"{source_word} {speaker}: " + ", ".join(parts) + " microphone position(s)")
    by_role = Counter(t.role for t in assessment.takes)
    lines.append(f"Background: {by_role['background']} take(s); decays: {by_role['decay']}")
    return lines


def method(pdf: FPDF, assessment: Assessment) -> None:
    """Standards and clauses applied, the decision rule and the uncertainty, in words for a client."""
    heading(pdf, "Method")
    paragraph(pdf, f"Standards applied: {_STANDARDS[assessment.test_type]}. The single numbers are field "
                   "(apparent) values from a measurement in the building, not laboratory ratings.", size=8.5)
    pdf.ln(1)
    paragraph(pdf, "Clauses and rules applied", size=8.5, bold=True)
    bullets(pdf, assessment.rules_applied)       # ends with what the mark of an unconfirmed value means
    if assessment.verdict is not None:
        pdf.ln(1)
        paragraph(pdf, "Decision", size=8.5, bold=True)
        paragraph(pdf, assessment.verdict.statement, size=8)
    pdf.ln(1)
    paragraph(pdf, "Uncertainty", size=8.5, bold=True)
    paragraph(pdf, f"Uncertainty u of each rating: {assessment.uncertainty_note or 'not stated'}.", size=8)
    band = uncertainty_columns(assessment)
    if band:
        paragraph(pdf, "Per band, standard uncertainty in dB (" + "; ".join(
            f"{_BAND_U_NAMES[name]}: " + ", ".join(f"{number(f)} Hz {v:.1f}" for f, v in zip(s.nominal_hz, s.values)
                                                  if v is not None)
            for name, s in band.items()) + ").", size=7)
