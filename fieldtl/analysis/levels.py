"""Band levels, A/C-weighted levels and their time histories from a stream of sample blocks.

:func:`analyse_levels` reads any iterable of 1-D sample blocks (scaled to ±1) once, in order,
and keeps only filter states and one row of sums per history interval, so memory does not grow
with the length of the recording beyond that history (an hour at 1 s intervals and 28 bands is
3600 x 32 floats).

Level of a quantity = 10 lg(mean square) + ``level_offset_db``; with offset 0 levels are in dB
re full scale (a full-scale sine reads -3.01 dB). A calibration supplies the offset.

Band Leq has two routes. "filtered" runs the multirate bank in the time domain and gives band
histories. "spectral" (stationary takes, where only Leq is needed) weights the recording's power
spectrum by the same bank's squared response (:mod:`fieldtl.analysis.spectral`): about six times
cheaper, no band histories. The weighted levels, their maxima and histories are always filtered.
:func:`stationary_levels` is the spectral route with the A-weighted level and its history only
(what a take of a sound insulation test needs; fieldtl.measure).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy import signal

from fieldtl.analysis.filterbank import BankStream, FilterBank, design_filter_bank, fraction_name
from fieldtl.analysis.intervals import IntervalTable
from fieldtl.analysis.spectral import SpectralBands
from fieldtl.analysis.weighting import (FAST_TIME_CONSTANT_S, SLOW_TIME_CONSTANT_S, exponential_coefficient,
                                        weighting_sos)
from fieldtl.bands import BandSpectrum, Fraction
from fieldtl.errors import InputError

DEFAULT_RANGE_HZ: dict[int, tuple[float, float]] = {3: (50.0, 5000.0), 1: (63.0, 4000.0)}  # ISO 16283 bands
CHUNK_FRAMES = 1 << 20   # blocks are regrouped into chunks of this many frames (21.8 s at 48 kHz; fewer, longer
                         # sosfilt calls: about 25 % faster than 1 << 18, measured in benchmarks/bands.py)
# stationary_levels runs one filter, not a bank: it keeps ingest's blocks of 2^16 frames as they come
# (no copy into longer chunks; measured about 10 % faster on 6 s takes in benchmarks/assess.py)
STATIONARY_CHUNK_FRAMES = 1 << 16
# Start-up transient of the A and C filters, discarded before LAeq, LCeq and the F/S levels:
# their slowest poles are the double pole at f1 = 20.6 Hz; the digital C filter's impulse response
# has all but 1e-9 of its energy out after 75 ms, the A filter's after 21 ms (computed).
WEIGHTING_SETTLE_S = 0.1
# Shortest averaging accepted after a transient is discarded (so a recording must last at least
# settle + this): 1/B for a band (bandwidth-time product 1) and one F time constant for the
# weighted levels. Common practice floor, far below what ISO 16283-1 asks of a measurement.
MIN_BAND_AVERAGING_BANDWIDTHS = 1.0
MIN_WEIGHTED_AVERAGING_S = FAST_TIME_CONSTANT_S
BandRoute = Literal["filtered", "spectral"]


@dataclass(frozen=True, slots=True, eq=False)
class LevelHistory:
    """Levels per history interval (the last one may be shorter); arrays are read-only.

    ``band_leq_db`` has shape (intervals, bands); nan marks an interval with no samples left
    after a band's start-up transient; None when the band Leq took the spectral route.
    ``lafmax_db`` / ``lasmax_db`` are the maxima of the F / S time-weighted A level within each
    interval.
    """

    interval_s: float
    band_leq_db: np.ndarray | None
    laeq_db: np.ndarray
    lceq_db: np.ndarray
    lafmax_db: np.ndarray
    lasmax_db: np.ndarray

    @property
    def start_s(self) -> np.ndarray:
        """Start time of each interval from the start of the recording."""
        return np.arange(self.laeq_db.size) * self.interval_s


@dataclass(frozen=True, slots=True, eq=False)
class LevelAnalysis:
    """What :func:`analyse_levels` found, and over which stretch of the recording."""

    source_name: str
    sample_rate_hz: float
    duration_s: float
    level_offset_db: float
    band_leq: BandSpectrum                    # quantity "Leq"
    band_averaging_s: tuple[float, ...]       # time averaged per band after its start-up transient
                                              # (spectral route: the whole recording, its ends tapered)
    laeq_db: float                            # from WEIGHTING_SETTLE_S to the end
    lceq_db: float
    lafmax_db: float
    lasmax_db: float
    history: LevelHistory


def analyse_levels(
    blocks: Iterable[np.ndarray],
    *,
    sample_rate_hz: float,
    level_offset_db: float = 0.0,
    fraction: Fraction = 3,
    band_range_hz: tuple[float, float] | None = None,
    history_interval_s: float = 1.0,
    total_frames: int | None = None,
    progress: Callable[[float], None] | None = None,
    source_name: str = "signal",
    band_route: BandRoute = "filtered",
) -> LevelAnalysis:
    """Band Leq, LAeq, LCeq, LAFmax, LASmax and their histories of one recording.

    ``blocks`` are consecutive 1-D blocks of samples scaled to ±1, of any sizes. ``band_range_hz``
    gives the lowest and highest nominal band (default 50-5000 Hz one-third octaves, 63-4000 Hz
    octaves). ``progress`` is called with the fraction done after each chunk when ``total_frames``
    is given, and with 1.0 at the end in any case. ``band_route`` "spectral" takes band Leq from
    the power spectrum (stationary recordings; no band history, see the module docstring).

    Each band discards its start-up transient (5/B, see filterbank.SETTLE_BANDWIDTHS); the
    weighted levels discard WEIGHTING_SETTLE_S. Raises InputError (one line naming
    ``source_name``) for bad blocks, non-finite samples, a band the sample rate cannot hold, or a
    recording shorter than the shortest usable length. Does not calibrate, correct for
    background noise or judge the measurement; those are for the caller.
    """
    if band_route not in ("filtered", "spectral"):
        raise InputError(f"{source_name}: band route must be 'filtered' or 'spectral', got {band_route!r:.40}")
    bank, shortest_s = _checked_bank(sample_rate_hz, fraction, band_range_hz, history_interval_s, total_frames,
                                     source_name)

    meter = _Meter(bank, interval_frames=round(history_interval_s * sample_rate_hz), band_route=band_route)
    for chunk in _chunks(blocks, source_name):
        meter.push(chunk)
        if progress is not None and total_frames:
            progress(min(1.0, meter.frames / total_frames))
    _require_length(meter.frames, sample_rate_hz, shortest_s, source_name, bank)
    if progress is not None:
        progress(1.0)
    return meter.result(source_name=source_name, level_offset_db=level_offset_db,
                        interval_s=history_interval_s)


def band_leq_spectral(
    blocks: Iterable[np.ndarray],
    *,
    sample_rate_hz: float,
    level_offset_db: float = 0.0,
    fraction: Fraction = 3,
    band_range_hz: tuple[float, float] | None = None,
    source_name: str = "signal",
) -> BandSpectrum:
    """Band Leq alone by the spectral route: what ``analyse_levels(..., band_route="spectral")``
    reports as ``band_leq``, without the weighted levels. Same checks and errors."""
    bank = _bank(sample_rate_hz, fraction, band_range_hz, source_name)
    spectral = SpectralBands(bank)
    frames = 0
    for chunk in _chunks(blocks, source_name):
        spectral.push(chunk)
        frames += chunk.size
    _require_length(frames, sample_rate_hz, shortest_usable_s(bank), source_name, bank)
    return _spectral_band_leq(bank, spectral, level_offset_db)


@dataclass(frozen=True, slots=True, eq=False)
class StationaryLevels:
    """What :func:`stationary_levels` found: band Leq and the A-weighted level with its history."""

    source_name: str
    sample_rate_hz: float
    duration_s: float
    level_offset_db: float
    band_leq: BandSpectrum           # quantity "Leq", by the spectral route
    laeq_db: float                   # from WEIGHTING_SETTLE_S to the end (inner_history: over the history's intervals)
    interval_s: float
    laeq_history_db: np.ndarray      # per interval, read-only; nan where no sample is left after the settling
    history_first_interval: int = 0  # the interval laeq_history_db starts with (1 with inner_history)


def stationary_levels(
    blocks: Iterable[np.ndarray],
    *,
    sample_rate_hz: float,
    level_offset_db: float = 0.0,
    fraction: Fraction = 3,
    band_range_hz: tuple[float, float] | None = None,
    history_interval_s: float = 1.0,
    total_frames: int | None = None,
    progress: Callable[[float], None] | None = None,
    source_name: str = "signal",
    inner_history: bool = False,
) -> StationaryLevels:
    """Band Leq, LAeq and the LAeq history of a stationary take, and nothing else.

    The same values as ``analyse_levels(..., band_route="spectral")`` gives for ``band_leq``,
    ``laeq_db`` and ``history.laeq_db`` (band Leq from the power spectrum, the A-weighted levels
    through the time-domain A filter), with the same checks, errors and ``progress`` calls, but
    without C weighting, the F/S time weighting and their maxima: what a take of a sound
    insulation test needs, at about a third of the cost.

    ``inner_history`` (needs ``total_frames``) keeps the intervals a stationarity check reads: all but
    the first (partly settling) and the last (often partial). The A filter then runs from
    WEIGHTING_SETTLE_S before interval 1 to the end of the last but one (4.1 s of a 6 s take), and
    ``laeq_db`` is the level over those intervals."""
    if inner_history and total_frames is None:
        raise ValueError("inner_history needs total_frames (where the last interval starts)")
    bank, shortest_s = _checked_bank(sample_rate_hz, fraction, band_range_hz, history_interval_s, total_frames,
                                     source_name)
    spectral = SpectralBands(bank)
    sos = weighting_sos("A", sample_rate_hz=bank.sample_rate_hz).copy()   # writable copy for sosfilt
    state = np.zeros((sos.shape[0], 2))
    interval_frames = round(history_interval_s * sample_rate_hz)
    table = IntervalTable(1, interval_frames, "sum")
    settle = math.ceil(WEIGHTING_SETTLE_S * bank.sample_rate_hz)
    filter_from, filter_to, counted_from = 0, math.inf, settle   # A-filtered from rest over [from, to)
    if inner_history:
        last_interval = max(0, -(-total_frames // interval_frames) - 1)
        filter_from, filter_to = max(0, interval_frames - settle), last_interval * interval_frames
        counted_from = max(interval_frames, settle)
    frames = 0
    for chunk in _chunks(blocks, source_name, STATIONARY_CHUNK_FRAMES):
        spectral.push(chunk)
        start, stop = max(filter_from, frames), min(filter_to, frames + chunk.size)
        if stop > start:
            weighted, state = signal.sosfilt(sos, chunk[start - frames : stop - frames], zi=state)
            table.add(0, weighted, first_index=start, step=1, valid_from=counted_from)
        frames += chunk.size
        if progress is not None and total_frames:
            progress(min(1.0, frames / total_frames))
    _require_length(frames, sample_rate_hz, shortest_s, source_name, bank)
    if progress is not None:
        progress(1.0)
    first_interval = 1 if inner_history else 0
    sums, counts = table.totals()
    with np.errstate(divide="ignore", invalid="ignore"):
        history_db = 10 * np.log10(table.rows()[first_interval:, 0] / table.row_counts()[first_interval:, 0])
        laeq_db = float(10 * np.log10(sums[0] / counts[0]) + level_offset_db)
    return StationaryLevels(source_name=source_name, sample_rate_hz=bank.sample_rate_hz,
                            duration_s=frames / bank.sample_rate_hz, level_offset_db=level_offset_db,
                            band_leq=_spectral_band_leq(bank, spectral, level_offset_db),
                            laeq_db=laeq_db, interval_s=history_interval_s,
                            laeq_history_db=_frozen(history_db + level_offset_db),
                            history_first_interval=first_interval)


def _spectral_band_leq(bank: FilterBank, spectral: SpectralBands, level_offset_db: float) -> BandSpectrum:
    mean_squares = spectral.mean_squares()
    if mean_squares is None:    # too short for the spectral route
        mean_squares = _filtered_mean_squares(bank, spectral.samples())[0]
    with np.errstate(divide="ignore"):
        return BandSpectrum.from_array(bank.nominal_hz, 10 * np.log10(mean_squares) + level_offset_db, "dB", "Leq",
                                       fraction=bank.fraction)


def _bank(sample_rate_hz: float, fraction: Fraction, band_range_hz: tuple[float, float] | None,
          source_name: str) -> FilterBank:
    if fraction not in DEFAULT_RANGE_HZ:
        raise InputError(f"{source_name}: fraction must be 1 (octaves) or 3 (one-third octaves), got {fraction}")
    low_hz, high_hz = band_range_hz or DEFAULT_RANGE_HZ[fraction]
    try:
        return design_filter_bank(sample_rate_hz=sample_rate_hz, fraction=fraction, low_hz=low_hz, high_hz=high_hz)
    except InputError as error:
        raise InputError(f"{source_name}: {error}") from None


def _filtered_mean_squares(bank: FilterBank, samples: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Band mean squares and sample counts of a short signal held in memory, through the bank in
    the time domain with each band's start-up transient discarded."""
    table = IntervalTable(len(bank.bands), max(1, samples.size), "sum")
    settle = [math.ceil(band.settle_s * bank.sample_rate_hz / 2**band.stage) for band in bank.bands]
    for channel, (start, filtered) in enumerate(BankStream(bank).push(samples)):
        table.add(channel, filtered, first_index=start, step=2**bank.bands[channel].stage, valid_from=settle[channel])
    sums, counts = table.totals()
    with np.errstate(invalid="ignore"):
        return sums / counts, counts


