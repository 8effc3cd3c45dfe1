"""Where a decay meets the background noise: Lundeby's iterative method (facts sheet 6.3).

Lundeby, Vigran, Bietz and Vorländer, Acustica 81 (1995), outline as in the facts sheet:
smooth the squared band signal, estimate the noise from the end, regress the decay down to
10 dB above the noise, re-smooth with a few intervals per 10 dB, re-estimate the noise after the
crossing point, regress the late decay over 20 dB ending 10 dB above the noise, and repeat until
the crossing point settles.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

NOISE_TAIL_FRACTION = 0.1        # first noise estimate: the last 10 % of the response (Lundeby 1995)
REGRESSION_END_ABOVE_NOISE_DB = 10.0   # regression stops 10 dB above the noise (Lundeby: 5-10 dB)
LATE_REGRESSION_RANGE_DB = 20.0  # late-decay regression spans 20 dB (Lundeby: 10-20 dB)
NOISE_START_BELOW_DB = 10.0      # noise is averaged from where the decay line is 10 dB under it (5-10 dB)
INTERVALS_PER_10_DB = 5          # re-smoothing resolution (Lundeby: 3-10 per 10 dB)
MAX_ITERATIONS = 20              # Lundeby reports convergence within about 5
CONVERGED_DB = 0.5               # stop when the crossing point moves less than 0.5 dB of decay
ENERGY_FLOOR_DB = -200.0         # below the peak: keeps logarithms finite for exact digital silence


@dataclass(frozen=True, slots=True)
class NoiseFloor:
    """Lundeby's estimates for one band-filtered decay, times counted from its first sample."""

    noise_power: float                  # mean square of the background, in the squared input's units
    peak_to_noise_db: float             # peak of the first smoothed energy over that noise power
    crossing_time_s: float | None       # where the late decay line meets the noise (<= signal length)
    late_decay_time_s: float | None     # -60 dB / late slope: the decay assumed beyond the crossing
    iterations: int                     # 0 when no decay was found (crossing and late decay are None)


def smoothing_window_s(nominal_hz: float) -> float:
    """First smoothing window, (800 / f + 10) ms (pyrato's band rule inside Lundeby's 10-50 ms)."""
    return (800.0 / nominal_hz + 10.0) / 1000.0


