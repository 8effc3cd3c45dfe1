"""ASTM E413 (NIC, NNIC, ASTC) and ASTM E989 (AIIC, NISR, ISR) ratings of one-third octaves.

Pure arithmetic, no I/O. The contours, the 32 dB sum rule and the 8 dB single-band rule are
[V] in the project's facts sheet (5.2, 5.3). E1007's T-normalised quantity is RTNISPL (rated as
NISR). From memory or not verified: the other E1007 names (ANISPL/AIIC, ISPL/ISR), and whether
E413/E989 round band values to whole decibels before fitting (ASTM rounding, not verified).
FSTC (from FTL, the shielded field test of E336-16) is not offered: the current E413 does not list
it as a field rating. This module does NOT round to whole
decibels: it uses the values to 0.1 dB like the ISO 717 ratings, so a 8.4 dB deficiency breaks
the 8 dB rule here where whole-decibel inputs might not.
"""

from __future__ import annotations

from collections.abc import Sequence

from fieldtl.bands import THIRD_OCTAVES_100_3150_HZ, BandSpectrum, nominal_bands_hz
from fieldtl.errors import InputError
from fieldtl.rating.iso717 import (Bound, Rating, Unfavourable, bound_of, curve_spectra, deviation_tenths,
                                   fit_shift_tenths, level_tenths, limited_bands, required_levels_db)

THIRD_OCTAVES_125_4000_HZ = nominal_bands_hz(125, 4000)

# E413 contour relative to its 500 Hz value, 125-4000 Hz (facts sheet 5.2 [V]).
E413_CONTOUR_RELATIVE = BandSpectrum(
    THIRD_OCTAVES_125_4000_HZ,
    tuple(float(v) for v in (-16, -13, -10, -7, -4, -1, 0, 1, 2, 3, 4, 4, 4, 4, 4, 4)), "dB", "ASTM E413 contour")
# E989 contour relative to its 500 Hz value, 100-3150 Hz (facts sheet 5.3 [V]).
E989_CONTOUR_RELATIVE = BandSpectrum(
    THIRD_OCTAVES_100_3150_HZ,
    tuple(float(v) for v in (2, 2, 2, 2, 2, 2, 1, 0, -1, -2, -3, -6, -9, -12, -15, -18)), "dB", "ASTM E989 contour")

_MAX_SUM_TENTHS = 320      # sum of deficiencies (E413) or excesses (E989) <= 32 dB (facts sheet 5.2, 5.3 [V])
_MAX_SINGLE_TENTHS = 80    # no single deficiency / excess above 8 dB (same sources)
_IIC_BASE_DB = 110         # IIC-style number = 110 - contour value at 500 Hz (E989; facts sheet 5.3 [V])

# E336 quantity -> E413 rating (ASTM E336 / E413).
E413_DESCRIPTORS = {"NR": "NIC", "NNR": "NNIC", "ATL": "ASTC"}
# E1007 quantity -> E989 rating: RTNISPL -> NISR (E1007); ANISPL -> AIIC and ISPL -> ISR from memory.
E989_DESCRIPTORS = {"ANISPL": "AIIC", "RTNISPL": "NISR", "ISPL": "ISR"}


def _descriptor(spectrum: BandSpectrum, table: dict[str, str], descriptor: str | None, standard: str) -> str:
    if descriptor:
        return descriptor
    if spectrum.quantity not in table:
        raise InputError(f"{spectrum.quantity}: {standard} has no rating name for this quantity "
                         f"(expected one of {', '.join(table)}, or pass descriptor=)")
    return table[spectrum.quantity]


def _rate_contour(spectrum: BandSpectrum, contour: BandSpectrum, *, standard: str, descriptor: str,
                  unfavourable: Unfavourable, limited: Sequence[bool] | None, bound_direction: Bound) -> Rating:
    if spectrum.fraction != 3:
        raise InputError(f"{spectrum.quantity}: {standard} rates one-third-octave bands only")  # E413 1.1, E989 4.3
    measured_tenths = level_tenths(required_levels_db(spectrum, contour.nominal_hz, standard=standard))
    relative_tenths = level_tenths(contour.as_array())
    shift_tenths = fit_shift_tenths(measured_tenths, relative_tenths, step_tenths=10,
                                    max_sum_tenths=_MAX_SUM_TENTHS, max_single_tenths=_MAX_SINGLE_TENTHS,
                                    unfavourable=unfavourable)
    shifted_tenths = relative_tenths + shift_tenths         # contour value at 500 Hz = shift
    deviation = deviation_tenths(measured_tenths, shifted_tenths, unfavourable)
    shifted, deviation_spectrum = curve_spectra(contour.nominal_hz, shifted_tenths, deviation, fraction=3,
                                                descriptor=descriptor)
    contour_500_db = shift_tenths // 10
    return Rating(
        descriptor=descriptor, standard=standard,
        single_number_db=contour_500_db if unfavourable == "below" else _IIC_BASE_DB - contour_500_db,
        single_number_precise_db=None, adaptation_terms_db={}, shifted_reference=shifted,
        unfavourable_deviation=deviation_spectrum, deviation_sum_db=int(deviation.sum()) / 10,
        max_deviation_db=int(deviation.max()) / 10,
        band_range_hz=(contour.nominal_hz[0], contour.nominal_hz[-1]),
        bound=bound_of(contour.nominal_hz, limited_bands(spectrum, limited), bound_direction),
        adaptation_term_bounds={})


def rate_e413(spectrum: BandSpectrum, *, limited: Sequence[bool] | None = None,
              descriptor: str | None = None) -> Rating:
    """NIC / NNIC / ASTC of an NR / NNR / ATL spectrum (ASTM E413 contour, 125-4000 Hz).

    The contour is raised in 1 dB steps to the highest position where the deficiencies (data below
    the contour) sum to at most 32 dB and none exceeds 8 dB; the rating is its value at 500 Hz.
    ``limited`` flags bands (aligned with ``spectrum``) that are measurement limits: the rating is
    then a lower bound. ``descriptor`` overrides the name taken from ``spectrum.quantity``.

    Does not check the E336 conditions on room volumes (for example ASTC only between spaces of at
    least 25 m3) or background noise.
    """
    standard = "ASTM E413"
    return _rate_contour(spectrum, E413_CONTOUR_RELATIVE, standard=standard,
                         descriptor=_descriptor(spectrum, E413_DESCRIPTORS, descriptor, standard),
                         unfavourable="below", limited=limited, bound_direction="lower")


def rate_e989(spectrum: BandSpectrum, *, limited: Sequence[bool] | None = None,
              descriptor: str | None = None) -> Rating:
    """AIIC / NISR / ISR of an ANISPL / RTNISPL / ISPL spectrum (ASTM E989 contour, 100-3150 Hz).

    The contour is lowered in 1 dB steps to the lowest position where the excesses (data above the
    contour) sum to at most 32 dB and none exceeds 8 dB; the rating is 110 minus its value at
    500 Hz. A band flagged in ``limited`` is an upper bound of the level, so the true contour could
    sit lower and the rating (higher is better) is a **lower** bound.

    Does not compute HIIC/LIIC and does not check the E1007 conditions.
    """
    standard = "ASTM E989"
    return _rate_contour(spectrum, E989_CONTOUR_RELATIVE, standard=standard,
                         descriptor=_descriptor(spectrum, E989_DESCRIPTORS, descriptor, standard),
                         unfavourable="above", limited=limited, bound_direction="lower")
