"""Test signals and sweep deconvolution, checked against analytic truths (Farina 2000, spectra)."""

import io
import math

import numpy as np
import pytest
import soundfile
from scipy import signal

from fieldtl.audio.signals import (MAX_GENERATED_SAMPLES, SweepSpec, checked_audio, exponential_sweep,
                                   impulse_response_from_sweep, inverse_sweep, pink_noise, sample_count,
                                   white_noise, write_signal_wav)
from fieldtl.cautions import HEARING_CAUTION
from fieldtl.errors import InputError

FS = 48_000


def _psd_slope_db_per_octave(samples, low_hz, high_hz):
    """Least-squares slope of 10 lg(PSD) against log2(f) between two frequencies."""
    freq_hz, psd = signal.welch(samples, fs=FS, nperseg=16_384)
    keep = (freq_hz >= low_hz) & (freq_hz <= high_hz)
    return np.polyfit(np.log2(freq_hz[keep]), 10 * np.log10(psd[keep]), 1)[0]


def test_pink_noise_falls_3_db_per_octave():
    # Pink noise: power spectral density ∝ 1/f, i.e. 10 lg(2) = 3.01 dB less per octave (analytic).
    noise = pink_noise(20.0, sample_rate_hz=FS, seed=1)
    assert _psd_slope_db_per_octave(noise, 50, 10_000) == pytest.approx(-10 * math.log10(2), abs=0.1)


def test_white_noise_is_flat():
    # White noise: constant power spectral density, 0 dB per octave (analytic).
    noise = white_noise(20.0, sample_rate_hz=FS, seed=1)
    assert _psd_slope_db_per_octave(noise, 50, 10_000) == pytest.approx(0.0, abs=0.1)


def test_pink_noise_has_equal_energy_per_octave_band():
    # ∫ df/f over an octave is ln 2 whatever the octave (analytic), so octave energies are equal.
    noise = pink_noise(20.0, sample_rate_hz=FS, seed=2)
    spectrum = np.abs(np.fft.rfft(noise)) ** 2
    freq_hz = np.fft.rfftfreq(noise.size, 1 / FS)
    levels_db = [10 * np.log10(spectrum[(freq_hz >= f / math.sqrt(2)) & (freq_hz < f * math.sqrt(2))].sum())
                 for f in (125, 250, 500, 1000, 2000, 4000)]
    assert max(levels_db) - min(levels_db) < 0.5


def test_noise_level_band_limits_and_seed():
    noise = pink_noise(2.0, sample_rate_hz=FS, level_dbfs=-23.0, low_hz=100.0, high_hz=5000.0, seed=7)
    assert 20 * math.log10(np.sqrt(np.mean(noise ** 2))) == pytest.approx(-23.0, abs=1e-9)
    spectrum = np.abs(np.fft.rfft(noise))
    freq_hz = np.fft.rfftfreq(noise.size, 1 / FS)
    assert np.all(spectrum[(freq_hz < 100.0) | (freq_hz > 5000.0)] < 1e-9 * spectrum.max())
    assert np.array_equal(noise, pink_noise(2.0, sample_rate_hz=FS, level_dbfs=-23.0, low_hz=100.0,
                                            high_hz=5000.0, seed=7))
    assert not np.array_equal(noise, pink_noise(2.0, sample_rate_hz=FS, level_dbfs=-23.0, low_hz=100.0,
                                                high_hz=5000.0, seed=8))


def test_fades_start_and_end_at_zero_and_never_raise_the_level():
    raw = white_noise(1.0, sample_rate_hz=FS, seed=3)
    faded = white_noise(1.0, sample_rate_hz=FS, fade_in_s=0.1, fade_out_s=0.1, seed=3)
    assert faded[0] == 0.0 and faded[-1] == pytest.approx(0.0, abs=1e-15)
    assert np.all(np.abs(faded) <= np.abs(raw) + 1e-15)
    assert np.array_equal(faded[4800:-4800], raw[4800:-4800])


def test_noise_that_would_clip_raises_instead():
    # Gaussian noise has a crest factor well above 3 dB, so 0 dB FS RMS must clip.
    with pytest.raises(InputError, match="would clip"):
        pink_noise(1.0, sample_rate_hz=FS, level_dbfs=0.0, seed=1)


@pytest.mark.parametrize("level_dbfs, clips", [(-3.0, True), (-3.02, False)])
def test_sweep_level_limit_is_the_sine_crest_factor(level_dbfs, clips):
    # A sine's peak is √2 × RMS: 3.0103 dB (analytic), so the highest RMS level is -3.0103 dB FS.
    if clips:
        with pytest.raises(InputError, match="would clip"):
            SweepSpec(1.0, level_dbfs=level_dbfs)
    else:
        sweep = exponential_sweep(SweepSpec(1.0, level_dbfs=level_dbfs, fade_in_s=0.0, fade_out_s=0.0))
        assert np.max(np.abs(sweep)) <= 1.0


