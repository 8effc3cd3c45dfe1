"""IEC 61672-1:2013 frequency weightings A and C, and the F and S time weightings.

The analytic curves follow Annex E of IEC 61672-1:2013 (facts sheet 8). The digital filters
are made of two parts: the low-frequency poles (f1, f2, f3) and the zeros at 0 Hz go through
the bilinear transform, which is accurate far below the Nyquist frequency; the double pole at
f4 = 12.2 kHz, which the bilinear transform would pull down by 1.2 dB at 10 kHz (48 kHz
sampling), is replaced by two digital biquads fitted by least squares to the remaining
difference from the analytic curve between 10 Hz and min(0.49 fs, 22 kHz), then scaled to the
analytic value at 1 kHz. The result follows the analytic curve to within 0.01 dB from 10 Hz to
min(0.45 fs, 20 kHz) at 44.1, 48 and 96 kHz (tested). Above 22 kHz at high sample rates it is
not fitted (it stays within a few dB of a curve already more than 10 dB down).
"""

from __future__ import annotations

import functools
import math
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy import optimize, signal

from fieldtl.errors import InputError

Weighting = Literal["A", "C"]

# Pole frequencies of IEC 61672-1:2013 Annex E as the standard rounds them (facts sheet 8).
# These rounded values reproduce the standard's weighting table at the exact base-ten band
# frequencies; the unrounded design values (20.598997, 107.65265, 737.86223, 12194.217 Hz)
# differ by less than 0.001 dB but tip 160 Hz to -13.3 instead of the tabled -13.4.
F1_HZ = 20.60
F2_HZ = 107.7
F3_HZ = 737.9
F4_HZ = 12194.0
A1000_DB = -2.000   # normalisation constants, IEC 61672-1:2013 Annex E (facts sheet 8)
C1000_DB = -0.062

FAST_TIME_CONSTANT_S = 0.125   # time weighting F, IEC 61672-1 (from memory)
SLOW_TIME_CONSTANT_S = 1.0     # time weighting S, IEC 61672-1 (from memory)

_FIT_LOW_HZ = 10.0
_FIT_HIGH_HZ = 22000.0


def c_weighting_db(frequency_hz: ArrayLike) -> np.ndarray:
    """C(f) = 20 lg[f4² f² / ((f² + f1²)(f² + f4²))] - C1000 (IEC 61672-1:2013 Annex E)."""
    f2 = np.square(np.asarray(frequency_hz, dtype=float))
    with np.errstate(divide="ignore"):
        return 20 * np.log10(F4_HZ**2 * f2 / ((f2 + F1_HZ**2) * (f2 + F4_HZ**2))) - C1000_DB


def a_weighting_db(frequency_hz: ArrayLike) -> np.ndarray:
    """A(f) = 20 lg[f4² f⁴ / ((f² + f1²) √(f² + f2²) √(f² + f3²) (f² + f4²))] - A1000
    (IEC 61672-1:2013 Annex E)."""
    f2 = np.square(np.asarray(frequency_hz, dtype=float))
    with np.errstate(divide="ignore"):
        return 20 * np.log10(F4_HZ**2 * f2**2 / ((f2 + F1_HZ**2) * np.sqrt(f2 + F2_HZ**2)
                                                 * np.sqrt(f2 + F3_HZ**2) * (f2 + F4_HZ**2))) - A1000_DB


def weighting_db(weighting: Weighting, frequency_hz: ArrayLike) -> np.ndarray:
    """The analytic A or C curve in dB."""
    return a_weighting_db(frequency_hz) if weighting == "A" else c_weighting_db(frequency_hz)


def weighting_sos(weighting: Weighting, *, sample_rate_hz: float) -> np.ndarray:
    """Second-order sections of the digital A or C weighting filter at ``sample_rate_hz``.

    Designed once per process for each weighting and rate (at 44.1, 48 and 96 kHz the design is
    read from fieldtl.analysis.weighting_designs, where :func:`fitted_sos` put it); the array is
    shared and read-only
    (``scipy.signal.sosfilt`` refuses read-only sections: filter with a copy). Does not check
    the IEC 61672-1 tolerances; see the weighting tests for that.
    """
    if weighting not in ("A", "C"):
        raise InputError(f"frequency weighting must be 'A' or 'C', got {weighting!r}")
    if not (math.isfinite(sample_rate_hz) and sample_rate_hz >= 8000.0):
        raise InputError(f"A and C weighting need a sample rate of at least 8000 Hz, got {sample_rate_hz}")
    return _weighting_sos(weighting, float(sample_rate_hz))


