"""Synthetic room signals with known band levels and known decays, for the demo and for tests.

Every function is pure: the same arguments and ``seed`` give the same samples. Signals are built
in the frequency domain between the IEC 61260-1 band edges (:func:`fieldtl.bands.band_edges_hz`),
so what each band holds is set by construction rather than by a filter's skirts.

Levels are "10 lg(mean square of samples scaled to +-1) + level_offset_db", the way the calibrated
analysis reads a recording: ``level_offset_db`` plays the part of the calibration offset (the
sound pressure level of a full-scale RMS of 1.0), so with ``level_offset_db=110`` a band asked
for at 60 dB holds a mean square of 10^((60 - 110)/10).

Decays are exponential in energy, 60 dB in the band's reverberation time T: the amplitude
envelope is exp(-3 ln(10) t / T) = exp(-6.91 t / T) (definition of T, ISO 3382-2).
"""

from __future__ import annotations

import math
from collections.abc import Iterator

import numpy as np
from scipy import fft

from fieldtl.audio.signals import sample_count
from fieldtl.bands import BandSpectrum, band_edges_hz, require_same_bands
from fieldtl.errors import InputError

DECAY_AMPLITUDE_RATE = 3.0 * math.log(10.0)  # 6.908: amplitude exp(-6.908 t/T) loses 60 dB of energy in T
DEFAULT_FLOOR_BELOW_DB = 60.0                # out-of-band floor, below the lowest in-band spectral density
DEFAULT_PEAK_DBFS = -6.0                     # impulse responses are scaled to this peak
DEFAULT_CALIBRATOR_NOISE_BELOW_DB = 60.0     # broadband noise under a calibrator tone, below its RMS
DEFAULT_CALIBRATOR_FADE_IN_S = 0.3           # the calibrator being seated on the microphone


def noise_with_band_levels(levels_db: BandSpectrum, *, duration_s: float, sample_rate_hz: float, seed: int,
                           level_offset_db: float = 0.0,
                           floor_below_db: float = DEFAULT_FLOOR_BELOW_DB) -> np.ndarray:
    """Gaussian noise whose band levels equal ``levels_db`` exactly, over the whole signal.

    Use it for steady room noise (background, a receiving-room level) or to shape the noise
    sent to a loudspeaker. The power spectral density is constant inside each band, between its
    IEC 61260-1 edges, and each band's power is then scaled so that the band's mean square
    (a plain FFT sum over the band's bins) is 10^((L - level_offset_db)/10) to rounding error.
    Outside the given bands there is only a flat floor ``floor_below_db`` below the lowest
    in-band spectral density (``math.inf``: nothing at all). The signal is circular: it loops
    without a click.

    Raises InputError for a band without a finite level, bands beyond the Nyquist frequency, a
    duration too short to put a frequency bin in every band, or a result that would clip (peak
    at or above full scale). Does not fade in or out, and does not model how a band-pass filter
    reads the spectrum: a filter with skirts also picks up some of the neighbouring bands.
    """
    name = "noise_with_band_levels"
    n_samples = sample_count(name, duration_s, sample_rate_hz)
    if not floor_below_db > 0.0:
        raise InputError(f"{name}: floor_below_db must be above 0 dB (math.inf for no floor), got {floor_below_db!r}")
    frequency_hz = fft.rfftfreq(n_samples, d=1.0 / sample_rate_hz)
    bins = _band_bins(name, levels_db, frequency_hz, sample_rate_hz)
    mean_squares = _mean_squares(name, levels_db, level_offset_db)
    random = _gaussian_spectrum(np.random.default_rng(seed), frequency_hz.size)
    spectrum = _band_spectrum(random, bins, mean_squares, n_samples)
    widths_hz = np.array([high - low for low, high in (band_edges_hz(f, fraction=levels_db.fraction)
                                                       for f in levels_db.nominal_hz)])
    floor_density = float(np.min(mean_squares / widths_hz)) * 10.0 ** (-floor_below_db / 10.0)
    outside = np.ones(frequency_hz.size, dtype=bool)
    for band in bins:
        outside[band] = False
    outside[0] = False  # no DC
    # E[2 |X_k|^2 / N^2] = density * bin width for a bin with unit-variance real and imaginary parts.
    spectrum[outside] = random[outside] * (n_samples * math.sqrt(floor_density * sample_rate_hz / n_samples / 4.0))
    samples = fft.irfft(spectrum, n=n_samples)
    _require_no_clipping(name, samples)
    return samples


