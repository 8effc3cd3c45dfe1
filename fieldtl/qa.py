"""On-site quality checks: what was measured → findings that say what to redo.

Every check is a pure function returning a tuple of :class:`~fieldtl.findings.Finding`; none
raises for a quality problem and none stops the calculation. Thresholds sit beside the rule they
come from, marked "from memory" or "common practice" where they are not read from a standard.
"""

from __future__ import annotations

import math
import warnings
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from fieldtl.bands import BandSpectrum
from fieldtl.findings import Finding
from fieldtl.insulation.low_frequency import low_frequency_applies

MIN_LOUDSPEAKER_POSITIONS = 2        # ISO 16283-1, single loudspeaker moved (from memory, high confidence)
MIN_MICROPHONE_POSITIONS = 5         # ISO 16283-1/-2, fixed positions per room per source position (from memory)
MIN_TAPPING_POSITIONS = 4            # ISO 16283-2 (from memory)
MIN_DECAYS = 6                       # ISO 16283-1/-2 reverberation time (from memory)
MIN_FIXED_POSITION_S = 6.0           # ISO 16283-1/-2 averaging time, bands >= 100 Hz (from memory)
MIN_CORNER_S = 15.0                  # low-frequency procedure, per corner (ISO 16283-1/-2, as transcribed)
MIN_CORNERS = 4                      # per source position and small room: 2 at floor, 2 at ceiling level (same)
MAX_ADJACENT_SOURCE_STEP_DB = 8.0    # ISO 16283-1 source-room spectrum rule
STATIONARITY_STD_DB = 2.0            # 1 s levels of a steady source should scatter less (common practice)
BACKGROUND_EVENT_DB = 10.0           # a 1 s background level this far above the median is an event (common practice)
SPREAD_LIMIT_DB = ((250.0, 6.0), (math.inf, 3.0))  # spatial std below 250 Hz / from 250 Hz (common practice)
DECAY_DISAGREEMENT = 0.25            # a decay more than 25 % from the band median (common practice)
VOLUME_SCOPE_M3 = (10.0, 250.0)      # ISO 16283-2 scope (verified); ISO 16283-1 the same (from memory)
MIN_ROOM_HEIGHT_M = 2.0              # S larger than V / 2 m means a room lower than 2 m (common practice)
SMALL_AREA_VOLUME_RATIO_M = 7.5      # S < V/7.5 triggers the small-element rule (from memory)
FIELD_ABOVE_LAB_DB = 2.0             # R'w more than 2 dB above the element's lab Rw (common practice)


@dataclass(frozen=True, slots=True)
class TakeSummary:
    """What QA needs to know about one take (a recording or a pasted column)."""

    label: str
    role: str
    speaker: int
    duration_s: float | None = None
    level_db: BandSpectrum | None = None
    level_history_std_db: float | None = None        # std of the 1 s overall levels
    background_event_db: float | None = None         # loudest 1 s level minus the median 1 s level
    reverberation_time_s: BandSpectrum | None = None
    octave_63_reverberation_time_s: float | None = None   # 63 Hz octave T20 of a decay (small rooms, 50-80 Hz)


def check_positions(takes: Sequence[TakeSummary], *, test_type: str) -> tuple[Finding, ...]:
    """Enough loudspeaker / tapping, microphone and decay positions (ISO 16283-1/-2, from memory)."""
    found: list[Finding] = []
    level_role = "impact" if test_type == "impact" else "receiving"
    speakers = sorted({t.speaker for t in takes if t.role == level_role})
    needed = MIN_TAPPING_POSITIONS if test_type == "impact" else MIN_LOUDSPEAKER_POSITIONS
    if len(speakers) < needed:
        what = "tapping-machine" if test_type == "impact" else "loudspeaker"
        found.append(Finding("too_few_source_positions", "warning",
                             f"{len(speakers)} {what} position(s) measured; at least {needed} are required",
                             f"Move the {what} to another position and repeat the level measurements.",
                             clause=f"ISO 16283-{2 if test_type == 'impact' else 1}",   # from memory
                             unconfirmed=True))
    rooms = ("impact",) if test_type == "impact" else ("source", "receiving")
    counts = Counter((t.role, t.speaker) for t in takes if t.role in rooms)
    for role in rooms:
        for speaker in speakers or [1]:
            n = counts[(role, speaker)]
            if n < MIN_MICROPHONE_POSITIONS:
                room = "receiving" if role == "impact" else role
                found.append(Finding("too_few_microphone_positions", "warning",
                                     f"{room} room, position {speaker}: {n} microphone position(s); "
                                     f"at least {MIN_MICROPHONE_POSITIONS} are required",
                                     f"Record {MIN_MICROPHONE_POSITIONS - n} more microphone position(s) in the "
                                     f"{room} room for source position {speaker}.",
                                     clause="ISO 16283-1/-2", unconfirmed=True))   # from memory
    decays = sum(1 for t in takes if t.role == "decay")
    if decays < MIN_DECAYS:
        found.append(Finding("too_few_decays", "warning",
                             f"{decays} decay(s) measured; at least {MIN_DECAYS} are required",
                             f"Record {MIN_DECAYS - decays} more decays at other source/microphone positions.",
                             clause="ISO 16283-1/-2", unconfirmed=True))   # from memory
    return tuple(found)


