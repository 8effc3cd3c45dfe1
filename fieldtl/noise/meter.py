"""The streaming kernel of a noise record: one recording's blocks → 10 ms A-weighted steps and
1 s band spectra, with memory flat in the length of the recording.

A-weighting is the project's IEC 61672-1 filter (:func:`fieldtl.analysis.weighting.weighting_sos`)
run in the time domain with its state carried between blocks. The squared A-weighted signal is
averaged over frames of D = round(fs / ENVELOPE_RATE_HZ) samples (a ~1 kHz envelope) and the F
and S time weightings run on that envelope as one-pole filters (``scipy.signal.lfilter``, state
carried): y[k] = α y[k-1] + (1 - α) e[k], α = exp(-Δ/τ), Δ = D / fs, the sampled form of
(1/τ) ∫ p_A²(ξ) e^(-(t-ξ)/τ) dξ of IEC 61672-1. For a burst that fills whole frames this is exact at
the frame ends (1 - α^n = 1 - e^(-Tb/τ)); a burst that starts inside a frame is spread over that
frame, which lowers the F reading of a 2 ms burst by at most about 0.04 dB (Δ/2τ, computed).

Every STEP_FRAMES envelope frames (10 ms) make one step: the F level at the end of the step (what
a meter sampling LAF at 100 Hz reads, for the statistical levels), the F and S maxima within the
step and the A-weighted energy (mean square x seconds). One-third-octave bands come from the
power spectrum of consecutive one-second segments aligned to whole seconds of the clock (the
first and last may be shorter and are zero-padded; no window, so every sample counts once:
Parseval), weighted by the squared response of the project's band filters
(``FilterBank.composite_response``). Without a window a strong tone leaks into its neighbours
(sidelobes fall 6 dB per octave of distance), which matters only for tones far above the rest.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
import scipy.fft
from scipy import signal

from fieldtl.analysis.filterbank import design_filter_bank, highest_band_hz, read_only
from fieldtl.analysis.levels import WEIGHTING_SETTLE_S
from fieldtl.analysis.weighting import (FAST_TIME_CONSTANT_S, SLOW_TIME_CONSTANT_S, exponential_coefficient,
                                        weighting_sos)
from fieldtl.bands import nominal_bands_hz

ENVELOPE_RATE_HZ = 1000.0
STEP_FRAMES = 10                 # envelope frames per step: 10 ms at 1 kHz
SEGMENT_S = 1.0
# Bins where every band's squared response is below -80 dB are left out of the sums: at 48 kHz this
# drops 10.3-24 kHz, where only the bank's folded anti-alias images remain (computed); sound there
# would have to be 80 dB above a band to change it by 0.04 dB.
_WEIGHT_FLOOR = 1e-8


@dataclass(frozen=True, slots=True, eq=False)
class Steps:
    """Consecutive 10 ms steps: start times (s since the epoch) and per-step values (mean squares
    in full-scale units; ``energy`` in mean square x seconds)."""

    time_s: np.ndarray
    step_s: float
    laf: np.ndarray
    lafmax: np.ndarray
    lasmax: np.ndarray
    energy: np.ndarray


@dataclass(frozen=True, slots=True, eq=False)
class Segments:
    """Consecutive band-spectrum segments: start times, durations and band energies (rows)."""

    time_s: np.ndarray
    duration_s: np.ndarray
    band_energy: np.ndarray      # (segments, bands), mean square x seconds


def record_bands_hz(sample_rate_hz: float, band_range_hz: tuple[float, float]) -> tuple[float, ...]:
    """The one-third-octave bands a recording at this rate can hold within ``band_range_hz``."""
    top_hz = min(band_range_hz[1], highest_band_hz(sample_rate_hz=sample_rate_hz))
    return nominal_bands_hz(band_range_hz[0], top_hz)


@functools.lru_cache(maxsize=8)
def _band_weights(sample_rate_hz: int, bands_hz: tuple[float, ...]) -> tuple[np.ndarray, int, int]:
    """|H_b(f)|² on the grid of a one-second real FFT, one-sided bins doubled, and the bin span used."""
    bank = design_filter_bank(sample_rate_hz=sample_rate_hz, low_hz=bands_hz[0], high_hz=bands_hz[-1])
    bins = sample_rate_hz // 2 + 1
    weights = bank.composite_response(np.arange(bins, dtype=float)) ** 2
    weights[:, 1:(sample_rate_hz + 1) // 2] *= 2.0      # one-sided spectrum: every bin but 0 Hz and Nyquist twice
    used = np.flatnonzero(weights.max(axis=0) > _WEIGHT_FLOOR)
    low, high = int(used[0]), int(used[-1]) + 1
    return read_only(np.ascontiguousarray(weights[:, low:high], dtype=np.float32)), low, high


class FileMeter:
    """Runs the kernel over one recording fed block by block (mutable: filter states, leftovers)."""

    def __init__(self, *, sample_rate_hz: int, start_s: float, bands_hz: tuple[float, ...]) -> None:
        self.sample_rate_hz = sample_rate_hz
        self._start_s = start_s
        self._frame = max(1, round(sample_rate_hz / ENVELOPE_RATE_HZ))
        envelope_rate_hz = sample_rate_hz / self._frame
        self._step_s = STEP_FRAMES * self._frame / sample_rate_hz
        # float32 A filter: 30 % faster; its rounding stays 55 dB below the A-weighted level even for a
        # full-scale 30 Hz tone, and 73 dB below it for white noise at -60 dB re full scale (computed)
        self._sos = weighting_sos("A", sample_rate_hz=sample_rate_hz).astype(np.float32)
        self._sos_state = np.zeros((self._sos.shape[0], 2), dtype=np.float32)
        self._alphas = (exponential_coefficient(FAST_TIME_CONSTANT_S, sample_rate_hz=envelope_rate_hz),
                        exponential_coefficient(SLOW_TIME_CONSTANT_S, sample_rate_hz=envelope_rate_hz))
        self._time_states: list[np.ndarray] | None = None
        self._settle_frames = math.ceil(WEIGHTING_SETTLE_S * envelope_rate_hz)
        self._frames_done = 0                       # envelope frames made so far (settling ones included)
        self._square_rest = np.empty(0, dtype=np.float32)           # squared samples short of a whole frame
        self._envelope_rest = np.empty(0)           # envelope frames short of a whole step (after settling)
        self._next_step_frame = self._settle_frames  # envelope frame index of the first frame in _envelope_rest
        self._time_rest = [np.empty(0), np.empty(0)]
        self._bands_hz = bands_hz
        self._weights, self._low_bin, self._high_bin = _band_weights(sample_rate_hz, bands_hz)
        first = round((math.ceil(start_s) - start_s) * sample_rate_hz) % sample_rate_hz
        self._segment_first = first or sample_rate_hz   # the first segment ends on a whole second of the clock
        self._segment_rest = np.empty(0, dtype=np.float32)
        self._segment_time_s = start_s

    @property
    def step_s(self) -> float:
        return self._step_s

    def push(self, block: np.ndarray) -> tuple[Steps | None, Segments | None]:
        samples = np.asarray(block, dtype=np.float32)
        return self._steps(samples), self._segments(samples, final=False)

    def finish(self) -> Segments | None:
        """The last, shorter segment (the samples of an unfinished 10 ms step are dropped)."""
        return self._segments(np.empty(0), final=True)

    # --- A-weighted steps ---------------------------------------------------------------------

    def _steps(self, block: np.ndarray) -> Steps | None:
        weighted, self._sos_state = signal.sosfilt(self._sos, block, zi=self._sos_state)
        squares = np.concatenate([self._square_rest, np.square(weighted)])
        whole = squares.size // self._frame * self._frame
        self._square_rest = squares[whole:]
        envelope = squares[:whole].reshape(-1, self._frame).mean(axis=1, dtype=np.float64)
        first_frame = self._frames_done
        self._frames_done += envelope.size
        skip = max(0, self._settle_frames - first_frame)
        envelope = envelope[skip:]
        if envelope.size == 0:
            return None
        if self._time_states is None:               # start F and S at the level of the first 125 ms
            initial = float(envelope[: max(1, round(FAST_TIME_CONSTANT_S / self._step_s * STEP_FRAMES))].mean())
            self._time_states = [np.array([alpha * initial]) for alpha in self._alphas]
        weighted_time = []
        for i, alpha in enumerate(self._alphas):
            out, self._time_states[i] = signal.lfilter([1.0 - alpha], [1.0, -alpha], envelope, zi=self._time_states[i])
            weighted_time.append(out)
        envelope = np.concatenate([self._envelope_rest, envelope])
        fast = np.concatenate([self._time_rest[0], weighted_time[0]])
        slow = np.concatenate([self._time_rest[1], weighted_time[1]])
        steps = envelope.size // STEP_FRAMES
        cut = steps * STEP_FRAMES
        self._envelope_rest, self._time_rest = envelope[cut:], [fast[cut:], slow[cut:]]
        if steps == 0:
            return None
        first_step_frame = self._next_step_frame
        self._next_step_frame += cut
        fast = fast[:cut].reshape(steps, STEP_FRAMES)
        time_s = self._start_s + (first_step_frame + np.arange(steps) * STEP_FRAMES) * self._frame / self.sample_rate_hz
        return Steps(time_s=time_s, step_s=self._step_s, laf=fast[:, -1].copy(), lafmax=fast.max(axis=1),
                     lasmax=slow[:cut].reshape(steps, STEP_FRAMES).max(axis=1),
                     energy=envelope[:cut].reshape(steps, STEP_FRAMES).sum(axis=1) * (self._frame / self.sample_rate_hz))

    # --- band spectra ---------------------------------------------------------------------------

    def _segments(self, block: np.ndarray, *, final: bool) -> Segments | None:
        pending = np.concatenate([self._segment_rest, block]) if self._segment_rest.size else block
        rate = self.sample_rate_hz
        lengths = []
        position = 0
        first = self._segment_first
        while pending.size - position >= first:
            lengths.append(first)
            position += first
            first = rate
        if final and pending.size - position > 0:
            lengths.append(pending.size - position)
            position = pending.size
        self._segment_first = first
        self._segment_rest = pending[position:]
        if not lengths:
            return None
        frames = np.zeros((len(lengths), rate), dtype=np.float32)     # zero-padded to one second
        start = 0
        for row, length in enumerate(lengths):
            frames[row, :length] = pending[start:start + length]
            start += length
        spectra = scipy.fft.rfft(frames, axis=-1, overwrite_x=True)[:, self._low_bin:self._high_bin]
        power = np.square(spectra.real) + np.square(spectra.imag)
        # Parseval: Σ x² = (1/N) Σ |X_k|² over all N bins; energy in mean square x seconds = Σ x² / fs
        band_energy = np.einsum("sk,bk->sb", power, self._weights).astype(np.float64) / (rate * rate)
        durations = np.array(lengths) / rate
        times = self._segment_time_s + np.concatenate([[0.0], np.cumsum(durations)[:-1]])
        self._segment_time_s = float(times[-1] + durations[-1])
        return Segments(time_s=times, duration_s=durations, band_energy=band_energy)