def _half_cycle_frequencies(sweep):
    """Mean frequency 1 / (2 Δt) between successive zero crossings, and the midpoint time."""
    i = np.flatnonzero(np.diff(np.signbit(sweep)))
    crossing_s = (i + sweep[i] / (sweep[i] - sweep[i + 1])) / FS   # linear interpolation
    return 0.5 * (crossing_s[1:] + crossing_s[:-1]), 1.0 / (2.0 * np.diff(crossing_s))


def test_sweep_instantaneous_frequency_follows_farina_law():
    # f(t) = f1 exp(t ln(f2/f1) / T): f1 at the start, f2 at the end (Farina 2000, analytic).
    spec = SweepSpec(2.0, sample_rate_hz=FS, low_hz=50.0, high_hz=10_000.0, fade_in_s=0.0, fade_out_s=0.0)
    sweep = exponential_sweep(spec)
    assert sweep[0] == 0.0                              # phase 0 at t = 0
    mid_s, frequency_hz = _half_cycle_frequencies(sweep)
    expected_hz = 50.0 * (10_000.0 / 50.0) ** (mid_s / 2.0)
    low = mid_s < 1.0                                   # below ~700 Hz a half cycle spans > 30 samples
    assert np.max(np.abs(frequency_hz[low] / expected_hz[low] - 1)) < 0.005
    assert np.mean(frequency_hz[-40:]) == pytest.approx(np.mean(expected_hz[-40:]), rel=0.005)
    # ln f is a straight line in t: its ends, extrapolated from the measured half cycles, are f1 and f2.
    slope, intercept = np.polyfit(mid_s[low], np.log(frequency_hz[low]), 1)
    assert math.exp(intercept) == pytest.approx(50.0, rel=0.002)
    assert math.exp(intercept + 2.0 * slope) == pytest.approx(10_000.0, rel=0.005)


def test_sweep_with_silence_and_harmonic_advance():
    spec = SweepSpec(1.0, sample_rate_hz=FS, low_hz=40.0, high_hz=12_500.0)
    assert exponential_sweep(spec, silence_s=0.5).size == 72_000
    # Δt_n = T ln(n) / ln(f2/f1) (Farina 2000): 1 s · ln 2 / ln(312.5) = 0.12060 s (computed).
    assert spec.harmonic_advance_s(2) == pytest.approx(math.log(2) / math.log(312.5), rel=1e-12)


def test_sweep_convolved_with_its_inverse_is_a_flat_band_limited_impulse():
    spec = SweepSpec(2.0, sample_rate_hz=FS, low_hz=40.0, high_hz=12_500.0)
    sweep, inverse = exponential_sweep(spec), inverse_sweep(spec)
    product = signal.fftconvolve(sweep, inverse)
    assert int(np.argmax(np.abs(product))) == sweep.size - 1
    gain = np.abs(np.fft.rfft(product, 1 << 19))
    freq_hz = np.fft.rfftfreq(1 << 19, 1 / FS)
    in_band = (freq_hz >= 100.0) & (freq_hz <= 10_000.0)
    assert np.all(np.abs(20 * np.log10(gain[in_band])) < 0.5)


def _room_response(played, impulse_response, *, delay_s):
    """What a microphone records: silence, then the played signal through the room."""
    padded = np.concatenate([np.zeros(round(delay_s * FS)), played])
    return signal.fftconvolve(padded, impulse_response)[: padded.size]


def _test_impulse_response(seed=4, t_s=0.8, length_s=1.2):
    rng = np.random.default_rng(seed)
    time_s = np.arange(round(length_s * FS)) / FS
    response = 0.1 * rng.standard_normal(time_s.size) * np.exp(-3 * math.log(10) * time_s / t_s)
    response[0] = 1.0
    return response


@pytest.mark.parametrize("by_samples", [False, True])
def test_sweep_round_trip_recovers_the_impulse_response(by_samples):
    spec = SweepSpec(2.0, sample_rate_hz=FS)
    played = exponential_sweep(spec, silence_s=1.5)
    truth = _test_impulse_response()
    recorded = _room_response(played, truth, delay_s=0.3)
    result = impulse_response_from_sweep(recorded, played if by_samples else spec, sample_rate_hz=FS)
    # The result starts 20 ms before the direct sound and lasts as long as the silence after the sweep.
    assert result.size == pytest.approx(round(1.52 * FS), abs=10)
    reference = np.concatenate([np.zeros(round(0.02 * FS)), truth, np.zeros(result.size)])[: result.size]
    band = signal.butter(4, [100, 5000], "bandpass", fs=FS, output="sos")
    error = signal.sosfiltfilt(band, result) - signal.sosfiltfilt(band, reference)
    error_db = 10 * np.log10(np.sum(error ** 2) / np.sum(signal.sosfiltfilt(band, reference) ** 2))
    assert error_db < -50.0


