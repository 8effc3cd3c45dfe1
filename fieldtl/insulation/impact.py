"""ISO 16283-2 field impact sound insulation: L'n and L'nT per one-third-octave band.

Input is calibrated receiving-room band levels with the tapping machine running (one BandSpectrum
per microphone position, per tapping position); output is one frozen :class:`ImpactResult`.
Formulas are those of the project's facts sheet, section 2 (background rule: section 1.8).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from fieldtl.bands import BandSpectrum
from fieldtl.errors import InputError
from fieldtl.findings import Finding, unconfirmed
from fieldtl.insulation.background import BACKGROUND_RULE
from fieldtl.insulation.common import (
    REFERENCE_AREA_M2,
    REFERENCE_TIME_S,
    REQUIRED_BANDS_HZ,
    BandSpread,
    ReverberationKind,
    absorption_area_m2,
    analysis_bands_hz,
    average_reverberation_time,
    freeze_sequences,
    ignored_bands_rule,
    to_spectrum,
    weighted_energy_mean_db,
)
from fieldtl.insulation.low_frequency import low_frequency_reverberation
from fieldtl.insulation.room_levels import room_levels
from fieldtl.validate import AREA_M2, REVERBERATION_S, VOLUME_M3, number


@dataclass(frozen=True, slots=True)
class TappingPosition:
    """Receiving-room levels with the tapping machine at one position (background included).

    Corner levels belong to the low-frequency procedure (receiving room under 25 m3).
    Sequences are stored as tuples.
    """

    receiving_levels_db: tuple[BandSpectrum, ...]  # one per microphone position or scan
    receiving_corner_levels_db: tuple[BandSpectrum, ...] = ()

    def __post_init__(self) -> None:
        freeze_sequences(self, "receiving_levels_db", "receiving_corner_levels_db")


@dataclass(frozen=True, slots=True)
class ImpactMeasurement:
    """Everything measured for one impact test; fields as in ``AirborneMeasurement``."""

    positions: tuple[TappingPosition, ...]
    background_levels_db: tuple[BandSpectrum, ...]
    reverberation_times_s: tuple[BandSpectrum, ...]
    background_corner_levels_db: tuple[BandSpectrum, ...] = ()
    reverberation_time_kind: ReverberationKind = "decays"
    octave_63_reverberation_times_s: tuple[float, ...] = ()   # 63 Hz octave-band T per decay (small rooms)

    def __post_init__(self) -> None:
        freeze_sequences(self, "positions", "background_levels_db", "reverberation_times_s",
                         "background_corner_levels_db", "octave_63_reverberation_times_s")


@dataclass(frozen=True, slots=True)
class ImpactResult:
    """Field impact levels per band, with everything needed to report and check them.

    ``limited[i]`` marks a band where background noise left a margin of 6 dB or less: the band's
    Li, L'n and L'nT are then upper bounds (the true level is at most the value).
    """

    impact_level_db: BandSpectrum  # Li, background-corrected, energy average of all combinations
    background_level_db: BandSpectrum  # B2
    reverberation_time_s: BandSpectrum  # T
    absorption_area_m2: BandSpectrum  # A = 0.16 V / T
    normalized_impact_level_db: BandSpectrum  # L'n
    standardized_impact_level_db: BandSpectrum  # L'nT
    position_levels_db: tuple[BandSpectrum, ...]  # Li per tapping position
    limited: tuple[bool, ...]
    background_margin_db: BandSpectrum
    spread: BandSpread
    rules_applied: tuple[str, ...]
    findings: tuple[Finding, ...]
    low_frequency_octave_t_s: float | None = None   # 63 Hz octave T used at 50/63/80 Hz (room under 25 m3)

    @property
    def nominal_hz(self) -> tuple[float, ...]:
        return self.impact_level_db.nominal_hz

    def single_number_bound(self, nominal_hz: tuple[float, ...] = REQUIRED_BANDS_HZ) -> Literal["exact", "upper"]:
        """"upper" when any band in ``nominal_hz`` is limited: a rating from them is an upper bound."""
        flags = dict(zip(self.nominal_hz, self.limited))
        return "upper" if any(flags.get(float(f), False) for f in nominal_hz) else "exact"


def impact_insulation(measurement: ImpactMeasurement, *, receiving_volume_m3: float,
                      reference_time_s: float = REFERENCE_TIME_S,
                      reference_area_m2: float = REFERENCE_AREA_M2) -> ImpactResult:
    """ISO 16283-2 default (and, under 25 m3, low-frequency) procedure, band by band.

    Per tapping position: energy average of microphone positions, background correction, LF corner
    procedure at 50/63/80 Hz; Li is then the energy average over tapping positions weighted by
    their microphone counts (equal to the average over all tapping x microphone combinations when
    nothing was corrected); L'n = Li + 10 lg(A/A0), L'nT = Li - 10 lg(T/T0).
    In a receiving room under 25 m3 (rounded) the 50/63/80 Hz T is the 63 Hz octave-band T
    (ISO 16283-2 clause 10.4). Does not rate (ISO 717-2), handle the rubber-ball source (L_Fmax) or
    check tapping positions.
    """
    if not measurement.positions or not measurement.positions[0].receiving_levels_db:
        raise InputError("impact measurement: no tapping positions with receiving-room levels")
    volume_m3 = number(receiving_volume_m3, "receiving room volume", low=VOLUME_M3[0], high=VOLUME_M3[1],
                       unit=" m3")
    t0_s = number(reference_time_s, "reference time T0", low=REVERBERATION_S[0], high=REVERBERATION_S[1],
                  unit=" s")
    a0_m2 = number(reference_area_m2, "reference area A0", low=AREA_M2[0], high=AREA_M2[1], unit=" m2")
    first = measurement.positions[0].receiving_levels_db[0]
    bands = analysis_bands_hz(first)
    room = room_levels([p.receiving_levels_db for p in measurement.positions],
                       [p.receiving_corner_levels_db for p in measurement.positions],
                       bands, volume_m3=volume_m3, room="receiving room",
                       background=measurement.background_levels_db,
                       background_corners=measurement.background_corner_levels_db)
    li = weighted_energy_mean_db(room.levels_db, room.weights)  # energy average, ISO 16283-2
    t_s, t_std_s, decay_count, t_rule = average_reverberation_time(
        measurement.reverberation_times_s, bands, kind=measurement.reverberation_time_kind)
    low_t = low_frequency_reverberation(t_s, t_std_s, bands, measurement.octave_63_reverberation_times_s,
                                        volume_m3=volume_m3)
    t_s, t_std_s = low_t.mean_s, low_t.std_s
    a_m2 = absorption_area_m2(volume_m3, t_s)  # A = 0.16 V / T (facts sheet 2)
    normalized = li + 10.0 * np.log10(a_m2 / a0_m2)  # L'n = Li + 10 lg(A/A0), ISO 16283-2
    standardized = li - 10.0 * np.log10(t_s / t0_s)  # L'nT = Li - 10 lg(T/T0), ISO 16283-2
    rules = (*ignored_bands_rule(first),
             "Li: energy average over tapping positions x microphone positions (ISO 16283-2)",
             unconfirmed(BACKGROUND_RULE + " (impact: limited bands are upper bounds)"),   # 10.0 dB edge from memory
             *room.rules, t_rule, *low_t.rules,
             f"A = 0.16 V/T with the receiving-room volume {volume_m3:g} m3; A0 = {a0_m2:g} m2, T0 = {t0_s:g} s")
    spread = BandSpread(None, to_spectrum(bands, room.reading_std_db, "Li std"),
                        to_spectrum(bands, t_std_s, "T std", "s"), 0, room.reading_count, decay_count)
    return ImpactResult(
        impact_level_db=to_spectrum(bands, li, "Li"),
        background_level_db=to_spectrum(bands, room.background_db, "B2"),
        reverberation_time_s=to_spectrum(bands, t_s, "T", "s"),
        absorption_area_m2=to_spectrum(bands, a_m2, "A", "m2"),
        normalized_impact_level_db=to_spectrum(bands, normalized, "L'n"),
        standardized_impact_level_db=to_spectrum(bands, standardized, "L'nT"),
        position_levels_db=tuple(to_spectrum(bands, row, f"Li{j + 1}") for j, row in enumerate(room.levels_db)),
        limited=tuple(bool(x) for x in room.limited),
        background_margin_db=to_spectrum(bands, room.margin_db, "Li - B2"),
        spread=spread,
        rules_applied=rules,
        findings=(*room.findings, *low_t.findings),
        low_frequency_octave_t_s=low_t.octave_63_s,
    )