def estimate_noise_floor(energy: np.ndarray, *, sample_rate_hz: float, window_s: float) -> NoiseFloor:
    """Lundeby's crossing point, noise power and late decay time of a squared band signal.

    ``energy`` (not all zero) starts at the decay's start. When no decay of at least 10 dB
    stands above the noise, or the fitted decay does not fall, the crossing point and late decay
    time are None and the noise power is the mean of the last 10 %. Does not integrate, truncate
    or subtract anything; see fieldtl.analysis.decay.
    """
    floor = float(np.max(energy)) * 10.0 ** (ENERGY_FLOOR_DB / 10.0)
    if float(np.min(energy)) < floor:      # a copy only where some sample is below the floor
        energy = np.maximum(energy, floor)
    noise_power = float(np.mean(energy[int(energy.size * (1.0 - NOISE_TAIL_FRACTION)):]))
    levels_db, times_s = _smoothed_db(energy, sample_rate_hz, window_s)
    if levels_db.size < 3:
        levels_db, times_s = _smoothed_db(energy, sample_rate_hz, energy.size / 3 / sample_rate_hz)
    peak = int(np.argmax(levels_db))
    peak_to_noise_db = float(levels_db[peak] - _db(noise_power))
    no_decay = NoiseFloor(noise_power, peak_to_noise_db, None, None, 0)
    line = _regress(levels_db, times_s, start=peak, end_level_db=_db(noise_power) + REGRESSION_END_ABOVE_NOISE_DB)
    if line is None:
        return no_decay
    slope_db_per_s, intercept_db = line
    crossing_s = (_db(noise_power) - intercept_db) / slope_db_per_s
    block_s = max((10.0 / -slope_db_per_s) / INTERVALS_PER_10_DB, 1.0 / sample_rate_hz)
    levels_db, times_s = _smoothed_db(energy, sample_rate_hz, block_s)
    if levels_db.size < 3:
        return no_decay
    peak = int(np.argmax(levels_db))
    duration_s = energy.size / sample_rate_hz
    for iteration in range(1, MAX_ITERATIONS + 1):
        noise_from_s = min(crossing_s + NOISE_START_BELOW_DB / -slope_db_per_s,
                           duration_s * (1.0 - NOISE_TAIL_FRACTION))
        noise_power = float(np.mean(energy[max(int(noise_from_s * sample_rate_hz), 0):]))
        noise_db = _db(noise_power)
        top_db = noise_db + REGRESSION_END_ABOVE_NOISE_DB + LATE_REGRESSION_RANGE_DB
        below_top = np.flatnonzero(levels_db[peak:] < top_db)
        start = peak + int(below_top[0]) if below_top.size else peak
        line = _regress(levels_db, times_s, start=start, end_level_db=noise_db + REGRESSION_END_ABOVE_NOISE_DB)
        if line is None:
            return NoiseFloor(noise_power, peak_to_noise_db, None, None, 0)
        slope_db_per_s, intercept_db = line
        previous_s, crossing_s = crossing_s, (noise_db - intercept_db) / slope_db_per_s
        if abs(crossing_s - previous_s) * -slope_db_per_s < CONVERGED_DB:
            break
    return NoiseFloor(noise_power=noise_power, peak_to_noise_db=peak_to_noise_db,
                      crossing_time_s=float(min(max(crossing_s, 0.0), duration_s)),
                      late_decay_time_s=-60.0 / slope_db_per_s, iterations=iteration)


def _smoothed_db(energy: np.ndarray, sample_rate_hz: float, block_s: float) -> tuple[np.ndarray, np.ndarray]:
    """Means over consecutive blocks, in dB, with the time of each block's centre."""
    block = max(1, round(block_s * sample_rate_hz))
    n_blocks = energy.size // block
    means = energy[: n_blocks * block].reshape(n_blocks, block).mean(axis=1)
    return _db(means), (np.arange(n_blocks) + 0.5) * block / sample_rate_hz


def _regress(levels_db: np.ndarray, times_s: np.ndarray, *, start: int,
             end_level_db: float) -> tuple[float, float] | None:
    """Least-squares line through the blocks from ``start`` to the first one below ``end_level_db``."""
    below = np.flatnonzero(levels_db[start + 1:] < end_level_db)
    stop = start + 1 + int(below[0]) if below.size else levels_db.size
    if stop - start < 2 or levels_db[start] - end_level_db < 0.0:
        return None
    slope, intercept, _ = least_squares_line(times_s[start:stop], levels_db[start:stop])
    if not slope < 0.0:
        return None
    return slope, intercept


def least_squares_line(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float]:
    """Slope, intercept and correlation coefficient r of the least-squares line y = a x + b.

    The closed form of ``numpy.polyfit(x, y, 1)`` and ``numpy.corrcoef(x, y)[0, 1]`` (the same
    values to rounding) without their general machinery, which costs more than the fit itself
    for the few hundred points of a decay. r is nan when x or y does not vary.
    """
    mean_x, mean_y = float(x.sum()) / x.size, float(y.sum()) / y.size   # what .mean() gives, without its wrapper
    dx = x - mean_x
    dy = y - mean_y
    sxx, sxy, syy = float(dx @ dx), float(dx @ dy), float(dy @ dy)
    slope = sxy / sxx if sxx > 0.0 else math.nan
    r = sxy / math.sqrt(sxx * syy) if sxx * syy > 0.0 else math.nan
    return slope, mean_y - slope * mean_x, r


def _db(power: np.ndarray | float) -> np.ndarray | float:
    return 10.0 * np.log10(power) if isinstance(power, np.ndarray) else 10.0 * math.log10(power)
