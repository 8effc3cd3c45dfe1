"""The levels of one room per source position (ISO 16283-1/-2): energy average of the microphone
positions, background correction, and the low-frequency corner procedure in small rooms."""

from __future__ import annotations

from collections.abc import Sequence
from typing import NamedTuple

import numpy as np

from fieldtl.bands import BandSpectrum
from fieldtl.errors import InputError
from fieldtl.findings import Finding
from fieldtl.insulation.background import background_corrected_db
from fieldtl.insulation.common import sample_std, stack_db, weighted_energy_mean_db
from fieldtl.insulation.low_frequency import (
    LOW_FREQUENCY_BANDS_HZ,
    corner_level_db,
    low_frequency_applies,
    low_frequency_level_db,
)
from fieldtl.units import energetic_mean_db


class RoomLevels(NamedTuple):
    """Levels of one room per source position, after background correction and the LF procedure."""

    levels_db: np.ndarray  # (positions, bands)
    weights: tuple[int, ...]  # microphone readings per position (weights for the overall average)
    margin_db: np.ndarray  # (bands,) smallest background margin that entered the result
    limited: np.ndarray  # (bands,) bool, any position's band (default or chosen corner) limited
    reading_std_db: np.ndarray  # (bands,) std of the raw default-procedure readings
    reading_count: int
    background_db: np.ndarray  # (bands,) energy-averaged background; NaN when none was given
    rules: tuple[str, ...]
    findings: tuple[Finding, ...]


