"""Reverberation time from interrupted-noise recordings (ISO 3382-2 interrupted noise method).

The recording holds one or more periods of steady noise, each followed by the room's decay
after the source is switched off. Each band is filtered forward (as a real-time analyser would,
so B·T > 16 applies), its energy smoothed, and the decays after every switch-off are
ensemble-averaged as energies; 0 dB of the averaged curve is its level just before the
switch-off, the decay's initial level. The averaged curve is
evaluated like any other decay (:func:`fieldtl.analysis.decay.evaluate_curve`); EDT is not.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import signal

from fieldtl.analysis.decay import (BT_MIN_FORWARD, CLAUSE_RANGE, BandDecay, DecayAnalysis, analysis_bands,
                                    band_without_decay, evaluate_curve)
from fieldtl.analysis.edc import CURVE_STEP_S, DecayCurve
from fieldtl.analysis.filterbank import band_sos
from fieldtl.analysis.lundeby import smoothing_window_s
from fieldtl.audio.signals import checked_audio
from fieldtl.bands import Fraction, exact_centre_hz
from fieldtl.findings import Finding

BROADBAND_WINDOW_S = 0.02     # envelope used to find the switch-offs (common practice)
MIN_LEVEL_STEP_DB = 20.0      # the noise must stand at least 20 dB above the quiet parts (common practice)
MIN_ON_S = 0.3                # shortest excitation accepted as reaching a steady state (common practice)
MIN_OFF_S = 0.2               # shortest decay period accepted after a switch-off (common practice)
HYSTERESIS_DB = 3.0           # on above the mid level + 3 dB, off below it - 3 dB (common practice)
SWITCH_OFF_FIT_DB = (5.0, 15.0)  # early broadband decay, dB below steady, extrapolated to the switch-off
NOISE_TAIL_FRACTION = 0.2     # background: the last 20 % of each off period (common practice)
MIN_RECORDING_S = 1.0


@dataclass(frozen=True, slots=True)
class Interruption:
    """Sample indices of one excitation period and the silence after it."""

    on_start: int
    switch_off: int
    off_end: int


def find_interruptions(samples: np.ndarray, *, sample_rate_hz: float) -> tuple[Interruption, ...]:
    """Switch-offs of the noise in a broadband recording.

    The envelope (20 ms centred mean square, read every 1 ms) is "on" above the level halfway,
    in dB, between its 5th and 95th percentiles plus 3 dB and "off" below it minus 3 dB
    (hysteresis, so a slow decay wavering at the threshold does not count twice). An excitation
    of at least 0.3 s followed by at least 0.2 s off is one interruption; its switch-off is where
    the early decay, extrapolated back, meets the excitation's median level, and its off period
    ends 20 ms before the level rises again. Returns () when the level never steps by 20 dB.
    """
    envelope_db = _db(_moving_mean(samples ** 2, round(BROADBAND_WINDOW_S * sample_rate_hz)))
    step = max(1, round(CURVE_STEP_S * sample_rate_hz))
    frames_db = envelope_db[::step]
    low_db, high_db = np.percentile(frames_db, [5.0, 95.0])
    if high_db - low_db < MIN_LEVEL_STEP_DB:
        return ()
    on = _hysteresis(frames_db, 0.5 * (low_db + high_db), HYSTERESIS_DB)
    edges = np.flatnonzero(np.diff(on.astype(np.int8))) + 1
    bounds = np.concatenate([[0], edges, [on.size]]) * step
    bounds[-1] = samples.size
    runs = [(int(a), int(b), bool(on[a // step])) for a, b in zip(bounds[:-1], bounds[1:])]
    guard = round(BROADBAND_WINDOW_S * sample_rate_hz)
    found = []
    for (a, b, is_on), (_, c, _) in zip(runs, runs[1:]):
        off_end = c if c == samples.size else c - guard
        if not is_on or b - a < MIN_ON_S * sample_rate_hz or off_end - b < MIN_OFF_S * sample_rate_hz:
            continue
        steady_db = float(np.median(envelope_db[a + (b - a) // 2: b]))
        found.append(Interruption(on_start=a, switch_off=_switch_off(envelope_db, a, b, off_end, steady_db),
                                  off_end=off_end))
    return tuple(found)


def _switch_off(envelope_db: np.ndarray, on_start: int, on_end: int, off_end: int, steady_db: float) -> int:
    """Where the early decay, extrapolated back as a straight line, meets the steady level.

    The line is fitted to the envelope from its last point above steady - 5 dB to the first
    point below steady - 15 dB; robust to the rounded knee a smoothing window leaves at the
    switch-off. Its accuracy is the steady level's: an excitation ending 1 dB off its median
    moves the estimate by 1 dB of decay (T/60 s).
    """
    above = np.flatnonzero(envelope_db[on_start:on_end] >= steady_db - SWITCH_OFF_FIT_DB[0])
    top = on_start + int(above[-1]) if above.size else on_start
    below = np.flatnonzero(envelope_db[top:off_end] <= steady_db - SWITCH_OFF_FIT_DB[1])
    bottom = top + int(below[0]) if below.size else on_end
    if bottom - top >= 3:
        slope, intercept = np.polyfit(np.arange(top, bottom), envelope_db[top:bottom], 1)
        if slope < 0.0:
            return int(np.clip(round((steady_db - intercept) / slope), on_start, top))
    return top


def _hysteresis(levels_db: np.ndarray, threshold_db: float, half_width_db: float) -> np.ndarray:
    """True from each rise above threshold + half width until the next fall below threshold - half width."""
    state = levels_db[0] > threshold_db
    on = np.empty(levels_db.size, dtype=bool)
    for i, level in enumerate(levels_db.tolist()):
        if state and level < threshold_db - half_width_db:
            state = False
        elif not state and level > threshold_db + half_width_db:
            state = True
        on[i] = state
    return on


def reverberation_from_interrupted_noise(
        recording: np.ndarray, *, sample_rate_hz: float, nominal_hz: Sequence[float] | None = None,
        fraction: Fraction = 3, source_name: str = "interrupted-noise recording") -> DecayAnalysis:
    """EDT, T20, T30 per band from a recording of one or more noise interruptions.

    Several interruptions are ensemble-averaged as energies (ISO 3382-2, from memory) over
    the shortest decay period, and 0 dB is their averaged level in the smoothing window just
    before the switch-off (a single decay starts from wherever the fluctuating noise left it).
    The dynamic range is that initial level over the background (the last 20 % of each
    silence). Leave at least the decay time of silence after each switch-off. Does not check
    that the excitation was broadband or long enough for the room to reach steady state, and
    gives no EDT (see :func:`fieldtl.analysis.decay.evaluate_curve`).
    """
    samples = checked_audio(recording, sample_rate_hz=sample_rate_hz, source_name=source_name,
                            min_duration_s=MIN_RECORDING_S)
    bands_hz = analysis_bands(nominal_hz, fraction=fraction, sample_rate_hz=sample_rate_hz, source_name=source_name)
    interruptions = find_interruptions(samples, sample_rate_hz=sample_rate_hz)
    if not interruptions:
        finding = Finding("switch_off_not_found", "error",
                          f"{source_name}: no switch-off found (at least {MIN_ON_S:g} s of noise standing "
                          f"{MIN_LEVEL_STEP_DB:.0f} dB above the quiet parts, then {MIN_OFF_S:g} s of decay)",
                          "record the noise, switch it off abruptly and keep recording through the decay",
                          clause="ISO 3382-2: interrupted noise method", unconfirmed=True)   # from memory
        bands = tuple(band_without_decay(f, fraction, None, (), bt_limit=BT_MIN_FORWARD) for f in bands_hz)
        return DecayAnalysis(source_name, "interrupted_noise", "ensemble", 0, bands, (finding,))
    bands = tuple(_band_decay(samples, f, interruptions, fraction=fraction, sample_rate_hz=sample_rate_hz,
                              source_name=source_name) for f in bands_hz)
    return DecayAnalysis(source_name, "interrupted_noise", "ensemble" if len(interruptions) > 1 else "single",
                         len(interruptions), bands, ())


def _band_decay(samples: np.ndarray, nominal_hz: float, interruptions: tuple[Interruption, ...], *,
                fraction: Fraction, sample_rate_hz: float, source_name: str) -> BandDecay:
    sos = band_sos(nominal_hz, sample_rate_hz=sample_rate_hz, fraction=fraction)
    energy = signal.sosfilt(sos, samples) ** 2   # forward filtering (ISO 3382-2: B·T > 16)
    window = max(1, round(smoothing_window_s(nominal_hz) * sample_rate_hz))
    half = window // 2
    envelope = _moving_mean(energy, window)
    # The band filter delays the switch-off by its group delay at mid-band.
    delay = round(_group_delay_s(sos, nominal_hz, fraction, sample_rate_hz) * sample_rate_hz)
    decays, initials, noises = [], [], []
    for part in interruptions:
        band_off = part.switch_off + delay
        # The centred envelope still holds excitation for half a window after the switch-off.
        start, stop = band_off + half, min(part.off_end + delay, energy.size) - half
        if stop - start < 2 or band_off - half < 0:
            continue
        decays.append(envelope[start:stop])
        initials.append(float(envelope[band_off - half]))   # the window just before the switch-off
        noises.append(float(np.mean(energy[stop - max(1, int(NOISE_TAIL_FRACTION * (stop - start))): stop])))
    initial = float(np.mean(initials)) if initials else 0.0
    if initial <= 0.0:
        return band_without_decay(nominal_hz, fraction, None, (_short_off_finding(source_name, nominal_hz),),
                                  bt_limit=BT_MIN_FORWARD)
    length = min(d.size for d in decays)
    # Ensemble average of the squared-pressure decays; 0 dB is their averaged level just before
    # the switch-off, the decay's initial level, from which the ranges count (ISO 3382-2, from memory).
    mean_decay = np.mean([d[:length] for d in decays], axis=0) / initial
    noise = max(float(np.mean(noises)) / initial, np.finfo(float).tiny)
    step = max(1, round(CURVE_STEP_S * sample_rate_hz))
    curve = DecayCurve(nominal_hz, fraction, step / sample_rate_hz, tuple(_db(mean_decay[::step]).tolist()),
                       -10.0 * math.log10(noise), "interrupted_noise", initial)
    return evaluate_curve(curve, source_name=source_name)


def _short_off_finding(source_name: str, nominal_hz: float) -> Finding:
    return Finding("decay_range_short", "warning",
                   f"{source_name}, {nominal_hz:g} Hz: the silences after the switch-offs are too short to hold a "
                   "decay in this band; T20 and T30 not evaluated",
                   "keep recording for at least the reverberation time after each switch-off", nominal_hz,
                   CLAUSE_RANGE, unconfirmed=True)


def _moving_mean(values: np.ndarray, window: int) -> np.ndarray:
    """Centred running mean, same length as ``values`` (shorter windows at the ends)."""
    cumulative = np.concatenate([[0.0], np.cumsum(values)])
    index = np.arange(values.size)
    lo = np.clip(index - window // 2, 0, values.size)
    hi = np.clip(index - window // 2 + window, 0, values.size)
    return (cumulative[hi] - cumulative[lo]) / (hi - lo)


def _group_delay_s(sos: np.ndarray, nominal_hz: float, fraction: Fraction, sample_rate_hz: float) -> float:
    """-dφ/dω of the band filter at its exact mid-band frequency, by a central difference."""
    centre_hz = exact_centre_hz(nominal_hz, fraction=fraction)
    step_hz = centre_hz * 1e-4
    _, response = signal.sosfreqz(sos, worN=[centre_hz - step_hz, centre_hz + step_hz], fs=sample_rate_hz)
    phase_step = float(np.angle(response[1] / response[0]))
    return -phase_step / (2.0 * math.pi * 2.0 * step_hz)


def _db(power: np.ndarray) -> np.ndarray:
    return 10.0 * np.log10(np.maximum(power, np.finfo(float).tiny))