@functools.lru_cache(maxsize=32)
def _weighting_sos(weighting: Weighting, sample_rate_hz: float) -> np.ndarray:
    from fieldtl.analysis.weighting_designs import FITTED_SOS

    shipped = FITTED_SOS.get((weighting, sample_rate_hz))
    sos = np.array(shipped) if shipped is not None else fitted_sos(weighting, sample_rate_hz)
    sos.flags.writeable = False
    return sos


def fitted_sos(weighting: Weighting, sample_rate_hz: float) -> np.ndarray:
    """The design of :func:`weighting_sos` made afresh (about 0.1 s): bilinear low-frequency part,
    two biquads fitted by least squares, gain exact at 1 kHz. weighting_sos takes the result for
    44.1, 48 and 96 kHz from fieldtl.analysis.weighting_designs, where it is kept."""
    low_pole_hz = [F1_HZ, F1_HZ] + ([F2_HZ, F3_HZ] if weighting == "A" else [])
    # Bilinear transform of s^n / Π(s + 2π fi): n zeros at 0 Hz, one per low-frequency pole.
    zeros_z, poles_z, gain = signal.bilinear_zpk(
        np.zeros(len(low_pole_hz)), -2 * np.pi * np.array(low_pole_hz), 1.0, fs=sample_rate_hz)
    high_hz = min(0.49 * sample_rate_hz, _FIT_HIGH_HZ)
    grid_hz = np.geomspace(_FIT_LOW_HZ, high_hz, 200)
    unit_z = np.exp(-2j * np.pi * grid_hz / sample_rate_hz)   # z^-1 on the grid
    low_db = 20 * np.log10(np.abs(gain * _zpk_on_grid(zeros_z, poles_z, unit_z)))
    target_db = weighting_db(weighting, grid_hz) - low_db

    def error_db(params: np.ndarray) -> np.ndarray:
        return 20 * np.log10(params[0] * np.abs(_zpk_on_grid(params[1:5], params[5:9], unit_z))) - target_db

    pole = math.exp(-2 * math.pi * F4_HZ / sample_rate_hz)   # matched-z image of f4: a starting point
    start = np.array([(1 - pole) ** 2 / 2.25, -0.5, -0.3, -0.2, 0.1, pole, 0.9 * pole, -0.3, 0.05])
    # 200 evaluations (about 0.1 s) bring the fit within 0.006 dB at 32-192 kHz (computed)
    fit = optimize.least_squares(error_db, start, bounds=([0.0] + [-1.0] * 4 + [-0.999] * 4,
                                                          [10.0] + [1.0] * 4 + [0.999] * 4), max_nfev=200)
    zeros_z = np.concatenate([zeros_z, fit.x[1:5]])
    poles_z = np.concatenate([poles_z, fit.x[5:9]])
    # exact agreement with the analytic curve at the 1 kHz reference frequency
    at_1k = np.exp(-2j * np.pi * 1000.0 / sample_rate_hz)
    gain = 10 ** (weighting_db(weighting, 1000.0) / 20) / np.abs(_zpk_on_grid(zeros_z, poles_z, np.array([at_1k])))[0]
    return signal.zpk2sos(zeros_z, poles_z, gain)


def _zpk_on_grid(zeros: np.ndarray, poles: np.ndarray, unit_z: np.ndarray) -> np.ndarray:
    """Π(1 - q z^-1) / Π(1 - p z^-1) evaluated at z^-1 = unit_z."""
    response = np.ones_like(unit_z)
    for q in zeros:
        response *= 1 - q * unit_z
    for p in poles:
        response /= 1 - p * unit_z
    return response


def exponential_coefficient(time_constant_s: float, *, sample_rate_hz: float) -> float:
    """α of y[n] = α y[n-1] + (1 - α) x²[n], the sampled form of the exponential time weighting
    (1/τ) ∫ p²(ξ) e^{-(t-ξ)/τ} dξ of IEC 61672-1 (from memory): α = exp(-1 / (τ fs))."""
    return math.exp(-1.0 / (time_constant_s * sample_rate_hz))
