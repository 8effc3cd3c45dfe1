"""Chart of a measured curve against its shifted reference curve (matplotlib, no pyplot state).

Unfavourable deviations are shaded; bands limited by background noise are drawn as bounds
(an arrow pointing the way the true value may lie); error bars show ± the per-band standard
uncertainty of ISO 12999-1:2020 Table 2 (airborne) or Table 4 (impact) for the situation used. A figure's size never depends on its title:
a user's title is one line, cut with "…" to the figure's width (see :func:`fitted_title`), so
even a tight bounding box (Streamlit's st.pyplot) stays the same size.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from fieldtl.assess import Assessment
from fieldtl.bands import BandSpectrum
from fieldtl.construction import Comparison
from fieldtl.errors import InputError
from fieldtl.iso12999 import band_uncertainty_source
from fieldtl.rating import Rating
from fieldtl.validate import file_label

MEASURED_COLOUR = "#1b4f72"
REFERENCE_COLOUR = "#7d7d7d"
DEVIATION_COLOUR = "#e67e22"
UNCERTAINTY_COLOUR = "#5d8aa8"
FIGURE_SIZE_IN = (7.0, 4.2)
FIGURE_DPI = 110
TITLE_FONT_SIZE = 10
TITLE_WIDTH_FRACTION = 0.9         # of the figure's width, left for a title line


def rating_figure(spectrum: BandSpectrum, rating: Rating, *, limited: tuple[bool, ...] = (),
                  title: str = "", band_uncertainty: BandSpectrum | None = None,
                  uncertainty_source: str = "") -> Figure:
    """Measured band values, the shifted reference curve and the unfavourable deviations.

    ``band_uncertainty`` (standard uncertainty per band, dB) adds error bars of ± u (k = 1) at the
    bands it shares with ``spectrum``; ``uncertainty_source`` names its table in the legend.
    """
    figure = Figure(figsize=FIGURE_SIZE_IN, dpi=FIGURE_DPI, layout="constrained")
    axes = figure.add_subplot()
    bands = spectrum.nominal_hz
    x = np.arange(len(bands))
    values = spectrum.as_array()
    axes.plot(x, values, marker="o", markersize=3.5, color=MEASURED_COLOUR, label=spectrum.quantity)
    reference = rating.shifted_reference
    ref_x = np.array([bands.index(f) for f in reference.nominal_hz])
    ref_values = reference.as_array()
    axes.plot(ref_x, ref_values, color=REFERENCE_COLOUR, linestyle="--",
              label=f"shifted reference ({rating.standard})")
    measured_at_ref = values[ref_x]
    deviation = rating.unfavourable_deviation.as_array() > 0
    low = np.minimum(measured_at_ref, ref_values)
    high = np.maximum(measured_at_ref, ref_values)
    axes.fill_between(ref_x, low, high, where=deviation, color=DEVIATION_COLOUR, alpha=0.35, step=None,
                      interpolate=True, label=f"unfavourable deviation (sum {rating.deviation_sum_db:.1f} dB)")
    if band_uncertainty is not None:
        _uncertainty_bars(axes, bands, values, band_uncertainty, uncertainty_source)
    if limited and any(limited):
        direction = "^" if rating.standard in ("ISO 717-1", "ASTM E413") else "v"
        marked = np.array(limited, dtype=bool)
        axes.scatter(x[marked], values[marked], marker=direction, s=60, color="#c0392b", zorder=5,
                     label="limited by background (bound)")
    axes.set_xticks(x, [f"{f:g}" for f in bands], rotation=90, fontsize=7)
    axes.set_xlabel("one-third-octave band (Hz)")
    axes.set_ylabel("dB")
    axes.grid(alpha=0.3)
    headline = f"{rating.descriptor} = {rating.single_number_db} dB"
    if rating.bound:
        headline += f" ({rating.bound} bound)"
    title = fitted_title(figure, title)
    axes.set_title(f"{title}\n{headline}" if title else headline, fontsize=TITLE_FONT_SIZE, parse_math=False)
    axes.legend(fontsize=7, loc="best")
    return figure


def assessment_figure(assessment: Assessment, *, descriptor: str | None = None) -> Figure:
    """The chart for one rating of an assessment (default: the requirement's, else the first)."""
    if not assessment.ratings:
        raise InputError(f"{assessment.source_name}: no rating to plot")
    wanted = descriptor or (assessment.verdict.requirement.descriptor if assessment.verdict else None)
    index = next((i for i, r in enumerate(assessment.ratings) if r.descriptor == wanted), 0)
    return rating_figure(assessment.rated_spectra[index], assessment.ratings[index],
                         limited=assessment.result.limited, title=assessment.title,
                         band_uncertainty=assessment.band_uncertainty_db,
                         uncertainty_source=band_uncertainty_source(assessment.test_type,
                                                                    assessment.uncertainty_situation))


def _uncertainty_bars(axes: Axes, bands: tuple[float, ...], values: np.ndarray, band_u: BandSpectrum, source: str) -> None:
    """Error bars of ± u at every band with both a measured value and a table value."""
    u_by_band = dict(zip(band_u.nominal_hz, band_u.values))
    u_db = np.array([np.nan if u_by_band.get(f) is None else u_by_band[f] for f in bands], dtype=float)
    shown = np.isfinite(u_db) & np.isfinite(values)
    if not shown.any():
        return
    label = "± u per band (standard uncertainty, k = 1)" + (f": {source}" if source else "")
    axes.errorbar(np.arange(len(bands))[shown], values[shown], yerr=u_db[shown], fmt="none",
                  ecolor=UNCERTAINTY_COLOUR, elinewidth=1.0, capsize=2.5, zorder=1, label=label)


def save_assessment_plot(assessment: Assessment, path: str | Path, *, descriptor: str | None = None) -> Path:
    """Write the chart as PNG (or any format matplotlib infers from the suffix).

    A name without a suffix is refused: matplotlib would add ".png" itself, and "" or "." would
    become a hidden file ".png" in the working folder.
    """
    target = Path(path)
    if not target.suffix:
        raise InputError(f"{file_label(target)}: the chart file needs a name ending in .png (or another "
                         "picture format)")
    assessment_figure(assessment, descriptor=descriptor).savefig(target)
    return target


def construction_figure(comparison: Comparison, *, title: str = "") -> Figure:
    """Predicted R of the declared construction beside the measured R', with the gap per band."""
    figure = Figure(figsize=FIGURE_SIZE_IN, dpi=FIGURE_DPI, layout="constrained")
    axes = figure.add_subplot()
    bands = comparison.gap_db.nominal_hz
    x = np.arange(len(bands))
    axes.plot(x, comparison.predicted_db.as_array(), color=REFERENCE_COLOUR, linestyle=":", marker="s",
              markersize=3, label=f"predicted R (Rw {comparison.predicted_rating.single_number_db} dB)")
    measured = comparison.measured_rating
    axes.plot(x, comparison.measured_db.as_array(), color=MEASURED_COLOUR, marker="o", markersize=3.5,
              label="measured R'" + ("" if measured is None else f" (R'w {measured.single_number_db} dB)"))
    axes.bar(x, comparison.gap_db.as_array(), color=DEVIATION_COLOUR, alpha=0.35, label="gap (predicted - measured)")
    axes.set_xticks(x, [f"{f:g}" for f in bands], rotation=90, fontsize=7)
    axes.set_xlabel("one-third-octave band (Hz)")
    axes.set_ylabel("dB")
    axes.grid(alpha=0.3)
    axes.set_title(fitted_title(figure, title) or "Declared construction: prediction against the field result",
                   fontsize=TITLE_FONT_SIZE, parse_math=False)
    axes.legend(fontsize=7, loc="best")
    return figure


def fitted_title(figure: Figure, title: str) -> str:
    """``title`` as one line (any whitespace run, newlines included, becomes one space), cut with
    "…" so that it spans at most TITLE_WIDTH_FRACTION of the figure's width at the title's font."""
    line = " ".join(title.split())
    if not line:
        return ""
    renderer = FigureCanvasAgg(figure).get_renderer()
    probe = figure.text(0.0, 0.0, "", fontsize=TITLE_FONT_SIZE, parse_math=False)
    limit_px = TITLE_WIDTH_FRACTION * figure.bbox.width

    def fits(text: str) -> bool:
        probe.set_text(text)
        return probe.get_window_extent(renderer).width <= limit_px

    if not fits(line):
        low, high = 0, min(len(line), 400)      # no character is narrower than 1/400 of the width
        while low < high:                        # the longest cut that still fits
            middle = (low + high + 1) // 2
            low, high = (middle, high) if fits(line[:middle].rstrip() + "…") else (low, middle - 1)
        line = line[:low].rstrip() + "…"
    probe.remove()
    return line