def check_corners(takes: Sequence[TakeSummary], *, test_type: str, receiving_volume_m3: float,
                  source_volume_m3: float | None) -> tuple[Finding, ...]:
    """At least four corners per source position in every room under 25 m3 (rounded).

    ISO 16283-1/-2 low-frequency procedure (as transcribed): four corners, two at floor and two at
    ceiling level, 0.3-0.4 m from the three surfaces, 15 s each, background in each corner. Which
    corner is at which height is not recorded, so only the count is checked here.
    """
    level_role = "impact" if test_type == "impact" else "receiving"
    speakers = sorted({t.speaker for t in takes if t.role == level_role}) or [1]
    rooms = [("receiving_corner", "receiving", receiving_volume_m3)]
    if test_type == "airborne":
        rooms.append(("source_corner", "source", source_volume_m3 or receiving_volume_m3))
    counts = Counter((t.role, t.speaker) for t in takes if t.role.endswith("corner"))
    found = []
    for role, room, volume in rooms:
        if not low_frequency_applies(volume):
            continue
        for speaker in speakers:
            n = counts[(role, speaker)]
            if 0 < n < MIN_CORNERS:   # none at all: the insulation layer already reports the missing procedure
                found.append(Finding("too_few_corners", "warning",
                                     f"{room} room, position {speaker}: {n} corner(s) measured; the low-frequency "
                                     f"procedure needs {MIN_CORNERS} (two at floor, two at ceiling level)",
                                     f"Record {MIN_CORNERS - n} more corner(s), 0.3-0.4 m from the three surfaces, "
                                     f"{MIN_CORNER_S:.0f} s each, with the background in each corner.",
                                     clause="ISO 16283-1/-2 low-frequency procedure"))
    return tuple(found)


def check_durations(takes: Sequence[TakeSummary]) -> tuple[Finding, ...]:
    """Averaging times: 6 s per fixed position (from memory), 15 s per corner (ISO 16283-1/-2, as transcribed)."""
    found = []
    for take in takes:
        if take.duration_s is None or take.role == "decay":
            continue
        minimum = MIN_CORNER_S if take.role.endswith("corner") else MIN_FIXED_POSITION_S
        if take.duration_s < minimum:
            found.append(Finding("recording_too_short", "warning",
                                 f"{take.label}: {take.duration_s:.1f} s recorded, {minimum:.0f} s needed",
                                 f"Record this position again for at least {minimum:.0f} s.",
                                 clause="ISO 16283-1/-2 averaging time"))
    return tuple(found)


def check_stationarity(takes: Sequence[TakeSummary]) -> tuple[Finding, ...]:
    """Steady signals should give steady 1 s levels; background should hold no loud events."""
    found = []
    for take in takes:
        steady_role = take.role in ("source", "receiving", "impact", "source_corner", "receiving_corner")
        if steady_role and take.level_history_std_db is not None and take.level_history_std_db > STATIONARITY_STD_DB:
            found.append(Finding("non_stationary", "warning",
                                 f"{take.label}: 1 s levels scatter by {take.level_history_std_db:.1f} dB "
                                 f"(limit {STATIONARITY_STD_DB:.1f} dB)",
                                 "Check that the source ran steadily and nobody talked or moved; record again.",
                                 clause="common practice"))
        if take.role == "background" and take.background_event_db is not None \
                and take.background_event_db > BACKGROUND_EVENT_DB:
            found.append(Finding("background_event", "warning",
                                 f"{take.label}: a 1 s background level {take.background_event_db:.0f} dB above "
                                 "the median (a door, voice or vehicle?)",
                                 "Record the background again when it is quiet.", clause="common practice"))
    return tuple(found)


