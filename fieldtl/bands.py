"""IEC 61260-1 base-ten band frequencies and the immutable band spectrum value.

Mid-band frequencies: fm = 1000 · G^(x/b) for odd b, with G = 10^(3/10) (IEC 61260-1:2014,
5.2 and 5.4); band edges fm · G^(±1/(2b)) (5.5). Filters are designed at exact frequencies and
results are labelled with the nominal ones (IEC 61260-1 Annex E / ISO 266 preferred numbers).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np

from fieldtl.errors import InputError

OCTAVE_RATIO_G = 10.0 ** (3.0 / 10.0)  # base-ten octave ratio, IEC 61260-1:2014 5.2

# Nominal one-third-octave mid-band frequencies, 20 Hz to 20 kHz (IEC 61260-1:2014 Annex E,
# ISO 266); x runs from -17 (20 Hz) to +13 (20 kHz) with 1 kHz at x = 0.
_THIRD_NOMINAL_HZ: tuple[float, ...] = (
    20, 25, 31.5, 40, 50, 63, 80, 100, 125, 160, 200, 250, 315, 400, 500, 630, 800,
    1000, 1250, 1600, 2000, 2500, 3150, 4000, 5000, 6300, 8000, 10000, 12500, 16000, 20000,
)
_THIRD_INDEX_OF_1K = _THIRD_NOMINAL_HZ.index(1000)
_OCTAVE_NOMINAL_HZ: tuple[float, ...] = (31.5, 63, 125, 250, 500, 1000, 2000, 4000, 8000, 16000)

Fraction = Literal[1, 3]


def nominal_bands_hz(low_hz: float, high_hz: float, *, fraction: Fraction = 3) -> tuple[float, ...]:
    """Nominal mid-band frequencies from ``low_hz`` to ``high_hz`` inclusive."""
    table = _THIRD_NOMINAL_HZ if fraction == 3 else _OCTAVE_NOMINAL_HZ
    if low_hz not in table or high_hz not in table:
        raise InputError(f"band range {low_hz}-{high_hz} Hz: both ends must be nominal "
                         f"{'one-third-octave' if fraction == 3 else 'octave'} frequencies")
    return tuple(float(f) for f in table if low_hz <= f <= high_hz)


THIRD_OCTAVES_50_5000_HZ = nominal_bands_hz(50, 5000)
THIRD_OCTAVES_100_3150_HZ = nominal_bands_hz(100, 3150)
THIRD_OCTAVES_20_10000_HZ = nominal_bands_hz(20, 10000)
OCTAVES_63_4000_HZ = nominal_bands_hz(63, 4000, fraction=1)
OCTAVES_125_2000_HZ = nominal_bands_hz(125, 2000, fraction=1)


def band_index(nominal_hz: float, *, fraction: Fraction = 3) -> int:
    """x of IEC 61260-1: the band number relative to 1 kHz (x = 0)."""
    table = _THIRD_NOMINAL_HZ if fraction == 3 else _OCTAVE_NOMINAL_HZ
    try:
        position = table.index(nominal_hz)
    except ValueError:
        kind = "one-third-octave" if fraction == 3 else "octave"
        raise InputError(f"{nominal_hz} Hz is not a nominal {kind} mid-band frequency") from None
    return position - (_THIRD_INDEX_OF_1K if fraction == 3 else _OCTAVE_NOMINAL_HZ.index(1000))


def exact_centre_hz(nominal_hz: float, *, fraction: Fraction = 3) -> float:
    """Exact mid-band frequency fm = 1000 · G^(x/b) (IEC 61260-1:2014 eq. 2, odd b)."""
    return 1000.0 * OCTAVE_RATIO_G ** (band_index(nominal_hz, fraction=fraction) / fraction)


def band_edges_hz(nominal_hz: float, *, fraction: Fraction = 3) -> tuple[float, float]:
    """Lower and upper band-edge frequencies fm · G^(∓1/(2b)) (IEC 61260-1:2014 eq. 3, 4)."""
    centre_hz = exact_centre_hz(nominal_hz, fraction=fraction)
    half = OCTAVE_RATIO_G ** (1.0 / (2 * fraction))
    return centre_hz / half, centre_hz * half


def thirds_of_octave(octave_hz: float) -> tuple[float, float, float]:
    """The three nominal one-third-octave bands that make up an octave band."""
    band_index(octave_hz, fraction=1)  # validates the octave
    i = _THIRD_NOMINAL_HZ.index(octave_hz)
    return tuple(float(f) for f in _THIRD_NOMINAL_HZ[i - 1 : i + 2])  # type: ignore[return-value]


@dataclass(frozen=True, slots=True)
class BandSpectrum:
    """One value per band, labelled with nominal mid-band frequencies.

    ``None`` marks a band with no valid value (not measured, or rejected); it becomes ``null``
    in JSON and ``nan`` in :meth:`as_array`.
    """

    nominal_hz: tuple[float, ...]
    values: tuple[float | None, ...]
    unit: Literal["dB", "s", "m2"]
    quantity: str
    fraction: Fraction = 3

    def __post_init__(self) -> None:
        if len(self.nominal_hz) != len(self.values):
            raise InputError(f"{self.quantity}: {len(self.nominal_hz)} bands but {len(self.values)} values")
        if any(b <= a for a, b in zip(self.nominal_hz, self.nominal_hz[1:])):
            raise InputError(f"{self.quantity}: band frequencies must be strictly ascending")

    @classmethod
    def from_array(cls, nominal_hz: Sequence[float], values: Iterable[float], unit: Literal["dB", "s", "m2"],
                   quantity: str, *, fraction: Fraction = 3) -> BandSpectrum:
        """Build from numbers where non-finite values (nan, inf) mean "no valid value"."""
        cleaned = tuple(float(v) if v is not None and math.isfinite(v) else None for v in values)
        return cls(tuple(float(f) for f in nominal_hz), cleaned, unit, quantity, fraction)

    def as_array(self) -> np.ndarray:
        """Values as float64 with nan where a band has no value."""
        return np.array([np.nan if v is None else v for v in self.values], dtype=float)

    def at(self, nominal_hz: float) -> float | None:
        """The value of one band, looked up by nominal frequency."""
        try:
            return self.values[self.nominal_hz.index(float(nominal_hz))]
        except ValueError:
            raise InputError(f"{self.quantity}: no {nominal_hz} Hz band") from None

    def select(self, nominal_hz: Sequence[float]) -> BandSpectrum:
        """The sub-spectrum of the given bands, in the given (ascending) order."""
        return BandSpectrum(tuple(float(f) for f in nominal_hz), tuple(self.at(f) for f in nominal_hz),
                            self.unit, self.quantity, self.fraction)

    def map_with(self, other: BandSpectrum, func: Callable[[float, float], float], *, quantity: str,
                 unit: Literal["dB", "s", "m2"] = "dB") -> BandSpectrum:
        """Band-by-band ``func(self, other)``; a band missing in either input stays missing."""
        require_same_bands(self, other)
        values = tuple(None if a is None or b is None else float(func(a, b))
                       for a, b in zip(self.values, other.values))
        return BandSpectrum(self.nominal_hz, values, unit, quantity, self.fraction)

    def rounded(self, decimals: int) -> tuple[float | None, ...]:
        """Values rounded for reports and JSON (None stays None)."""
        return tuple(None if v is None else round(v, decimals) for v in self.values)


def require_same_bands(a: BandSpectrum, b: BandSpectrum) -> None:
    """Raise InputError unless both spectra have the same bands in the same order."""
    if a.nominal_hz != b.nominal_hz:
        raise InputError(f"{a.quantity} and {b.quantity} have different bands "
                         f"({len(a.nominal_hz)} vs {len(b.nominal_hz)})")
