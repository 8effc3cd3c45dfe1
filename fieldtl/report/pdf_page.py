"""The printed page shared by the test report and the noise-record report (fpdf2): A4 portrait,
DejaVu Sans embedded, the cautions plus the page number in every footer, and the text helpers.

Every string reaches the page as plain text: markdown is never enabled, control characters are
dropped and characters the embedded font (matplotlib's DejaVu Sans) cannot draw are replaced by
U+FFFD (:func:`safe`), so names such as "Müller & Søn <b>" print literally and an unusual character
never stops the writer.
"""

from __future__ import annotations

import functools
import unicodedata
from pathlib import Path

import matplotlib
from fontTools.ttLib import TTFont
from fpdf import FPDF, XPos, YPos

FONT = "DejaVu"
_FONT_DIR = Path(matplotlib.get_data_path()) / "fonts" / "ttf"
_FONT_FILES = {"": _FONT_DIR / "DejaVuSans.ttf", "B": _FONT_DIR / "DejaVuSans-Bold.ttf"}
_MARGIN_MM = 15.0
LINE_MM = 4.6
_LABEL_MM = 42.0
_PAGE_ALIAS = "{nb}"
_REPLACEMENT = "\ufffd"
HEADER_FILL = (228, 233, 240)


class ReportPdf(FPDF):
    """A4 portrait with DejaVu Sans embedded and the cautions plus page number in every footer."""

    def __init__(self, cautions: tuple[str, ...]) -> None:
        super().__init__(orientation="portrait", unit="mm", format="A4")
        for style, path in _FONT_FILES.items():
            self.add_font(FONT, style, str(path))
        self.set_margins(_MARGIN_MM, _MARGIN_MM, _MARGIN_MM)
        # The page-count alias is on only from the page number in the footer until the next page
        # starts (fpdf2 substitutes it at output() if it is on then), so "{nb}" typed by a user
        # in the body prints literally.
        self.alias_nb_pages("")
        self._footer_lines = tuple(safe(f"Caution: {c}") for c in cautions)
        self._footer_mm = 0.0

    def start(self) -> None:
        """Open page 1 and keep body text clear of the footer (measuring text needs a page)."""
        self.add_page()
        self.set_font(FONT, size=6)
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
        self.set_font(FONT, size=6)
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


def safe(text: object) -> str:
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


def paragraph(pdf: FPDF, text: str, *, size: float = 9, bold: bool = False, height_mm: float = LINE_MM) -> None:
    pdf.set_font(FONT, "B" if bold else "", size)
    pdf.multi_cell(0, height_mm, safe(text), align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)


def heading(pdf: FPDF, text: str, *, keep_with_mm: float = 20.0) -> None:
    """A section heading, moved to the next page unless ``keep_with_mm`` of what follows fits under it."""
    pdf.ln(2.5)
    if pdf.will_page_break(10 + keep_with_mm):
        pdf.add_page()
    paragraph(pdf, text, size=11, bold=True, height_mm=6)
    pdf.set_draw_color(27, 79, 114)
    pdf.line(pdf.l_margin, pdf.get_y(), pdf.w - pdf.r_margin, pdf.get_y())
    pdf.ln(1.5)


def field(pdf: FPDF, label: str, value: str, *, size: float = 9) -> None:
    """A label and a value beside it; the value wraps under itself."""
    pdf.set_font(FONT, "B", size)
    pdf.cell(_LABEL_MM, LINE_MM, safe(label))
    pdf.set_font(FONT, "", size)
    pdf.multi_cell(0, LINE_MM, safe(value) if value.strip() else "not stated",
                   align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)


def bullets(pdf: FPDF, lines: tuple[str, ...] | list[str], *, size: float = 8) -> None:
    pdf.set_font(FONT, "", size)
    for line in lines:
        pdf.set_x(pdf.l_margin + 3)
        pdf.cell(4, LINE_MM - 0.6, "•")
        pdf.multi_cell(0, LINE_MM - 0.6, safe(line), align="L", new_x=XPos.LMARGIN, new_y=YPos.NEXT)


def number(value: float) -> str:
    return f"{value:g}"
