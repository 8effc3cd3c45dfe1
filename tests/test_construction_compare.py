"""Construction check findings: each fires on the case it is built for and stays quiet otherwise.

The measured R' spectra are invented from the prediction itself, so the expected finding follows
from the construction of the case; thresholds are common practice (flanking lowers a field R'w by 3-5 dB at good junctions) or the
module's stated own choices.
"""

import pytest

from fieldtl.bands import BandSpectrum
from fieldtl.construction import (MATERIALS, Cavity, Construction, Layer, Leaf, compare_with_measurement,
                                  comparison_to_json, construction_from_layers)
from fieldtl.construction.predict import predict
from fieldtl.errors import InputError

CONCRETE_150 = predict(construction_from_layers(["concrete_dense:150"]))   # fc about 117 Hz
CONCRETE_100 = predict(construction_from_layers(["concrete_dense:100"]))   # fc about 176 Hz -> 160 Hz band


def _measured(prediction, change_db=lambda f: 0.0, quantity="R'", bands=None):
    spectrum = prediction.r_db if bands is None else prediction.r_db.select(bands)
    return BandSpectrum(spectrum.nominal_hz, tuple(v + change_db(f) for f, v in zip(spectrum.nominal_hz,
                                                                                     spectrum.values)),
                        "dB", quantity)


def _codes(comparison):
    return [(f.code, f.severity) for f in comparison.findings]


def test_clean_case_is_quiet():
    # 1 dB below the prediction everywhere: less than the 3 dB of typical flanking (common practice).
    comparison = compare_with_measurement(CONCRETE_150, _measured(CONCRETE_150, lambda f: -1.0))
    assert comparison.findings == ()
    assert comparison.mean_gap_db == pytest.approx(1.0)
    assert comparison.rating_gap_db in (0, 1, 2)


@pytest.mark.parametrize(("drop_db", "severity", "words"), [
    (4.0, "info", "typical of flanking"),          # 3-5 dB: good junctions (common practice)
    (7.0, "warning", "more than the 3-5 dB"),       # 5-10 dB: poor junctions, linings, leaks [CP]
    (12.0, "warning", "far more than flanking"),    # beyond 10 dB [CP]
])
def test_flanking_gap(drop_db, severity, words):
    comparison = compare_with_measurement(CONCRETE_150, _measured(CONCRETE_150, lambda f: -drop_db))
    assert _codes(comparison) == [("flanking_gap", severity)]
    assert comparison.rating_gap_db == pytest.approx(drop_db, abs=1)
    assert words in comparison.findings[0].message


def test_field_above_prediction():
    # A field value 4 dB above the element's own prediction: an input error (common practice).
    comparison = compare_with_measurement(CONCRETE_150, _measured(CONCRETE_150, lambda f: 4.0))
    assert _codes(comparison) == [("field_above_prediction", "warning")]
    assert "Check S, V and T" in comparison.findings[0].action


def test_dip_at_the_critical_frequency_is_explained():
    # A 6 dB notch in the 200 Hz band lies within ±1/3 octave of fc = 176 Hz (nearest band 160 Hz);
    # the same notch at 1000 Hz is far from fc and is not explained by it.
    near = compare_with_measurement(CONCRETE_100, _measured(CONCRETE_100, lambda f: -1.0 - 6.0 * (f == 200)))
    assert _codes(near) == [("dip_near_critical", "info")]
    assert near.findings[0].band_hz == 200.0
    far = compare_with_measurement(CONCRETE_100, _measured(CONCRETE_100, lambda f: -1.0 - 6.0 * (f == 1000)))
    assert far.findings == ()


def _dips(comparison):
    return {(f.code, f.band_hz) for f in comparison.findings if f.code.startswith("dip_")}


