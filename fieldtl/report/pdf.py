"""Assessment → a printable PDF report for a client (fpdf2), usually three or four A4 pages.

Page 1: the test, the verdict with the value it compares and its uncertainty, the single numbers
and the cautions. Then the chart, the per-band table, the findings, the construction check, the
test details and the method (standards, clauses and rules applied). The cautions are repeated in
small type in every page footer. Internal notes of the code ("from memory", facts-sheet numbers)
never reach the page: texts pass through :func:`fieldtl.report.client.marked`, and the method
section says once what the mark of an unconfirmed value means.

Every string reaches the page as plain text: markdown is never enabled, control characters are
dropped and characters the embedded font (matplotlib's DejaVu Sans) cannot draw are replaced by
U+FFFD, so names such as "Müller & Søn <b>" print literally and an unusual character never
stops the writer.
"""

from __future__ import annotations

import dataclasses
import functools
import io
import re
import unicodedata
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import matplotlib
from fontTools.ttLib import TTFont
from fpdf import FPDF, FontFace, XPos, YPos
from matplotlib.figure import Figure

from fieldtl import __version__
from fieldtl.assess import Assessment
from fieldtl.errors import InputError
from fieldtl.insulation import AirborneResult
from fieldtl.report.client import client_assessment, compared_value
from fieldtl.report.export import band_columns, grouped_findings, low_frequency_t_note, uncertainty_columns
from fieldtl.report.plot import assessment_figure, construction_figure

_FONT = "DejaVu"
_FONT_DIR = Path(matplotlib.get_data_path()) / "fonts" / "ttf"
_FONT_FILES = {"": _FONT_DIR / "DejaVuSans.ttf", "B": _FONT_DIR / "DejaVuSans-Bold.ttf"}
_MARGIN_MM = 15.0
_LINE_MM = 4.6
_LABEL_MM = 42.0
_CHART_WIDTH_MM = 150.0
_PAGE_ALIAS = "{nb}"
_REPLACEMENT = "\ufffd"
_LIMITED_FILL = (253, 235, 208)
_HEADER_FILL = (228, 233, 240)
_CAUTION_FILL = (242, 242, 242)

# ISO 16283-1/-2 background rule: with a margin <= 6 dB, 1.3 dB is subtracted and
# the band is a measurement limit. The corrected receiving-room level is then at most the value
# shown (upper bound), so airborne insulation is at least the value shown (lower bound) and impact
# levels at most the value shown (upper bound). L1, B and T are not affected.
_LOWER_BOUND_COLUMNS = frozenset({"D", "Dn", "DnT", "R_prime"})
_UPPER_BOUND_COLUMNS = frozenset({"L2", "Li", "L_prime_n", "L_prime_nT"})
_BOUND_MARK = {"lower": "≥", "upper": "≤"}

_STANDARDS = {
    "airborne": "ISO 16283-1:2014 + Amd 1:2017 (field airborne insulation), ISO 717-1:2020 (single numbers), "
                "ASTM E336 with ASTM E413 (NIC, NNIC, ASTC)",
    "impact": "ISO 16283-2 (field impact insulation), ISO 717-2:2020 (single numbers), "
              "ASTM E1007 with ASTM E989 (AIIC, NISR)",
}
_TEST_TYPES = {"airborne": "Airborne sound insulation between rooms",
               "impact": "Impact sound insulation of a floor (tapping machine)"}
_ROLE_NAMES = {"source": "source-room", "receiving": "receiving-room", "source_corner": "source-room corner",
               "receiving_corner": "receiving-room corner", "impact": "receiving-room"}


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
    assessment = client_assessment(assessment)     # no internal notes; unconfirmed values marked
    pdf = _ReportPdf(assessment.cautions)
    pdf.set_title(_safe(assessment.title))
    pdf.set_creator(f"fieldtl {__version__}")
    pdf.start()
    _title_block(pdf, assessment, details)       # page 1: the test, verdict, single numbers, cautions
    _verdict(pdf, assessment)
    _single_numbers(pdf, assessment)
    _cautions_box(pdf, assessment.cautions)
    pdf.add_page()
    _chart(pdf, assessment)
    _band_table(pdf, assessment)
    _qa_notes(pdf, assessment)
    _construction_check(pdf, assessment)
    _test_details(pdf, assessment, details)
    _method(pdf, assessment)
    pdf.ln(3)
    _paragraph(pdf, f"Produced with fieldtl {__version__}. End of report.", size=8)
    return bytes(pdf.output())