def shortest_usable_s(bank: FilterBank) -> float:
    """Shortest recording that leaves something to average in every band and weighted level."""
    band_s = max(band.settle_s + MIN_BAND_AVERAGING_BANDWIDTHS / band.bandwidth_hz for band in bank.bands)
    return max(band_s, WEIGHTING_SETTLE_S + MIN_WEIGHTED_AVERAGING_S)


def _checked_bank(sample_rate_hz: float, fraction: Fraction, band_range_hz: tuple[float, float] | None,
                  history_interval_s: float, total_frames: int | None, source_name: str) -> tuple[FilterBank, float]:
    """The bank for these settings and its shortest usable length, after the checks both analyses share."""
    bank = _bank(sample_rate_hz, fraction, band_range_hz, source_name)
    if not (math.isfinite(history_interval_s) and history_interval_s * sample_rate_hz >= 1):
        raise InputError(f"{source_name}: history interval must be at least one sample, got {history_interval_s}")
    shortest_s = shortest_usable_s(bank)
    if total_frames is not None:
        _require_length(total_frames, sample_rate_hz, shortest_s, source_name, bank)
    return bank, shortest_s


def _require_length(frames: int, sample_rate_hz: float, shortest_s: float, source_name: str,
                    bank: FilterBank) -> None:
    if frames / sample_rate_hz >= shortest_s:
        return
    lowest = bank.bands[0]
    if lowest.settle_s + MIN_BAND_AVERAGING_BANDWIDTHS / lowest.bandwidth_hz >= shortest_s:
        reason = (f"the {lowest.nominal_hz:g} Hz {fraction_name(bank.fraction)} band discards its first "
                  f"{lowest.settle_s:.3f} s as start-up transient")
    else:
        reason = f"the A and C weighting filters discard their first {WEIGHTING_SETTLE_S:.3f} s"
    raise InputError(f"{source_name}: {frames / sample_rate_hz:.3f} s is too short; at least {shortest_s:.3f} s "
                     f"is needed ({reason})")


