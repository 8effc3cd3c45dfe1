"""The on-site checklist: counts per role and position against the ISO 16283 targets (from memory)."""

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
    # Low-frequency procedure in rooms under 25 m3: 4 corner positions per source position (from memory).
    items = _items(receiving_volume_m3=20.0, takes=[TakeCount("source", 3)])
    assert "Loudspeaker position 3: source-room microphone positions" in items
    assert items["Loudspeaker position 1: receiving-room corners (room under 25 m3)"].need == 4
    assert not any("source-room corners" in label for label in items)


def test_impact_needs_four_tapping_positions_and_pasted_levels_need_no_calibration():
    items = _items(test_type="impact", band_levels_pasted=True)
    assert "Tapping position 4: receiving-room microphone positions" in items
    assert not any("source-room" in label for label in items)
    assert "Calibration tone at the start" not in items
