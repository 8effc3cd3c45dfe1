"""Arithmetic shared by ISO 16283-1 (airborne) and ISO 16283-2 (impact) field measurements.

Everything here is a pure function of band levels (numpy arrays or BandSpectrum values): the
evaluated bands, stacking and averaging of positions and decays, the absorption area. Background
correction is in :mod:`fieldtl.insulation.background`, the low-frequency procedure in
:mod:`~fieldtl.insulation.low_frequency`, a room's levels in :mod:`~fieldtl.insulation.room_levels`
and octave values in :mod:`~fieldtl.insulation.octaves`. Section numbers ("facts sheet 1.8") point
to the project's standards facts sheet, which says for each number whether it was verified,
computed or recalled from memory.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np

from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, THIRD_OCTAVES_100_3150_HZ, BandSpectrum
from fieldtl.errors import InputError
from fieldtl.findings import unconfirmed
from fieldtl.units import db_to_energy, energy_to_db

FIELD_BANDS_HZ = THIRD_OCTAVES_50_5000_HZ  # ISO 16283-1/-2: 50-5000 Hz with the optional bands (facts sheet 1.2)
REQUIRED_BANDS_HZ = THIRD_OCTAVES_100_3150_HZ  # required range, ISO 16283-1/-2 (facts sheet 1.2, 2)
REFERENCE_TIME_S = 0.5  # T0 of ISO 16283-1/-2 (facts sheet 1.1, from memory, high confidence)
REFERENCE_AREA_M2 = 10.0  # A0 of ISO 16283-1/-2 (facts sheet 1.1, from memory, high confidence)
SABINE_FACTOR_S_PER_M = 0.16  # A = 0.16 V / T as used by the ISO field standards (facts sheet 0)

ReverberationKind = Literal["decays", "averaged"]


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
    return (mean_s, std_s, count,   # the arithmetic mean of T: ISO 16283-1/-2, from memory
            unconfirmed(f"T per band: arithmetic mean of {count} decay(s) (ISO 16283-1/-2){partial}"))


def to_spectrum(nominal_hz: Sequence[float], values: np.ndarray, quantity: str,
                unit: Literal["dB", "s", "m2"] = "dB") -> BandSpectrum:
    """A BandSpectrum from an array, NaN and inf becoming 'no value'."""
    return BandSpectrum.from_array(nominal_hz, values, unit, quantity)