def test_harmonic_distortion_lands_before_the_linear_response_and_is_discarded():
    spec = SweepSpec(2.0, sample_rate_hz=FS, low_hz=40.0, high_hz=12_500.0)
    played = exponential_sweep(spec, silence_s=1.0)
    clean = _room_response(played, np.array([1.0]), delay_s=1.0)
    distorted = _room_response(played + 0.3 * played ** 2, np.array([1.0]), delay_s=1.0)   # 2nd-order distortion
    # Full deconvolution: the 2nd harmonic's impulse sits L ln 2 before the linear one (Farina 2000).
    sweep_samples = round(spec.duration_s * FS)
    full = signal.fftconvolve(distorted, inverse_sweep(spec))[sweep_samples - 1:]
    linear = int(np.argmax(np.abs(full)))
    advance = round(spec.harmonic_advance_s(2) * FS)
    window = np.abs(full[linear - advance - 200: linear - advance + 200])
    assert window.max() > 0.01 * np.abs(full[linear])
    assert abs(int(np.argmax(window)) - 200) <= 20
    # The returned response keeps 20 ms before the linear peak, where the distortion adds nothing
    # inside the sweep's band (its DC term leaks below 40 Hz only).
    result = impulse_response_from_sweep(distorted, spec, sample_rate_hz=FS)
    reference = impulse_response_from_sweep(clean, spec, sample_rate_hz=FS)
    peak = int(np.argmax(np.abs(result)))
    assert peak == round(0.02 * FS)
    band = signal.butter(4, [100, 10_000], "bandpass", fs=FS, output="sos")
    difference = signal.sosfiltfilt(band, result - reference)
    assert np.max(np.abs(difference[:peak - 48])) < 1e-3 * np.abs(result[peak])


def test_deconvolution_rejects_a_recording_that_stops_with_the_sweep():
    spec = SweepSpec(1.0, sample_rate_hz=FS)
    with pytest.raises(InputError, match="after the sweep"):
        impulse_response_from_sweep(exponential_sweep(spec, silence_s=0.05), spec, sample_rate_hz=FS)
    with pytest.raises(InputError, match="made for 48000 Hz"):
        impulse_response_from_sweep(exponential_sweep(spec, silence_s=1.0), spec, sample_rate_hz=44_100)


def test_write_signal_wav_is_24_bit_and_refuses_to_clip(tmp_path):
    noise = pink_noise(0.5, sample_rate_hz=FS, seed=5)
    path = tmp_path / "pink.wav"
    write_signal_wav(path, noise, sample_rate_hz=FS)
    info = soundfile.info(str(path))
    assert (info.subtype, info.samplerate, info.channels) == ("PCM_24", FS, 1)
    read, _ = soundfile.read(str(path))
    assert np.max(np.abs(read - noise)) <= 2.0 ** -23
    with pytest.raises(InputError, match="would clip"):
        write_signal_wav(tmp_path / "loud.wav", noise * 20.0, sample_rate_hz=FS)
    buffer = io.BytesIO()          # the app writes into memory for a download
    write_signal_wav(buffer, noise, sample_rate_hz=FS)
    assert soundfile.info(io.BytesIO(buffer.getvalue())).subtype == "PCM_24"


@pytest.mark.parametrize("samples, sample_rate_hz, match", [
    (np.array([]), FS, "no samples"),
    (np.array([0.0, np.nan, 0.0]), FS, "NaN or infinite"),
    (np.zeros((2, 100)), FS, "one channel"),
    (np.zeros(100), 0.0, "sample rate"),
    (np.zeros(100), float("nan"), "sample rate"),
    (np.zeros(100), FS, "at least 1 s"),
])
def test_checked_audio_rejects_unusable_arrays(samples, sample_rate_hz, match):
    with pytest.raises(InputError, match=match):
        checked_audio(samples, sample_rate_hz=sample_rate_hz, source_name="take.wav", min_duration_s=1.0)


@pytest.mark.parametrize("kwargs", [dict(duration_s=0.0), dict(duration_s=1.0, low_hz=5000.0, high_hz=100.0),
                                    dict(duration_s=1.0, high_hz=30_000.0),
                                    dict(duration_s=1.0, fade_in_s=0.8, fade_out_s=0.8)])
def test_bad_sweep_specs_raise(kwargs):
    with pytest.raises(InputError):
        SweepSpec(**kwargs)


def test_hearing_caution_is_one_plain_sentence():
    assert HEARING_CAUTION.count(".") == 1 and HEARING_CAUTION.endswith(".")
    assert "hearing protection" in HEARING_CAUTION and "gradually" in HEARING_CAUTION


def test_longest_signal_limit_at_its_edge():
    # 2**25 samples at 48 kHz is 699.05 s: just inside is allowed, one sample more is refused.
    assert sample_count("noise", MAX_GENERATED_SAMPLES / 48_000, 48_000) == 2**25
    with pytest.raises(InputError, match="too long; at most 699 s"):
        sample_count("noise", (MAX_GENERATED_SAMPLES + 1) / 48_000, 48_000)
