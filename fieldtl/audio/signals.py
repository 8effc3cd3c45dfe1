"""Test signals: pink and white noise, the exponential sine sweep, and sweep deconvolution.

Levels are in dB re full scale RMS, where full scale RMS is a digital RMS of 1.0 (a full-scale
square wave). On that scale a full-scale sine is -3.01 dB (AES17 would call it 0 dB FS).
Nothing here clips silently: a level whose peak would exceed full scale raises InputError.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

import numpy as np
import soundfile
from scipy import fft

from fieldtl.errors import InputError
from fieldtl.validate import SAMPLE_RATE_HZ


SINE_CREST_DB = 10.0 * math.log10(2.0)   # a sine's peak is √2 times its RMS: 3.01 dB (computed)
DECONVOLUTION_REGULARISATION_DB = 60.0   # ε of the spectral division, dB below the sweep's peak power
# Kept before the linear response's peak: room for the band filters' spread (common practice);
# with a known sweep, also at most half the 2nd harmonic's advance so no harmonic is kept.
IMPULSE_LEAD_S = 0.02
# The longest signal made in memory: 2**25 samples (about 11.6 min at 48 kHz, 87 s at 384 kHz) keep
# the noise generator's spectrum and samples under about 1.5 GB. Test noise is looped by the player,
# so a longer file adds nothing.
MAX_GENERATED_SAMPLES = 2 ** 25
MAX_SEED = 2 ** 63 - 1


def checked_audio(samples: np.ndarray, *, sample_rate_hz: float, source_name: str,
                  min_duration_s: float = 0.0) -> np.ndarray:
    """The one gatekeeper for in-memory audio: a finite 1-D float64 array, long enough.

    Raises InputError (one line naming ``source_name``) for a bad sample rate, a multi-channel or
    empty array, non-finite samples, or fewer than ``min_duration_s`` seconds of audio.
    Does not check clipping or level (see fieldtl.audio.ingest for file facts).
    """
    if not (isinstance(sample_rate_hz, (int, float)) and math.isfinite(sample_rate_hz) and sample_rate_hz > 0):
        raise InputError(f"{source_name}: sample rate must be a positive number of Hz, got {sample_rate_hz!r}")
    array = np.asarray(samples, dtype=float)
    if array.ndim != 1:
        raise InputError(f"{source_name}: expected one channel (a 1-D array), got shape {array.shape}")
    if array.size == 0:
        raise InputError(f"{source_name}: contains no samples")
    if not np.all(np.isfinite(array)):
        first_s = int(np.argmin(np.isfinite(array))) / sample_rate_hz
        raise InputError(f"{source_name}: contains NaN or infinite samples (first at {first_s:.3f} s)")
    if array.size < min_duration_s * sample_rate_hz:
        raise InputError(f"{source_name}: {array.size / sample_rate_hz:.3f} s of audio, at least "
                         f"{min_duration_s:g} s needed")
    return array


def pink_noise(duration_s: float, *, sample_rate_hz: float = 48_000.0, level_dbfs: float = -20.0,
               low_hz: float = 20.0, high_hz: float | None = None, fade_in_s: float = 0.0,
               fade_out_s: float = 0.0, seed: int | None = None) -> np.ndarray:
    """Gaussian noise whose power spectral density falls 3 dB per octave (equal energy per band).

    Shaped in the frequency domain, so the signal loops without a click and has no energy
    outside ``low_hz``..``high_hz`` (``None``: up to half the sample rate). ``level_dbfs`` is
    the RMS before the fades. Raises InputError if that level would clip.
    """
    return _shaped_noise("pink noise", duration_s, -0.5, sample_rate_hz=sample_rate_hz,
                         level_dbfs=level_dbfs, low_hz=low_hz, high_hz=high_hz,
                         fade_in_s=fade_in_s, fade_out_s=fade_out_s, seed=seed)


def white_noise(duration_s: float, *, sample_rate_hz: float = 48_000.0, level_dbfs: float = -20.0,
                low_hz: float = 20.0, high_hz: float | None = None, fade_in_s: float = 0.0,
                fade_out_s: float = 0.0, seed: int | None = None) -> np.ndarray:
    """Gaussian noise with a flat power spectral density between ``low_hz`` and ``high_hz``.

    Same options and guarantees as :func:`pink_noise`.
    """
    return _shaped_noise("white noise", duration_s, 0.0, sample_rate_hz=sample_rate_hz,
                         level_dbfs=level_dbfs, low_hz=low_hz, high_hz=high_hz,
                         fade_in_s=fade_in_s, fade_out_s=fade_out_s, seed=seed)


def _shaped_noise(name: str, duration_s: float, amplitude_exponent: float, *, sample_rate_hz: float,
                  level_dbfs: float, low_hz: float, high_hz: float | None, fade_in_s: float,
                  fade_out_s: float, seed: int | None) -> np.ndarray:
    """Random-phase Gaussian spectrum with amplitude ∝ f^exponent inside the band, then RMS-scaled."""
    top_hz = sample_rate_hz / 2 if high_hz is None else high_hz
    n_samples = sample_count(name, duration_s, sample_rate_hz)
    _check_band(name, low_hz, top_hz, sample_rate_hz)
    _check_fades(name, fade_in_s, fade_out_s, duration_s)
    frequency_hz = fft.rfftfreq(n_samples, d=1.0 / sample_rate_hz)
    in_band = (frequency_hz >= low_hz) & (frequency_hz <= top_hz)
    if np.count_nonzero(in_band) < 2:
        raise InputError(f"{name}: {duration_s:g} s is too short to resolve the band {low_hz:g}-{top_hz:g} Hz")
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, int) or not 0 <= seed <= MAX_SEED):
        raise InputError(f"{name}: seed must be a whole number from 0 to {MAX_SEED}, got {str(seed)[:80]}")
    rng = np.random.default_rng(seed)
    spectrum = rng.standard_normal(frequency_hz.size) + 1j * rng.standard_normal(frequency_hz.size)
    gain = np.zeros(frequency_hz.size)
    gain[in_band] = frequency_hz[in_band] ** amplitude_exponent   # pink: |X|² ∝ 1/f, -3 dB per octave
    samples = fft.irfft(spectrum * gain, n=n_samples)
    samples *= 10.0 ** (level_dbfs / 20.0) / np.sqrt(np.mean(samples ** 2))
    peak = float(np.max(np.abs(samples)))
    if peak > 1.0:
        highest_db = level_dbfs - 20.0 * math.log10(peak)
        raise InputError(f"{name} at {level_dbfs:g} dB FS RMS would clip (peak {20 * math.log10(peak):+.1f} dB "
                         f"re full scale); use {math.floor(highest_db * 10) / 10:g} dB FS RMS or lower")
    return _apply_fades(samples, fade_in_s, fade_out_s, sample_rate_hz)


@dataclass(frozen=True, slots=True)
class SweepSpec:
    """An exponential sine sweep, described fully enough to regenerate it sample for sample.

    ``level_dbfs`` is the RMS of the unfaded sweep (its peak is 3.01 dB higher), so it must be
    at most -3.01 dB FS. Invalid values raise InputError when the spec is created.
    """

    duration_s: float
    sample_rate_hz: float = 48_000.0
    low_hz: float = 40.0
    high_hz: float = 12_500.0
    level_dbfs: float = -10.0
    fade_in_s: float = 0.02
    fade_out_s: float = 0.005

    def __post_init__(self) -> None:
        name = "sweep"
        sample_count(name, self.duration_s, self.sample_rate_hz)
        _check_band(name, self.low_hz, self.high_hz, self.sample_rate_hz)
        _check_fades(name, self.fade_in_s, self.fade_out_s, self.duration_s)
        if not math.isfinite(self.level_dbfs) or self.level_dbfs + SINE_CREST_DB > 0.0:
            raise InputError(f"sweep at {self.level_dbfs:g} dB FS RMS would clip: a sine's peak is 3.01 dB "
                             f"above its RMS, so use -3.1 dB FS RMS or lower")

    @property
    def rate_constant_s(self) -> float:
        """L = Ts / ln(f2/f1): the sweep's frequency grows as f1·exp(t/L) (Farina 2000)."""
        return self.duration_s / math.log(self.high_hz / self.low_hz)

    def harmonic_advance_s(self, order: int) -> float:
        """How far before the linear response the harmonic of ``order`` lands: L·ln(n) (Farina 2000)."""
        return self.rate_constant_s * math.log(order)


