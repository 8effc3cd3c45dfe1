"""The charts (app: Altair; PDF/PNG: matplotlib) draw ± the ISO 12999-1 per-band standard uncertainty.

Expected values are ISO 12999-1:2020 Table 2 (airborne, per one-third octave) and Table 4 (impact),
as transcribed; verify against a licensed copy. They are written here literally, not read from the code.
"""

import dataclasses
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))
from test_report_pdf import _airborne, _impact  # invented pasted-level surveys

from fieldtl.assess import assess
from fieldtl.measure import takes_from_band_columns
from fieldtl.report.plot import assessment_figure
from fieldtl.ui.chart import rating_chart

# ISO 12999-1:2020 Table 2, airborne, standard uncertainty in dB (as transcribed; verify against a licensed copy).
TABLE_2_B = {50: 4.0, 100: 2.8, 500: 1.1, 5000: 2.2}
TABLE_2_C = {50: 2.0, 100: 1.4, 500: 0.6, 5000: 0.6}
# ISO 12999-1:2020 Table 4, impact, situation B (as transcribed; verify against a licensed copy).
TABLE_4_B = {50: 3.2, 100: 2.0, 1250: 1.3, 5000: 2.3}


def _with_situation(survey, situation):
    changed = dataclasses.replace(survey, uncertainty_situation=situation)
    return assess(changed, takes_from_band_columns(changed.band_columns), calibrated=True)


def _altair_bars(assessment):
    """The per-band rows of the error-bar layer of the app's chart, and that layer."""
    spec = rating_chart(assessment).to_dict()
    layers = [layer for layer in spec["layer"] if layer["mark"]["type"] == "errorbar"]
    assert len(layers) <= 1
    if not layers:
        return {}, None
    layer = layers[0]
    rows = spec["datasets"][layer["data"]["name"]]
    return {float(row["band"]): row for row in rows}, layer


def _matplotlib_bars(assessment):
    """Band index -> (low, high, measured line's value) of the drawn error bars, and the legend label;
    ({}, None) without bars."""
    axes = assessment_figure(assessment).axes[0]
    if not axes.containers:
        return {}, None
    (container,) = axes.containers
    _, _, (segments,) = container.lines
    measured = axes.lines[0].get_ydata()            # the first line drawn: the measured curve
    return ({round(s[0][0]): (s[0][1], s[1][1], measured[round(s[0][0])]) for s in segments.get_segments()},
            container.get_label())


@pytest.mark.parametrize("situation, expected", [("B", TABLE_2_B), ("C", TABLE_2_C)])
def test_app_chart_carries_table_2_per_band(situation, expected):
    _, survey = _airborne()
    assessment = _with_situation(survey, situation)
    rows, layer = _altair_bars(assessment)
    for band_hz, u_db in expected.items():
        row = rows[band_hz]
        assert row["u_db"] == u_db                                   # ISO 12999-1:2020 Table 2
        assert row["high_db"] - row["measured"] == pytest.approx(u_db, abs=1e-9)   # ± u, k = 1
        assert row["measured"] - row["low_db"] == pytest.approx(u_db, abs=1e-9)
    legend = layer["encoding"]["color"]["legend"]
    assert legend["title"] == f"ISO 12999-1:2020 Table 2, situation {situation}"
    assert "standard uncertainty, k = 1" in rows[50.0]["uncertainty"]


def test_app_chart_of_an_impact_test_carries_table_4_and_none_for_situation_a():
    _, survey = _impact()
    rows, layer = _altair_bars(_with_situation(survey, "B"))
    assert {f: rows[f]["u_db"] for f in TABLE_4_B} == TABLE_4_B        # ISO 12999-1:2020 Table 4, B
    assert layer["encoding"]["color"]["legend"]["title"] == "ISO 12999-1:2020 Table 4, situation B"
    # Table 4 has no situation A column: no bars (and no invented values).
    rows_a, layer_a = _altair_bars(_with_situation(survey, "A"))
    assert layer_a is None and rows_a == {}


@pytest.mark.parametrize("situation, expected", [("B", TABLE_2_B), ("C", TABLE_2_C)])
def test_pdf_chart_draws_table_2_per_band(situation, expected):
    assessment, survey = _airborne()
    assessment = _with_situation(survey, situation)
    bars, label = _matplotlib_bars(assessment)
    bands = list(assessment.result.nominal_hz)
    for band_hz, u_db in expected.items():
        low, high, measured = bars[bands.index(band_hz)]
        assert high - low == pytest.approx(2 * u_db, abs=1e-9)      # ± u, ISO 12999-1:2020 Table 2
        assert (low + high) / 2 == pytest.approx(measured, abs=1e-9)
    assert len(bars) == 21                                           # 50 Hz ... 5 kHz, every band
    assert label.endswith(f"ISO 12999-1:2020 Table 2, situation {situation}")
    assert "standard uncertainty, k = 1" in label


def test_pdf_chart_of_an_impact_test_draws_table_4_and_nothing_for_situation_a():
    _, survey = _impact()
    assessment = _with_situation(survey, "B")
    bars, label = _matplotlib_bars(assessment)
    bands = list(assessment.result.nominal_hz)
    for band_hz, u_db in TABLE_4_B.items():
        low, high, _ = bars[bands.index(band_hz)]
        assert high - low == pytest.approx(2 * u_db, abs=1e-9)       # ISO 12999-1:2020 Table 4, B
    assert label.endswith("ISO 12999-1:2020 Table 4, situation B")
    assert _matplotlib_bars(_with_situation(survey, "A")) == ({}, None)


def test_chart_texts_carry_no_internal_notes():
    assessment, _ = _airborne()
    texts = [str(rating_chart(assessment).to_dict()), _matplotlib_bars(assessment)[1]]
    for text in texts:
        for word in ("from memory", "facts sheet", "placeholder"):
            assert word not in text.lower()