def room_levels(readings: Sequence[Sequence[BandSpectrum]], corners: Sequence[Sequence[BandSpectrum]],
                nominal_hz: tuple[float, ...], *, volume_m3: float, room: str,
                background: Sequence[BandSpectrum] | None = None,
                background_corners: Sequence[BandSpectrum] = ()) -> RoomLevels:
    """Per-position levels of one room: energy average, background correction, LF procedure.

    ``readings[j]`` are the default-procedure microphone levels for source position j (energy
    averaged, ISO 16283-1/-2); ``corners[j]`` the LF corner levels for that position. With a
    ``background`` (receiving room), the position average and each corner are corrected
    individually (corner i by ``background_corners[i]``); ``background=None`` means no correction
    (source room), an empty sequence that none was measured (a finding). The LF procedure is
    applied to 50/63/80 Hz only when :func:`low_frequency_applies` and corners were measured; its
    room-level step L_LF - L is added to every position's level in those bands.
    Does not check microphone distances, averaging times or corner positions.
    """
    raw = [stack_db(r, nominal_hz, what=f"{room} levels") for r in readings]
    levels = np.vstack([energetic_mean_db(r) for r in raw])  # energy average of microphone positions
    margin = np.full(len(nominal_hz), np.nan)
    limited = np.zeros((len(raw), len(nominal_hz)), dtype=bool)
    rules: list[str] = []
    findings: list[Finding] = []
    background_db = None
    if background is not None and not background:
        rules.append(f"{room}: no background levels given; no correction, no band can be marked as a limit")
        findings.append(Finding(
            "background_not_measured", "warning",
            f"No background noise levels were given for the {room}; levels are not corrected and "
            "bands too close to the background cannot be detected.",
            "Measure the background noise in the receiving room with the source off.",
            clause="ISO 16283-1/-2 background correction"))   # facts sheet 1.8
    if background:
        background_db = energetic_mean_db(stack_db(background, nominal_hz, what=f"{room} background"))
        corrected = background_corrected_db(levels, background_db)
        levels, limited = corrected.level_db, corrected.limited
        margin = np.min(corrected.margin_db, axis=0)
    lf_mask = np.isin(nominal_hz, LOW_FREQUENCY_BANDS_HZ) & low_frequency_applies(volume_m3)
    has_corners = [len(c) > 0 for c in corners]
    if any(has_corners) and not all(has_corners):
        raise InputError(f"{room}: corner levels given for some source positions but not for others")
    if lf_mask.any() and not any(has_corners):
        rules.append(f"{room} ({volume_m3:g} m3, under 25 m3 when rounded): low-frequency procedure needed "
                     "for 50-80 Hz but no corner levels given; default procedure used")
        findings.append(Finding(
            "low_frequency_corners_missing", "warning",
            f"The {room} is {volume_m3:g} m3 (under 25 m3) but no corner levels were measured; "
            "50, 63 and 80 Hz use the default procedure only.",
            "Measure four corners (two at floor, two at ceiling level, 15 s each) in that room for every "
            "source position, and the background noise in each corner.",
            clause="ISO 16283-1/-2 low-frequency procedure"))
    elif any(has_corners) and not lf_mask.any():
        rules.append(f"{room}: corner levels not used (room volume {volume_m3:g} m3 is not under 25 m3 "
                     "or no 50-80 Hz bands are evaluated)")
    elif lf_mask.any():
        lf_hz = tuple(f for f, m in zip(nominal_hz, lf_mask) if m)
        if background_db is not None and not background_corners:
            rules.append(f"{room}: no corner background levels; corners corrected with the room's "
                         "average background instead")
            findings.append(Finding(
                "corner_background_missing", "warning",
                f"No background levels were measured at the {room} corners; the room's average "
                "background was used for them.",
                "Measure the background noise at each low-frequency corner position.",
                clause="ISO 16283-1/-2 low-frequency procedure"))
        corrected_corners = []
        for j, position_corners in enumerate(corners):
            corner_db = stack_db(position_corners, lf_hz, what=f"{room} corner levels")
            if background_db is not None:   # each corner corrected by its own background (ISO 16283-1/-2)
                corner_background_db = _corner_background(background_corners, background_db[lf_mask],
                                                          len(position_corners), lf_hz, room)
                corrected = background_corrected_db(corner_db, corner_background_db)
                corner_db = corrected.level_db
                highest = np.argmax(corner_db, axis=0)
                limited[j, lf_mask] |= corrected.limited[highest, np.arange(len(lf_hz))]  # chosen corner a limit
                margin[lf_mask] = np.minimum(margin[lf_mask], np.min(corrected.margin_db, axis=0))
            corrected_corners.append(corner_db)
        # L_LF of the room from its default average and L_Corner; the same dB step is added to every
        # position's level, so the room average equals L_LF and D keeps its position combination.
        default_db = weighted_energy_mean_db(levels[:, lf_mask], [r.shape[0] for r in raw])
        step_db = low_frequency_level_db(default_db, corner_level_db(corrected_corners)) - default_db
        levels[:, lf_mask] += step_db
        rules.append(f"{room} ({volume_m3:g} m3, under 25 m3 when rounded): low-frequency procedure at "
                     f"{', '.join(f'{f:g}' for f in lf_hz)} Hz: L_Corner = energy average over source "
                     "positions of the highest corner level per band, combined with the default level L as "
                     "L_LF = 10 lg[(10^(0.1 L_Corner) + 2·10^(0.1 L))/3] (ISO 16283-1 Formulae (12), (13); "
                     "ISO 16283-2 Formulae (15), (16))")
    pooled = np.vstack(raw)
    return RoomLevels(levels, tuple(r.shape[0] for r in raw), margin, np.any(limited, axis=0),
                      sample_std(pooled), pooled.shape[0],
                      np.full(len(nominal_hz), np.nan) if background_db is None else background_db,
                      tuple(rules), tuple(findings))


def _corner_background(background_corners: Sequence[BandSpectrum], average_db: np.ndarray,
                       corner_count: int, lf_hz: tuple[float, ...], room: str) -> np.ndarray:
    if not background_corners:
        return np.tile(average_db, (corner_count, 1))
    if len(background_corners) != corner_count:
        raise InputError(f"{room}: {corner_count} corner levels per position but "
                         f"{len(background_corners)} corner background levels (they pair by position)")
    return stack_db(background_corners, lf_hz, what=f"{room} corner background")