def _chunks(blocks: Iterable[np.ndarray], source_name: str, chunk_frames: int = CHUNK_FRAMES) -> Iterator[np.ndarray]:
    """Regroup checked blocks into chunks of ``chunk_frames`` frames (the last may be shorter)."""
    pending: list[np.ndarray] = []
    pending_frames = 0
    frames_seen = 0
    for number, block in enumerate(blocks):
        samples = np.asarray(block, dtype=float)
        if samples.ndim != 1:
            raise InputError(f"{source_name}: block {number} has shape {samples.shape}; expected 1-D samples")
        if not np.isfinite(samples).all():
            bad = frames_seen + int(np.flatnonzero(~np.isfinite(samples))[0])
            raise InputError(f"{source_name}: non-finite sample (nan or inf) at frame {bad}")
        frames_seen += samples.size
        pending.append(samples)
        pending_frames += samples.size
        if pending_frames < chunk_frames:
            continue
        joined = np.concatenate(pending) if len(pending) > 1 else pending[0]
        start = 0
        while joined.size - start >= chunk_frames:
            yield joined[start : start + chunk_frames]
            start += chunk_frames
        pending = [joined[start:]]
        pending_frames = joined.size - start
    if pending_frames:
        yield np.concatenate(pending)


class _Meter:
    """Mutable accumulation state of one analysis: filter states and per-interval sums."""

    def __init__(self, bank: FilterBank, *, interval_frames: int, band_route: BandRoute) -> None:
        rate_hz = bank.sample_rate_hz
        self.bank = bank
        self.frames = 0
        self._spectral = SpectralBands(bank) if band_route == "spectral" else None
        self._bank_stream = BankStream(bank)
        self._settle_frames = [math.ceil(band.settle_s * rate_hz / 2**band.stage) for band in bank.bands]
        self._weighting_settle = math.ceil(WEIGHTING_SETTLE_S * rate_hz)
        self._weighting = [(sos.copy(), np.zeros((sos.shape[0], 2)))   # writable copies for sosfilt
                           for sos in (weighting_sos("A", sample_rate_hz=rate_hz),
                                       weighting_sos("C", sample_rate_hz=rate_hz))]
        self._time_weighting = [(exponential_coefficient(tau, sample_rate_hz=rate_hz), np.zeros(1))
                                for tau in (FAST_TIME_CONSTANT_S, SLOW_TIME_CONSTANT_S)]
        # channels: the bands, then A and C
        self._energy = IntervalTable(len(bank.bands) + 2, interval_frames, "sum")
        self._maxima = IntervalTable(2, interval_frames, "max")   # F, S

    def push(self, chunk: np.ndarray) -> None:
        first = self.frames
        self.frames += chunk.size
        if self._spectral is not None:
            self._spectral.push(chunk)
        else:
            for channel, (start, filtered) in enumerate(self._bank_stream.push(chunk)):
                band = self.bank.bands[channel]
                self._energy.add(channel, filtered, first_index=start, step=2**band.stage,
                                 valid_from=self._settle_frames[channel])
        weighted = []
        for i, (sos, state) in enumerate(self._weighting):
            filtered, new_state = signal.sosfilt(sos, chunk, zi=state)
            self._weighting[i] = (sos, new_state)
            self._energy.add(len(self.bank.bands) + i, filtered, first_index=first, step=1,
                             valid_from=self._weighting_settle)
            weighted.append(filtered)
        skip = max(0, self._weighting_settle - first)
        if skip >= chunk.size:
            return
        squared_a = np.square(weighted[0][skip:])
        for i, (alpha, state) in enumerate(self._time_weighting):
            # exponential time weighting F / S (IEC 61672-1), sampled: y[n] = α y[n-1] + (1 - α) x²[n]
            averaged, new_state = signal.lfilter([1.0 - alpha], [1.0, -alpha], squared_a, zi=state)
            self._time_weighting[i] = (alpha, new_state)
            self._maxima.add(i, averaged, first_index=first + skip, step=1, valid_from=0)

    def result(self, *, source_name: str, level_offset_db: float, interval_s: float) -> LevelAnalysis:
        rate_hz = self.bank.sample_rate_hz
        n_bands = len(self.bank.bands)
        sums, counts = self._energy.totals()
        band_sums, band_counts = sums[:n_bands], counts[:n_bands]
        if self._spectral is not None:
            band_sums = self._spectral.mean_squares()
            band_counts = np.array([self.frames / 2**band.stage for band in self.bank.bands])
            if band_sums is None:   # too short for the spectral route
                band_sums, band_counts = _filtered_mean_squares(self.bank, self._spectral.samples())
            band_sums = band_sums * band_counts
        with np.errstate(divide="ignore", invalid="ignore"):
            band_db = 10 * np.log10(band_sums / band_counts) + level_offset_db
            totals_db = 10 * np.log10(sums / counts) + level_offset_db
            rows_db = 10 * np.log10(self._energy.rows() / self._energy.row_counts()) + level_offset_db
            maxima = self._maxima.rows()
            max_db = np.where(np.isneginf(maxima), np.nan, 10 * np.log10(np.maximum(maxima, 0.0))) + level_offset_db
        rows = rows_db.shape[0]
        max_db = np.vstack([max_db, np.full((rows - max_db.shape[0], 2), np.nan)])
        band_rows = None if self._spectral is not None else _frozen(rows_db[:, :n_bands])
        history = LevelHistory(interval_s, band_rows, _frozen(rows_db[:, n_bands]),
                               _frozen(rows_db[:, n_bands + 1]), _frozen(max_db[:, 0]), _frozen(max_db[:, 1]))
        averaging_s = tuple(float(band_counts[i]) * 2**band.stage / rate_hz for i, band in enumerate(self.bank.bands))
        return LevelAnalysis(
            source_name=source_name, sample_rate_hz=rate_hz, duration_s=self.frames / rate_hz,
            level_offset_db=level_offset_db,
            band_leq=BandSpectrum.from_array(self.bank.nominal_hz, band_db, "dB", "Leq", fraction=self.bank.fraction),
            band_averaging_s=averaging_s, laeq_db=float(totals_db[n_bands]), lceq_db=float(totals_db[n_bands + 1]),
            lafmax_db=float(np.nanmax(max_db[:, 0])), lasmax_db=float(np.nanmax(max_db[:, 1])), history=history)


def _frozen(values: np.ndarray) -> np.ndarray:
    values = np.ascontiguousarray(values)
    values.flags.writeable = False
    return values