def exponential_sweep(spec: SweepSpec, *, silence_s: float = 0.0) -> np.ndarray:
    """The sweep x(t) = sin(2π f1 L (exp(t/L) - 1)), L = Ts/ln(f2/f1) (Farina 2000), faded, then
    ``silence_s`` of zeros so the room's decay is recorded after the sweep ends.
    """
    if not (math.isfinite(silence_s) and 0.0 <= silence_s <= 60.0):
        raise InputError(f"sweep: silence after the sweep must be 0 to 60 s, got {silence_s!r}")
    n_samples = round(spec.duration_s * spec.sample_rate_hz)
    time_s = np.arange(n_samples) / spec.sample_rate_hz
    phase_rad = 2.0 * math.pi * spec.low_hz * spec.rate_constant_s * np.expm1(time_s / spec.rate_constant_s)
    sweep = math.sqrt(2.0) * 10.0 ** (spec.level_dbfs / 20.0) * np.sin(phase_rad)
    sweep = _apply_fades(sweep, spec.fade_in_s, spec.fade_out_s, spec.sample_rate_hz)
    return np.concatenate([sweep, np.zeros(round(silence_s * spec.sample_rate_hz))])


def inverse_sweep(spec: SweepSpec) -> np.ndarray:
    """Farina's inverse filter: the time-reversed sweep with an envelope falling 6 dB per octave.

    Scaled so that the sweep convolved with it has unit gain at the geometric mean of the sweep's
    band, with the impulse at sample ``len(sweep) - 1``. Does not flatten the fades' roll-off at
    the band ends.
    """
    sweep = exponential_sweep(spec)
    reversed_time_s = np.arange(sweep.size) / spec.sample_rate_hz
    # Envelope exp(-t/L) on the reversed sweep turns its pink spectrum white (Farina 2000).
    inverse = sweep[::-1] * np.exp(-reversed_time_s / spec.rate_constant_s)
    n_fft = fft.next_fast_len(2 * sweep.size)
    centre_hz = math.sqrt(spec.low_hz * spec.high_hz)
    product = fft.rfft(sweep, n_fft) * fft.rfft(inverse, n_fft)
    centre_bin = round(centre_hz * n_fft / spec.sample_rate_hz)
    return inverse / abs(product[centre_bin])


