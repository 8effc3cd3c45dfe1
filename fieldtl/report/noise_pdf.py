"""A noise record → a printable PDF "noise record" report (fpdf2), reusing the test report's page
style (fieldtl.report.pdf_page: fonts, footer cautions, headings, plain-text handling).

Order: title block, cautions, record details, per-night summary, timeline chart, reference lines,
events table, diary with matches, the link to the wall, notes. Every user text reaches the page
as plain text (fieldtl.report.pdf_page.safe).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from fpdf import FontFace

from fieldtl import __version__
from fieldtl.noise.chart import timeline_figure
from fieldtl.noise.diary import DiaryMatch
from fieldtl.noise.export import level_unit, record_cautions
from fieldtl.noise.record import NoiseRecord
from fieldtl.noise.reference import Comparison
from fieldtl.noise.wall import WallComparison
from fieldtl.report.pdf_charts import figure
from fieldtl.report.pdf_front import cautions_box
from fieldtl.report.pdf_page import FONT, HEADER_FILL, ReportPdf, bullets, field, heading, paragraph, safe

MAX_EVENT_ROWS = 200        # longer lists are cut in print (the CSV holds every event)


def _level(value: float) -> str:
    return f"{value:.1f}" if math.isfinite(value) else "–"


def record_to_pdf(record: NoiseRecord, *, reference: str = "", diary: Sequence[DiaryMatch] = (),
                  wall: Sequence[WallComparison] = (), references: Sequence[Comparison] = ()) -> bytes:
    """The report as PDF bytes; ``reference`` is the complaint's anonymous reference."""
    cautions = record_cautions(record)
    pdf = ReportPdf(cautions)
    pdf.start()
    pdf.set_text_color(27, 79, 114)
    paragraph(pdf, "Noise record", size=10, bold=True)
    pdf.set_text_color(0, 0, 0)
    paragraph(pdf, reference or "(no reference given)", size=16, bold=True, height_mm=7.5)
    cautions_box(pdf, cautions)
    unit = level_unit(record)
    heading(pdf, "Record")
    field(pdf, "Period", f"{record.start:%Y-%m-%d %H:%M} to {record.end:%Y-%m-%d %H:%M} "
                         f"({record.settings.zone_name})")
    field(pdf, "Files", "\n".join(f"{f.name}: from {f.start:%Y-%m-%d %H:%M:%S}, {f.analysed_s / 3600:.2f} h analysed"
                                   for f in record.files))
    field(pdf, "Levels", "calibrated, dB re 20 µPa" if record.calibrated else
          "not calibrated: dB re full scale; only differences between levels are meaningful")
    settings = record.settings
    rule = " or ".join(([f"{settings.event_margin_db:g} dB above the background (LAF90 of the "
                         f"{settings.background_window_min} minutes either side)"] if settings.event_margin_db else [])
                       + ([f"above {settings.event_level_db:g} {unit}"] if settings.event_level_db is not None else []))
    field(pdf, "Events", f"LAF (A-weighted, time weighting F) {rule}")
    field(pdf, "Audio kept", "short event clips (switched on for this period)" if settings.keep_clips
          else "none: levels and spectra only")
    _nights(pdf, record, unit)
    figure(pdf, "Timeline", timeline_figure(record, diary=diary))
    if references:
        heading(pdf, "Reference lines (comparisons, not a verdict)")
        bullets(pdf, [c.text for c in references])
    _events(pdf, record, unit)
    if diary:
        _diary(pdf, diary)
    for comparison in wall:
        _wall(pdf, comparison, unit)
    if record.findings:
        heading(pdf, "Notes on the recordings")
        bullets(pdf, [f"{f.message}. {f.action}" for f in record.findings])
    pdf.ln(3)
    paragraph(pdf, f"Produced with fieldtl {__version__}. End of report.", size=8)
    return bytes(pdf.output())