def impulse_response_with_decay(reverberation_times_s: BandSpectrum, *, sample_rate_hz: float, duration_s: float,
                                seed: int, noise_floor_db: float | None = None, onset_s: float = 0.0,
                                peak_dbfs: float = DEFAULT_PEAK_DBFS) -> np.ndarray:
    """A synthetic room impulse response: per band, band-limited noise times exp(-6.91 t / T_band).

    Every band starts at the same mean square (so the response's spectrum is pink-like at its
    start) and its energy falls 60 dB in the band's reverberation time. The bands are summed, a
    steady noise floor is added when ``noise_floor_db`` is given (in each band, that many dB
    below the band's starting energy, so it is also the peak-to-noise ratio of every band),
    and the whole is scaled to a peak of ``peak_dbfs`` dB re full scale. Before ``onset_s``
    there is only the noise floor (or silence).

    Does not model a direct sound, early reflections, room modes or air absorption; each band
    decays with one single exponential, so its T20, T30 and EDT are all the band's T.
    Multiplying band-limited noise by a decaying envelope smears its spectrum by a Lorentzian
    about 2.2/T Hz wide at half power, so a little energy reaches the neighbouring bands.
    """
    name = "impulse_response_with_decay"
    n_samples = sample_count(name, duration_s, sample_rate_hz)
    times_s = _reverberation_times(name, reverberation_times_s)
    if not (math.isfinite(onset_s) and 0.0 <= onset_s < duration_s):
        raise InputError(f"{name}: onset_s must be from 0 s to below the duration, got {onset_s!r}")
    if noise_floor_db is not None and not (math.isfinite(noise_floor_db) and noise_floor_db > 0.0):
        raise InputError(f"{name}: noise_floor_db must be a positive number of dB, got {noise_floor_db!r}")
    if not (math.isfinite(peak_dbfs) and peak_dbfs < 0.0):
        raise InputError(f"{name}: peak_dbfs must be below 0 dB re full scale, got {peak_dbfs!r}")
    decay_rng, noise_rng = (np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(2))
    frequency_hz = fft.rfftfreq(n_samples, d=1.0 / sample_rate_hz)
    bins = _band_bins(name, reverberation_times_s, frequency_hz, sample_rate_hz)
    unit = np.ones(len(bins))
    time_s = np.arange(n_samples) / sample_rate_hz - onset_s
    after_onset = time_s >= 0.0
    response = np.zeros(n_samples)
    for band_noise, band_time_s in zip(_band_noises(decay_rng, bins, unit, n_samples), times_s):
        # amplitude envelope exp(-3 ln10 t / T): 60 dB of energy in T (ISO 3382-2 definition of T)
        envelope = np.where(after_onset, np.exp(-DECAY_AMPLITUDE_RATE * np.maximum(time_s, 0.0) / band_time_s), 0.0)
        response += band_noise * envelope
    if noise_floor_db is not None:
        floor = _band_spectrum(_gaussian_spectrum(noise_rng, frequency_hz.size), bins,
                               unit * 10.0 ** (-noise_floor_db / 10.0), n_samples)
        response += fft.irfft(floor, n=n_samples)
    return response * (10.0 ** (peak_dbfs / 20.0) / float(np.max(np.abs(response))))


