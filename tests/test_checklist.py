"""The on-site checklist: counts per role and position against the ISO 16283 targets (from memory)."""

import pytest

from fieldtl.checklist import TakeCount, checklist


def _items(**kwargs):
    defaults = dict(test_type="airborne", receiving_volume_m3=40.0, source_volume_m3=45.0, takes=())
    return {item.label: item for item in checklist(**(defaults | kwargs))}


def test_empty_airborne_test_lists_every_target():
    # ISO 16283-1 (from memory): 2 loudspeaker positions x 5 microphone positions per room, 6 decays.
    items = _items()
    assert items["Loudspeaker position 1: source-room microphone positions"].need == 5
    assert items["Loudspeaker position 2: receiving-room microphone positions"].need == 5
    assert items["Reverberation decays in the receiving room"].need == 6
    assert not any(item.done for item in items.values())
    assert "Calibration tone at the start" in items and "Calibration check at the end" in items


def test_counts_advance_per_position():
    takes = [TakeCount("receiving", 1)] * 5 + [TakeCount("receiving", 2)] * 2 + [TakeCount("decay", 1)] * 6
    items = _items(takes=takes)
    assert items["Loudspeaker position 1: receiving-room microphone positions"].done
    assert items["Loudspeaker position 2: receiving-room microphone positions"].have == 2
    assert items["Reverberation decays in the receiving room"].done


def test_extra_positions_appear_and_small_rooms_ask_for_corners():
    # Low-frequency procedure in rooms under 25 m3 (rounded): 4 corners per source position, two at floor
    # and two at ceiling level, 15 s each (ISO 16283-1/-2, as transcribed; verify against a licensed copy).
    items = _items(receiving_volume_m3=20.0, takes=[TakeCount("source", 3)])
    assert "Loudspeaker position 3: source-room microphone positions" in items
    label = ("Loudspeaker position 1: receiving-room corners (room under 25 m3: 2 at floor, 2 at ceiling level, "
             "15 s each, background in each)")
    assert items[label].need == 4
    assert not any("source-room corners" in label for label in items)


def test_impact_needs_four_tapping_positions_and_pasted_levels_need_no_calibration():
    items = _items(test_type="impact", band_levels_pasted=True)
    assert "Tapping position 4: receiving-room microphone positions" in items
    assert not any("source-room" in label for label in items)
    assert "Calibration tone at the start" not in items


def test_take_description_reads_level_margin_and_problems():
    from fieldtl.bands import THIRD_OCTAVES_100_3150_HZ, BandSpectrum
    from fieldtl.checklist import background_level_db, describe_take
    from fieldtl.findings import Finding
    from fieldtl.qa import TakeSummary

    bands = THIRD_OCTAVES_100_3150_HZ
    level = BandSpectrum(bands, (50.0,) * 16, "dB", "Leq")
    quiet = TakeSummary("bg.wav", "background", 1, level_db=BandSpectrum(bands, (30.0,) * 15 + (44.0,), "dB", "Leq"))
    take = TakeSummary("rec.wav", "receiving", 1, duration_s=6.0, level_db=level)
    text = describe_take(take, (Finding("clipping", "error", "x"),), background_db=background_level_db([quiet]),
                         calibrated=True)
    # 16 bands of 50 dB sum to 50 + 10 lg 16 = 62.04 dB (energy sum, analytic); worst margin 6 dB at 3150 Hz.
    assert text == "62.0 dB (100-3150 Hz); lowest margin over background 6.0 dB at 3150 Hz; 6.0 s; check: clipping"
    decay = TakeSummary("ir.wav", "decay", 1, reverberation_time_s=BandSpectrum(bands, (0.5,) * 15 + (None,), "s", "T"))
    assert describe_take(decay, (), calibrated=False) == "T20 in 15 of 16 bands 100-3150 Hz, median 0.50 s"


@pytest.mark.parametrize(("volume_m3", "asks"), [(24.4, True), (24.5, False)])
def test_corner_items_follow_the_rounded_volume(volume_m3, asks):
    # ISO 16283-1/-2 (as transcribed): volume rounded to whole m3 below 25 -> 24.4 asks, 24.5 does not
    items = _items(receiving_volume_m3=volume_m3)
    assert any("receiving-room corners" in label for label in items) is asks