def impulse_response_from_sweep(recording: np.ndarray, played: SweepSpec | np.ndarray, *,
                                sample_rate_hz: float, ir_length_s: float | None = None,
                                source_name: str = "sweep recording") -> np.ndarray:
    """The linear impulse response from a recording of a played exponential sweep.

    ``played`` is either the :class:`SweepSpec` that generated the sweep or the sweep's own
    samples, without or with trailing silence. Both are deconvolved by regularised spectral
    division, H = Y X* / (|X|² + ε), which is exact inside the sweep's band; Farina's inverse
    filter (:func:`inverse_sweep`) leaves a low-level spread around the impulse that lengthens
    or shortens long low-frequency decays by about 1 % (measured), so it is not used here.
    The recording may start any time before the sweep does and
    must run on after it for at least the decay time. The result starts shortly before the
    linear response's peak; the harmonic-distortion responses, which land earlier by
    L·ln(n) (Farina 2000), are discarded. Its length is the part of the recording after the
    sweep ended, or ``ir_length_s`` if shorter.

    Does not average several sweeps, detect the impulse start (see fieldtl.analysis.decay) or
    correct the loudspeaker's response.
    """
    recorded = checked_audio(recording, sample_rate_hz=sample_rate_hz, source_name=source_name)
    if isinstance(played, SweepSpec):
        if played.sample_rate_hz != sample_rate_hz:
            raise InputError(f"{source_name}: recorded at {sample_rate_hz:g} Hz but the sweep was made for "
                             f"{played.sample_rate_hz:g} Hz")
        sweep = exponential_sweep(played)
        sweep_samples = sweep.size
        lags = _deconvolve_by_division(recorded, sweep)
        lead_s = min(0.5 * played.harmonic_advance_s(2), IMPULSE_LEAD_S)
    else:
        reference = checked_audio(played, sample_rate_hz=sample_rate_hz, source_name="played sweep")
        sweep_samples = _active_length(reference)
        lags = _deconvolve_by_division(recorded, reference[:sweep_samples])
        lead_s = IMPULSE_LEAD_S
    last_complete_lag = recorded.size - sweep_samples   # later lags saw only part of the sweep
    if last_complete_lag < 1:
        raise InputError(f"{source_name}: {recorded.size / sample_rate_hz:.2f} s is shorter than the "
                         f"{sweep_samples / sample_rate_hz:.2f} s sweep")
    peak = int(np.argmax(np.abs(lags[: last_complete_lag + 1])))
    start = max(0, peak - round(lead_s * sample_rate_hz))
    stop = last_complete_lag + 1
    if ir_length_s is not None:
        if not (math.isfinite(ir_length_s) and ir_length_s > 0):
            raise InputError(f"{source_name}: impulse response length must be a positive number of seconds, "
                             f"got {ir_length_s!r}")
        stop = min(stop, start + round(ir_length_s * sample_rate_hz))
    if (stop - start) < 0.1 * sample_rate_hz:
        after_s = (recorded.size - sweep_samples - peak) / sample_rate_hz
        raise InputError(f"{source_name}: the recording ends {max(after_s, 0.0):.2f} s after the sweep; "
                         "keep recording at least as long as the decay (0.1 s minimum)")
    return lags[start:stop]


