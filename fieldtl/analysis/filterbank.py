"""Band-pass filters for one-third-octave and octave analysis (IEC 61260-1:2014)."""

from __future__ import annotations

import numpy as np
from scipy import signal

from fieldtl.bands import Fraction, band_edges_hz
from fieldtl.errors import InputError

DEFAULT_ORDER = 3  # Butterworth prototype order N (band-pass order 2N); N >= 3 meets class 1 (facts sheet 7.3, computed)


def band_sos(nominal_hz: float, *, sample_rate_hz: float, fraction: Fraction = 3,
             order: int = DEFAULT_ORDER) -> np.ndarray:
    """Second-order sections of a Butterworth band-pass between the IEC 61260-1 band edges.

    Designed at the exact (base-ten) mid-band frequency of the nominal band ``nominal_hz``.
    Does not check the class-1 mask; see the filter tests for that.
    """
    low_hz, high_hz = band_edges_hz(nominal_hz, fraction=fraction)
    if high_hz >= sample_rate_hz / 2:
        raise InputError(f"{nominal_hz} Hz band needs a sample rate above {2 * high_hz:.0f} Hz, "
                         f"got {sample_rate_hz:g} Hz")
    return signal.butter(order, [low_hz, high_hz], btype="bandpass", fs=sample_rate_hz, output="sos")
