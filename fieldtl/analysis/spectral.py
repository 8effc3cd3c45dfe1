"""Band Leq of a stationary recording from its power spectrum (Parseval), without band filtering.

For a stationary signal the mean square at a band filter's output is the signal's power spectrum
weighted by the filter's squared magnitude response. :class:`SpectralBands` estimates the power
spectrum block by block (Welch: sine-window segments with 50 % overlap, whose squared windows
add up to exactly one, so every sample between the first and last half segment counts alike) and
weights it by the squared response of the very bank :mod:`fieldtl.analysis.filterbank` runs in
the time domain: band-pass, low-side guard, every anti-alias low-pass before it and the folding
of each decimation (:func:`band_power_weights`, the square of ``FilterBank.composite_response``
on the FFT grid). Only Leq comes out: no time history, no maxima, and an event is weighted by the
taper where it falls in the first or last half segment, so the route suits stationary takes
(source, receiving, background, impact). On 60 s of pink noise it agrees with the time-domain
bank within 0.03 dB per band, and for a sine at any band's centre or edge within 0.01 dB (tests).

Segments are as long as SEGMENT_MAX_S allows, at least four times shorter than the recording,
and never shorter than RESOLUTION_BINS_PER_BAND bins across the narrowest band (the window's
smoothing of the response then stays below 0.03 dB at a band edge). A recording shorter than
four such segments (5.5 s at 48 kHz with a 50 Hz band) gets ``None`` from
:meth:`SpectralBands.mean_squares`; the caller filters it in the time domain instead.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import scipy.fft

from fieldtl.analysis.filterbank import FilterBank, anti_alias_sos, read_only

SEGMENT_MAX_S = 4.0             # longest segment: 2^18 frames at 44.1 and 48 kHz, 2^19 at 96 kHz
MIN_SEGMENT_SPAN = 4            # the recording spans at least this many segments when it can
RESOLUTION_BINS_PER_BAND = 10   # FFT bins across the narrowest band, at least (2^16 at 48 kHz, 50 Hz band)
BATCH_SEGMENTS = 4              # segments transformed together: 4 of 2^16 float32 fit a core's 2 MB cache with their
                                # spectra (measured about 10 % faster than 8 on 6 s takes)


def band_power_weights(bank: FilterBank, fft_frames: int) -> np.ndarray:
    """|H(f)|² of every band of ``bank`` on the grid of a real FFT of ``fft_frames`` samples.

    Shape (bands, fft_frames // 2 + 1); the square of ``bank.composite_response`` at
    ``k * sample_rate_hz / fft_frames``, aliases of the decimations included. Computed once per
    process for each bank and FFT length; the array is shared and read-only.
    """
    if fft_frames & (fft_frames - 1) or fft_frames < 2 ** (bank.stages + 2):
        raise ValueError(f"FFT length must be a power of two of at least {2 ** (bank.stages + 2)}, got {fft_frames}")
    return _band_power_weights(bank, fft_frames)


@functools.lru_cache(maxsize=8)
def _band_power_weights(bank: FilterBank, fft_frames: int) -> np.ndarray:
    # The FFT grid folds onto itself at every stage's Nyquist frequency (a whole number of bins, as
    # fft_frames is a power of two), so each stage's filters are evaluated once on that stage's own
    # grid 0..nyquist and looked up through the folded bin index of every input bin.
    weights = np.empty((len(bank.bands), fft_frames // 2 + 1))
    folded_bin = np.arange(fft_frames // 2 + 1)
    chain = np.ones(fft_frames // 2 + 1)        # anti-alias low-passes passed so far
    for stage in range(bank.stages + 1):
        nyquist_bin = fft_frames >> (stage + 1)
        omega = np.pi * np.arange(nyquist_bin + 1) / nyquist_bin
        for i, band in enumerate(bank.bands):
            if band.stage == stage:
                weights[i] = chain * _sos_power(band.sos, omega)[folded_bin]
        if stage < bank.stages:
            chain = chain * _sos_power(anti_alias_sos(), omega)[folded_bin]
            period = nyquist_bin   # the next stage's sampling rate, in bins
            folded_bin = np.abs(folded_bin - period * np.round(folded_bin / period).astype(np.int64))
    return read_only(weights)


def _sos_power(sos: np.ndarray, omega: np.ndarray) -> np.ndarray:
    """|H(e^jω)|² of second-order sections, in real arithmetic: for each section
    |b0 + b1 e^-jω + b2 e^-2jω|² = b0² + b1² + b2² + 2 (b0 b1 + b1 b2) cos ω + 2 b0 b2 cos 2ω,
    and the same for the denominator (a0 = 1)."""
    cos_1, cos_2 = np.cos(omega), np.cos(2 * omega)
    power = np.ones_like(omega)
    for b0, b1, b2, _, a1, a2 in sos:
        power *= ((b0 * b0 + b1 * b1 + b2 * b2 + 2 * (b0 * b1 + b1 * b2) * cos_1 + 2 * b0 * b2 * cos_2)
                  / (1 + a1 * a1 + a2 * a2 + 2 * (a1 + a1 * a2) * cos_1 + 2 * a2 * cos_2))
    return power


def _power_of_two_at_least(frames: float) -> int:
    return 1 << max(0, math.ceil(math.log2(frames)))


class SpectralBands:
    """Accumulates the Welch power spectrum of one signal fed in consecutive chunks.

    Mutable by design. Holds at most MIN_SEGMENT_SPAN longest segments of samples until it has
    chosen the segment length, then one segment plus the chunk being fed.
    """

    def __init__(self, bank: FilterBank) -> None:
        rate_hz = bank.sample_rate_hz
        narrowest_hz = min(band.bandwidth_hz for band in bank.bands)
        self._bank = bank
        self._shortest = max(_power_of_two_at_least(RESOLUTION_BINS_PER_BAND * rate_hz / narrowest_hz),
                             2 ** (bank.stages + 2))
        self._longest = max(self._shortest, _power_of_two_at_least(SEGMENT_MAX_S * rate_hz))
        self._pending: list[np.ndarray] = []   # samples from the start of the last segment done (or of the signal)
        self._pending_frames = 0
        self._segment_frames = 0                # 0 until chosen
        self._window = _sine_window(2)
        self._power = np.empty(0)
        self._segments = 0

    def push(self, chunk: np.ndarray) -> None:
        # float32: exact for 16- and 24-bit recordings; its rounding in the FFT (about -140 dB of a
        # segment's energy, spread over every bin) is far below any band a meter reports
        self._pending.append(chunk if self._segment_frames == 0 else chunk.astype(np.float32))
        self._pending_frames += chunk.size
        if not self._segment_frames:
            if self._pending_frames < MIN_SEGMENT_SPAN * self._longest:
                return
            self._choose(self._longest)
        self._transform_pending()

    def samples(self) -> np.ndarray:
        """Everything fed so far, while the segment length is not chosen yet (a short recording)."""
        if self._segment_frames:
            raise RuntimeError("samples are only kept until the segment length is chosen")
        return np.concatenate(self._pending) if self._pending else np.empty(0)

    def mean_squares(self) -> np.ndarray | None:
        """Mean square at each band's output, or None if the signal spans fewer than
        MIN_SEGMENT_SPAN of the shortest segments (filter it in the time domain instead:
        :meth:`samples` still holds it)."""
        if not self._segment_frames:
            frames = self._pending_frames
            if frames < MIN_SEGMENT_SPAN * self._shortest:
                return None
            self._choose(min(self._longest, 1 << int(math.log2(frames / MIN_SEGMENT_SPAN))))
        self._transform_pending(final=True)
        power = self._power.copy()
        power[1:-1] *= 2                         # one-sided spectrum: every bin but 0 Hz and Nyquist twice
        weights = band_power_weights(self._bank, self._segment_frames)
        # Parseval: Σ|X_k|² over all bins = N Σ (w x)²; the squared windows sum to N/2 per segment.
        # einsum, not a BLAS product: BLAS threads spinning after a small product slow a loaded 2-core machine.
        total_squared_window = self._segments * self._segment_frames / 2
        return np.einsum("bk,k->b", weights, power) / (self._segment_frames * total_squared_window)

    def _choose(self, segment_frames: int) -> None:
        self._segment_frames = segment_frames
        self._window = _sine_window(segment_frames)
        self._power = np.zeros(segment_frames // 2 + 1)
        self._pending = [np.concatenate(self._pending, dtype=np.float32)]

    def _transform_pending(self, *, final: bool = False) -> None:
        """Transform every whole segment pending; with ``final``, also one last segment ending with
        the signal when samples are left after the last whole one (in the same batch, as a batch of
        several segments costs less per segment than one alone)."""
        frames, hop = self._segment_frames, self._segment_frames // 2
        pending = np.concatenate(self._pending) if len(self._pending) > 1 else self._pending[0]
        first = hop if self._segments else 0     # the pending samples start with a segment already done
        count = max(0, (pending.size - first - frames) // hop + 1)
        starts = [first + hop * k for k in range(count)]
        last_end = starts[-1] + frames if starts else (frames if self._segments else 0)
        if final and pending.size > last_end and pending.size >= frames:
            starts.append(pending.size - frames)
        for batch in range(0, len(starts), BATCH_SEGMENTS):
            self._add([pending[start : start + frames] for start in starts[batch : batch + BATCH_SEGMENTS]])
        if starts and not final:
            pending = pending[starts[-1]:]
        self._pending, self._pending_frames = [pending], pending.size

    def _add(self, segments: list[np.ndarray]) -> None:
        windowed = np.empty((len(segments), self._segment_frames), dtype=np.float32)
        for row, segment in zip(windowed, segments):
            np.multiply(segment, self._window, out=row)
        spectra = scipy.fft.rfft(windowed, axis=-1, overwrite_x=True)
        # |X|² = re² + im²: the squared real and imaginary parts interleaved, summed over segments
        squares = np.square(spectra.view(np.float32), out=spectra.view(np.float32)).sum(axis=0)
        self._power += squares[0::2]
        self._power += squares[1::2]
        self._segments += len(segments)


@functools.lru_cache(maxsize=8)
def _sine_window(frames: int) -> np.ndarray:
    """Periodic sine window: w[n]² + w[n + N/2]² = sin² + cos² = 1, so 50 % overlap adds to one."""
    return read_only(np.sin(np.pi * (np.arange(frames) + 0.5) / frames).astype(np.float32))
