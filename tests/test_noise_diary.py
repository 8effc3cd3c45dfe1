"""Diary matching, the link to the wall, reference lines (expected values from the invented tone
night's known times and levels, and from the ISO 16283-1 definition of DnT)."""

from __future__ import annotations

import dataclasses
import math
from datetime import datetime
from zoneinfo import ZoneInfo

import pytest
from noise_night import Burst, night_source

from fieldtl.bands import BandSpectrum, nominal_bands_hz
from fieldtl.errors import InputError
from fieldtl.noise.diary import match_diary, read_diary_csv
from fieldtl.noise.record import analyse_sources
from fieldtl.noise.reference import WHO_BEDROOM_NIGHT, compare, reference_line
from fieldtl.noise.settings import RecordSettings
from fieldtl.noise.wall import DEFAULT_SOURCES, SourceSpectrum, compare_with_wall

LONDON = ZoneInfo("Europe/London")
START = datetime(2026, 11, 28, 23, 50, tzinfo=LONDON)          # the record crosses midnight
BURSTS = (Burst(120.0, 3.0, -20.0), Burst(400.0, 2.0, -25.0), Burst(700.0, 4.0, -15.0))


@pytest.fixture(scope="module")
def record():
    source = night_source(duration_s=1200.0, background_dbfs=-50.0, bursts=BURSTS)
    return analyse_sources([source], RecordSettings(zone_name="Europe/London", interval_min=5), start=START)


DIARY = ("time;what was heard;how disturbing\n"
         "23:52;thumping music;8\n"                 # burst 1 at 23:52:00
         "00:02;voices;very\n"                       # burst 3 is 20 s before: within 5 minutes
         "2026-11-29 00:01;door slam;9\n"            # burst 3 at 00:01:40, 40 s after the note
         "22:10;bass;7\n")                           # a bare time before the start: the next evening, outside


def test_diary_entries_matched(record):
    entries = read_diary_csv(DIARY.encode("cp1252"), zone_name="Europe/London", first_date=record.start)
    assert [e.time.strftime("%Y-%m-%d %H:%M") for e in entries] == [
        "2026-11-28 23:52", "2026-11-29 00:02", "2026-11-29 00:01", "2026-11-29 22:10"]
    matches = match_diary(record, entries)
    assert [m.status for m in matches] == ["measured", "measured", "measured", "outside"]
    first, _, third, outside = matches
    assert first.event is not None and first.event.lafmax_db == pytest.approx(-20.0, abs=0.5)
    assert first.event_offset_s == pytest.approx(0.0, abs=0.2)       # the burst starts at 23:52:00
    assert third.event.lafmax_db == pytest.approx(-15.0, abs=0.5)
    assert third.event_offset_s == pytest.approx(40.0, abs=0.2)      # 23:50 + 700 s = 00:01:40
    assert "outside the recording" in outside.statement


def test_nothing_measurable_when_quiet(record):
    # the last burst ends at 00:01:44 and LAF falls below the threshold 25 dB / (34.7 dB/s) = 0.72 s later
    # (F decay 10 lg(e) / 0.125 s, IEC 61672-1), so the 5-minute window (MATCH_WINDOW_S) closes at 00:06:44.7
    def status(moment: str):
        entries = read_diary_csv(f"time,heard\n{moment},humming\n", zone_name="Europe/London")
        return match_diary(record, entries)[0]
    inside, outside = status("2026-11-29 00:06:40"), status("2026-11-29 00:06:50")
    assert inside.status == "measured" and inside.event is not None
    assert outside.status == "nothing_measurable" and outside.event is None


@pytest.mark.parametrize(("text", "message"), [
    ("moment\n23:00\n", "no 'time' column"),
    ("time,heard,disturbance\n25:00,x,1\n", "not a time of day"),
    ("time,heard,disturbance\n23:00,x,11\n", "outside 0 to 10"),
    ("time,heard\nyesterday,x\n", "write it like"),
])
def test_bad_diary_is_one_line(record, text, message):
    with pytest.raises(InputError, match=message) as caught:
        read_diary_csv(text, zone_name="Europe/London", first_date=record.start)
    assert "\n" not in str(caught.value)


# --- the wall ------------------------------------------------------------------------------------

BANDS = nominal_bands_hz(100, 3150)


