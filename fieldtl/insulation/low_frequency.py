"""The low-frequency procedure of ISO 16283-1/-2 for small rooms: when it applies, the corner
level, the combined 50/63/80 Hz level and the 63 Hz octave-band reverberation time. Section numbers
("facts sheet 1.3") point to the project's standards facts sheet.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from fieldtl.errors import InputError
from fieldtl.findings import Finding
from fieldtl.units import db_to_energy, energetic_mean_db, energy_to_db

LOW_FREQUENCY_BANDS_HZ = (50.0, 63.0, 80.0)  # bands of the low-frequency procedure (facts sheet 1.3)
LOW_FREQUENCY_VOLUME_LIMIT_M3 = 25  # LF procedure: volume rounded to whole m3 below 25 (ISO 16283-1/-2, as transcribed)


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
