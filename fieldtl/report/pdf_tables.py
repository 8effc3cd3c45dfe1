"""The test report's tables: the single numbers (page 1), the per-band results and the findings."""

from __future__ import annotations

import re

from fpdf import FPDF, FontFace

from fieldtl.assess import Assessment
from fieldtl.report.export import band_columns, grouped_findings, low_frequency_t_note
from fieldtl.report.pdf_page import FONT, HEADER_FILL, heading, number, paragraph, safe

_LIMITED_FILL = (253, 235, 208)

# ISO 16283-1/-2 background rule: with a margin <= 6 dB, 1.3 dB is subtracted and
# the band is a measurement limit. The corrected receiving-room level is then at most the value
# shown (upper bound), so airborne insulation is at least the value shown (lower bound) and impact
# levels at most the value shown (upper bound). L1, B and T are not affected.
_LOWER_BOUND_COLUMNS = frozenset({"D", "Dn", "DnT", "R_prime"})
_UPPER_BOUND_COLUMNS = frozenset({"L2", "Li", "L_prime_n", "L_prime_nT"})
_BOUND_MARK = {"lower": "≥", "upper": "≤"}


def single_numbers(pdf: FPDF, assessment: Assessment) -> None:
    heading(pdf, "Single-number results")
    if not assessment.ratings:
        paragraph(pdf, "No single number could be formed (see the QA notes).")
        return
    terms = list(dict.fromkeys(k for r in assessment.ratings for k in r.adaptation_terms_db))
    fixed_mm = [22.0, 13.0, 13.0, 13.0]   # rating, value, 0.1 dB value, u
    term_mm = min(16.0, (pdf.epw - sum(fixed_mm)) / max(len(terms), 1))
    headings = ["Rating", "Value\ndB", "0.1 dB\nstep", *(_term_heading(t) for t in terms), "u\ndB"]
    pdf.set_font(FONT, "", 7.5)
    with pdf.table(col_widths=[*fixed_mm[:3], *([term_mm] * len(terms)), fixed_mm[3]],
                   width=sum(fixed_mm) + term_mm * len(terms), text_align="CENTER", line_height=3.6,
                   padding=(0.5, 0.5), borders_layout="HORIZONTAL_LINES",
                   headings_style=FontFace(emphasis="BOLD", size_pt=6.5, fill_color=HEADER_FILL)) as table:
        heading_row = table.row()
        for text in headings:
            heading_row.cell(text)
        for rating in assessment.ratings:
            row = table.row()
            row.cell(f"{rating.descriptor}\n{rating.standard}", align="LEFT")
            row.cell(_BOUND_MARK.get(rating.bound or "", "") + str(rating.single_number_db),
                     style=FontFace(emphasis="BOLD"))
            precise = rating.single_number_precise_db
            row.cell("–" if precise is None else f"{precise:.1f}")
            for term in terms:
                value = rating.adaptation_terms_db.get(term)
                mark = "*" if rating.adaptation_term_bounds.get(term) else ""
                row.cell("" if value is None else f"{value:+d}{mark}")
            u_db = assessment.table_uncertainty_db.get(rating.descriptor)
            row.cell("–" if u_db is None else f"{u_db:.1f}")
    pdf.ln(1)
    paragraph(pdf, "≥ / ≤ before a value: the rating is a lower / upper bound because bands in its range were "
                   "limited by background noise. * after a term: the single number plus that term is such a "
                   "bound. Terms are added to the single number (e.g. DnT,w + Ctr). The 0.1 dB step value is "
                   "for uncertainty work (ISO 717-1/-2:2020); requirements compare the whole-dB values.", size=7)
    pdf.ln(1)
    paragraph(pdf, "u: standard uncertainty of the rating alone (ISO 12999-1, see Method); the verdict uses "
                   "the row of its own quantity (e.g. + Ctr).", size=7)


def _term_heading(term: str) -> str:
    """"Ctr,50-3150" → "Ctr" over "50-3150" so narrow columns stay readable."""
    match = re.match(r"^([A-Za-z]+),?(.*)$", term)
    if match is None or not match[2]:
        return term
    return f"{match[1]}\n{match[2]}"


def band_table(pdf: FPDF, assessment: Assessment) -> None:
    heading(pdf, "Results per one-third-octave band")
    columns = band_columns(assessment)
    limited = assessment.result.limited
    headings = ["Hz"] + [f"{_column_name(name)}\n{'s' if s.unit == 's' else 'dB'}" for name, s in columns.items()]
    pdf.set_font(FONT, "", 7.5)
    with pdf.table(col_widths=[14] + [20] * len(columns), width=min(pdf.epw, 14 + 20 * len(columns)),
                   text_align="RIGHT", line_height=3.6, padding=(0.4, 1.2),
                   headings_style=FontFace(emphasis="BOLD", fill_color=HEADER_FILL),
                   borders_layout="HORIZONTAL_LINES") as table:
        heading_row = table.row()
        for text in headings:
            heading_row.cell(text)
        for i, frequency_hz in enumerate(assessment.result.nominal_hz):
            style = FontFace(fill_color=_LIMITED_FILL) if limited[i] else None
            row = table.row()
            row.cell(number(frequency_hz), style=style)
            for name, spectrum in columns.items():
                row.cell(_band_cell(name, spectrum.values[i], spectrum.unit, limited[i]), style=style)
    pdf.ln(1)
    paragraph(pdf, "Shaded rows: band limited by background noise (margin 6 dB or less, 1.3 dB subtracted, "
                   "ISO 16283-1/-2). ≥ marks a lower bound (the true insulation is at least the value), ≤ an "
                   "upper bound (the true level is at most the value). – : no value. Levels and D to 0.1 dB, "
                   "T to 0.01 s.", size=7)
    lf_note = low_frequency_t_note(assessment)
    if lf_note:
        paragraph(pdf, lf_note, size=8, bold=True)


def _column_name(name: str) -> str:
    """JSON key → printed name: "R_prime" → "R'", "L_prime_nT" → "L'nT"."""
    return name.replace("_prime_", "'").replace("_prime", "'")


def _band_cell(name: str, value: float | None, unit: str, limited: bool) -> str:
    if value is None:
        return "–"
    text = f"{value:.2f}" if unit == "s" else f"{value:.1f}"
    if limited and name in _LOWER_BOUND_COLUMNS:
        return "≥" + text
    if limited and name in _UPPER_BOUND_COLUMNS:
        return "≤" + text
    return text


def findings_table(pdf: FPDF, assessment: Assessment) -> None:
    heading(pdf, "Findings")
    groups = grouped_findings(assessment.findings)
    if not groups:
        paragraph(pdf, "No quality findings.")
        return
    pdf.set_font(FONT, "", 7.5)
    with pdf.table(col_widths=(36, 82, 62), text_align="LEFT", line_height=3.5, padding=(0.6, 1),
                   headings_style=FontFace(emphasis="BOLD", fill_color=HEADER_FILL),
                   borders_layout="HORIZONTAL_LINES") as table:
        heading_row = table.row()
        for text in ("Severity / code", "What was seen", "What to do"):
            heading_row.cell(text)
        for finding, count, bands_hz in groups:
            more = (f" (and {count - 1} more: {', '.join(number(b) for b in bands_hz[1:])} Hz)"
                    if count > 1 and len(bands_hz) > 1 else (f" (and {count - 1} more)" if count > 1 else ""))
            row = table.row()
            row.cell(f"{finding.severity.upper()}\n{finding.code}")
            row.cell(safe(f"{finding.message}{more}"))
            row.cell(safe(finding.action))
