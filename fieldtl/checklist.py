"""What a test still needs on site, and what each take showed.

A pure function of the test's type, geometry and the takes so far, for the capture page and the
report. The targets are those of :mod:`fieldtl.qa` (ISO 16283-1/-2, from memory); a checklist
item is advice, never a gate: results are computed with whatever is there. Low-frequency corners
follow ISO 16283-1/-2 as transcribed (four per position, two at floor and two at ceiling level,
15 s each, background in each corner).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from fieldtl.bands import BandSpectrum
from fieldtl.findings import Finding
from fieldtl.insulation.low_frequency import low_frequency_applies
from fieldtl.qa import (MIN_CORNER_S, MIN_CORNERS, MIN_DECAYS, MIN_LOUDSPEAKER_POSITIONS, MIN_MICROPHONE_POSITIONS,
                        MIN_TAPPING_POSITIONS, TakeSummary)
from fieldtl.units import energetic_mean_db, energetic_sum_db

MIN_BACKGROUND_TAKES = 1


@dataclass(frozen=True, slots=True)
class TakeCount:
    """One role at one source position (``speaker`` 0 means "any position")."""

    role: str
    speaker: int


@dataclass(frozen=True, slots=True)
class ChecklistItem:
    label: str
    have: int
    need: int
    role: str
    speaker: int = 0

    @property
    def done(self) -> bool:
        return self.have >= self.need


def checklist(*, test_type: str, receiving_volume_m3: float, source_volume_m3: float | None,
              takes: Sequence[TakeCount], calibration_expected: bool = True,
              band_levels_pasted: bool = False) -> tuple[ChecklistItem, ...]:
    """Checklist items in the order they are usually measured on site."""
    def count(role: str, speaker: int = 0) -> int:
        return sum(1 for t in takes if t.role == role and (speaker == 0 or t.speaker == speaker))

    items: list[ChecklistItem] = []
    if calibration_expected and not band_levels_pasted:
        items.append(ChecklistItem("Calibration tone at the start", count("calibration"), 1, "calibration"))
    level_role = "impact" if test_type == "impact" else "receiving"
    positions_needed = MIN_TAPPING_POSITIONS if test_type == "impact" else MIN_LOUDSPEAKER_POSITIONS
    seen = sorted({t.speaker for t in takes if t.role in (level_role, "source")})
    speakers = sorted(set(seen) | set(range(1, positions_needed + 1)))
    what = "Tapping position" if test_type == "impact" else "Loudspeaker position"
    for speaker in speakers:
        if test_type == "airborne":
            items.append(ChecklistItem(f"{what} {speaker}: source-room microphone positions",
                                       count("source", speaker), MIN_MICROPHONE_POSITIONS, "source", speaker))
        items.append(ChecklistItem(f"{what} {speaker}: receiving-room microphone positions",
                                   count(level_role, speaker), MIN_MICROPHONE_POSITIONS, level_role, speaker))
        small_rooms = [("source_corner", source_volume_m3)] if test_type == "airborne" else []
        small_rooms.append(("receiving_corner", receiving_volume_m3))
        for role, volume in small_rooms:
            if volume is not None and low_frequency_applies(volume):
                room = "source" if role == "source_corner" else "receiving"
                background = ", background in each" if room == "receiving" else ""
                items.append(ChecklistItem(
                    f"{what} {speaker}: {room}-room corners (room under 25 m3: 2 at floor, 2 at ceiling level, "
                    f"{MIN_CORNER_S:.0f} s each{background})", count(role, speaker), MIN_CORNERS, role, speaker))
    items.append(ChecklistItem("Background noise in the receiving room", count("background"),
                               MIN_BACKGROUND_TAKES, "background"))
    if low_frequency_applies(receiving_volume_m3):   # background in every corner used (ISO 16283-1/-2 LF)
        per_position = [count("receiving_corner", s) for s in speakers]
        for corner in range(1, max([MIN_CORNERS, *per_position]) + 1):
            items.append(ChecklistItem(f"Background noise in receiving-room corner {corner} (source off)",
                                       count("background_corner", corner), MIN_BACKGROUND_TAKES,
                                       "background_corner", corner))
    items.append(ChecklistItem("Reverberation decays in the receiving room", count("decay"), MIN_DECAYS, "decay"))
    if calibration_expected and not band_levels_pasted:
        items.append(ChecklistItem("Calibration check at the end", count("calibration_after"), 1,
                                   "calibration_after"))
    return tuple(items)


def describe_take(take: TakeSummary, findings: Sequence[Finding], *,
                  background_db: BandSpectrum | None = None, calibrated: bool) -> str:
    """One line a site engineer reads at a glance: level, margin over background, clipping, decay."""
    parts: list[str] = []
    unit = "dB" if calibrated else "dB re FS"
    if take.level_db is not None:
        bands = [f for f in take.level_db.nominal_hz if 100 <= f <= 3150]
        level = take.level_db.select(bands).as_array()
        parts.append(f"{energetic_sum_db(level[np.isfinite(level)]):.1f} {unit} (100-3150 Hz)")
        if background_db is not None and take.role in ("receiving", "impact", "receiving_corner"):
            margin = level - background_db.select(bands).as_array()
            if np.any(np.isfinite(margin)):
                worst = int(np.nanargmin(margin))
                parts.append(f"lowest margin over background {margin[worst]:.1f} dB at {bands[worst]:g} Hz")
    if take.reverberation_time_s is not None:
        t_s = take.reverberation_time_s.select([f for f in take.reverberation_time_s.nominal_hz
                                                if 100 <= f <= 3150]).as_array()
        valid = t_s[np.isfinite(t_s)]
        parts.append(f"T20 in {valid.size} of {t_s.size} bands 100-3150 Hz"
                     + (f", median {np.median(valid):.2f} s" if valid.size else ""))
    if take.duration_s is not None:
        parts.append(f"{take.duration_s:.1f} s")
    serious = sorted({f.code for f in findings if f.severity in ("error", "warning")})
    if serious:
        parts.append("check: " + ", ".join(code.replace("_", " ") for code in serious))
    return "; ".join(parts)


def background_level_db(takes: Sequence[TakeSummary]) -> BandSpectrum | None:
    """Energy mean of the background takes' band levels, or None without one."""
    spectra = [t.level_db for t in takes if t.role == "background" and t.level_db is not None]
    if not spectra:
        return None
    bands = spectra[0].nominal_hz
    return BandSpectrum.from_array(bands, energetic_mean_db(np.vstack([s.select(bands).as_array() for s in spectra])),
                                   "dB", "B")