class _ReportPdf(FPDF):
    """A4 portrait with DejaVu Sans embedded and the cautions plus page number in every footer."""

    def __init__(self, cautions: tuple[str, ...]) -> None:
        super().__init__(orientation="portrait", unit="mm", format="A4")
        for style, path in _FONT_FILES.items():
            self.add_font(_FONT, style, str(path))
        self.set_margins(_MARGIN_MM, _MARGIN_MM, _MARGIN_MM)
        # The page-count alias is on only from the page number in the footer until the next page
        # starts (fpdf2 substitutes it at output() if it is on then), so "{nb}" typed by a user
        # in the body prints literally.
        self.alias_nb_pages("")
        self._footer_lines = tuple(_safe(f"Caution: {c}") for c in cautions)
        self._footer_mm = 0.0

    def start(self) -> None:
        """Open page 1 and keep body text clear of the footer (measuring text needs a page)."""
        self.add_page()
        self.set_font(_FONT, size=6)
        heights = [self.multi_cell(self.epw, 2.6, line, dry_run=True, output="HEIGHT") for line in self._footer_lines]
        self._footer_mm = sum(heights) + 2.6 + 2.0   # + page-number line + rule
        self.set_auto_page_break(True, margin=self._footer_mm + _MARGIN_MM / 2 + 3.0)

    def header(self) -> None:
        self.alias_nb_pages("")

    def footer(self) -> None:
        self.set_y(-(self._footer_mm + _MARGIN_MM / 2))
        self.set_draw_color(160, 160, 160)
        self.line(self.l_margin, self.get_y(), self.w - self.r_margin, self.get_y())
        self.ln(1.0)
        self.set_font(_FONT, size=6)
        self.set_text_color(70, 70, 70)
        for line in self._footer_lines:
            self.multi_cell(0, 2.6, line, align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)
        self.alias_nb_pages(_PAGE_ALIAS)
        self.cell(0, 2.6, f"Page {self.page_no()} of {_PAGE_ALIAS}", align="R")
        self.set_text_color(0, 0, 0)


# --- text helpers -------------------------------------------------------------------------------

@functools.lru_cache(maxsize=1)
def _drawable_codepoints() -> frozenset[int]:
    """Characters both embedded fonts can draw (read once from the TTF cmaps)."""
    maps = [set(TTFont(str(path), lazy=True).getBestCmap()) for path in _FONT_FILES.values()]
    return frozenset(set.intersection(*maps))


def _safe(text: object) -> str:
    """Plain printable text: tabs become spaces, other control characters go, undrawable → U+FFFD."""
    drawable = _drawable_codepoints()
    out = []
    for char in str(text).replace("\r\n", "\n").replace("\r", "\n").replace("\t", " "):
        if char == "\n":
            out.append(char)
        elif unicodedata.category(char) in ("Cc", "Cf", "Cs", "Co", "Cn"):
            continue
        else:
            out.append(char if ord(char) in drawable else _REPLACEMENT)
    return "".join(out)


def _paragraph(pdf: FPDF, text: str, *, size: float = 9, bold: bool = False, height_mm: float = _LINE_MM) -> None:
    pdf.set_font(_FONT, "B" if bold else "", size)
    pdf.multi_cell(0, height_mm, _safe(text), align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)


def _heading(pdf: FPDF, text: str, *, keep_with_mm: float = 20.0) -> None:
    """A section heading, moved to the next page unless ``keep_with_mm`` of what follows fits under it."""
    pdf.ln(2.5)
    if pdf.will_page_break(10 + keep_with_mm):
        pdf.add_page()
    _paragraph(pdf, text, size=11, bold=True, height_mm=6)
    pdf.set_draw_color(27, 79, 114)
    pdf.line(pdf.l_margin, pdf.get_y(), pdf.w - pdf.r_margin, pdf.get_y())
    pdf.ln(1.5)


def _field(pdf: FPDF, label: str, value: str, *, size: float = 9) -> None:
    """A label and a value beside it; the value wraps under itself."""
    pdf.set_font(_FONT, "B", size)
    pdf.cell(_LABEL_MM, _LINE_MM, _safe(label))
    pdf.set_font(_FONT, "", size)
    pdf.multi_cell(0, _LINE_MM, _safe(value) if value.strip() else "not stated",
                   align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)