def check_spatial_spread(takes: Sequence[TakeSummary]) -> tuple[Finding, ...]:
    """Standard deviation of levels across microphone positions, per room (common practice)."""
    found = []
    for role in ("source", "receiving", "impact"):
        spectra = [t.level_db for t in takes if t.role == role and t.level_db is not None]
        if len(spectra) < 3:
            continue
        bands = spectra[0].nominal_hz
        values = np.vstack([s.select(bands).as_array() for s in spectra])
        std_db = np.nanstd(values, axis=0, ddof=1)
        limits = np.array([next(limit for edge, limit in SPREAD_LIMIT_DB if f < edge) for f in bands])
        excess = std_db - limits
        worst = int(np.nanargmax(excess)) if np.any(np.isfinite(excess)) else None
        if worst is not None and excess[worst] > 0:
            room = "receiving" if role == "impact" else role
            found.append(Finding("spatial_spread_high", "warning",
                                 f"{room} room: levels differ by {std_db[worst]:.1f} dB (standard deviation) "
                                 f"between microphone positions at {bands[worst]:g} Hz",
                                 "Check for a microphone too close to the loudspeaker, a wall or a corner; "
                                 "move it and record again.", band_hz=bands[worst], clause="common practice"))
    return tuple(found)


def check_background(margin_db: BandSpectrum, limited: Sequence[bool], *, test_type: str) -> tuple[Finding, ...]:
    """Background margin per band: corrected (6-10 dB) or a measurement limit (<= 6 dB)."""
    found = []
    bound = "upper" if test_type == "impact" else "lower"
    for band_hz, margin, is_limited in zip(margin_db.nominal_hz, margin_db.values, limited):
        if margin is None:
            continue
        if is_limited:
            found.append(Finding("background_limit", "warning",
                                 f"{band_hz:g} Hz: signal only {margin:.1f} dB above background; the band is a "
                                 f"measurement limit ({bound} bound)",
                                 "Raise the source level in this band (shape the noise) or measure when it is "
                                 "quieter.", band_hz=band_hz, clause="ISO 16283-1/-2 background correction"))
        elif margin < 10.0:
            found.append(Finding("background_margin", "info",
                                 f"{band_hz:g} Hz: signal {margin:.1f} dB above background; corrected",
                                 "No action needed; more source level would remove the correction.",
                                 band_hz=band_hz, clause="ISO 16283-1/-2 background correction"))
    return tuple(found)


def check_source_spectrum(source_levels_db: Sequence[BandSpectrum], *,
                          labels: Sequence[str]) -> tuple[Finding, ...]:
    """Adjacent one-third-octave source-room levels differ by no more than 8 dB (ISO 16283-1)."""
    found = []
    for label, spectrum in zip(labels, source_levels_db):
        levels = spectrum.as_array()
        steps = np.abs(np.diff(levels))
        if np.any(steps > MAX_ADJACENT_SOURCE_STEP_DB):
            i = int(np.nanargmax(steps))
            found.append(Finding("source_spectrum_step", "warning",
                                 f"{label}: source-room level changes by {steps[i]:.1f} dB between "
                                 f"{spectrum.nominal_hz[i]:g} and {spectrum.nominal_hz[i + 1]:g} Hz "
                                 f"(limit {MAX_ADJACENT_SOURCE_STEP_DB:.0f} dB)",
                                 "Use a smoother (pink or gently shaped) noise spectrum and measure again.",
                                 band_hz=spectrum.nominal_hz[i + 1], clause="ISO 16283-1 source-room spectrum"))
    return tuple(found)


def check_decays(takes: Sequence[TakeSummary]) -> tuple[Finding, ...]:
    """Decays that disagree with the others in a band by more than 25 % (common practice)."""
    decays = [t for t in takes if t.role == "decay" and t.reverberation_time_s is not None]
    if len(decays) < 3:
        return ()
    bands = decays[0].reverberation_time_s.nominal_hz
    values = np.vstack([t.reverberation_time_s.select(bands).as_array() for t in decays])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)   # a band no decay could evaluate: median nan
        median = np.nanmedian(values, axis=0)
    found = []
    for j, band_hz in enumerate(bands):
        with np.errstate(invalid="ignore"):
            deviant = [decays[i].label for i in range(len(decays))
                       if np.isfinite(values[i, j]) and abs(values[i, j] / median[j] - 1) > DECAY_DISAGREEMENT]
        if deviant and band_hz >= 100:
            found.append(Finding("decay_disagreement", "warning",
                                 f"{band_hz:g} Hz: T of {', '.join(deviant)} differs from the median "
                                 f"{median[j]:.2f} s by more than {DECAY_DISAGREEMENT:.0%}",
                                 "Check those decays for noise or a door left open; measure them again.",
                                 band_hz=band_hz, clause="common practice"))
    return tuple(found)


