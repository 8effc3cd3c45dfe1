"""Arithmetic shared by ISO 16283-1 (airborne) and ISO 16283-2 (impact) field measurements.

Everything here is a pure function of band levels (numpy arrays or BandSpectrum values): background
correction, the low-frequency corner procedure, averaging of positions and decays, octave values
from one-third octaves. Section numbers ("facts sheet 1.8") point to the project's standards facts
sheet, which says for each number whether it was verified, computed or recalled from memory.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Literal, NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from fieldtl.bands import (
    THIRD_OCTAVES_50_5000_HZ,
    THIRD_OCTAVES_100_3150_HZ,
    BandSpectrum,
    nominal_bands_hz,
    thirds_of_octave,
)
from fieldtl.errors import InputError
from fieldtl.findings import Finding
from fieldtl.units import db_to_energy, energetic_mean_db, energy_to_db

FIELD_BANDS_HZ = THIRD_OCTAVES_50_5000_HZ  # ISO 16283-1/-2: 50-5000 Hz with the optional bands (facts sheet 1.2)
REQUIRED_BANDS_HZ = THIRD_OCTAVES_100_3150_HZ  # required range, ISO 16283-1/-2 (facts sheet 1.2, 2)
LOW_FREQUENCY_BANDS_HZ = (50.0, 63.0, 80.0)  # bands of the low-frequency procedure (facts sheet 1.3)
LOW_FREQUENCY_VOLUME_LIMIT_M3 = 25  # LF procedure: volume rounded to whole m3 below 25 (ISO 16283-1/-2, as transcribed)
REFERENCE_TIME_S = 0.5  # T0 of ISO 16283-1/-2 (facts sheet 1.1, from memory, high confidence)
REFERENCE_AREA_M2 = 10.0  # A0 of ISO 16283-1/-2 (facts sheet 1.1, from memory, high confidence)
SABINE_FACTOR_S_PER_M = 0.16  # A = 0.16 V / T as used by the ISO field standards (facts sheet 0)
NO_CORRECTION_MARGIN_DB = 10.0  # margin >= 10 dB: no correction; 10.0 itself falls here (from memory)
LIMIT_MARGIN_DB = 6.0  # margin <= 6 dB: fixed correction, band marked as a limit (facts sheet 1.8)
LIMIT_CORRECTION_DB = 1.3  # -10 lg(1 - 10^-0.6) = 1.256, rounded by the standard to 1.3 (facts sheet 1.8)
EDGE_TOLERANCE_DB = 1e-9  # a margin within this of 6 or 10 dB counts as exactly 6 or 10 (float noise only)

ReverberationKind = Literal["decays", "averaged"]

BACKGROUND_RULE = (
    "background correction per band (ISO 16283-1/-2): margin >= 10 dB no correction (10.0 dB itself "
    "is treated as 'no correction', from memory); 6 dB < margin < 10 dB energy subtraction "
    "10 lg(10^(Lsb/10) - 10^(Lb/10)); margin <= 6 dB subtract 1.3 dB and mark the band as a "
    "measurement limit")


class BackgroundCorrection(NamedTuple):
    """Per-band result of :func:`background_corrected_db` (arrays of the input's shape)."""

    level_db: np.ndarray  # corrected signal level
    margin_db: np.ndarray  # signal-plus-background level minus background level
    limited: np.ndarray  # bool: margin <= 6 dB, the corrected level is only a bound


def background_corrected_db(signal_db: ArrayLike, background_db: ArrayLike) -> BackgroundCorrection:
    """Correct signal-plus-background levels for background noise, band by band.

    ISO 16283-1 / ISO 16283-2 background rule (facts sheet 1.8). Margins within 1e-9 dB of 6 or
    10 dB count as exactly 6 or 10 (so 46.0 - 40.0 is "6 dB" whatever the float rounding).
    Does not decide which way a limited band bounds the result: that depends on the quantity
    (airborne: lower bound; impact: upper bound). NaN inputs give NaN levels and unflagged bands.
    """
    signal = np.asarray(signal_db, dtype=float)
    background = np.asarray(background_db, dtype=float)
    margin = signal - background
    with np.errstate(invalid="ignore", divide="ignore"):
        no_correction = margin >= NO_CORRECTION_MARGIN_DB - EDGE_TOLERANCE_DB  # Δ >= 10 dB: none
        limited = margin <= LIMIT_MARGIN_DB + EDGE_TOLERANCE_DB  # Δ <= 6 dB: 1.3 dB and a limit
        subtracted = energy_to_db(db_to_energy(signal) - db_to_energy(background))  # 6 < Δ < 10
    level = np.where(no_correction, signal, np.where(limited, signal - LIMIT_CORRECTION_DB, subtracted))
    return BackgroundCorrection(level, margin, limited)


def low_frequency_applies(volume_m3: float) -> bool:
    """True when the room needs the low-frequency procedure at 50, 63 and 80 Hz.

    ISO 16283-1/-2 (as transcribed): the room volume rounded to the nearest cubic metre is smaller
    than 25 m3, so 24.4 m3 applies and 24.5 m3 (rounds to 25) does not. Halves round up here.
    """
    return math.floor(float(volume_m3) + 0.5) < LOW_FREQUENCY_VOLUME_LIMIT_M3


def corner_level_db(corner_levels_by_position: Sequence[ArrayLike]) -> np.ndarray:
    """L_Corner: per position the highest corner level per band, energy-averaged over positions.

    ``corner_levels_by_position[j]`` has the corners of loudspeaker (or tapping-machine) position j
    on its first axis and the bands on its second. The highest corner is taken band by band (bands
    may come from different corners); with several positions their maxima are energy-averaged
    (ISO 16283-1 Formula (12), ISO 16283-2 Formula (15), as transcribed).
    """
    maxima = [np.max(np.atleast_2d(np.asarray(c, dtype=float)), axis=0) for c in corner_levels_by_position]
    if not maxima:
        raise InputError("low-frequency procedure: no corner levels given")
    return energetic_mean_db(np.vstack(maxima))


def low_frequency_level_db(default_level_db: ArrayLike, corner_level: ArrayLike) -> np.ndarray:
    """L_LF = 10 lg[(10^(0.1 L_Corner) + 2·10^(0.1 L)) / 3].

    The corner level weighs one third and the default-procedure energy average L two thirds
    (ISO 16283-1 Formula (13), ISO 16283-2 Formula (16), ISO 16283-3 Formula (5), as transcribed).
    ``corner_level`` is L_Corner from :func:`corner_level_db`. Does not check volumes or bands.
    """
    default = np.asarray(default_level_db, dtype=float)
    corner = np.asarray(corner_level, dtype=float)
    return energy_to_db((db_to_energy(corner) + 2.0 * db_to_energy(default)) / 3.0)


def weighted_energy_mean_db(levels_db: np.ndarray, weights: Sequence[float]) -> np.ndarray:
    """Energy mean of the rows of ``levels_db`` weighted by ``weights`` (e.g. microphone counts)."""
    w = np.asarray(weights, dtype=float)[:, None]
    return energy_to_db(np.sum(w * db_to_energy(levels_db), axis=0) / np.sum(w))


def sample_std(values: np.ndarray) -> np.ndarray:
    """Standard deviation across rows with n - 1 in the denominator; NaN where fewer than 2 rows."""
    if values.shape[0] < 2:
        return np.full(values.shape[1:], np.nan)
    return np.std(values, axis=0, ddof=1)


def absorption_area_m2(volume_m3: float, reverberation_time_s: np.ndarray) -> np.ndarray:
    """Equivalent absorption area A = 0.16 V / T (Sabine, as in ISO 16283-1/-2; facts sheet 1.1)."""
    return SABINE_FACTOR_S_PER_M * volume_m3 / reverberation_time_s


@dataclass(frozen=True, slots=True)
class BandSpread:
    """Per-band scatter of the inputs, for uncertainty estimates.

    Standard deviations use n - 1 and are taken across every default-procedure microphone reading
    (all loudspeaker or tapping positions pooled; corner readings left out) and across decays.
    A band is None where fewer than two readings exist. ``source_std_db`` is None for impact.
    """

    source_std_db: BandSpectrum | None
    receiving_std_db: BandSpectrum
    reverberation_std_s: BandSpectrum
    source_count: int
    receiving_count: int
    decay_count: int


def freeze_sequences(instance: object, *names: str) -> None:
    """Store the named fields of a frozen dataclass as tuples (lists passed in stay hashable values)."""
    for name in names:
        object.__setattr__(instance, name, tuple(getattr(instance, name)))


def analysis_bands_hz(first: BandSpectrum) -> tuple[float, ...]:
    """The bands evaluated: those of ``first`` inside 50-5000 Hz, which must cover 100-3150 Hz."""
    if first.fraction != 3:
        raise InputError(f"{first.quantity}: one-third-octave levels are needed, got octave bands")
    bands = tuple(f for f in first.nominal_hz if f in FIELD_BANDS_HZ)
    missing = [f for f in REQUIRED_BANDS_HZ if f not in bands]
    if missing:
        raise InputError(f"{first.quantity}: the required 100-3150 Hz bands are incomplete "
                         f"(missing {', '.join(f'{f:g}' for f in missing)} Hz)")
    return bands


def ignored_bands_rule(first: BandSpectrum) -> tuple[str, ...]:
    """A rule note when the input carried bands outside 50-5000 Hz (they are not evaluated)."""
    outside = [f for f in first.nominal_hz if f not in FIELD_BANDS_HZ]
    if not outside:
        return ()
    return (f"bands outside 50-5000 Hz not evaluated: {', '.join(f'{f:g}' for f in outside)} Hz",)


def stack_db(spectra: Sequence[BandSpectrum], nominal_hz: Sequence[float], *, what: str,
             unit: str = "dB") -> np.ndarray:
    """Rows of ``spectra`` restricted to ``nominal_hz`` (NaN for bands without a value)."""
    if len(spectra) == 0:
        raise InputError(f"{what}: no spectra given")
    rows = []
    for spectrum in spectra:
        if spectrum.unit != unit or spectrum.fraction != 3:
            raise InputError(f"{what} ({spectrum.quantity}): expected one-third-octave values in {unit}, "
                             f"got {'octave' if spectrum.fraction == 1 else 'one-third-octave'} values "
                             f"in {spectrum.unit}")
        rows.append(spectrum.select(nominal_hz).as_array())
    return np.vstack(rows)


def average_reverberation_time(decays: Sequence[BandSpectrum], nominal_hz: Sequence[float], *,
                               kind: ReverberationKind) -> tuple[np.ndarray, np.ndarray, int, str]:
    """T per band: the arithmetic mean over decays, or one averaged T taken as given.

    ``kind="decays"``: one spectrum per decay, arithmetic mean per band (ISO 16283-1 / ISO 3382-2,
    from memory). ``kind="averaged"``: exactly one spectrum that the caller already
    averaged (for example T from an ensemble-averaged decay); it is used unchanged and its spread
    is unknown. Returns (mean_s, std_s, decay_count, rule text). The low-frequency rule for small
    rooms is applied afterwards by :func:`low_frequency_reverberation`.
    """
    values_s = stack_db(decays, nominal_hz, what="reverberation times", unit="s")
    with np.errstate(invalid="ignore"):
        if np.any(values_s <= 0.0):
            raise InputError("reverberation times must be positive in every band")
    if kind == "averaged":
        if values_s.shape[0] != 1:
            raise InputError(f"reverberation time marked as averaged: expected 1 spectrum, got {values_s.shape[0]}")
        return (values_s[0], np.full(values_s.shape[1], np.nan), 1,
                "T used as given by the caller (already averaged, e.g. from an ensemble-averaged decay)")
    if kind != "decays":
        raise InputError(f"reverberation time kind must be 'decays' or 'averaged', got {kind!r}")
    count = values_s.shape[0]
    valid = np.isfinite(values_s)
    per_band = valid.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_s = np.where(per_band > 0, np.nansum(values_s, axis=0) / per_band, np.nan)
        squares = np.nansum((values_s - mean_s) ** 2, axis=0)
        std_s = np.where(per_band >= 2, np.sqrt(squares / (per_band - 1)), np.nan)
    partial = "" if valid.all() else "; a band where a decay gave no valid T uses the remaining decays"
    return (mean_s, std_s, count,
            f"T per band: arithmetic mean of {count} decay(s) (ISO 16283-1/-2, from memory){partial}")


class LowFrequencyReverberation(NamedTuple):
    """T and its spread per band after the low-frequency rule, and what was done."""

    mean_s: np.ndarray
    std_s: np.ndarray
    octave_63_s: float | None   # the 63 Hz octave-band T used for 50, 63 and 80 Hz, or None
    rules: tuple[str, ...]
    findings: tuple[Finding, ...]


def low_frequency_reverberation(mean_s: np.ndarray, std_s: np.ndarray, nominal_hz: Sequence[float],
                                octave_63_s: Sequence[float], *, volume_m3: float) -> LowFrequencyReverberation:
    """In a room under 25 m3 (rounded) the 50, 63 and 80 Hz T is one 63 Hz octave-band T.

    ISO 16283-1/-2 clause 10.4 (as transcribed): the one-third-octave T is not used there; one T
    measured in the 63 Hz octave band (here the arithmetic mean of the decays' octave T) serves all
    three bands. ``octave_63_s`` holds one octave T per decay (NaN: that decay gave none). Without
    any, the one-third-octave T stays and a finding says the standard's T is missing.
    """
    lf_mask = np.isin(np.asarray(nominal_hz, dtype=float), LOW_FREQUENCY_BANDS_HZ)
    if not lf_mask.any() or not low_frequency_applies(volume_m3):
        return LowFrequencyReverberation(mean_s, std_s, None, (), ())
    values = np.asarray(octave_63_s, dtype=float)
    values = values[np.isfinite(values) & (values > 0)]
    if values.size == 0:
        return LowFrequencyReverberation(mean_s, std_s, None, (
            f"receiving room {volume_m3:g} m3 (under 25 m3 when rounded): no 63 Hz octave-band T available; "
            "one-third-octave T used at 50-80 Hz instead of the standard's octave T",), (Finding(
                "low_frequency_octave_t_missing", "warning",
                "The receiving room is under 25 m3, where 50, 63 and 80 Hz need the reverberation time of the "
                "63 Hz octave band, but no decay gave one; one-third-octave values were used.",
                "Record decays with enough low-frequency energy (or give the 63 Hz octave T).",
                clause="ISO 16283-1/-2 clause 10.4"),))
    mean, std = mean_s.copy(), std_s.copy()
    octave_mean = float(np.mean(values))
    mean[lf_mask] = octave_mean
    std[lf_mask] = float(np.std(values, ddof=1)) if values.size >= 2 else np.nan
    rule = (f"receiving room {volume_m3:g} m3 (under 25 m3 when rounded): T at 50, 63 and 80 Hz is the 63 Hz "
            f"octave-band T = {octave_mean:.2f} s (mean of {values.size} decay(s)), ISO 16283-1/-2 clause 10.4")
    return LowFrequencyReverberation(mean, std, octave_mean, (rule,), ())


def octave_level_difference_db(spectrum: BandSpectrum) -> BandSpectrum:
    """Octave values of a level difference or index: X_oct = -10 lg((1/3) Σ 10^(-Xi/10)).

    For D, Dn, DnT and R' (facts sheet 0, from memory, high confidence). Octaves are formed only
    where all three one-third octaves are present; a missing third leaves the octave missing.
    """
    return _octaves(spectrum, lambda thirds: -10.0 * np.log10(np.mean(10.0 ** (-thirds / 10.0))))


def octave_level_sum_db(spectrum: BandSpectrum) -> BandSpectrum:
    """Octave impact levels as the energy sum of the three one-third octaves (facts sheet 2)."""
    return _octaves(spectrum, lambda thirds: 10.0 * np.log10(np.sum(10.0 ** (thirds / 10.0))))


def octave_limited(nominal_hz: Sequence[float], limited: Sequence[bool]) -> tuple[bool, ...]:
    """Octave limit flags: an octave is a limit when any of its one-third octaves is one."""
    flags = dict(zip((float(f) for f in nominal_hz), limited))
    return tuple(any(flags[f] for f in thirds_of_octave(octave_hz))
                 for octave_hz in _complete_octaves_hz(tuple(flags)))


def _complete_octaves_hz(thirds_hz: tuple[float, ...]) -> tuple[float, ...]:
    return tuple(o for o in nominal_bands_hz(31.5, 16000, fraction=1)
                 if all(f in thirds_hz for f in thirds_of_octave(o)))


def _octaves(spectrum: BandSpectrum, combine: Callable[[np.ndarray], float]) -> BandSpectrum:
    if spectrum.fraction != 3:
        raise InputError(f"{spectrum.quantity}: octave values need one-third-octave input")
    octaves_hz = _complete_octaves_hz(spectrum.nominal_hz)
    values = [combine(spectrum.select(thirds_of_octave(o)).as_array()) for o in octaves_hz]
    return BandSpectrum.from_array(octaves_hz, values, spectrum.unit, spectrum.quantity, fraction=1)


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
            clause="ISO 16283-1/-2 background correction (facts sheet 1.8)"))
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


def to_spectrum(nominal_hz: Sequence[float], values: np.ndarray, quantity: str,
                unit: Literal["dB", "s", "m2"] = "dB") -> BandSpectrum:
    """A BandSpectrum from an array, NaN and inf becoming 'no value'."""
    return BandSpectrum.from_array(nominal_hz, values, unit, quantity)