def _deconvolve_by_division(recorded: np.ndarray, sweep: np.ndarray) -> np.ndarray:
    """H = Y X* / (|X|² + ε); negative lags (harmonics) wrap to the end, beyond what is returned."""
    n_fft = fft.next_fast_len(recorded.size + sweep.size)
    sweep_spectrum = fft.rfft(sweep, n_fft)
    power = np.abs(sweep_spectrum) ** 2
    epsilon = power.max() * 10.0 ** (-DECONVOLUTION_REGULARISATION_DB / 10.0)
    transfer = fft.rfft(recorded, n_fft) * np.conj(sweep_spectrum) / (power + epsilon)
    return fft.irfft(transfer, n_fft)[: recorded.size]


def _active_length(sweep: np.ndarray) -> int:
    """Samples up to the last one above -80 dB re the peak: trailing silence is not the sweep."""
    peak = float(np.max(np.abs(sweep)))
    if peak == 0.0:
        raise InputError("played sweep: all samples are zero")
    return int(np.flatnonzero(np.abs(sweep) > peak * 1e-4)[-1]) + 1


def write_signal_wav(target: str | Path | BinaryIO, samples: np.ndarray, *, sample_rate_hz: float) -> None:
    """Write a mono 24-bit PCM WAV to a path or a binary file object; never clips (InputError instead)."""
    name = Path(target).name if isinstance(target, (str, Path)) else "signal.wav"
    audio = checked_audio(samples, sample_rate_hz=sample_rate_hz, source_name=name)
    if sample_rate_hz != int(sample_rate_hz):
        raise InputError(f"{name}: a WAV file needs a whole-number sample rate, got {sample_rate_hz:g} Hz")
    peak = float(np.max(np.abs(audio)))
    if peak > 1.0:
        raise InputError(f"{name}: peak {20 * math.log10(peak):+.2f} dB re full scale would clip; "
                         "lower the level")
    try:
        soundfile.write(str(target) if isinstance(target, Path) else target, audio, int(sample_rate_hz),
                        subtype="PCM_24", format="WAV")
    except (RuntimeError, soundfile.LibsndfileError, OSError) as exc:
        raise InputError(f"{name}: cannot write the WAV file ({exc})") from None


