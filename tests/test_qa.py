"""On-site quality checks: each fires on the case it is for and stays quiet otherwise."""

import pytest

from fieldtl.bands import THIRD_OCTAVES_100_3150_HZ, BandSpectrum
from fieldtl.qa import (
    TakeSummary,
    check_against_lab_rating,
    check_background,
    check_calibration,
    check_decays,
    check_durations,
    check_geometry,
    check_positions,
    check_source_spectrum,
    check_spatial_spread,
    check_stationarity,
)

BANDS = THIRD_OCTAVES_100_3150_HZ


def _codes(findings):
    return [f.code for f in findings]


def _flat(level_db, quantity="L"):
    return BandSpectrum(BANDS, (level_db,) * len(BANDS), "dB", quantity)


def test_airborne_position_counts():
    # ISO 16283-1 (from memory): >= 2 loudspeaker positions, >= 5 microphone positions per room and
    # loudspeaker position, >= 6 decays.
    full = [TakeSummary(f"{r}{s}{m}", r, s) for r in ("source", "receiving") for s in (1, 2) for m in range(5)]
    decays = [TakeSummary(f"d{i}", "decay", 1) for i in range(6)]
    assert check_positions(full + decays, test_type="airborne") == ()
    short = [t for t in full if not (t.role == "receiving" and t.speaker == 2 and t.label.endswith("4"))]
    findings = check_positions(short + decays[:5], test_type="airborne")
    assert _codes(findings) == ["too_few_microphone_positions", "too_few_decays"]
    assert "receiving room, position 2: 4 microphone position(s)" in findings[0].message
    one_speaker = [t for t in full if t.speaker == 1]
    assert _codes(check_positions(one_speaker + decays, test_type="airborne")) == ["too_few_source_positions"]


def test_impact_needs_four_tapping_positions():
    # ISO 16283-2 (from memory): >= 4 tapping-machine positions.
    takes = [TakeSummary(f"i{s}{m}", "impact", s) for s in (1, 2, 3) for m in range(5)]
    takes += [TakeSummary(f"d{i}", "decay", 1) for i in range(6)]
    assert _codes(check_positions(takes, test_type="impact")) == ["too_few_source_positions"]


def test_averaging_time():
    # ISO 16283-1 (from memory): 6 s per fixed position, 15 s per low-frequency corner position.
    takes = [TakeSummary("a", "receiving", 1, duration_s=6.0), TakeSummary("b", "receiving", 1, duration_s=5.9),
             TakeSummary("c", "receiving_corner", 1, duration_s=10.0), TakeSummary("d", "decay", 1, duration_s=1.0)]
    assert [f.message.split(":")[0] for f in check_durations(takes)] == ["b", "c"]


def test_source_spectrum_eight_db_rule():
    # ISO 16283-1: adjacent one-third-octave source levels may differ by up to 8 dB.
    levels = [90.0] * len(BANDS)
    levels[5] = 98.0
    assert check_source_spectrum([BandSpectrum(BANDS, tuple(levels), "dB", "L1")], labels=["s1"]) == ()
    levels[5] = 98.1
    findings = check_source_spectrum([BandSpectrum(BANDS, tuple(levels), "dB", "L1")], labels=["s1"])
    assert _codes(findings) == ["source_spectrum_step"] and findings[0].band_hz == BANDS[5]


def test_background_findings_follow_the_margin():
    margins = BandSpectrum(BANDS[:3], (12.0, 8.0, 5.0), "dB", "L2 - B2")
    findings = check_background(margins, (False, False, True), test_type="airborne")
    assert [(f.code, f.band_hz) for f in findings] == [("background_margin", 125.0), ("background_limit", 160.0)]
    assert "lower bound" in findings[1].message
    assert "upper bound" in check_background(margins, (False, False, True), test_type="impact")[1].message


def test_stationarity_and_background_events():
    takes = [TakeSummary("steady", "receiving", 1, level_history_std_db=0.4),
             TakeSummary("wobbly", "receiving", 1, level_history_std_db=3.0),
             TakeSummary("quiet", "background", 1, background_event_db=3.0),
             TakeSummary("door", "background", 1, background_event_db=18.0)]
    assert _codes(check_stationarity(takes)) == ["non_stationary", "background_event"]


def test_spatial_spread():
    calm = [TakeSummary(str(i), "receiving", 1, level_db=_flat(50.0 + i * 0.5)) for i in range(5)]
    assert check_spatial_spread(calm) == ()
    wild = calm + [TakeSummary("near", "receiving", 1, level_db=_flat(62.0))]
    assert _codes(check_spatial_spread(wild)) == ["spatial_spread_high"]


def test_decay_disagreement():
    t = lambda value: BandSpectrum(BANDS, (value,) * len(BANDS), "s", "T")  # noqa: E731
    decays = [TakeSummary(f"d{i}", "decay", 1, reverberation_time_s=t(0.5 + 0.01 * i)) for i in range(5)]
    assert check_decays(decays) == ()
    odd = decays + [TakeSummary("door open", "decay", 1, reverberation_time_s=t(0.9))]
    findings = check_decays(odd)
    assert len(findings) == len(BANDS) and all("door open" in f.message for f in findings)


def test_calibration_missing_matters_more_for_impact():
    assert check_calibration(calibrated=True, test_type="impact") == ()
    assert check_calibration(calibrated=False, test_type="airborne")[0].severity == "warning"
    assert check_calibration(calibrated=False, test_type="impact")[0].severity == "error"


@pytest.mark.parametrize("volumes, area, codes", [
    ((40.0, 50.0), 10.0, []),
    ((8.0, 50.0), 10.0, ["volume_out_of_scope"]),          # ISO 16283-2 scope 10-250 m3 (verified)
    ((40.0, 50.0), 30.0, ["area_implausible"]),            # room under 2 m high (common practice)
    ((40.0, 50.0), 4.0, ["small_separating_area"]),        # S < V/7.5 = 5.33 m2 (from memory)
])
def test_geometry(volumes, area, codes):
    findings = check_geometry(receiving_volume_m3=volumes[0], source_volume_m3=volumes[1], separating_area_m2=area)
    assert _codes(findings) == codes


def test_field_result_above_lab_value():
    # Common practice: field R'w sits 3-5 dB below lab Rw; more than 2 dB above points to an input error.
    assert check_against_lab_rating(field_rating_db=54, lab_rating_db=52) == ()
    assert _codes(check_against_lab_rating(field_rating_db=55, lab_rating_db=52)) == ["field_above_lab"]