def interrupted_noise_with_decay(band_levels_db: BandSpectrum, reverberation_times_s: BandSpectrum, *,
                                 steady_s: float, decay_s: float, sample_rate_hz: float, seed: int,
                                 background_db: BandSpectrum | None = None,
                                 level_offset_db: float = 0.0) -> np.ndarray:
    """Steady noise at ``band_levels_db`` for ``steady_s``, switched off, then ``decay_s`` of decay.

    While the source runs, each band holds band-limited Gaussian noise at its level; after the
    switch-off its amplitude falls as exp(-6.91 t / T_band), 60 dB of energy in T (the
    interrupted-noise method, ISO 3382-2). ``background_db`` adds steady background noise
    (:func:`noise_with_band_levels`, its own bands) over the whole signal. Levels use
    ``level_offset_db`` as :func:`noise_with_band_levels` does. Each band's carrier noise has its
    exact power over the whole signal, so the steady part's band levels are exact only in
    expectation (about 4.34/sqrt(B·steady_s) dB of scatter for a band B Hz wide). Raises InputError if the result would clip. Does not model the loudspeaker's own
    switch-off transient or the room's build-up before ``steady_s``.
    """
    name = "interrupted_noise_with_decay"
    require_same_bands(band_levels_db, reverberation_times_s)
    times_s = _reverberation_times(name, reverberation_times_s)
    if not (math.isfinite(steady_s) and steady_s > 0.0 and math.isfinite(decay_s) and decay_s > 0.0):
        raise InputError(f"{name}: steady_s and decay_s must be positive, got {steady_s!r} and {decay_s!r}")
    duration_s = steady_s + decay_s
    n_samples = sample_count(name, duration_s, sample_rate_hz)
    frequency_hz = fft.rfftfreq(n_samples, d=1.0 / sample_rate_hz)
    bins = _band_bins(name, band_levels_db, frequency_hz, sample_rate_hz)
    mean_squares = _mean_squares(name, band_levels_db, level_offset_db)
    source_seed, background_seed = np.random.SeedSequence(seed).spawn(2)
    time_after_off_s = np.maximum(np.arange(n_samples) / sample_rate_hz - steady_s, 0.0)
    samples = np.zeros(n_samples)
    for band_noise, band_time_s in zip(_band_noises(np.random.default_rng(source_seed), bins, mean_squares,
                                                    n_samples), times_s):
        samples += band_noise * np.exp(-DECAY_AMPLITUDE_RATE * time_after_off_s / band_time_s)
    if background_db is not None:
        samples += noise_with_band_levels(background_db, duration_s=duration_s, sample_rate_hz=sample_rate_hz,
                                          seed=int(background_seed.generate_state(1)[0]),
                                          level_offset_db=level_offset_db)
    _require_no_clipping(name, samples)
    return samples


def calibrator_tone(*, level_dbfs: float, duration_s: float, sample_rate_hz: float, seed: int,
                    frequency_hz: float = 1000.0, fade_in_s: float = DEFAULT_CALIBRATOR_FADE_IN_S,
                    noise_below_db: float = DEFAULT_CALIBRATOR_NOISE_BELOW_DB) -> np.ndarray:
    """A calibrator tone: a sine whose RMS is ``level_dbfs`` dB re full-scale RMS (10 lg of its mean
    square), with a random phase, a linear fade-in while the calibrator is seated, and white noise
    ``noise_below_db`` below the tone's RMS over the whole band to the Nyquist frequency.

    With a calibrator of L dB and a chain whose full-scale RMS is X dB re 20 µPa, use
    ``level_dbfs = L - X``. Raises InputError if the peak would reach full scale. Does not model
    the calibrator's frequency tolerance or distortion.
    """
    name = "calibrator_tone"
    n_samples = sample_count(name, duration_s, sample_rate_hz)
    if not (math.isfinite(frequency_hz) and 0.0 < frequency_hz < sample_rate_hz / 2):
        raise InputError(f"{name}: frequency {frequency_hz!r} Hz must lie between 0 and half the sample rate")
    if not (math.isfinite(fade_in_s) and 0.0 <= fade_in_s < duration_s):
        raise InputError(f"{name}: fade_in_s must be from 0 s to below the duration, got {fade_in_s!r}")
    if not noise_below_db > 0.0:
        raise InputError(f"{name}: noise_below_db must be above 0 dB, got {noise_below_db!r}")
    rng = np.random.default_rng(seed)
    phase_rad = rng.uniform(0.0, 2.0 * math.pi)
    rms = 10.0 ** (level_dbfs / 20.0)
    time_s = np.arange(n_samples) / sample_rate_hz
    tone = math.sqrt(2.0) * rms * np.sin(2.0 * math.pi * frequency_hz * time_s + phase_rad)
    fade = round(fade_in_s * sample_rate_hz)
    tone[:fade] *= np.linspace(0.0, 1.0, fade, endpoint=False)
    tone += rms * 10.0 ** (-noise_below_db / 20.0) * rng.standard_normal(n_samples)
    _require_no_clipping(name, tone)
    return tone