def _flat(value: float, quantity: str) -> BandSpectrum:
    return BandSpectrum(BANDS, tuple(float(value) for _ in BANDS), "dB", quantity)


def test_expected_level_is_source_minus_dnt():
    # ISO 16283-1: DnT = L1 - L2 + 10 lg(T/T0), T0 = 0.5 s; with T = T0, L2 = L1 - DnT exactly
    source = SourceSpectrum("test", "airborne", _flat(80.0, "L1"), "invented")
    result = compare_with_wall(source, _flat(30.0, "L2"), separation=_flat(50.0, "DnT"))
    assert all(v == pytest.approx(30.0) for v in result.expected_db)
    assert result.conclusion.startswith("Consistent")
    # T = 1.0 s: the room holds the sound twice as long, +10 lg 2 = +3.01 dB
    doubled = compare_with_wall(source, _flat(30.0, "L2"), separation=_flat(50.0, "DnT"), reverberation_time_s=1.0)
    assert doubled.expected_db[0] == pytest.approx(30.0 + 10 * math.log10(2.0), abs=1e-9)


@pytest.mark.parametrize(("low_excess", "high_excess", "start"), [
    (12.0, 0.0, "Excess concentrated at low"), (0.0, 12.0, "Excess concentrated above"),
    (10.0, 10.0, "Broadband excess"), (5.9, 0.0, "Consistent"), (6.0, 0.0, "Excess concentrated at low")])
def test_excess_points_to_a_cause(low_excess, high_excess, start):
    source = SourceSpectrum("test", "airborne", _flat(80.0, "L1"), "invented")
    heard = BandSpectrum(BANDS, tuple(30.0 + (low_excess if f <= 200 else high_excess) for f in BANDS), "dB", "L2")
    assert compare_with_wall(source, heard, separation=_flat(50.0, "DnT")).conclusion.startswith(start)


def test_impact_source_needs_an_impact_test():
    footsteps = next(s for s in DEFAULT_SOURCES if s.kind == "impact")
    with pytest.raises(InputError, match="needs an impact test"):
        compare_with_wall(footsteps, _flat(30.0, "L2"), separation=_flat(50.0, "DnT"))
    result = compare_with_wall(footsteps, _flat(30.0, "L2"), separation=_flat(55.0, "L'nT"))
    assert result.expected_db[0] == pytest.approx(55.0 + footsteps.levels_db.at(100.0))


def test_default_sources_say_they_are_invented():
    assert all("invented" in s.origin for s in DEFAULT_SOURCES)


# --- reference lines ------------------------------------------------------------------------------

def test_reference_lines_count_above(record):
    calibrated = dataclasses.replace(record, calibrated=True)
    # burst LAFmax -20, -25, -15 (dB re full scale here): a local limit of -20.2 has 2 above, -19.8 one
    just_below = reference_line("local event limit", "event_lafmax", 0.0)
    assert compare(calibrated, (dataclasses.replace(just_below, level_db=-20.2),))[0].above == 2
    assert compare(calibrated, (dataclasses.replace(just_below, level_db=-19.8),))[0].above == 1
    who = compare(calibrated, WHO_BEDROOM_NIGHT)
    assert [c.above for c in who] == [0, 0]
    assert "WHO Guidelines for Community Noise (1999)" in who[0].text and "memory" not in who[0].text
    assert all("not calibrated" in c.text for c in compare(record, WHO_BEDROOM_NIGHT))


def test_reference_line_checked():
    for args in (("", "night_laeq", 30.0), ("x", "daily", 30.0), ("x", "night_laeq", math.nan)):
        with pytest.raises(InputError):
            reference_line(*args)


def test_edited_source_says_so_and_is_checked():
    from fieldtl.noise.wall import edited_source

    music = DEFAULT_SOURCES[0]
    assert edited_source(music, music.levels_db.values) is music
    louder = edited_source(music, tuple(v + 6.0 for v in music.levels_db.values))
    assert louder.origin.startswith("edited by the user from: invented")
    result = compare_with_wall(louder, _flat(30.0, "L2"), separation=_flat(50.0, "DnT"))
    assert result.expected_db[0] == pytest.approx(music.levels_db.at(100.0) + 6.0 - 50.0)
    for bad in (math.nan, 141.0, -21.0):
        with pytest.raises(InputError, match="100 Hz|50 Hz"):
            edited_source(music, (bad,) + music.levels_db.values[1:])
