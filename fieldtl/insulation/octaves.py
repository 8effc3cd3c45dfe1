"""Octave values from one-third octaves for the field quantities of ISO 16283-1/-2: level
differences and indices (D, Dn, DnT, R'), impact levels, and the octaves' limit flags.
Section numbers ("facts sheet 2") point to the project's standards facts sheet.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np

from fieldtl.bands import BandSpectrum, nominal_bands_hz, thirds_of_octave
from fieldtl.errors import InputError


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