def test_dip_at_the_mass_air_mass_resonance_is_explained():
    # 1 x 12.5 mm gypsum board each side, 100 mm cavity, full fill: f0 = 60.05 sqrt(18/(0.1 · 81))
    # = 89.5 Hz (module formula), nearest band 100 Hz (exact centres 79.4 and 100 Hz, log midpoint
    # 89.1 Hz, IEC 61260-1). The predicted curve itself dips there (Sharp's model sits ~5 dB below
    # the mass law at f0, computed) and at fc = 2656 Hz, so a field curve that follows it gets both
    # dips explained; an extra notch at 125 Hz is within 1/3 octave of f0, one at 160 Hz is not.
    board = Leaf((Layer(MATERIALS["gypsum_board"], 12.5),))
    prediction = predict(Construction("w", (board, board), Cavity(100.0, "full", "independent")))
    assert prediction.mass_air_mass_resonance_hz == pytest.approx(89.5, abs=0.1)
    follows = compare_with_measurement(prediction, _measured(prediction, lambda f: -1.0))
    assert _dips(follows) == {("dip_near_mass_air_mass", 100.0), ("dip_near_critical", 2500.0)}
    near = compare_with_measurement(prediction, _measured(prediction, lambda f: -1.0 - 8.0 * (f == 125)))
    assert ("dip_near_mass_air_mass", 125.0) in _dips(near)
    far = compare_with_measurement(prediction, _measured(prediction, lambda f: -1.0 - 8.0 * (f == 160)))
    assert _dips(far) == _dips(follows)


def test_high_frequency_shortfall_only_when_broadband_and_growing():
    # Extra shortfall of 3 dB at 1 kHz growing by 2 dB per band (an air path), beside a flat 1 dB gap
    # below 1 kHz; the same excess shrinking with frequency, or a single 8 dB notch at 2 kHz (not
    # broadband), stays quiet.
    steps = {1000: 3, 1250: 5, 1600: 7, 2000: 9, 2500: 11, 3150: 13, 4000: 15, 5000: 17}
    leaky = compare_with_measurement(CONCRETE_150, _measured(CONCRETE_150, lambda f: -1.0 - steps.get(f, 0)))
    assert ("high_frequency_shortfall", "warning") in _codes(leaky)
    shrinking = {f: 20 - extra for f, extra in steps.items()}   # as large, but shrinking with frequency
    falling = compare_with_measurement(CONCRETE_150, _measured(CONCRETE_150, lambda f: -1.0 - shrinking.get(f, 0)))
    assert "high_frequency_shortfall" not in [code for code, _ in _codes(falling)]
    notch = compare_with_measurement(CONCRETE_150, _measured(CONCRETE_150, lambda f: -1.0 - 8.0 * (f == 2000)))
    assert "high_frequency_shortfall" not in [code for code, _ in _codes(notch)]


def test_partial_band_range_compares_by_mean_gap():
    # 100-2500 Hz only: R'w needs 100-3150 Hz (ISO 717-1), so the mean band gap is used instead.
    bands = [f for f in CONCRETE_150.r_db.nominal_hz if 100 <= f <= 2500]
    comparison = compare_with_measurement(CONCRETE_150, _measured(CONCRETE_150, lambda f: -4.0, bands=bands))
    assert comparison.measured_rating is None and comparison.rating_gap_db is None
    assert _codes(comparison) == [("flanking_gap", "info")]
    assert "mean band gap" in comparison.findings[0].message


def test_bad_measured_input():
    with pytest.raises(InputError, match="needs a one-third-octave R'"):
        compare_with_measurement(CONCRETE_150, _measured(CONCRETE_150, quantity="DnT"))
    empty = BandSpectrum((50.0, 63.0), (None, None), "dB", "R'")
    with pytest.raises(InputError, match="no measured band in common"):
        compare_with_measurement(CONCRETE_150, empty)


def test_comparison_json():
    comparison = compare_with_measurement(CONCRETE_150, _measured(CONCRETE_150, lambda f: -4.0))
    data = comparison_to_json(comparison)
    assert data["gap_db"] == [4.0] * 21
    assert data["predicted_Rw"] - data["measured_R_prime_w"] == data["rating_gap_db"] == 4
    assert [w["code"] for w in data["warnings"]] == ["flanking_gap"]