def _bullets(pdf: FPDF, lines: tuple[str, ...] | list[str], *, size: float = 8) -> None:
    pdf.set_font(_FONT, "", size)
    for line in lines:
        pdf.set_x(pdf.l_margin + 3)
        pdf.cell(4, _LINE_MM - 0.6, "•")
        pdf.multi_cell(0, _LINE_MM - 0.6, _safe(line), align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)


def _number(value: float) -> str:
    return f"{value:g}"


# --- sections -----------------------------------------------------------------------------------

def _title_block(pdf: FPDF, assessment: Assessment, details: ReportDetails) -> None:
    pdf.set_text_color(27, 79, 114)
    _paragraph(pdf, "Field sound insulation test report", size=10, bold=True)
    pdf.set_text_color(0, 0, 0)
    _paragraph(pdf, assessment.title or "(untitled test)", size=16, bold=True, height_mm=7.5)
    pdf.ln(1.5)
    for label, value in (("Project", details.project), ("Client", details.client),
                         ("Site address", details.site_address), ("Date of measurement", details.measurement_date),
                         ("Engineer / operator", details.engineer), ("Organisation", details.organisation)):
        _field(pdf, label, value)
    _field(pdf, "Test", _TEST_TYPES[assessment.test_type])


def _cautions_box(pdf: FPDF, cautions: tuple[str, ...]) -> None:
    pdf.ln(2.5)
    pdf.set_fill_color(*_CAUTION_FILL)
    pdf.set_font(_FONT, "B", 9)
    pdf.multi_cell(0, 5, "Cautions", fill=True, padding=(1, 2, 0, 2), align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)
    pdf.set_font(_FONT, "", 8.5)
    for caution in cautions:
        pdf.multi_cell(0, 4.2, _safe(f"• {caution}"), fill=True, padding=(0.5, 2, 0.5, 2),
                       align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)


def _test_details(pdf: FPDF, assessment: Assessment, details: ReportDetails) -> None:
    _heading(pdf, "Test details")
    _field(pdf, "Test", f"{_TEST_TYPES[assessment.test_type]}; input {assessment.source_name}")
    _field(pdf, "Geometry", _geometry_text(assessment))
    _field(pdf, "Construction", assessment.construction or "")
    _field(pdf, "Levels", "calibrated, dB re 20 µPa" if assessment.calibrated else
           "not calibrated: dB re full scale. Level differences and ratings hold only if every recording "
           "used the same gain; absolute levels (L1, L2, B) are not sound pressure levels")
    _field(pdf, "Instruments", "\n".join(details.instruments))
    _field(pdf, "Positions", "\n".join(_position_counts(assessment)))
    if details.positions_description.strip():
        _field(pdf, "", details.positions_description)
    if details.notes.strip():
        _field(pdf, "Notes", details.notes)


def _geometry_text(assessment: Assessment) -> str:
    used = assessment.result.separating_area_m2 if isinstance(assessment.result, AirborneResult) else None
    used_text = "" if used is None else f"S used for R' = {used:.2f} m²"
    geometry = assessment.geometry
    if geometry is None:
        return "; ".join(filter(None, [used_text, "entered room volumes and area not given to the report"]))
    parts = [f"V receiving = {_number(geometry.receiving_volume_m3)} m³"]
    if geometry.source_volume_m3 is not None:
        parts.append(f"V source = {_number(geometry.source_volume_m3)} m³")
    if geometry.separating_area_m2 is not None:
        parts.append(f"S entered = {_number(geometry.separating_area_m2)} m²")
    if used_text:
        parts.append(used_text)
    if assessment.element_lab_rw_db is not None:
        parts.append(f"declared laboratory Rw of the element = {_number(assessment.element_lab_rw_db)} dB")
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


