"""ISO 16283-2 field impact arithmetic, checked against the standard's formulas and worked values.

Expected numbers are computed by hand in the comments ("analytic") from the ISO 16283-2 formulas
L'n = Li + 10 lg(A/A0), L'nT = Li - 10 lg(T/T0), A = 0.16 V/T (all from memory, high confidence)
and the ISO 16283-1/-2 background-correction rule (from memory, high confidence).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as hs

from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, BandSpectrum
from fieldtl.errors import InputError
from fieldtl.insulation import (
    ImpactMeasurement,
    TappingPosition,
    impact_insulation,
    octave_level_sum_db,
    octave_limited,
)

BANDS = THIRD_OCTAVES_50_5000_HZ


def flat(level: float, *, unit: str = "dB", quantity: str = "L", **at_hz: float) -> BandSpectrum:
    return BandSpectrum.from_array(BANDS, [at_hz.get(f"hz_{f:g}", level) for f in BANDS], unit, quantity)


def measurement(li: float = 60.0, t_s: float = 0.6, background: float = 20.0, **li_at_hz: float) -> ImpactMeasurement:
    positions = [TappingPosition([flat(li, **li_at_hz)] * 2) for _ in range(4)]
    return ImpactMeasurement(positions, [flat(background)] * 2, [flat(t_s, unit="s", quantity="T")] * 6)


def test_worked_example_normalized_and_standardized_impact_level():
    # ISO 16283-2 formulas, analytic: Li 60, T 0.6 s, V 45 m3 -> A = 0.16·45/0.6 = 12 m2,
    # L'n = 60 + 10 lg(12/10) = 60.79, L'nT = 60 - 10 lg(0.6/0.5) = 59.21
    result = impact_insulation(measurement(), receiving_volume_m3=45.0)
    for hz in (100.0, 500.0, 3150.0):
        assert result.absorption_area_m2.at(hz) == pytest.approx(12.0)
        assert result.normalized_impact_level_db.at(hz) == pytest.approx(60.79, abs=0.005)
        assert result.standardized_impact_level_db.at(hz) == pytest.approx(59.21, abs=0.005)
    assert result.limited == (False,) * len(BANDS)
    assert result.single_number_bound() == "exact"


@given(li=hs.floats(30.0, 90.0), t_s=hs.floats(0.2, 3.0), volume_m3=hs.floats(10.0, 250.0))
def test_standardized_and_normalized_identity(li, t_s, volume_m3):
    # analytic identity of the ISO 16283-2 formulas: L'nT = L'n - 10 lg(0.032 V), from A = 0.16 V/T, A0 = 10 m2, T0 = 0.5 s
    result = impact_insulation(measurement(li=li, t_s=t_s, background=li - 30.0), receiving_volume_m3=volume_m3)
    assert result.standardized_impact_level_db.at(500) == pytest.approx(
        result.normalized_impact_level_db.at(500) - 10 * math.log10(0.032 * volume_m3), abs=1e-9)


def test_li_is_the_energy_average_over_tapping_and_microphone_positions():
    # 2 tapping positions x 2 microphones: 62.0, 64.5 | 63.1, 61.8 -> energy average of the four
    # = 10 lg((10^6.2 + 10^6.45 + 10^6.31 + 10^6.18)/4) = 62.99 dB (computed)
    positions = [TappingPosition([flat(62.0), flat(64.5)]), TappingPosition([flat(63.1), flat(61.8)])]
    result = impact_insulation(ImpactMeasurement(positions, [flat(10.0)], [flat(0.5, unit="s")]),
                               receiving_volume_m3=50.0)
    expected = 10 * math.log10(np.mean(10 ** (np.array([62.0, 64.5, 63.1, 61.8]) / 10)))
    assert expected == pytest.approx(62.99, abs=0.005)
    assert result.impact_level_db.at(500) == pytest.approx(expected, abs=1e-9)
    assert result.spread.receiving_count == 4 and result.spread.source_std_db is None
    # unequal microphone counts: still the average over all combinations (weights = counts)
    uneven = [TappingPosition([flat(62.0)]), TappingPosition([flat(64.5), flat(63.1), flat(61.8)])]
    result = impact_insulation(ImpactMeasurement(uneven, [flat(10.0)], [flat(0.5, unit="s")]), receiving_volume_m3=50.0)
    assert result.impact_level_db.at(500) == pytest.approx(expected, abs=1e-9)


def test_limited_bands_are_upper_bounds():
    # 500 Hz only 4 dB over the background: Li corrected by 1.3 dB and marked; for impact the
    # reported level is then an upper bound (ISO 16283-2 background-correction rule, from memory)
    result = impact_insulation(measurement(background=20.0, hz_500=24.0), receiving_volume_m3=45.0)
    assert result.limited[BANDS.index(500.0)] and sum(result.limited) == 1
    assert result.impact_level_db.at(500) == pytest.approx(24.0 - 1.3)
    assert result.single_number_bound() == "upper"
    assert octave_limited(result.nominal_hz, result.limited)[3]  # the 500 Hz octave (63, 125, 250, 500, ...)
    # energy subtraction between 6 and 10 dB: Lsb 40, Lb 32 -> 39.25 (ISO 16283-2 background-correction
    # rule, analytic)
    corrected = impact_insulation(measurement(li=40.0, background=32.0), receiving_volume_m3=45.0)
    assert corrected.impact_level_db.at(1000) == pytest.approx(39.25, abs=0.005)
    assert not any(corrected.limited)


LF_60_66_DB = 10 * math.log10((10 ** 6.6 + 2 * 10 ** 6.0) / 3)  # ISO 16283-2 Formula (16) by hand: 62.9966 dB


def test_low_frequency_procedure_in_a_small_receiving_room():
    # 20 m3 < 25 m3: highest corner per tapping position (66), energy-averaged over positions
    # (Formula (15): all 66 -> 66), combined with the default (60) by ISO 16283-2 Formula (16):
    # 10 lg((10^6.6 + 2·10^6)/3) = 63.00 dB at 50-80 Hz (as transcribed; verify against a licensed copy)
    positions = [TappingPosition([flat(60.0)] * 2, [flat(66.0), flat(63.0), flat(61.0), flat(58.0)])] * 4
    small = ImpactMeasurement(positions, [flat(20.0)] * 2, [flat(0.5, unit="s")],
                              background_corner_levels_db=[flat(20.0)] * 4, octave_63_reverberation_times_s=(0.5,))
    result = impact_insulation(small, receiving_volume_m3=20.0)
    assert result.impact_level_db.at(50) == pytest.approx(LF_60_66_DB, abs=0.005)
    assert result.impact_level_db.at(100) == pytest.approx(60.0)
    assert result.findings == ()


def test_small_room_uses_the_63_hz_octave_t_at_50_to_80_hz():
    # ISO 16283-2 clause 10.4 (as transcribed): in a room under 25 m3 one 63 Hz octave-band T serves
    # 50, 63 and 80 Hz. Third-octave T 0.5 s everywhere, octave T 1.0 s (mean of 0.8 and 1.2):
    # L'nT = Li - 10 lg(T/0.5) = 60 - 3.0103 at 50-80 Hz, 60 at 100 Hz.
    positions = [TappingPosition([flat(60.0)] * 2)]
    small = ImpactMeasurement(positions, [flat(20.0)] * 2, [flat(0.5, unit="s")] * 2,
                              octave_63_reverberation_times_s=(0.8, 1.2))
    result = impact_insulation(small, receiving_volume_m3=24.4)
    for hz in (50.0, 63.0, 80.0):
        assert result.reverberation_time_s.at(hz) == pytest.approx(1.0)
        assert result.standardized_impact_level_db.at(hz) == pytest.approx(60.0 - 10 * math.log10(2.0))
    assert result.reverberation_time_s.at(100) == pytest.approx(0.5)
    assert result.low_frequency_octave_t_s == pytest.approx(1.0)
    assert result.spread.reverberation_std_s.at(63) == pytest.approx(math.sqrt(0.08))  # std of 0.8, 1.2 (n - 1)
    assert any("63 Hz octave-band T" in rule for rule in result.rules_applied)
    # 24.5 m3 rounds to 25: third-octave T stays
    large = impact_insulation(small, receiving_volume_m3=24.5)
    assert large.reverberation_time_s.at(63) == pytest.approx(0.5) and large.low_frequency_octave_t_s is None
    # small room without an octave T: a finding, third-octave T kept
    without = impact_insulation(ImpactMeasurement(positions, [flat(20.0)] * 2, [flat(0.5, unit="s")] * 2),
                                receiving_volume_m3=20.0)
    assert "low_frequency_octave_t_missing" in [f.code for f in without.findings]
    assert without.reverberation_time_s.at(63) == pytest.approx(0.5)


def test_corner_background_missing_is_a_finding_not_an_error():
    positions = [TappingPosition([flat(60.0)], [flat(66.0)])]
    result = impact_insulation(ImpactMeasurement(positions, [flat(20.0)], [flat(0.5, unit="s")]),
                               receiving_volume_m3=20.0)
    assert [f.code for f in result.findings] == ["corner_background_missing", "low_frequency_octave_t_missing"]
    assert result.impact_level_db.at(63) == pytest.approx(LF_60_66_DB, abs=0.005)


def test_octave_impact_levels_are_energy_sums():
    # ISO 16283-2 octave impact level = energy sum of the thirds (from memory), analytic:
    # 10 lg(10^5.0 + 10^5.2 + 10^4.8) = 55.07 dB
    thirds = BandSpectrum((800.0, 1000.0, 1250.0), (50.0, 52.0, 48.0), "dB", "L'nT")
    assert octave_level_sum_db(thirds).at(1000) == pytest.approx(55.07, abs=0.005)


def test_missing_background_is_a_finding():
    result = impact_insulation(ImpactMeasurement([TappingPosition([flat(60.0)])], [], [flat(0.5, unit="s")]),
                               receiving_volume_m3=45.0)
    assert [f.code for f in result.findings] == ["background_not_measured"]
    assert result.background_level_db.at(500) is None


@pytest.mark.parametrize(("build", "message"), [
    (lambda: impact_insulation(measurement(), receiving_volume_m3=0.0), "receiving room volume"),
    (lambda: impact_insulation(ImpactMeasurement([], [], []), receiving_volume_m3=45.0), "no tapping positions"),
    (lambda: impact_insulation(ImpactMeasurement([TappingPosition([flat(60.0)], [flat(66.0)]),
                                                  TappingPosition([flat(60.0)])], [flat(20.0)],
                                                 [flat(0.5, unit="s")]), receiving_volume_m3=20.0), "some source"),
    (lambda: impact_insulation(ImpactMeasurement([TappingPosition([flat(60.0)])], [flat(20.0)],
                                                 [flat(0.5, unit="s")] * 2, reverberation_time_kind="averaged"),
                               receiving_volume_m3=45.0), "expected 1 spectrum"),
])
def test_bad_input_raises_one_line_input_error(build, message):
    with pytest.raises(InputError, match=message) as caught:
        build()
    assert "\n" not in str(caught.value)
