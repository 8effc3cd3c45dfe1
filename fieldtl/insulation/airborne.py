"""ISO 16283-1 field airborne sound insulation: D, Dn, DnT and R' per one-third-octave band.

Input is band levels already measured and calibrated (one BandSpectrum per microphone position or
scan, per loudspeaker position); output is one frozen :class:`AirborneResult`. Formulas and
thresholds are those of the project's facts sheet, sections 1.1-1.10; where the facts sheet marks a
rule "from memory", the comment beside the line says so.
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

SourceCombination = Literal["energy", "arithmetic", "simultaneous"]
AreaRule = Literal["smaller", "receiving", "source", "off"]
AREA_VOLUME_DIVISOR_M = 7.5  # S >= V / 7.5 for small or offset separating elements (facts sheet 1.10, from memory)

_COMBINATION_RULES = {
    "energy": unconfirmed("loudspeaker positions combined on an energy basis, "   # formula from memory
                          "D = -10 lg((1/m) Σ 10^(-Dj/10)) (ISO 16283-1)"),
    "arithmetic": "loudspeaker positions combined as the arithmetic mean of Dj (ISO 140-4 practice)",
    "simultaneous": unconfirmed("loudspeakers operating simultaneously: D = L1 - L2 (ISO 16283-1)"),  # from memory
}


@dataclass(frozen=True, slots=True)
class LoudspeakerPosition:
    """Levels measured with the loudspeaker at one position (or all loudspeakers running together).

    ``receiving_levels_db`` include the background (they are corrected here). Corner levels are
    those of the low-frequency procedure for this loudspeaker position; leave them empty in rooms
    of 25 m3 or more. Sequences are stored as tuples.
    """

    source_levels_db: tuple[BandSpectrum, ...]  # L1 per microphone position or scan
    receiving_levels_db: tuple[BandSpectrum, ...]  # L2 (signal + background) per microphone position or scan
    source_corner_levels_db: tuple[BandSpectrum, ...] = ()
    receiving_corner_levels_db: tuple[BandSpectrum, ...] = ()

    def __post_init__(self) -> None:
        freeze_sequences(self, "source_levels_db", "receiving_levels_db", "source_corner_levels_db",
                  "receiving_corner_levels_db")


@dataclass(frozen=True, slots=True)
class AirborneMeasurement:
    """Everything measured for one airborne test between two rooms.

    ``background_levels_db``: receiving-room background per microphone position (energy averaged);
    ``background_corner_levels_db``: background at each receiving-room LF corner, paired by index
    with each position's ``receiving_corner_levels_db``. ``reverberation_times_s``: receiving-room
    T per decay (``reverberation_time_kind="decays"``) or one already-averaged T ("averaged").
    """

    positions: tuple[LoudspeakerPosition, ...]
    background_levels_db: tuple[BandSpectrum, ...]
    reverberation_times_s: tuple[BandSpectrum, ...]
    background_corner_levels_db: tuple[BandSpectrum, ...] = ()
    reverberation_time_kind: ReverberationKind = "decays"
    octave_63_reverberation_times_s: tuple[float, ...] = ()   # 63 Hz octave-band T per decay (small rooms)

    def __post_init__(self) -> None:
        freeze_sequences(self, "positions", "background_levels_db", "reverberation_times_s",
                  "background_corner_levels_db", "octave_63_reverberation_times_s")


@dataclass(frozen=True, slots=True)
class Rooms:
    """Room geometry. ``common_area_m2`` is None when the rooms share no separating element."""

    source_volume_m3: float
    receiving_volume_m3: float
    common_area_m2: float | None


@dataclass(frozen=True, slots=True)
class AirborneResult:
    """Field airborne insulation per band, with everything needed to report and check it.

    ``limited[i]`` marks a band where background noise left a margin of 6 dB or less: the band's
    D, Dn, DnT and R' are then lower bounds (true insulation is at least the value). The overall
    L1 and L2 are energy averages over all microphone readings (LF-combined where applied);
    D is combined from the per-position differences ``position_level_differences_db`` and so is not
    always exactly L1 - L2. ``background_margin_db`` is the smallest margin that entered each band.
    """

    source_level_db: BandSpectrum  # L1
    receiving_level_db: BandSpectrum  # L2, background-corrected
    background_level_db: BandSpectrum  # B2, receiving room
    reverberation_time_s: BandSpectrum  # T, receiving room
    absorption_area_m2: BandSpectrum  # A = 0.16 V / T
    level_difference_db: BandSpectrum  # D
    normalized_level_difference_db: BandSpectrum  # Dn
    standardized_level_difference_db: BandSpectrum  # DnT
    apparent_sound_reduction_index_db: BandSpectrum | None  # R'; None without a common element
    position_level_differences_db: tuple[BandSpectrum, ...]  # Dj per loudspeaker position
    limited: tuple[bool, ...]
    background_margin_db: BandSpectrum
    spread: BandSpread
    separating_area_m2: float | None  # S actually used for R'
    rules_applied: tuple[str, ...]
    findings: tuple[Finding, ...]
    low_frequency_octave_t_s: float | None = None   # 63 Hz octave T used at 50/63/80 Hz (room under 25 m3)

    @property
    def nominal_hz(self) -> tuple[float, ...]:
        return self.level_difference_db.nominal_hz

    def single_number_bound(self, nominal_hz: tuple[float, ...] = REQUIRED_BANDS_HZ) -> Literal["exact", "lower"]:
        """"lower" when any band in ``nominal_hz`` is limited: a rating from them is a lower bound."""
        flags = dict(zip(self.nominal_hz, self.limited))
        return "lower" if any(flags.get(float(f), False) for f in nominal_hz) else "exact"


def combine_source_positions(level_differences_db: np.ndarray, *,
                             rule: SourceCombination = "energy") -> np.ndarray:
    """Combine level differences Dj of m loudspeaker positions (rows) into one D per band.

    "energy" (default): D = -10 lg((1/m) Σ 10^(-Dj/10)), ISO 16283-1 (facts sheet 1.6; the formula
    is from memory). "arithmetic": mean of Dj. "simultaneous": several loudspeakers ran at once,
    so there is exactly one row and D = L1 - L2 as given.
    """
    differences = np.atleast_2d(np.asarray(level_differences_db, dtype=float))
    if rule == "energy":
        return -10.0 * np.log10(np.mean(10.0 ** (-differences / 10.0), axis=0))  # ISO 16283-1 (from memory)
    if rule == "arithmetic":
        return np.mean(differences, axis=0)
    if rule == "simultaneous":
        if differences.shape[0] != 1:
            raise InputError(f"simultaneous loudspeakers give one sound field, got {differences.shape[0]} positions")
        return differences[0]
    raise InputError(f"loudspeaker combination rule must be 'energy', 'arithmetic' or 'simultaneous', got {rule!r}")


def separating_area_m2(rooms: Rooms, *, rule: AreaRule = "smaller") -> tuple[float | None, str]:
    """The area S used for R', and a sentence saying how it was chosen.

    S = max(S_common, V / 7.5) with V the smaller room's volume by default; ``rule`` picks the
    receiving or source room instead, or "off" keeps S_common (facts sheet 1.10, from memory).
    Without a common element (``common_area_m2`` None) R' is not defined and S is None.
    """
    if rooms.common_area_m2 is None:
        # ISO 16283-1 (from memory)
        return None, unconfirmed("no common separating element: R' not computed, D, Dn and DnT only (ISO 16283-1)")
    common_m2 = number(rooms.common_area_m2, "common area of the separating element", low=AREA_M2[0],
                       high=AREA_M2[1], unit=" m2")
    volumes_m3 = {"smaller": min(rooms.source_volume_m3, rooms.receiving_volume_m3),
                  "receiving": rooms.receiving_volume_m3, "source": rooms.source_volume_m3}
    if rule == "off":
        return common_m2, f"S = {common_m2:.2f} m2, the common area as given (V/7.5 rule not applied)"
    if rule not in volumes_m3:
        raise InputError(f"area rule must be 'smaller', 'receiving', 'source' or 'off', got {rule!r}")
    floor_m2 = volumes_m3[rule] / AREA_VOLUME_DIVISOR_M
    if floor_m2 > common_m2:
        return floor_m2, unconfirmed(f"S = {floor_m2:.2f} m2 = V/7.5 with V the {rule} room volume "  # from memory
                                     f"{volumes_m3[rule]:g} m3, larger than the common area {common_m2:.2f} m2 "
                                     "(ISO 16283-1 small-element rule)")
    return common_m2, f"S = {common_m2:.2f} m2, the common area (not below V/7.5 of the {rule} room)"


def airborne_insulation(measurement: AirborneMeasurement, rooms: Rooms, *,
                        source_combination: SourceCombination = "energy", area_rule: AreaRule = "smaller",
                        reference_time_s: float = REFERENCE_TIME_S,
                        reference_area_m2: float = REFERENCE_AREA_M2) -> AirborneResult:
    """ISO 16283-1 default (and, in rooms under 25 m3, low-frequency) procedure, band by band.

    Per loudspeaker position: energy average of microphone positions, background correction of L2,
    LF corner procedure at 50/63/80 Hz; then Dj = L1,j - L2,j combined by ``source_combination``;
    A = 0.16 V2 / T; Dn = D - 10 lg(A/A0); DnT = D + 10 lg(T/T0); R' = D + 10 lg(S/A).
    Evaluates the given bands inside 50-5000 Hz (100-3150 Hz must be present).
    In a receiving room under 25 m3 (rounded) the 50/63/80 Hz T is the 63 Hz octave-band T of
    ``octave_63_reverberation_times_s`` (ISO 16283-1 clause 10.4). Does not rate (ISO 717-1), check
    position distances, averaging times or the 8 dB source spectrum rule.
    """
    if not measurement.positions or not measurement.positions[0].receiving_levels_db:
        raise InputError("airborne measurement: no loudspeaker positions with receiving-room levels")
    source_m3 = number(rooms.source_volume_m3, "source room volume", low=VOLUME_M3[0], high=VOLUME_M3[1],
                       unit=" m3")
    receiving_m3 = number(rooms.receiving_volume_m3, "receiving room volume", low=VOLUME_M3[0],
                          high=VOLUME_M3[1], unit=" m3")
    t0_s = number(reference_time_s, "reference time T0", low=REVERBERATION_S[0], high=REVERBERATION_S[1],
                  unit=" s")
    a0_m2 = number(reference_area_m2, "reference area A0", low=AREA_M2[0], high=AREA_M2[1], unit=" m2")
    first = measurement.positions[0].receiving_levels_db[0]
    bands = analysis_bands_hz(first)
    source = room_levels([p.source_levels_db for p in measurement.positions],
                         [p.source_corner_levels_db for p in measurement.positions],
                         bands, volume_m3=source_m3, room="source room")
    receiving = room_levels([p.receiving_levels_db for p in measurement.positions],
                            [p.receiving_corner_levels_db for p in measurement.positions],
                            bands, volume_m3=receiving_m3, room="receiving room",
                            background=measurement.background_levels_db,
                            background_corners=measurement.background_corner_levels_db)
    position_d = source.levels_db - receiving.levels_db  # Dj = L1,j - L2,j (ISO 16283-1)
    d = combine_source_positions(position_d, rule=source_combination)
    t_s, t_std_s, decay_count, t_rule = average_reverberation_time(
        measurement.reverberation_times_s, bands, kind=measurement.reverberation_time_kind)
    low_t = low_frequency_reverberation(t_s, t_std_s, bands, measurement.octave_63_reverberation_times_s,
                                        volume_m3=receiving_m3)
    t_s, t_std_s = low_t.mean_s, low_t.std_s
    a_m2 = absorption_area_m2(receiving_m3, t_s)  # A = 0.16 V / T, receiving room (facts sheet 1.1)
    dn = d - 10.0 * np.log10(a_m2 / a0_m2)  # Dn = D - 10 lg(A/A0), ISO 16283-1
    dnt = d + 10.0 * np.log10(t_s / t0_s)  # DnT = D + 10 lg(T/T0), ISO 16283-1
    s_m2, s_rule = separating_area_m2(rooms, rule=area_rule)
    r = None if s_m2 is None else to_spectrum(bands, d + 10.0 * np.log10(s_m2 / a_m2), "R'")  # R' = D + 10 lg(S/A)
    rules = (*ignored_bands_rule(first),
             "energy average of microphone positions per loudspeaker position (ISO 16283-1)",
             _COMBINATION_RULES[source_combination],
             unconfirmed(BACKGROUND_RULE), *source.rules, *receiving.rules,
             t_rule, *low_t.rules, f"A = 0.16 V/T with the receiving-room volume {receiving_m3:g} m3; "
             f"A0 = {a0_m2:g} m2, T0 = {t0_s:g} s", s_rule)
    spread = BandSpread(to_spectrum(bands, source.reading_std_db, "L1 std"),
                        to_spectrum(bands, receiving.reading_std_db, "L2 std"),
                        to_spectrum(bands, t_std_s, "T std", "s"),
                        source.reading_count, receiving.reading_count, decay_count)
    return AirborneResult(
        source_level_db=to_spectrum(bands, weighted_energy_mean_db(source.levels_db, source.weights), "L1"),
        receiving_level_db=to_spectrum(bands, weighted_energy_mean_db(receiving.levels_db, receiving.weights), "L2"),
        background_level_db=to_spectrum(bands, receiving.background_db, "B2"),
        reverberation_time_s=to_spectrum(bands, t_s, "T", "s"),
        absorption_area_m2=to_spectrum(bands, a_m2, "A", "m2"),
        level_difference_db=to_spectrum(bands, d, "D"),
        normalized_level_difference_db=to_spectrum(bands, dn, "Dn"),
        standardized_level_difference_db=to_spectrum(bands, dnt, "DnT"),
        apparent_sound_reduction_index_db=r,
        position_level_differences_db=tuple(to_spectrum(bands, row, f"D{j + 1}") for j, row in enumerate(position_d)),
        limited=tuple(bool(x) for x in receiving.limited),
        background_margin_db=to_spectrum(bands, receiving.margin_db, "L2 - B2"),
        spread=spread,
        separating_area_m2=s_m2,
        rules_applied=tuple(rules),
        findings=(*source.findings, *receiving.findings, *low_t.findings),
        low_frequency_octave_t_s=low_t.octave_63_s,
    )

