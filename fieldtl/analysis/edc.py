"""Decay curves and their straight lines: the kernels of reverberation time (ISO 3382-2, ISO 18233).

A :class:`DecayCurve` is one band's decay in dB re its start; :func:`integrated_decay_curve`
makes one from a band-filtered impulse response (Lundeby noise floor, Schroeder backward
integration), and :func:`fit_decay_line` fits the least-squares line over an evaluation range.
What the lines mean for a result (findings, averaging) is :mod:`fieldtl.analysis.decay`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from fieldtl.analysis.lundeby import estimate_noise_floor, least_squares_line, smoothing_window_s
from fieldtl.bands import Fraction
from fieldtl.errors import InputError

Parameter = Literal["EDT", "T20", "T30"]
NoiseHandling = Literal["subtract", "truncate", "none"]
CurveKind = Literal["integrated_impulse_response", "interrupted_noise"]

# Evaluation ranges on the decay curve, dB re its start (ISO 3382-1 / ISO 3382-2; facts sheet 6.1).
EVALUATION_RANGES_DB: dict[Parameter, tuple[float, float]] = {
    "EDT": (0.0, -10.0), "T20": (-5.0, -25.0), "T30": (-5.0, -35.0)}
START_BELOW_PEAK_DB = 20.0         # IR start: first point 20 dB below the peak (ISO 3382-1, from memory)
CURVE_STEP_S = 0.001               # decay curves are kept at about 1 ms resolution
PADDING_BELOW_PEAK_DB = 140.0  # below any recording's noise (24-bit spans 144 dB); above FFT residue


@dataclass(frozen=True, slots=True)
class DecayLine:
    """A least-squares line through the decay curve and the range it really used."""

    reverberation_time_s: float     # -60 dB / slope (for EDT: the early decay time)
    top_db: float                   # decay level at the first point used
    bottom_db: float                # decay level at the last point used
    start_s: float                  # time of the first point used, re the decay's start
    stop_s: float                   # time of the last point used
    nonlinearity_permille: float    # ξ = 1000 (1 - r²) (ISO 3382-2 Annex B, from memory)


@dataclass(frozen=True, slots=True)
class DecayCurve:
    """One band's decay ready for evaluation, every ``step_s`` from its start.

    ``level_db`` is relative to the decay's initial level: the total energy of an impulse
    response's Schroeder curve (so it starts at exactly 0 dB), or the steady-state level before
    an interrupted noise is switched off.
    """

    nominal_hz: float
    fraction: Fraction
    step_s: float
    level_db: tuple[float, ...]
    dynamic_range_db: float         # how far the curve can fall before the noise takes over, dB
    kind: CurveKind                 # Schroeder curve of a time-reversed-filtered IR, or a forward-filtered
                                    # interrupted-noise decay (B·T limit 4 or 16; EDT only for the first)
    initial_energy: float           # what 0 dB stands for, in the input's units squared: the EDC's
                                    # start (sum over samples) or the band mean square at switch-off

    def time_s(self) -> np.ndarray:
        """Time of each level, from 0 at the decay's start."""
        return np.arange(len(self.level_db)) * self.step_s


def fit_decay_line(time_s: np.ndarray, level_db: np.ndarray, *, top_db: float,
                   bottom_db: float) -> DecayLine | None:
    """Least-squares line from the first point at or below ``top_db`` to the first at or below
    ``bottom_db`` (both included); T = -60 / slope (ISO 3382-2, facts sheet 6.1).

    ``level_db`` must already be normalised to 0 dB at the decay's start. Returns None if the
    curve never reaches ``bottom_db`` or fewer than three points lie in the range.
    """
    level_db = np.asarray(level_db, dtype=float)
    time_s = np.asarray(time_s, dtype=float)
    below_top = np.flatnonzero(level_db <= top_db)
    if below_top.size == 0:
        return None
    first = int(below_top[0])
    below_bottom = np.flatnonzero(level_db[first:] <= bottom_db)
    if below_bottom.size == 0:
        return None
    last = first + int(below_bottom[0])
    if last - first < 2:
        return None
    t, y = time_s[first:last + 1], level_db[first:last + 1]
    slope, _, r = least_squares_line(t, y)
    if not slope < 0.0:
        return None
    return DecayLine(reverberation_time_s=float(-60.0 / slope), top_db=float(y[0]), bottom_db=float(y[-1]),
                     start_s=float(t[0]), stop_s=float(t[-1]),
                     nonlinearity_permille=float(1000.0 * (1.0 - r * r)))   # ISO 3382-2 Annex B (from memory)