def _band_bins(name: str, spectrum: BandSpectrum, frequency_hz: np.ndarray, sample_rate_hz: float) -> list[slice]:
    """Per band, the FFT bins f1 <= f < f2 between its IEC 61260-1:2014 edges (5.5)."""
    if not spectrum.nominal_hz:
        raise InputError(f"{name}: {spectrum.quantity} has no bands")
    bins = []
    for nominal_hz in spectrum.nominal_hz:
        low_hz, high_hz = band_edges_hz(nominal_hz, fraction=spectrum.fraction)
        if high_hz >= sample_rate_hz / 2:
            raise InputError(f"{name}: the {nominal_hz:g} Hz band reaches {high_hz:.0f} Hz, above half the "
                             f"sample rate {sample_rate_hz:g} Hz")
        first, stop = np.searchsorted(frequency_hz, [low_hz, high_hz])
        if stop <= first:
            raise InputError(f"{name}: too short to resolve the {nominal_hz:g} Hz band "
                             f"(frequency resolution {frequency_hz[1]:.3g} Hz)")
        bins.append(slice(int(first), int(stop)))
    return bins


def _mean_squares(name: str, levels_db: BandSpectrum, level_offset_db: float) -> np.ndarray:
    values = levels_db.as_array()
    if levels_db.unit != "dB" or not np.all(np.isfinite(values)):
        raise InputError(f"{name}: {levels_db.quantity} must hold a finite level in dB for every band")
    if not math.isfinite(level_offset_db):
        raise InputError(f"{name}: level_offset_db must be finite, got {level_offset_db!r}")
    return 10.0 ** ((values - level_offset_db) / 10.0)


def _reverberation_times(name: str, spectrum: BandSpectrum) -> np.ndarray:
    values = spectrum.as_array()
    if spectrum.unit != "s" or not np.all(np.isfinite(values) & (values > 0.0)):
        raise InputError(f"{name}: {spectrum.quantity} must hold a positive time in s for every band")
    return values


def _gaussian_spectrum(rng: np.random.Generator, n_bins: int) -> np.ndarray:
    return rng.standard_normal(n_bins) + 1j * rng.standard_normal(n_bins)


def _band_spectrum(random: np.ndarray, bins: list[slice], mean_squares: np.ndarray, n_samples: int) -> np.ndarray:
    """The half spectrum ``random`` kept inside the bands only, each band scaled so that its mean
    square is exactly its target.

    Parseval for a real signal from its half spectrum: a bin other than 0 and N/2 contributes
    2 |X_k|^2 / N^2 to the mean square.
    """
    spectrum = np.zeros_like(random)
    for band, target in zip(bins, mean_squares):
        current = 2.0 * float(np.sum(np.abs(random[band]) ** 2)) / n_samples**2
        spectrum[band] = random[band] * math.sqrt(target / current)
    return spectrum


def _band_noises(rng: np.random.Generator, bins: list[slice], mean_squares: np.ndarray,
                 n_samples: int) -> Iterator[np.ndarray]:
    """One band-limited Gaussian noise per band (independent bands), each with an exact mean square."""
    spectrum = _band_spectrum(_gaussian_spectrum(rng, n_samples // 2 + 1), bins, mean_squares, n_samples)
    for band in bins:
        only_band = np.zeros_like(spectrum)
        only_band[band] = spectrum[band]
        yield fft.irfft(only_band, n=n_samples)


def _require_no_clipping(name: str, samples: np.ndarray) -> None:
    peak = float(np.max(np.abs(samples)))
    if peak >= 1.0:
        raise InputError(f"{name}: the signal would clip (peak {20 * math.log10(peak):+.1f} dB re full scale); "
                         f"lower the levels by at least {20 * math.log10(peak) + 0.1:.1f} dB")
