"""ISO 717-1 (airborne) and ISO 717-2 (impact) single-number ratings of band spectra.

Pure arithmetic: no I/O and no judgement of measurement quality. Bands flagged as measurement
limits (background-limited) only turn the result into a bound; they are rated like any other band.

Sources (tags of the project's facts sheet, /work/shared/reference/standards.md): reference curves
and the 32.0 / 10.0 dB shift rule [V] (facts sheet 4.1, 4.2, 4.4); band values used to one decimal
and the 0.1 dB-step evaluation of the 2020 editions (ISO 717-1:2020 and ISO 717-2:2020 scope texts
on public catalogue pages) [V]; spectrum adaptation spectra 100-3150 Hz [V], enlarged-range and
octave spectra from memory, checked for internal consistency (facts sheet 4.3); rounding of the
adaptation terms half up [CP] (facts sheet 4.5). Clause numbers follow public excerpts of the 2013
text (ISO 717-1 4.4 comparison, 4.5 adaptation terms; ISO 717-2 4.3 comparison) and are not
checked against the 2020 editions.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Literal

import numpy as np

from fieldtl.bands import (OCTAVES_125_2000_HZ, THIRD_OCTAVES_100_3150_HZ, BandSpectrum, Fraction,
                           nominal_bands_hz)
from fieldtl.errors import InputError

Bound = Literal["lower", "upper"]
Unfavourable = Literal["below", "above"]


@dataclass(frozen=True, slots=True)
class Rating:
    """A single-number rating and everything needed to show how it was reached.

    ``bound`` is None unless a band of the rating range was marked as a measurement limit; then
    it says which side the true value lies on: "lower" (true value >= this one) for airborne
    ratings (R'w, DnT,w, NNIC ...) and for ASTM impact ratings (AIIC ...: higher is better),
    "upper" for ISO impact ratings (L'n,w, L'nT,w). ``adaptation_term_bounds[name]`` is the same
    for the sum ``single_number_db + adaptation_terms_db[name]`` over the term's own band range.
    Treat the two dictionaries as read-only.
    """

    descriptor: str                          # "DnT,w", "R'w", "L'nT,w", "NNIC", "AIIC" ...
    standard: str                            # "ISO 717-1", "ISO 717-2", "ASTM E413", "ASTM E989"
    single_number_db: int
    single_number_precise_db: float | None   # 0.1 dB-step evaluation (ISO 717-1/-2:2020); None for ASTM
    adaptation_terms_db: dict[str, int] = field(hash=False)   # "C", "Ctr", "C50-3150", "CI" ...
    shifted_reference: BandSpectrum          # reference curve / contour at its final position
    unfavourable_deviation: BandSpectrum     # per band, >= 0 dB, at that position
    deviation_sum_db: float                  # sum of unfavourable deviations
    max_deviation_db: float                  # largest single unfavourable deviation
    band_range_hz: tuple[float, float]       # lowest and highest nominal band rated
    bound: Bound | None
    adaptation_term_bounds: dict[str, Bound | None] = field(hash=False)
    # Unrounded single number + term, i.e. X_Aj (ISO 717-1) or Ln,sum - 15 (ISO 717-2): the value
    # to propagate uncertainty through, since rounding the term would dominate a 0.1 dB analysis.
    adapted_precise_db: dict[str, float] = field(hash=False, default_factory=dict)


def _reference(bands_hz: tuple[float, ...], values_db: Sequence[int], name: str,
               fraction: Fraction = 3) -> BandSpectrum:
    return BandSpectrum(bands_hz, tuple(float(v) for v in values_db), "dB", name, fraction)


# ISO 717-1 reference values (facts sheet 4.1 [V]), one-third octaves 100-3150 Hz and octaves 125-2000 Hz.
AIRBORNE_REFERENCE_THIRDS = _reference(
    THIRD_OCTAVES_100_3150_HZ, (33, 36, 39, 42, 45, 48, 51, 52, 53, 54, 55, 56, 56, 56, 56, 56),
    "ISO 717-1 reference")
AIRBORNE_REFERENCE_OCTAVES = _reference(OCTAVES_125_2000_HZ, (36, 45, 52, 55, 56), "ISO 717-1 reference", 1)
# ISO 717-2 reference values (facts sheet 4.4 [V]).
IMPACT_REFERENCE_THIRDS = _reference(
    THIRD_OCTAVES_100_3150_HZ, (62, 62, 62, 62, 62, 62, 61, 60, 59, 58, 57, 54, 51, 48, 45, 42),
    "ISO 717-2 reference")
IMPACT_REFERENCE_OCTAVES = _reference(OCTAVES_125_2000_HZ, (67, 67, 65, 62, 49), "ISO 717-2 reference", 1)

# Largest allowed sum of unfavourable deviations, in tenths of a dB: 32.0 dB over 16 one-third
# octaves, 10.0 dB over 5 octaves (ISO 717-1 4.4, ISO 717-2 4.3; facts sheet 4.2 [V]).
_MAX_SUM_TENTHS: dict[int, int] = {3: 320, 1: 100}
_OCTAVE_IMPACT_CORRECTION_DB = 5  # ISO 717-2 octave rating: curve at 500 Hz minus 5 dB (facts sheet 4.4, from memory)
_IMPACT_SUM_OFFSET_DB = 15.0      # CI = Ln,sum - 15 - Ln,w (ISO 717-2 Annex A, clause from memory; facts sheet 4.4 [V])


def _spectra(rows: Mapping[str, tuple[float, float, tuple[int, ...]]], fraction: Fraction
             ) -> Mapping[str, BandSpectrum]:
    return MappingProxyType({name: _reference(nominal_bands_hz(low_hz, high_hz, fraction=fraction), values, name,
                                              fraction)
                             for name, (low_hz, high_hz, values) in rows.items()})


_CTR_THIRDS_100_3150 = (-20, -20, -18, -16, -15, -14, -13, -12, -11, -9, -8, -9, -10, -11, -13, -15)
# Sound spectra L_ij of ISO 717-1 for the adaptation terms (facts sheet 4.3). Spectrum No. 1 (C) and
# No. 2 (Ctr) for 100-3150 Hz [V]; enlarged ranges from memory [M-med], consistent with spectrum No. 1
# summing to 0 dB in every range (checked in the tests).
AIRBORNE_SPECTRA_THIRDS: Mapping[str, BandSpectrum] = _spectra({
    "C": (100, 3150, (-29, -26, -23, -21, -19, -17, -15, -13, -12, -11, -10, -9, -9, -9, -9, -9)),
    "Ctr": (100, 3150, _CTR_THIRDS_100_3150),
    "C50-3150": (50, 3150, (-40, -36, -33, -29, -26, -23, -21, -19, -17, -15, -13, -12, -11, -10, -9, -9, -9,
                            -9, -9)),
    "Ctr,50-3150": (50, 3150, (-25, -23, -21) + _CTR_THIRDS_100_3150),
    "C50-5000": (50, 5000, (-41, -37, -34, -30, -27, -24, -22, -20, -18, -16, -14, -13, -12, -11, -10, -10,
                            -10, -10, -10, -10, -10)),
    "Ctr,50-5000": (50, 5000, (-25, -23, -21) + _CTR_THIRDS_100_3150 + (-16, -18)),
    "C100-5000": (100, 5000, (-30, -27, -24, -22, -20, -18, -16, -14, -13, -12, -11, -10, -10, -10, -10, -10,
                              -10, -10)),
    "Ctr,100-5000": (100, 5000, _CTR_THIRDS_100_3150 + (-16, -18)),
}, 3)
# Octave-band spectra (facts sheet 4.3): main range [M-high], enlarged ranges [M-med]; each value is
# the rounded energy sum of its three one-third-octave values (checked in the tests).
AIRBORNE_SPECTRA_OCTAVES: Mapping[str, BandSpectrum] = _spectra({
    "C": (125, 2000, (-21, -14, -8, -5, -4)),
    "Ctr": (125, 2000, (-14, -10, -7, -4, -6)),
    "C50-3150": (63, 2000, (-31, -21, -14, -8, -5, -4)),
    "Ctr,50-3150": (63, 2000, (-18, -14, -10, -7, -4, -6)),
    "C50-5000": (63, 4000, (-32, -22, -15, -9, -6, -5, -5)),
    "Ctr,50-5000": (63, 4000, (-18, -14, -10, -7, -4, -6, -11)),
    "C100-5000": (125, 4000, (-22, -15, -9, -6, -5, -5)),
    "Ctr,100-5000": (125, 4000, (-14, -10, -7, -4, -6, -11)),
}, 1)
# Band ranges of the impact adaptation terms (ISO 717-2 Annex A; facts sheet 4.4 [V] for one-third
# octaves, octave ranges from memory).
IMPACT_TERM_RANGES_HZ: dict[int, dict[str, tuple[float, float]]] = {
    3: {"CI": (100, 2500), "CI,50-2500": (50, 2500)},
    1: {"CI": (125, 2000), "CI,50-2500": (63, 2000)},
}


def round_half_up(value: float) -> int:
    """Nearest integer, exact halves upwards (common practice; ISO's tie rule not verified)."""
    return math.floor(value + 0.5)


def level_tenths(level_db: np.ndarray) -> np.ndarray:
    """Levels as integer tenths of a dB, rounded half up.

    ISO 717-1 4.4 / ISO 717-2 4.3.1: band values are used to one decimal place (facts sheet 4.2,
    4.5); integers make the 32.0 dB boundary exact instead of a floating-point coin toss.
    """
    return np.floor(np.asarray(level_db, dtype=float) * 10.0 + 0.5).astype(np.int64)


def _valid_values(spectrum: BandSpectrum) -> dict[float, float]:
    return {f: v for f, v in zip(spectrum.nominal_hz, spectrum.values) if v is not None and math.isfinite(v)}


def required_levels_db(spectrum: BandSpectrum, bands_hz: Sequence[float], *, standard: str) -> np.ndarray:
    """The values of ``bands_hz`` as floats; InputError naming the quantity and band if one is missing."""
    if spectrum.unit != "dB":
        raise InputError(f"{spectrum.quantity}: {standard} rates levels in dB, got unit {spectrum.unit!r}")
    valid = _valid_values(spectrum)
    for nominal_hz in bands_hz:
        if nominal_hz not in valid:
            raise InputError(f"{spectrum.quantity}: no valid value at {nominal_hz:g} Hz, "
                             f"which the {standard} rating needs")
    return np.array([valid[f] for f in bands_hz], dtype=float)


def has_levels(spectrum: BandSpectrum, bands_hz: Sequence[float]) -> bool:
    """True when every band of ``bands_hz`` is present with a finite value."""
    return set(bands_hz) <= _valid_values(spectrum).keys()


def limited_bands(spectrum: BandSpectrum, limited: Sequence[bool] | None) -> frozenset[float]:
    """Nominal frequencies flagged as measurement limits; ``limited`` is aligned with the spectrum's bands."""
    if limited is None:
        return frozenset()
    if len(limited) != len(spectrum.nominal_hz):
        raise InputError(f"{spectrum.quantity}: {len(limited)} limit flags for {len(spectrum.nominal_hz)} bands")
    return frozenset(f for f, flag in zip(spectrum.nominal_hz, limited) if flag)


def bound_of(bands_hz: Sequence[float], limited_hz: frozenset[float], direction: Bound) -> Bound | None:
    """``direction`` if any rated band is a measurement limit, else None (facts sheet 1.8, common practice)."""
    return direction if limited_hz.intersection(bands_hz) else None


def fit_shift_tenths(measured_tenths: np.ndarray, curve_tenths: np.ndarray, *, step_tenths: int,
                     max_sum_tenths: int, unfavourable: Unfavourable,
                     max_single_tenths: int | None = None) -> int:
    """Shift of the curve, in tenths of a dB and a multiple of ``step_tenths``, that rules allow.

    ``unfavourable="below"`` (airborne): measured values below the curve count, and the highest
    allowed position is returned. ``"above"`` (impact): values above the curve count, and the lowest
    allowed position is returned. Allowed: the sum of unfavourable deviations is at most
    ``max_sum_tenths`` and, if given, no single deviation exceeds ``max_single_tenths``.
    Both quantities grow monotonically with the shift, so the allowed positions form one run.
    """
    sign = 1 if unfavourable == "below" else -1
    room = sign * (measured_tenths - curve_tenths)      # deviation at t = sign * shift: max(0, t - room)
    start = step_tenths * (int(room.min()) // step_tenths)  # every deviation is 0 here
    # After k steps the band with the least room deviates by >= (k - 1) * step + 1 tenths.
    shifts = start + step_tenths * np.arange(max_sum_tenths // step_tenths + 3)
    deviation = np.clip(shifts[:, None] - room[None, :], 0, None)
    allowed = deviation.sum(axis=1) <= max_sum_tenths
    if max_single_tenths is not None:
        allowed &= deviation.max(axis=1) <= max_single_tenths
    return sign * int(shifts[np.flatnonzero(allowed)[-1]])


def deviation_tenths(measured_tenths: np.ndarray, shifted_tenths: np.ndarray, unfavourable: Unfavourable
                     ) -> np.ndarray:
    """Unfavourable deviation per band, in tenths of a dB (>= 0)."""
    difference = shifted_tenths - measured_tenths if unfavourable == "below" else measured_tenths - shifted_tenths
    return np.clip(difference, 0, None)


def curve_spectra(bands_hz: tuple[float, ...], shifted_tenths: np.ndarray, deviation: np.ndarray, *,
                  fraction: Fraction, descriptor: str) -> tuple[BandSpectrum, BandSpectrum]:
    """The shifted curve and the unfavourable deviations as band spectra in dB."""
    return (BandSpectrum(bands_hz, tuple(float(v) / 10 for v in shifted_tenths), "dB",
                         f"{descriptor} reference", fraction),
            BandSpectrum(bands_hz, tuple(float(v) / 10 for v in deviation), "dB",
                         f"{descriptor} unfavourable deviation", fraction))


def weighted_descriptor(quantity: str) -> str:
    """ISO 717 name of the rating of a quantity: "R'" -> "R'w", "DnT" -> "DnT,w", "L'nT" -> "L'nT,w"."""
    return f"{quantity}w" if len(quantity.replace("'", "")) == 1 else f"{quantity},w"


def _fraction_of(spectrum: BandSpectrum, standard: str) -> Fraction:
    if spectrum.fraction not in (1, 3):
        raise InputError(f"{spectrum.quantity}: {standard} rates one-third-octave or octave bands, "
                         f"got fraction {spectrum.fraction!r}")
    return spectrum.fraction


@dataclass(frozen=True, slots=True)
class _Fit:
    shifted_tenths: np.ndarray
    deviation_tenths: np.ndarray
    single_number_db: int
    precise_db: float


def _fit_iso(measured_tenths: np.ndarray, reference: BandSpectrum, unfavourable: Unfavourable, *,
             correction_db: int = 0) -> _Fit:
    curve_tenths = level_tenths(reference.as_array())
    at_500 = reference.nominal_hz.index(500.0)
    options = {"max_sum_tenths": _MAX_SUM_TENTHS[reference.fraction], "unfavourable": unfavourable}
    # Reference curve shifted in 1 dB steps; in 0.1 dB steps for the uncertainty value
    # (ISO 717-1 4.4 / ISO 717-2 4.3.1 of the 2020 editions, 0.1 dB steps [V: scope texts]).
    shifted = curve_tenths + fit_shift_tenths(measured_tenths, curve_tenths, step_tenths=10, **options)
    precise_at_500 = curve_tenths[at_500] + fit_shift_tenths(measured_tenths, curve_tenths, step_tenths=1, **options)
    return _Fit(shifted, deviation_tenths(measured_tenths, shifted, unfavourable),
                single_number_db=int(shifted[at_500]) // 10 - correction_db,   # curve value at 500 Hz
                precise_db=(int(precise_at_500) - 10 * correction_db) / 10)


def _assemble(reference: BandSpectrum, fit: _Fit, *, descriptor: str, standard: str, terms_db: dict[str, int],
              term_bounds: dict[str, Bound | None], bound: Bound | None,
              adapted_precise_db: dict[str, float]) -> Rating:
    shifted, deviation = curve_spectra(reference.nominal_hz, fit.shifted_tenths, fit.deviation_tenths,
                                       fraction=reference.fraction, descriptor=descriptor)
    return Rating(
        descriptor=descriptor, standard=standard, single_number_db=fit.single_number_db,
        single_number_precise_db=fit.precise_db, adaptation_terms_db=terms_db, shifted_reference=shifted,
        unfavourable_deviation=deviation, deviation_sum_db=int(fit.deviation_tenths.sum()) / 10,
        max_deviation_db=int(fit.deviation_tenths.max()) / 10,
        band_range_hz=(reference.nominal_hz[0], reference.nominal_hz[-1]), bound=bound,
        adaptation_term_bounds=term_bounds, adapted_precise_db=adapted_precise_db)


def rate_iso717_1(spectrum: BandSpectrum, *, limited: Sequence[bool] | None = None,
                  descriptor: str | None = None) -> Rating:
    """Weighted airborne rating (R'w, DnT,w, Dn,w ...) with C and Ctr, ISO 717-1.

    One-third octaves (``spectrum.fraction == 3``) are rated over 100-3150 Hz, octaves over
    125-2000 Hz; other bands may be present and are ignored except by the enlarged-range terms
    (C50-3150, Ctr,50-3150, C50-5000, Ctr,50-5000, C100-5000, Ctr,100-5000), which are computed only
    when all of their bands have values. ``limited`` flags bands (aligned with ``spectrum``) whose
    values are measurement limits; the rating is then a lower bound. ``descriptor`` defaults to the
    ISO name built from ``spectrum.quantity``.

    Does not check the measurement (frequency range rules, background, room volumes) and does not
    decide which adaptation term a regulation asks for.
    """
    standard = "ISO 717-1"
    fraction = _fraction_of(spectrum, standard)
    reference = AIRBORNE_REFERENCE_THIRDS if fraction == 3 else AIRBORNE_REFERENCE_OCTAVES
    descriptor = descriptor or weighted_descriptor(spectrum.quantity)
    measured_tenths = level_tenths(required_levels_db(spectrum, reference.nominal_hz, standard=standard))
    fit = _fit_iso(measured_tenths, reference, "below")
    limited_hz = limited_bands(spectrum, limited)
    terms_db: dict[str, int] = {}
    term_bounds: dict[str, Bound | None] = {}
    adapted_db: dict[str, float] = {}
    for name, spectrum_db in (AIRBORNE_SPECTRA_THIRDS if fraction == 3 else AIRBORNE_SPECTRA_OCTAVES).items():
        if not has_levels(spectrum, spectrum_db.nominal_hz):
            continue
        band_tenths = level_tenths(required_levels_db(spectrum, spectrum_db.nominal_hz, standard=standard))
        # X_Aj = -10 lg sum 10^((L_ij - X_i)/10); C_j = X_Aj - X_w, as an integer (ISO 717-1 4.5; facts sheet 4.3)
        x_a_db = -10.0 * math.log10(float(np.sum(10.0 ** ((spectrum_db.as_array() - band_tenths / 10) / 10))))
        terms_db[name] = round_half_up(x_a_db - fit.single_number_db)
        adapted_db[name] = x_a_db
        term_bounds[name] = bound_of(spectrum_db.nominal_hz, limited_hz, "lower")
    return _assemble(reference, fit, descriptor=descriptor, standard=standard, terms_db=terms_db,
                     term_bounds=term_bounds,
                     bound=bound_of(reference.nominal_hz, limited_hz, "lower"), adapted_precise_db=adapted_db)


def rate_iso717_2(spectrum: BandSpectrum, *, limited: Sequence[bool] | None = None,
                  descriptor: str | None = None) -> Rating:
    """Weighted impact rating (L'n,w, L'nT,w ...) with CI, ISO 717-2.

    One-third octaves are rated over 100-3150 Hz; octaves over 125-2000 Hz with the curve value at
    500 Hz reduced by 5 dB. CI uses the energy sum over 100-2500 Hz (octaves 125-2000 Hz);
    CI,50-2500 is computed only when 50-2500 Hz (octaves 63-2000 Hz) all have values. ``limited``
    flags bands whose values are measurement limits; the rating is then an upper bound.

    Does not check the measurement (tapping positions, background, room volumes) and does not
    rate floor coverings (delta Lw) or rubber-ball levels.
    """
    standard = "ISO 717-2"
    fraction = _fraction_of(spectrum, standard)
    reference = IMPACT_REFERENCE_THIRDS if fraction == 3 else IMPACT_REFERENCE_OCTAVES
    correction_db = 0 if fraction == 3 else _OCTAVE_IMPACT_CORRECTION_DB
    descriptor = descriptor or weighted_descriptor(spectrum.quantity)
    measured_tenths = level_tenths(required_levels_db(spectrum, reference.nominal_hz, standard=standard))
    fit = _fit_iso(measured_tenths, reference, "above", correction_db=correction_db)
    limited_hz = limited_bands(spectrum, limited)
    terms_db: dict[str, int] = {}
    term_bounds: dict[str, Bound | None] = {}
    adapted_db: dict[str, float] = {}
    for name, (low_hz, high_hz) in IMPACT_TERM_RANGES_HZ[fraction].items():
        bands_hz = nominal_bands_hz(low_hz, high_hz, fraction=fraction)
        if not has_levels(spectrum, bands_hz):
            continue
        band_tenths = level_tenths(required_levels_db(spectrum, bands_hz, standard=standard))
        # Ln,sum = 10 lg sum 10^(Li/10); CI = Ln,sum - 15 - Ln,w, as an integer (ISO 717-2 Annex A, from memory)
        sum_db = 10.0 * math.log10(float(np.sum(10.0 ** (band_tenths / 100))))
        terms_db[name] = round_half_up(sum_db - _IMPACT_SUM_OFFSET_DB - fit.single_number_db)
        adapted_db[name] = sum_db - _IMPACT_SUM_OFFSET_DB
        term_bounds[name] = bound_of(bands_hz, limited_hz, "upper")
    return _assemble(reference, fit, descriptor=descriptor, standard=standard, terms_db=terms_db,
                     term_bounds=term_bounds,
                     bound=bound_of(reference.nominal_hz, limited_hz, "upper"), adapted_precise_db=adapted_db)