def _band_table(pdf: FPDF, assessment: Assessment) -> None:
    _heading(pdf, "Results per one-third-octave band")
    columns = band_columns(assessment)
    limited = assessment.result.limited
    headings = ["Hz"] + [f"{_column_name(name)}\n{'s' if s.unit == 's' else 'dB'}" for name, s in columns.items()]
    pdf.set_font(_FONT, "", 7.5)
    with pdf.table(col_widths=[14] + [20] * len(columns), width=min(pdf.epw, 14 + 20 * len(columns)),
                   text_align="RIGHT", line_height=3.6, padding=(0.4, 1.2),
                   headings_style=FontFace(emphasis="BOLD", fill_color=_HEADER_FILL),
                   borders_layout="HORIZONTAL_LINES") as table:
        heading_row = table.row()
        for heading in headings:
            heading_row.cell(heading)
        for i, frequency_hz in enumerate(assessment.result.nominal_hz):
            style = FontFace(fill_color=_LIMITED_FILL) if limited[i] else None
            row = table.row()
            row.cell(_number(frequency_hz), style=style)
            for name, spectrum in columns.items():
                row.cell(_band_cell(name, spectrum.values[i], spectrum.unit, limited[i]), style=style)
    pdf.ln(1)
    _paragraph(pdf, "Shaded rows: band limited by background noise (margin 6 dB or less, 1.3 dB subtracted, "
                    "ISO 16283-1/-2). ≥ marks a lower bound (the true insulation is at least the value), ≤ an "
                    "upper bound (the true level is at most the value). – : no value. Levels and D to 0.1 dB, "
                    "T to 0.01 s.", size=7)
    lf_note = low_frequency_t_note(assessment)
    if lf_note:
        _paragraph(pdf, lf_note, size=8, bold=True)


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


def _chart(pdf: FPDF, assessment: Assessment) -> None:
    if not assessment.ratings:
        _heading(pdf, "Chart")
        _paragraph(pdf, "No single number could be formed, so there is no chart.")
        return
    # The title block already names the test; drawing the chart without it also keeps user text
    # away from matplotlib's mathtext parser (a title like "$\frac$" would fail to render).
    _figure(pdf, "Chart", assessment_figure(dataclasses.replace(assessment, title="")))


def _figure(pdf: FPDF, heading: str, figure: Figure) -> None:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=200)
    width_in, height_in = figure.get_size_inches()
    height_mm = _CHART_WIDTH_MM * height_in / width_in
    _heading(pdf, heading, keep_with_mm=height_mm)
    pdf.image(buffer, x=(pdf.w - _CHART_WIDTH_MM) / 2, w=_CHART_WIDTH_MM, h=height_mm)


def _construction_check(pdf: FPDF, assessment: Assessment) -> None:
    """Predicted R of the declared build-up beside the measured R' (only when one was declared)."""
    check = assessment.construction_check
    if check is None:
        return
    measured = "could not be rated" if check.measured_rating is None else \
        f"R'w = {check.measured_rating.single_number_db} dB"
    _figure(pdf, "Construction check", construction_figure(check))
    _paragraph(pdf, f"The declared build-up predicts Rw = {check.predicted_rating.single_number_db} dB; the field "
                    f"measurement {measured}; mean band gap {check.mean_gap_db:+.1f} dB (prediction minus field). "
                    "The prediction is a simple model of the element alone (no flanking); its findings are "
                    "listed with the other findings.", size=8.5)


def _single_numbers(pdf: FPDF, assessment: Assessment) -> None:
    _heading(pdf, "Single-number results")
    if not assessment.ratings:
        _paragraph(pdf, "No single number could be formed (see the QA notes).")
        return
    terms = list(dict.fromkeys(k for r in assessment.ratings for k in r.adaptation_terms_db))
    fixed_mm = [22.0, 13.0, 13.0, 13.0]   # rating, value, 0.1 dB value, u
    term_mm = min(16.0, (pdf.epw - sum(fixed_mm)) / max(len(terms), 1))
    headings = ["Rating", "Value\ndB", "0.1 dB\nstep", *(_term_heading(t) for t in terms), "u\ndB"]
    pdf.set_font(_FONT, "", 7.5)
    with pdf.table(col_widths=[*fixed_mm[:3], *([term_mm] * len(terms)), fixed_mm[3]],
                   width=sum(fixed_mm) + term_mm * len(terms), text_align="CENTER", line_height=3.6,
                   padding=(0.5, 0.5), borders_layout="HORIZONTAL_LINES",
                   headings_style=FontFace(emphasis="BOLD", size_pt=6.5, fill_color=_HEADER_FILL)) as table:
        heading_row = table.row()
        for heading in headings:
            heading_row.cell(heading)
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
    _paragraph(pdf, "≥ / ≤ before a value: the rating is a lower / upper bound because bands in its range were "
                    "limited by background noise. * after a term: the single number plus that term is such a "
                    "bound. Terms are added to the single number (e.g. DnT,w + Ctr). The 0.1 dB step value is "
                    "for uncertainty work (ISO 717-1/-2:2020); requirements compare the whole-dB values.", size=7)
    pdf.ln(1)
    _paragraph(pdf, "u: standard uncertainty of the rating alone (ISO 12999-1, see Method); the verdict uses "
                    "the row of its own quantity (e.g. + Ctr).", size=7)