def check_calibration(*, calibrated: bool, test_type: str) -> tuple[Finding, ...]:
    """Levels need a calibration for L1, L2, L'n; level differences do not."""
    if calibrated:
        return ()
    if test_type == "impact":
        return (Finding("calibration_missing", "error",
                        "no calibration: impact levels are only in dB re full scale, so L'n and L'nT are not "
                        "absolute", "Record the calibrator tone on the measuring microphone and re-run.",
                        clause="ISO 16283-2"),)
    return (Finding("calibration_missing", "warning",
                    "no calibration: levels are in dB re full scale; D, DnT and R' stay valid because both rooms "
                    "used the same microphone and gain", "Record the calibrator tone to report absolute levels.",
                    clause="common practice"),)


def check_geometry(*, receiving_volume_m3: float, source_volume_m3: float | None,
                   separating_area_m2: float | None) -> tuple[Finding, ...]:
    """Volumes inside the standards' scope; S plausible against V."""
    found = []
    low, high = VOLUME_SCOPE_M3
    for room, volume in (("receiving", receiving_volume_m3), ("source", source_volume_m3)):
        if volume is not None and not low <= volume <= high:
            found.append(Finding("volume_out_of_scope", "error",
                                 f"{room} room volume {volume:g} m3 is outside the {low:g}-{high:g} m3 the field "
                                 "standards are written for", "Check the volume; state the deviation in the report.",
                                 # ISO 16283-2's scope verified; ISO 16283-1's the same from memory
                                 clause="ISO 16283-2 scope; ISO 16283-1", unconfirmed=True))
    if separating_area_m2 is not None:
        volumes = [v for v in (receiving_volume_m3, source_volume_m3) if v is not None]
        smaller = min(volumes)
        if separating_area_m2 > max(volumes) / MIN_ROOM_HEIGHT_M:
            found.append(Finding("area_implausible", "warning",
                                 f"separating area {separating_area_m2:g} m2 is larger than a room of "
                                 f"{max(volumes):g} m3 can have with a {MIN_ROOM_HEIGHT_M:g} m height",
                                 "Check the area and the volumes (units, typing).", clause="common practice"))
        elif separating_area_m2 < smaller / SMALL_AREA_VOLUME_RATIO_M:
            found.append(Finding("small_separating_area", "info",
                                 f"separating area {separating_area_m2:g} m2 is below V/7.5 = "
                                 f"{smaller / SMALL_AREA_VOLUME_RATIO_M:.1f} m2; R' uses V/7.5",
                                 "State the S rule in the report.", clause="ISO 16283-1",   # from memory
                                 unconfirmed=True))
    return tuple(found)


def check_against_lab_rating(*, field_rating_db: int | None, lab_rating_db: float | None) -> tuple[Finding, ...]:
    """A field R'w well above the element's lab Rw points to an input error (common practice)."""
    if field_rating_db is None or lab_rating_db is None:
        return ()
    if field_rating_db > lab_rating_db + FIELD_ABOVE_LAB_DB:
        return (Finding("field_above_lab", "warning",
                        f"R'w {field_rating_db} dB is more than {FIELD_ABOVE_LAB_DB:g} dB above the declared "
                        f"laboratory Rw {lab_rating_db:g} dB of the construction",
                        "Check S, V and T and the role of every recording (source and receiving swapped?).",
                        clause="common practice"),)
    return ()


def check_astm_scope(*, receiving_volume_m3: float, source_volume_m3: float | None) -> tuple[Finding, ...]:
    """ASTM E336: ATL/ASTC only between spaces of 25 m3 or more (verified scope text)."""
    volumes = [v for v in (receiving_volume_m3, source_volume_m3) if v is not None]
    if min(volumes) < 25.0:
        return (Finding("astm_small_room", "info",
                        "a room is smaller than 25 m3: ASTM E336 does not allow ATL/ASTC there, and NNIC "
                        "assumes a receiving room of 25 m3 or more", "Report NIC only for ASTM purposes.",
                        clause="ASTM E336 scope"),)
    return ()