def schroeder_decay_db(energy: np.ndarray, *, tail_energy: float = 0.0, step: int = 1,
                       overwrite: bool = False) -> np.ndarray:
    """Backward-integrated energy plus ``tail_energy``, in dB re its first value (0 dB at t = 0).

    E(t) = Σ_{τ >= t} e(τ) + tail (Schroeder 1965; facts sheet 6.3). ``energy`` is the squared
    band signal, already truncated and noise-subtracted as wanted. Points where the integral is
    not positive (after noise subtraction) end the curve. Returns every ``step``-th point of the
    curve (the same values, only fewer logarithms taken). With ``overwrite`` the integral is
    built in ``energy`` itself (a float64 array the caller no longer needs), saving a copy.
    Does not find the start or the noise.
    """
    energy = np.asarray(energy, dtype=float)
    integral = np.cumsum(energy[::-1], out=energy[::-1] if overwrite else None)[::-1]
    integral += tail_energy
    if integral.size == 0 or integral[0] <= 0.0:
        raise InputError("decay has no energy above the noise estimate")
    non_positive = np.flatnonzero(integral <= 0.0)
    if non_positive.size:
        integral = integral[: int(non_positive[0])]
    return 10.0 * np.log10(integral[::step] / integral[0])


def impulse_start_index(impulse_response: np.ndarray) -> int | None:
    """First sample whose square is within 20 dB of the peak's (ISO 3382-1 convention, from memory).

    None if the response's last 10 % (its noise) is itself within 20 dB of the peak, so the
    threshold cannot separate the start from the noise.
    """
    energy = np.asarray(impulse_response, dtype=float) ** 2
    peak = float(np.max(energy))
    threshold = peak * 10.0 ** (-START_BELOW_PEAK_DB / 10.0)
    if peak == 0.0 or np.mean(energy[int(0.9 * energy.size):]) >= threshold:
        return None
    return int(np.flatnonzero(energy >= threshold)[0])


def without_trailing_padding(response: np.ndarray) -> np.ndarray:
    """The response without the digital silence (zeros, or numerical residue) some files end with.

    Samples after the last one within PADDING_BELOW_PEAK_DB of the peak are padding, not room: a
    recorded noise floor is always far above that, and Lundeby's noise estimate from the last
    10 % (facts sheet 6.3) would otherwise read the padding instead of the noise.
    """
    threshold = float(np.max(np.abs(response))) * 10.0 ** (-PADDING_BELOW_PEAK_DB / 20.0)
    return response[: int(np.flatnonzero(np.abs(response) > threshold)[-1]) + 1]


def integrated_decay_curve(band_response: np.ndarray, *, nominal_hz: float, sample_rate_hz: float,
                           fraction: Fraction = 3, noise_handling: NoiseHandling = "subtract") -> DecayCurve | None:
    """The Schroeder curve of one band-filtered impulse response, with Lundeby noise handling.

    ``band_response`` starts at the impulse start and is already band-filtered (``nominal_hz``
    only labels the curve and sets the smoothing window). Returns None when no decay of 10 dB
    stands above the noise (see :func:`fieldtl.analysis.lundeby.estimate_noise_floor`).
    The curve's dynamic range is where it meets the noise: the EDC level of the tail term, which
    for a pure exponential decay equals the ratio of its initial power to the noise power.
    """
    energy = np.asarray(band_response, dtype=float) ** 2
    floor = estimate_noise_floor(energy, sample_rate_hz=sample_rate_hz, window_s=smoothing_window_s(nominal_hz))
    if floor.crossing_time_s is None or floor.late_decay_time_s is None:
        return None
    end = max(round(floor.crossing_time_s * sample_rate_hz), 1)
    # Tail beyond the crossing point: P · T_late / (6 ln 10), in sample sums (facts sheet 6.3 (a)).
    tail = floor.noise_power * floor.late_decay_time_s / (6.0 * math.log(10.0)) * sample_rate_hz
    head_energy = float(np.sum(energy[:end]))
    dynamic_range_db = 10.0 * math.log10((head_energy + tail) / tail)
    tail_energy = 0.0 if noise_handling == "none" else tail
    if noise_handling == "none":
        kept, kept_energy = energy, float(np.sum(energy))
    elif noise_handling == "truncate":
        kept, kept_energy = energy[:end], head_energy
    else:
        kept = np.subtract(energy[:end], floor.noise_power, out=energy[:end])   # energy is not used again
        kept_energy = float(np.sum(kept))
    initial_energy = kept_energy + tail_energy
    if initial_energy <= 0.0:
        return None    # nothing left above the noise estimate
    step = max(1, round(CURVE_STEP_S * sample_rate_hz))
    level_db = schroeder_decay_db(kept, tail_energy=tail_energy, step=step, overwrite=True)   # kept is ours
    return DecayCurve(nominal_hz, fraction, step / sample_rate_hz, tuple(level_db.tolist()),
                      dynamic_range_db, "integrated_impulse_response", initial_energy)