_BAND_U_NAMES = {"u_iso12999": "ISO 12999-1:2020 table value", "u_spread": "this test's own spread"}


def _term_heading(term: str) -> str:
    """"Ctr,50-3150" → "Ctr" over "50-3150" so narrow columns stay readable."""
    match = re.match(r"^([A-Za-z]+),?(.*)$", term)
    if match is None or not match[2]:
        return term
    return f"{match[1]}\n{match[2]}"


def _verdict(pdf: FPDF, assessment: Assessment) -> None:
    _heading(pdf, "Verdict")
    verdict = assessment.verdict
    if verdict is None:
        missing = next((f for f in assessment.findings if f.code == "verdict_not_possible"), None)
        _paragraph(pdf, f"No verdict: {missing.message}." if missing else "No requirement entered, so no verdict.",
                   size=10, bold=True)
        return
    bound = {"lower": ", a lower bound", "upper": ", an upper bound"}.get(verdict.bound, "")
    _paragraph(pdf, f"{verdict.outcome.upper()} against the requirement {verdict.requirement} dB "
                    f"(value {verdict.value_db:.0f} dB{bound})", size=11, bold=True, height_mm=6)
    _paragraph(pdf, f"Compared value: {compared_value(assessment)}, the whole-dB rating plus the whole-dB term as "
                    f"the single-number table below shows them. Expanded uncertainty U = "
                    f"{verdict.expanded_uncertainty_db:.1f} dB (k = {verdict.coverage_factor:.2f}, ISO 12999-1). "
                    "How the decision was made is set out under Method.", size=9)


def _qa_notes(pdf: FPDF, assessment: Assessment) -> None:
    _heading(pdf, "Findings")
    groups = grouped_findings(assessment.findings)
    if not groups:
        _paragraph(pdf, "No quality findings.")
        return
    pdf.set_font(_FONT, "", 7.5)
    with pdf.table(col_widths=(36, 82, 62), text_align="LEFT", line_height=3.5, padding=(0.6, 1),
                   headings_style=FontFace(emphasis="BOLD", fill_color=_HEADER_FILL),
                   borders_layout="HORIZONTAL_LINES") as table:
        heading_row = table.row()
        for heading in ("Severity / code", "What was seen", "What to do"):
            heading_row.cell(heading)
        for finding, count, bands_hz in groups:
            more = (f" (and {count - 1} more: {', '.join(_number(b) for b in bands_hz[1:])} Hz)"
                    if count > 1 and len(bands_hz) > 1 else (f" (and {count - 1} more)" if count > 1 else ""))
            row = table.row()
            row.cell(f"{finding.severity.upper()}\n{finding.code}")
            row.cell(_safe(f"{finding.message}{more}"))
            row.cell(_safe(finding.action))


def _method(pdf: FPDF, assessment: Assessment) -> None:
    """Standards and clauses applied, the decision rule and the uncertainty, in words for a client."""
    _heading(pdf, "Method")
    _paragraph(pdf, f"Standards applied: {_STANDARDS[assessment.test_type]}. The single numbers are field "
                    "(apparent) values from a measurement in the building, not laboratory ratings.", size=8.5)
    pdf.ln(1)
    _paragraph(pdf, "Clauses and rules applied", size=8.5, bold=True)
    _bullets(pdf, assessment.rules_applied)       # ends with what the mark of an unconfirmed value means
    if assessment.verdict is not None:
        pdf.ln(1)
        _paragraph(pdf, "Decision", size=8.5, bold=True)
        _paragraph(pdf, assessment.verdict.statement, size=8)
    pdf.ln(1)
    _paragraph(pdf, "Uncertainty", size=8.5, bold=True)
    _paragraph(pdf, f"Uncertainty u of each rating: {assessment.uncertainty_note or 'not stated'}.", size=8)
    band = uncertainty_columns(assessment)
    if band:
        _paragraph(pdf, "Per band, standard uncertainty in dB (" + "; ".join(
            f"{_BAND_U_NAMES[name]}: " + ", ".join(f"{_number(f)} Hz {v:.1f}" for f, v in zip(s.nominal_hz, s.values)
                                                  if v is not None)
            for name, s in band.items()) + ").", size=7)
