"""Band-pass filters for one-third-octave and octave analysis (IEC 61260-1:2014).

:func:`band_sos` designs one Butterworth band-pass between the IEC 61260-1 band edges.
:func:`design_filter_bank` arranges those band-passes in a multirate bank: the signal is
low-passed and decimated by 2 once per octave, and each band runs at the lowest rate whose
anti-alias pass band still covers it, so low bands are cheap and their filters well conditioned.
:class:`BankStream` runs a bank causally, block by block, carrying the filter states between
blocks, so memory does not grow with the length of a recording.

Every band filter is designed at its own exact base-ten band edges at the rate it runs at. The
same normalised filter is *not* reused one octave down: the base-ten octave ratio G = 10^0.3 =
1.99526 (IEC 61260-1:2014 5.2) is not 2, so a reused filter would sit 0.24 % too high per octave
(1.7 % after seven octaves). Designing each band costs nothing at run time. The anti-alias
low-pass is the same normalised filter at every stage.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field

import numpy as np
from scipy import signal

from fieldtl.bands import Fraction, band_edges_hz, exact_centre_hz, nominal_bands_hz
from fieldtl.errors import InputError

DEFAULT_ORDER = 3  # Butterworth prototype order N (band-pass order 2N); N >= 3 meets class 1 (facts sheet 7.3, computed)

# A band runs at the lowest rate r = fs / 2^k with upper band edge f2 <= EDGE_FRACTION[b] * r.
# Bilinear frequency warping flattens the low-side skirt of a band-pass close to the Nyquist
# frequency. One-third octaves get a low-side guard (GUARD_*) and may go up to f2 / r = 0.38;
# octaves, whose failing region reaches too close to the band to guard, stop at 0.24. The class-1
# stop-band limits (IEC 61260-1:2014 5.10) are then met with at least 0.85 dB (one-third octaves)
# and 0.28 dB (octaves) to spare (computed; the filter tests check every band at 44.1, 48, 96 kHz).
# At 48 kHz the 50 Hz-5 kHz bank then costs about 4 full-rate filter passes instead of 21.
EDGE_FRACTION: dict[int, float] = {3: 0.38, 1: 0.24}
# Guard of one-third-octave bands: a 4th-order Butterworth high-pass at GUARD_CENTRE_RATIO * fm.
# Without it the 6th-order band-pass misses the x = -3 limit (60 dB) by about 5 dB at
# f2 / r = 0.38; the guard adds 18 dB there, at most 0.04 dB at the lower band edge (relative to
# fm) and takes 0.004 dB off the noise bandwidth (computed).
GUARD_ORDER = 4
GUARD_CENTRE_RATIO = 0.55
# The anti-alias low-pass before each decimation (elliptic, the same normalised filter at every
# stage) passes up to the largest EDGE_FRACTION of the new rate, the highest band edge that will
# run there, and is ANTI_ALIAS_STOP_DB down from 0.6 of the new rate. What lies between half
# and 0.6 of the new rate folds back to between 0.4 and half of it: above every band edge of
# that stage, where its band filters and the next low-pass remove it (the class-1 test covers
# these aliases).
_ALIAS_PASS_FRACTION = max(EDGE_FRACTION.values())
_ALIAS_STOP_FRACTION = 0.6
_TABLE_RANGE_HZ: dict[int, tuple[float, float]] = {3: (20.0, 20000.0), 1: (31.5, 16000.0)}
ANTI_ALIAS_RIPPLE_DB = 0.002    # pass-band ripple of the elliptic low-pass
ANTI_ALIAS_STOP_DB = 90.0       # well below the 60-70 dB floor of IEC 61260-1:2014 class 1
# Start-up transient discarded from each band: SETTLE_BANDWIDTHS / B seconds, B = f2 - f1
# ("a few times 1/B" is common practice, facts sheet 7.3). The slowest pole of a 6th-order
# Butterworth band-pass decays with time constant 1/(pi B sin(pi/6)) = 0.64/B, so after 5/B its
# start-up transient is down by exp(-5/0.64) = 4e-4 (68 dB) in amplitude; the impulse response of
# the whole chain (anti-alias low-passes and guard included) has then released all but 1e-5 of its
# energy (worst band, 20 Hz to 10 kHz at 44.1, 48 and 96 kHz, computed).
SETTLE_BANDWIDTHS = 5.0
# Bands of an impulse response (fieldtl.analysis.decay) are filtered at a lowered rate (decimated by 2
# through the anti-alias low-pass, stop band 90 dB down): a band's upper edge stays at most 0.12 of the rate it
# runs at, as the 5 kHz band's does at 48 kHz (0.117), so every band filter keeps the shape it has
# at full rate; and the rate stays at least 5 kHz, so the decay curve keeps its 1 ms steps. At
# 48 kHz, 50-630 Hz then run at 6 kHz: about three times less work for a decay (benchmarks/assess.py).
DECAY_EDGE_FRACTION = 0.12
DECAY_MIN_RATE_HZ = 5000.0


def band_sos(nominal_hz: float, *, sample_rate_hz: float, fraction: Fraction = 3,
             order: int = DEFAULT_ORDER) -> np.ndarray:
    """Second-order sections of a Butterworth band-pass between the IEC 61260-1 band edges.

    Designed at the exact (base-ten) mid-band frequency of the nominal band ``nominal_hz``, once
    per process for each band, rate and order; returns a fresh copy of that design. Does not
    check the class-1 mask; see the filter tests for that.
    """
    low_hz, high_hz = band_edges_hz(nominal_hz, fraction=fraction)
    if high_hz >= sample_rate_hz / 2:
        raise InputError(f"{nominal_hz} Hz band needs a sample rate above {2 * high_hz:.0f} Hz, "
                         f"got {sample_rate_hz:g} Hz")
    return _band_sos(low_hz, high_hz, float(sample_rate_hz), order).copy()   # writable: sosfilt needs one


@functools.lru_cache(maxsize=256)
def _band_sos(low_hz: float, high_hz: float, sample_rate_hz: float, order: int) -> np.ndarray:
    return read_only(signal.butter(order, [low_hz, high_hz], btype="bandpass", fs=sample_rate_hz, output="sos"))


@functools.cache
def anti_alias_sos() -> np.ndarray:
    """Elliptic low-pass run before every decimation by 2, normalised to the input rate.

    Pass band to 0.38 of the output rate (the largest EDGE_FRACTION), stop band from 0.6 of it;
    in units of the input Nyquist frequency (which equals the output rate) these are 0.38 and
    0.6. Designed once per process; the array is shared and read-only (``scipy.signal.sosfilt``
    refuses read-only sections: filter with a copy).
    """
    order, _ = signal.ellipord(_ALIAS_PASS_FRACTION, _ALIAS_STOP_FRACTION, ANTI_ALIAS_RIPPLE_DB, ANTI_ALIAS_STOP_DB)
    return read_only(signal.ellip(order, ANTI_ALIAS_RIPPLE_DB, ANTI_ALIAS_STOP_DB, _ALIAS_PASS_FRACTION,
                                  output="sos"))


def decay_stage(nominal_hz: float, *, fraction: Fraction, sample_rate_hz: float) -> int:
    """How many times a band's impulse response is decimated by 2 before its band filter: as often as
    the band's upper edge stays at most DECAY_EDGE_FRACTION of the lowered rate and that rate at least
    DECAY_MIN_RATE_HZ (0 when the full rate is needed)."""
    high_hz = band_edges_hz(nominal_hz, fraction=fraction)[1]
    stage = 0
    while (high_hz <= DECAY_EDGE_FRACTION * sample_rate_hz / 2 ** (stage + 1)
           and sample_rate_hz / 2 ** (stage + 1) >= DECAY_MIN_RATE_HZ):
        stage += 1
    return stage


def halved(samples: np.ndarray) -> np.ndarray:
    """``samples`` through the anti-alias low-pass, every second one kept, ending with the last one
    (for a reversed decay: its first sample stays at time 0)."""
    low_passed = signal.sosfilt(anti_alias_sos().copy(), samples)
    return low_passed[(low_passed.size - 1) % 2 :: 2]


def read_only(values: np.ndarray) -> np.ndarray:
    """``values`` marked read-only (for arrays shared through a design cache), returned."""
    values.flags.writeable = False
    return values


@dataclass(frozen=True, slots=True, eq=False)
class BandFilter:
    """One band of a bank: where it runs and how it is filtered."""

    nominal_hz: float
    centre_hz: float          # exact base-ten mid-band frequency (IEC 61260-1:2014 5.4)
    low_hz: float             # band edges (IEC 61260-1:2014 5.5)
    high_hz: float
    stage: int                # runs at sample_rate_hz / 2**stage
    sos: np.ndarray = field(repr=False)   # read-only; whole chain gives 0 dB at centre_hz
    settle_s: float           # start-up transient discarded: SETTLE_BANDWIDTHS / (high_hz - low_hz)

    @property
    def bandwidth_hz(self) -> float:
        return self.high_hz - self.low_hz


@dataclass(frozen=True, slots=True, eq=False)
class FilterBank:
    """A multirate one-third-octave or octave bank for one sample rate (build it with
    :func:`design_filter_bank`)."""

    sample_rate_hz: float
    fraction: Fraction
    bands: tuple[BandFilter, ...]

    @property
    def nominal_hz(self) -> tuple[float, ...]:
        return tuple(band.nominal_hz for band in self.bands)

    @property
    def stages(self) -> int:
        """Number of decimations by 2 the lowest band needs."""
        return max(band.stage for band in self.bands)

    def composite_response(self, frequency_hz: np.ndarray) -> np.ndarray:
        """Magnitude (linear) from an input sine at each frequency to each band's output.

        Shape (bands, frequencies). Follows the sine through every anti-alias low-pass and
        decimation, folding its frequency at each one, so aliases are included. A decimated
        sine is a sine, so this is the exact steady-state response of :class:`BankStream`
        (except exactly at 0 Hz or a Nyquist frequency, where it depends on phase).
        """
        frequency_hz = np.asarray(frequency_hz, dtype=float)
        chain = np.ones_like(frequency_hz)
        folded_hz = frequency_hz.copy()
        out = np.empty((len(self.bands), frequency_hz.size))
        for stage in range(self.stages + 1):
            rate_hz = self.sample_rate_hz / 2**stage
            for i, band in enumerate(self.bands):
                if band.stage == stage:
                    out[i] = chain * _magnitude(band.sos, folded_hz, rate_hz)
            chain = chain * _magnitude(anti_alias_sos(), folded_hz, rate_hz)
            folded_hz = _fold_hz(folded_hz, rate_hz / 2)
        return out


def design_filter_bank(*, sample_rate_hz: float, fraction: Fraction = 3, low_hz: float = 50.0,
                       high_hz: float = 5000.0) -> FilterBank:
    """The multirate bank for the nominal bands ``low_hz`` to ``high_hz`` inclusive.

    Raises InputError when a band's upper edge is above EDGE_FRACTION of the sample rate
    (the 10 kHz one-third octave needs at least 29.5 kHz, the 8 kHz octave 46.8 kHz).
    Designed once per process for each rate, fraction and range (a bank holds only read-only
    arrays, so every caller may share it). Does not filter anything.
    """
    if fraction not in (1, 3):
        raise InputError(f"fraction must be 1 (octaves) or 3 (one-third octaves), got {fraction}")
    if not (math.isfinite(sample_rate_hz) and sample_rate_hz > 0):
        raise InputError(f"sample rate must be a positive number of Hz, got {sample_rate_hz}")
    nominals = nominal_bands_hz(low_hz, high_hz, fraction=fraction)
    edge_fraction = EDGE_FRACTION[fraction]
    top_edge_hz = band_edges_hz(nominals[-1], fraction=fraction)[1]
    if top_edge_hz > edge_fraction * sample_rate_hz:
        raise InputError(f"{nominals[-1]:g} Hz band needs a sample rate of at least "
                         f"{top_edge_hz / edge_fraction:.0f} Hz, got {sample_rate_hz:g} Hz")
    return _design_filter_bank(float(sample_rate_hz), fraction, nominals)


@functools.lru_cache(maxsize=16)
def _design_filter_bank(sample_rate_hz: float, fraction: Fraction, nominals: tuple[float, ...]) -> FilterBank:
    return FilterBank(sample_rate_hz, fraction, tuple(_band_filter(f, sample_rate_hz, fraction) for f in nominals))


def highest_band_hz(*, sample_rate_hz: float, fraction: Fraction = 3) -> float:
    """The highest nominal band a bank at this sample rate can hold (10 kHz one-third octave
    from 29.5 kHz, 8 kHz octave from 46.8 kHz, 5 kHz one-third octave from 14.8 kHz)."""
    fitting = [f for f in nominal_bands_hz(*_TABLE_RANGE_HZ[fraction], fraction=fraction)
               if band_edges_hz(f, fraction=fraction)[1] <= EDGE_FRACTION[fraction] * sample_rate_hz]
    if not fitting:
        raise InputError(f"sample rate {sample_rate_hz:g} Hz is too low for any {fraction_name(fraction)} band")
    return fitting[-1]


def fraction_name(fraction: Fraction) -> str:
    return "one-third-octave" if fraction == 3 else "octave"


def _band_filter(nominal_hz: float, sample_rate_hz: float, fraction: Fraction) -> BandFilter:
    low_hz, high_hz = band_edges_hz(nominal_hz, fraction=fraction)
    stage = math.floor(math.log2(EDGE_FRACTION[fraction] * sample_rate_hz / high_hz))
    rate_hz = sample_rate_hz / 2**stage
    centre_hz = exact_centre_hz(nominal_hz, fraction=fraction)
    sos = band_sos(nominal_hz, sample_rate_hz=rate_hz, fraction=fraction)
    if fraction == 3:
        guard = signal.butter(GUARD_ORDER, GUARD_CENTRE_RATIO * centre_hz, btype="highpass", fs=rate_hz, output="sos")
        sos = np.vstack([sos, guard])
    # Normalise the whole chain (anti-alias low-passes and band-pass) to 0 dB at the exact
    # mid-band frequency: IEC 61260-1:2014 5.10 states attenuation relative to fm.
    gain = _magnitude(sos, np.array([centre_hz]), rate_hz)[0]
    for k in range(stage):
        gain *= _magnitude(anti_alias_sos(), np.array([centre_hz]), sample_rate_hz / 2**k)[0]
    sos[0, :3] /= gain
    return BandFilter(float(nominal_hz), centre_hz, low_hz, high_hz, stage, read_only(sos),
                      SETTLE_BANDWIDTHS / (high_hz - low_hz))


def _magnitude(sos: np.ndarray, frequency_hz: np.ndarray, rate_hz: float) -> np.ndarray:
    """|H| of second-order sections at ``frequency_hz``: Π |b0 + b1 z⁻¹ + b2 z⁻²| / |1 + a1 z⁻¹ + a2 z⁻²|
    at z⁻¹ = e^(-j 2π f / rate), what ``scipy.signal.sosfreqz`` evaluates, without its per-call
    overhead (a bank's design normalises every band this way: 0.05 s of a process's start)."""
    unit_z = np.exp(-2j * np.pi * np.asarray(frequency_hz, dtype=float) / rate_hz)
    response = np.ones_like(unit_z)
    for b0, b1, b2, a0, a1, a2 in sos:
        response *= (b0 + (b1 + b2 * unit_z) * unit_z) / (a0 + (a1 + a2 * unit_z) * unit_z)
    return np.abs(response)


def _fold_hz(frequency_hz: np.ndarray, new_rate_hz: float) -> np.ndarray:
    """The frequency a sine at ``frequency_hz`` appears at after sampling at ``new_rate_hz``."""
    return np.abs(frequency_hz - new_rate_hz * np.round(frequency_hz / new_rate_hz))


class BankStream:
    """Runs a :class:`FilterBank` over consecutive blocks of one signal.

    Mutable by design: it holds the filter states (``sosfilt`` zi) and the sample counts of
    every stage, so feeding a signal in one block or in many gives the same output. Does not
    discard start-up transients or compute levels; see :mod:`fieldtl.analysis.levels`.
    """

    __slots__ = ("_bank", "_band_sos", "_alias_sos", "_band_zi", "_alias_zi", "_frames_in")

    def __init__(self, bank: FilterBank) -> None:
        self._bank = bank
        # writable copies of the shared read-only designs: scipy.signal.sosfilt refuses read-only sections
        self._band_sos = [band.sos.copy() for band in bank.bands]
        self._alias_sos = anti_alias_sos().copy()
        self._band_zi = [np.zeros((band.sos.shape[0], 2)) for band in bank.bands]
        self._alias_zi = [np.zeros((self._alias_sos.shape[0], 2)) for _ in range(bank.stages)]
        self._frames_in = [0] * (bank.stages + 1)   # samples seen so far at each stage

    def push(self, block: np.ndarray) -> list[tuple[int, np.ndarray]]:
        """Filter the next block; per band, the index of its first output sample at the band's
        own rate and the output samples (possibly none)."""
        outputs: list[tuple[int, np.ndarray]] = [(0, np.empty(0))] * len(self._bank.bands)
        samples = np.asarray(block, dtype=float)
        for stage in range(self._bank.stages + 1):
            first = self._frames_in[stage]
            self._frames_in[stage] += samples.size
            for i, band in enumerate(self._bank.bands):
                if band.stage != stage:
                    continue
                if samples.size:
                    filtered, self._band_zi[i] = signal.sosfilt(self._band_sos[i], samples, zi=self._band_zi[i])
                else:
                    filtered = samples
                outputs[i] = (first, filtered)
            if stage == self._bank.stages:
                break
            if samples.size:
                low_passed, self._alias_zi[stage] = signal.sosfilt(self._alias_sos, samples,
                                                                   zi=self._alias_zi[stage])
                # keep the samples with an even index counted from the start of the signal
                samples = low_passed[first % 2 :: 2]
        return outputs