def sample_count(name: str, duration_s: float, sample_rate_hz: float) -> int:
    """Samples in ``duration_s`` at ``sample_rate_hz``, checked before anything is allocated.

    InputError (naming ``name``) unless the rate is 8-384 kHz and the count is 2 to
    :data:`MAX_GENERATED_SAMPLES`.
    """
    low_hz, high_hz = SAMPLE_RATE_HZ
    if not (isinstance(sample_rate_hz, (int, float)) and math.isfinite(sample_rate_hz)
            and low_hz <= sample_rate_hz <= high_hz):
        raise InputError(f"{name}: sample rate must be {low_hz:,} to {high_hz:,} Hz, got {sample_rate_hz!r}")
    if not (isinstance(duration_s, (int, float)) and math.isfinite(duration_s) and duration_s > 0):
        raise InputError(f"{name}: duration must be a positive number of seconds, got {duration_s!r}")
    n_samples = round(duration_s * sample_rate_hz)
    if n_samples < 2:
        raise InputError(f"{name}: {duration_s:g} s is shorter than two samples at {sample_rate_hz:g} Hz")
    if n_samples > MAX_GENERATED_SAMPLES:
        raise InputError(f"{name}: {duration_s:g} s at {sample_rate_hz:g} Hz is too long; at most "
                         f"{MAX_GENERATED_SAMPLES / sample_rate_hz:.0f} s at this rate")
    return n_samples


def _check_band(name: str, low_hz: float, high_hz: float, sample_rate_hz: float) -> None:
    if not (math.isfinite(low_hz) and math.isfinite(high_hz) and 0 < low_hz < high_hz <= sample_rate_hz / 2):
        raise InputError(f"{name}: band {low_hz:g}-{high_hz:g} Hz must satisfy 0 < low < high <= "
                         f"{sample_rate_hz / 2:g} Hz (half the sample rate)")


def _check_fades(name: str, fade_in_s: float, fade_out_s: float, duration_s: float) -> None:
    if not (math.isfinite(fade_in_s) and math.isfinite(fade_out_s) and fade_in_s >= 0 and fade_out_s >= 0):
        raise InputError(f"{name}: fades must be 0 s or more, got {fade_in_s!r} and {fade_out_s!r}")
    if fade_in_s + fade_out_s > duration_s:
        raise InputError(f"{name}: fades of {fade_in_s:g} s + {fade_out_s:g} s exceed the {duration_s:g} s signal")


def _apply_fades(samples: np.ndarray, fade_in_s: float, fade_out_s: float, sample_rate_hz: float) -> np.ndarray:
    """Raised-cosine (half Hann) fade in and out; never raises a sample's magnitude."""
    faded = samples.copy()
    n_in, n_out = round(fade_in_s * sample_rate_hz), round(fade_out_s * sample_rate_hz)
    if n_in:
        faded[:n_in] *= 0.5 * (1.0 - np.cos(np.pi * np.arange(n_in) / n_in))
    if n_out:
        faded[faded.size - n_out:] *= 0.5 * (1.0 + np.cos(np.pi * (np.arange(n_out) + 1) / n_out))
    return faded
