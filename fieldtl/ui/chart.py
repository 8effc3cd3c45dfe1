"""An interactive band chart for phones (Vega-Lite through Altair): text at 12 px whatever the width.

Imports no matplotlib (fieldtl.report.plot does): the Results page's first visit stays light."""

from __future__ import annotations

import altair as alt
import pandas as pd

from fieldtl.assess import Assessment
from fieldtl.construction import Comparison
from fieldtl.iso12999 import band_uncertainty_source

FONT_PX = 12          # at least 11 px on a 390 px phone: Vega-Lite draws text at this size, unscaled
TEXT_COLOUR = "#333333"          # 12.6:1 on white; Vega's default grey axis text is lighter
MEASURED_COLOUR = "#1b4f72"
REFERENCE_COLOUR = "#595959"     # 7:1 on white
DEVIATION_COLOUR = "#e67e22"
UNCERTAINTY_COLOUR = "#5d8aa8"   # lighter than the measured line, so the line stays on top


def rating_chart(assessment: Assessment) -> alt.Chart | None:
    """The requirement's rating (else the first): measured bands, shifted reference, unfavourable deviations."""
    if not assessment.ratings:
        return None
    wanted = assessment.verdict.requirement.descriptor if assessment.verdict else None
    index = next((i for i, r in enumerate(assessment.ratings) if r.descriptor == wanted), 0)
    rating, spectrum = assessment.ratings[index], assessment.rated_spectra[index]
    reference = dict(zip(rating.shifted_reference.nominal_hz, rating.shifted_reference.values))
    deviation = dict(zip(rating.unfavourable_deviation.nominal_hz, rating.unfavourable_deviation.values))
    limited = dict(zip(assessment.result.nominal_hz, assessment.result.limited))
    band_u = assessment.band_uncertainty_db
    u_db = {} if band_u is None else dict(zip(band_u.nominal_hz, band_u.values))
    frame = pd.DataFrame([{"band": f"{f:g}", "measured": v, "reference": reference.get(f),
                           "deviates": bool(deviation.get(f) or 0) and v is not None,
                           "limited": "bound (background)" if limited.get(f) else "measured",
                           **_uncertainty_row(v, u_db.get(f))}
                          for f, v in zip(spectrum.nominal_hz, spectrum.values)])
    order = list(frame["band"])
    x = alt.X("band:N", sort=order, title="one-third-octave band, Hz", axis=alt.Axis(labelAngle=-90))
    y_title = f"{spectrum.quantity}, dB"
    measured = alt.Chart(frame).mark_line(point=True, color=MEASURED_COLOUR).encode(
        x=x, y=alt.Y("measured:Q", title=y_title, scale=alt.Scale(zero=False)),
        tooltip=["band", alt.Tooltip("measured:Q", format=".1f"), alt.Tooltip("u_db:Q", title="u, dB", format=".1f"),
                 alt.Tooltip("reference:Q", format=".0f"), "limited"])
    shifted = alt.Chart(frame).mark_line(strokeDash=[6, 4], color=REFERENCE_COLOUR).encode(x=x, y="reference:Q")
    below = alt.Chart(frame[frame["deviates"]]).mark_bar(color=DEVIATION_COLOUR, opacity=0.5).encode(
        x=x, y="measured:Q", y2="reference:Q")
    layers = [below, shifted]
    if frame["u_db"].notna().any():
        layers.append(_uncertainty_bars(frame[frame["u_db"].notna()], x, band_uncertainty_source(
            assessment.test_type, assessment.uncertainty_situation), y_title))
    chart = alt.layer(*layers, measured).properties(height=300, title=f"{rating.descriptor} = "
                                                                      f"{rating.single_number_db} dB")
    return chart.configure_axis(labelFontSize=FONT_PX, titleFontSize=FONT_PX, labelColor=TEXT_COLOUR,
                                titleColor=TEXT_COLOUR).configure_title(
        fontSize=FONT_PX, limit=360, color=TEXT_COLOUR).configure_legend(
        labelFontSize=FONT_PX, titleFontSize=FONT_PX, labelColor=TEXT_COLOUR, titleColor=TEXT_COLOUR,
        labelLimit=360, titleLimit=360)


def _uncertainty_row(measured_db: float | None, u_db: float | None) -> dict[str, float | None]:
    """The band's standard uncertainty and the ends of its ± u bar (None where either is missing)."""
    if measured_db is None or u_db is None:
        return {"u_db": None, "low_db": None, "high_db": None}
    return {"u_db": u_db, "low_db": measured_db - u_db, "high_db": measured_db + u_db}


def _uncertainty_bars(frame: pd.DataFrame, x: alt.X, source: str, y_title: str) -> alt.Chart:
    """Error bars of ± the standard uncertainty (k = 1) per band, with a legend naming the table."""
    label = "± u per band (standard uncertainty, k = 1)"
    return alt.Chart(frame.assign(uncertainty=label)).mark_errorbar(ticks=True).encode(
        x=x, y=alt.Y("low_db:Q", title=y_title), y2="high_db:Q",
        color=alt.Color("uncertainty:N", scale=alt.Scale(range=[UNCERTAINTY_COLOUR]),
                        legend=alt.Legend(orient="bottom", title=source, direction="vertical")))


def construction_chart(check: Comparison) -> alt.Chart:
    """Predicted R of the declared build-up and the measured R' per band, text at FONT_PX."""
    curves = (("R predicted", check.predicted_db), ("R' measured", check.measured_db))
    frame = pd.DataFrame([{"band": f"{f:g}", "value": v, "curve": name} for name, spectrum in curves
                          for f, v in zip(spectrum.nominal_hz, spectrum.values) if v is not None])
    order = [f"{f:g}" for f in check.gap_db.nominal_hz]
    chart = alt.Chart(frame).mark_line(point=True).encode(
        x=alt.X("band:N", sort=order, title="one-third-octave band, Hz", axis=alt.Axis(labelAngle=-90)),
        y=alt.Y("value:Q", title="dB", scale=alt.Scale(zero=False)),
        color=alt.Color("curve:N", scale=alt.Scale(range=[REFERENCE_COLOUR, MEASURED_COLOUR]),
                        legend=alt.Legend(orient="bottom", title=None)),
        strokeDash=alt.StrokeDash("curve:N", legend=None),
        tooltip=["band", "curve", alt.Tooltip("value:Q", format=".1f")]).properties(height=300)
    return chart.configure_axis(labelFontSize=FONT_PX, titleFontSize=FONT_PX, labelColor=TEXT_COLOUR,
                                titleColor=TEXT_COLOUR).configure_legend(labelFontSize=FONT_PX, labelColor=TEXT_COLOUR)