def _table(pdf, headings: list[str], rows: list[list[str]], widths: list[float]) -> None:
    pdf.set_font(FONT, "", 7.5)
    with pdf.table(col_widths=widths, width=min(pdf.epw, sum(widths)), text_align="RIGHT", line_height=3.6,
                   padding=(0.4, 1.2), headings_style=FontFace(emphasis="BOLD", fill_color=HEADER_FILL),
                   borders_layout="HORIZONTAL_LINES") as table:
        for cells in [headings, *rows]:
            row = table.row()
            for cell in cells:
                row.cell(safe(cell))


def _nights(pdf, record: NoiseRecord, unit: str) -> None:
    heading(pdf, "Per period")
    rows = [[f"{p.name} {p.date}", f"{p.levels.covered_s / 3600:.1f}", _level(p.levels.laeq_db),
             _level(p.levels.lafmax_db), _level(p.levels.laf90_db), str(p.events)] for p in record.periods]
    _table(pdf, ["period", "hours", f"LAeq {unit}", f"LAFmax {unit}", f"LAF90 {unit}", "events"], rows,
           [40, 16, 26, 26, 26, 16])
    for night in record.nights:
        paragraph(pdf, f"Night of {night.date}: {night.events_above} event(s) with LAFmax above "
                       f"{night.count_level_db:g} {unit}.", size=8)


def _events(pdf, record: NoiseRecord, unit: str) -> None:
    heading(pdf, f"Events ({len(record.events)})")
    if not record.events:
        paragraph(pdf, "No event was found with the rule above.")
        return
    low = [i for i, f in enumerate(record.bands_hz) if f <= 200]
    rows = []
    for number, e in enumerate(record.events[:MAX_EVENT_ROWS], start=1):
        bass = [e.band_leq_db[i] for i in low if math.isfinite(e.band_leq_db[i])]
        loudest = record.bands_hz[max(range(len(e.band_leq_db)), key=lambda i: e.band_leq_db[i]
                                      if math.isfinite(e.band_leq_db[i]) else -math.inf)]
        rows.append([str(number), f"{e.start:%Y-%m-%d %H:%M:%S}", f"{e.duration_s:.1f}", _level(e.lafmax_db),
                     _level(e.lae_db), _level(e.background_db), _level(max(bass)) if bass else "–", f"{loudest:g}"])
    _table(pdf, ["#", "start", "s", f"LAFmax {unit}", f"LAE {unit}", "background", "max 20-200 Hz", "loudest band Hz"],
           rows, [8, 34, 12, 22, 20, 20, 22, 22])
    if len(record.events) > MAX_EVENT_ROWS:
        paragraph(pdf, f"First {MAX_EVENT_ROWS} events shown; the CSV lists all {len(record.events)}.", size=7)


def _diary(pdf, diary: Sequence[DiaryMatch]) -> None:
    heading(pdf, "Diary")
    for number, match in enumerate(diary, start=1):
        entry = match.entry
        paragraph(pdf, f"{number}. {entry.time:%Y-%m-%d %H:%M} — {entry.heard or '(no description)'}"
                       f" — disturbance: {entry.disturbance or 'not given'}", size=8.5, bold=True)
        paragraph(pdf, f"   {match.statement}", size=8)


def _wall(pdf, comparison: WallComparison, unit: str) -> None:
    heading(pdf, f"Link to the separating element: {comparison.source.name}")
    paragraph(pdf, f"Source spectrum: {comparison.source.origin}. Expected level in the room = source level − DnT "
                   "+ 10 lg(T/0.5 s) (ISO 16283-1 definition of DnT).", size=8)
    rows = [[f"{f:g}", _level(x), _level(r), _level(d)] for f, x, r, d in
            zip(comparison.nominal_hz, comparison.expected_db, comparison.recorded_db, comparison.excess_db)]
    _table(pdf, ["Hz", f"expected {unit}", f"recorded {unit}", "excess dB"], rows, [16, 30, 30, 24])
    paragraph(pdf, comparison.conclusion, size=8.5, bold=True)
