"""Synthetic room signals checked against analytic truths, never against fieldtl's own filter bank.

Band powers are integrated from a plain FFT between band edges computed here from the
IEC 61260-1:2014 formulas (5.2, 5.4, 5.5): fm = 1000 · G^(x/3), G = 10^(3/10), edges fm · G^(∓1/6).
Decay rates are fitted on Schroeder curves of bands filtered with scipy Butterworth band-passes
designed here. A decay is exponential in energy, 60 dB in T (definition of T, ISO 3382-2).
"""

import contextlib
import importlib.util
import io
import json
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hs
from scipy import signal

from fieldtl.audio.calibration import calibration_from_tone
from fieldtl.audio.ingest import open_recording, read_samples
from fieldtl.audio.synthesis import (
    calibrator_tone,
    impulse_response_with_decay,
    interrupted_noise_with_decay,
    noise_with_band_levels,
)
from fieldtl.bands import BandSpectrum
from fieldtl.errors import InputError
from fieldtl.survey import load_survey

SAMPLE_RATE_HZ = 48_000
BANDS_HZ = (50.0, 63.0, 80.0, 100.0, 125.0, 160.0, 200.0, 250.0, 315.0, 400.0, 500.0, 630.0, 800.0, 1000.0,
            1250.0, 1600.0, 2000.0, 2500.0, 3150.0, 4000.0, 5000.0)
G = 10.0 ** 0.3  # IEC 61260-1:2014 5.2, base-ten octave ratio


def iec_edges_hz(nominal_hz: float) -> tuple[float, float]:
    """IEC 61260-1:2014 eq. 2-4 for one-third octaves; x = 10 lg(f/1000) rounded (nominal to index)."""
    x = round(10.0 * math.log10(nominal_hz / 1000.0))
    centre_hz = 1000.0 * G ** (x / 3.0)
    return centre_hz / G ** (1.0 / 6.0), centre_hz * G ** (1.0 / 6.0)


def fft_band_levels_db(samples: np.ndarray, bands_hz=BANDS_HZ, *, offset_db: float = 0.0) -> np.ndarray:
    """10 lg of each band's mean square by Parseval: sum of 2|X_k|^2 / N^2 over f1 <= f_k < f2."""
    spectrum = np.fft.rfft(samples)
    frequency_hz = np.fft.rfftfreq(samples.size, 1.0 / SAMPLE_RATE_HZ)
    levels = []
    for nominal_hz in bands_hz:
        low_hz, high_hz = iec_edges_hz(nominal_hz)
        inside = (frequency_hz >= low_hz) & (frequency_hz < high_hz)
        levels.append(10.0 * math.log10(2.0 * np.sum(np.abs(spectrum[inside]) ** 2) / samples.size**2) + offset_db)
    return np.array(levels)


def spectrum_db(values, bands_hz=BANDS_HZ, quantity="L") -> BandSpectrum:
    return BandSpectrum.from_array(bands_hz, values, "dB", quantity)


def times_s(values, bands_hz=BANDS_HZ) -> BandSpectrum:
    return BandSpectrum.from_array(bands_hz, values, "s", "T")


SLOPED_DB = np.linspace(65.0, 35.0, len(BANDS_HZ)) + np.tile([0.0, 2.5, -1.5], 7)


# --- noise_with_band_levels -------------------------------------------------------------------

def test_band_levels_are_exact_by_fft_integration():
    # Construction puts exactly 10^((L - offset)/10) into each band: exact up to float rounding.
    samples = noise_with_band_levels(spectrum_db(SLOPED_DB), duration_s=3.0, sample_rate_hz=SAMPLE_RATE_HZ,
                                     seed=7, level_offset_db=110.0)
    np.testing.assert_allclose(fft_band_levels_db(samples, offset_db=110.0), SLOPED_DB, atol=1e-9)


@settings(max_examples=15, deadline=None)
@given(hs.lists(hs.floats(0.0, 60.0), min_size=21, max_size=21), hs.integers(0, 2**32 - 1))
def test_any_spectrum_reads_back_exactly(levels_db, seed):
    samples = noise_with_band_levels(spectrum_db(levels_db), duration_s=1.0, sample_rate_hz=SAMPLE_RATE_HZ,
                                     seed=seed, level_offset_db=100.0)
    np.testing.assert_allclose(fft_band_levels_db(samples, offset_db=100.0), levels_db, atol=1e-9)


def test_octave_bands_are_shaped_between_octave_edges():
    # Octave edges fm · G^(∓1/2) (IEC 61260-1:2014 eq. 3-4 with b = 1).
    octaves = BandSpectrum.from_array((125.0, 250.0, 500.0, 1000.0, 2000.0), [50, 44, 47, 40, 38], "dB", "L",
                                      fraction=1)
    samples = noise_with_band_levels(octaves, duration_s=1.0, sample_rate_hz=SAMPLE_RATE_HZ, seed=3,
                                     level_offset_db=90.0)
    spectrum = np.fft.rfft(samples)
    frequency_hz = np.fft.rfftfreq(samples.size, 1.0 / SAMPLE_RATE_HZ)
    for nominal_hz, level_db in zip(octaves.nominal_hz, octaves.values):
        centre_hz = 1000.0 * G ** round(math.log2(nominal_hz / 1000.0))
        inside = (frequency_hz >= centre_hz / G**0.5) & (frequency_hz < centre_hz * G**0.5)
        measured = 10 * math.log10(2 * np.sum(np.abs(spectrum[inside]) ** 2) / samples.size**2) + 90.0
        assert measured == pytest.approx(level_db, abs=1e-9)


def test_outside_the_bands_only_the_stated_floor():
    levels = spectrum_db(SLOPED_DB)
    low_hz, high_hz = iec_edges_hz(50.0)[0], iec_edges_hz(5000.0)[1]
    for floor_below_db in (60.0, 30.0):
        samples = noise_with_band_levels(levels, duration_s=2.0, sample_rate_hz=SAMPLE_RATE_HZ, seed=1,
                                         level_offset_db=100.0, floor_below_db=floor_below_db)
        spectrum = np.fft.rfft(samples)
        frequency_hz = np.fft.rfftfreq(samples.size, 1.0 / SAMPLE_RATE_HZ)
        outside = (frequency_hz < low_hz) | (frequency_hz >= high_hz)
        outside_ms = 2 * np.sum(np.abs(spectrum[outside]) ** 2) / samples.size**2
        # Expected: the lowest in-band density (the 5000 Hz band here, L = 10 lg(ms), width f2 - f1)
        # times 10^(-floor/10), over 0-44.7 Hz and 5623 Hz-24 kHz. 2 s x 19 kHz of Gaussian bins: 0.1 dB.
        lowest_density = min(10 ** ((L - 100.0) / 10) / (iec_edges_hz(f)[1] - iec_edges_hz(f)[0])
                             for f, L in zip(BANDS_HZ, SLOPED_DB))
        expected_ms = lowest_density * 10 ** (-floor_below_db / 10) * (SAMPLE_RATE_HZ / 2 - high_hz + low_hz)
        assert 10 * math.log10(outside_ms / expected_ms) == pytest.approx(0.0, abs=0.1)
    silent_outside = np.fft.rfft(noise_with_band_levels(levels, duration_s=2.0, sample_rate_hz=SAMPLE_RATE_HZ,
                                                        seed=1, level_offset_db=100.0, floor_below_db=math.inf))
    # Only float rounding of the inverse and forward FFT is left: over 200 dB below the bands.
    in_band_energy = np.sum(np.abs(silent_outside[~outside]) ** 2)
    assert np.sum(np.abs(silent_outside[outside]) ** 2) < 1e-20 * in_band_energy


def test_seeds_reproduce_and_differ():
    levels = spectrum_db(SLOPED_DB)
    make = lambda seed: noise_with_band_levels(levels, duration_s=0.5, sample_rate_hz=SAMPLE_RATE_HZ, seed=seed,
                                               level_offset_db=100.0)
    np.testing.assert_array_equal(make(11), make(11))
    assert not np.allclose(make(11), make(12))


def test_noise_rejects_bad_input():
    with pytest.raises(InputError, match="would clip"):
        noise_with_band_levels(spectrum_db(SLOPED_DB), duration_s=1.0, sample_rate_hz=SAMPLE_RATE_HZ, seed=1)
    with pytest.raises(InputError, match="too short to resolve the 50 Hz band"):
        noise_with_band_levels(spectrum_db(SLOPED_DB), duration_s=0.05, sample_rate_hz=SAMPLE_RATE_HZ, seed=1,
                               level_offset_db=100.0)
    with pytest.raises(InputError, match="finite level"):
        noise_with_band_levels(spectrum_db([40.0] * 20 + [math.nan]), duration_s=1.0,
                               sample_rate_hz=SAMPLE_RATE_HZ, seed=1, level_offset_db=100.0)
    with pytest.raises(InputError, match="above half the sample rate"):
        noise_with_band_levels(spectrum_db([40.0], bands_hz=(10000.0,)), duration_s=1.0, sample_rate_hz=16_000,
                               seed=1, level_offset_db=100.0)


# --- impulse_response_with_decay -------------------------------------------------------------

T_SLOPED_S = np.linspace(0.8, 0.4, len(BANDS_HZ))


def schroeder_t20_s(edc: np.ndarray) -> float:
    """T20: least-squares line over -5..-25 dB of the normalised Schroeder curve (ISO 3382-2)."""
    level_db = 10 * np.log10(edc / edc[0])
    time_s = np.arange(edc.size) / SAMPLE_RATE_HZ
    fit = (level_db <= -5.0) & (level_db >= -25.0)
    return -60.0 / np.polyfit(time_s[fit], level_db[fit], 1)[0]


def butterworth_band(samples: np.ndarray, nominal_hz: float) -> np.ndarray:
    """4th-order Butterworth band-pass (8th-order filter) between the IEC edges, run time-reversed
    (ISO 3382-2 allows time-reversed filtering of impulse responses; it keeps the filter's own
    ringing out of the decay)."""
    sos = signal.butter(4, iec_edges_hz(nominal_hz), btype="bandpass", fs=SAMPLE_RATE_HZ, output="sos")
    return signal.sosfilt(sos, samples[::-1])[::-1]


def test_impulse_response_decays_60_db_in_each_band_time():
    # One noise decay in a band of width B fluctuates: over 60 seeds (computed here) its T20 scattered
    # by 0.7-1.1/sqrt(B·T) across these bands. The ensemble average of n = 16 Schroeder curves
    # (ISO 3382-2 allows ensemble averaging) divides that by about sqrt(n); we allow 3 x 1.1/sqrt(B·T·n)
    # (3.8 % at 5 kHz, 27 % at 50 Hz). A decay built at the wrong rate (e.g. exp(-13.8 t/T) in
    # amplitude) would read T/2, far outside.
    reverberation = times_s(T_SLOPED_S)
    n_decays = 16
    edcs = np.zeros((len(BANDS_HZ), int(1.6 * SAMPLE_RATE_HZ)))
    for seed in range(n_decays):
        response = impulse_response_with_decay(reverberation, sample_rate_hz=SAMPLE_RATE_HZ, duration_s=1.6,
                                               seed=seed)
        for i, nominal_hz in enumerate(BANDS_HZ):
            edcs[i] += np.cumsum(butterworth_band(response, nominal_hz)[::-1] ** 2)[::-1]
    for i, (nominal_hz, expected_s) in enumerate(zip(BANDS_HZ, T_SLOPED_S)):
        bandwidth_hz = np.subtract(*iec_edges_hz(nominal_hz)[::-1])
        tolerance = 3 * 1.1 / math.sqrt(bandwidth_hz * expected_s * n_decays)
        assert schroeder_t20_s(edcs[i]) / expected_s - 1 == pytest.approx(0.0, abs=tolerance), nominal_hz


def test_impulse_response_noise_floor_sits_where_asked():
    # Every band starts at the same mean square e0 and has a floor e0·10^(-X/10). Broadband: the
    # last 0.4 s (decays 65 dB or more below e0, so floor only) against the first 5 ms, whose
    # expected mean is e0 · Σ_b (1 - exp(-k w/T_b)) / (k w / T_b), k = ln(10^6) = 13.8155.
    reverberation = times_s(T_SLOPED_S)
    floor_db = 45.0
    window_s = 0.005
    k = math.log(1e6)
    early_expected = sum((1 - math.exp(-k * window_s / t)) / (k * window_s / t) for t in T_SLOPED_S)
    late_expected = len(BANDS_HZ) * 10 ** (-floor_db / 10)
    early = late = 0.0
    for seed in range(12):
        response = impulse_response_with_decay(reverberation, sample_rate_hz=SAMPLE_RATE_HZ, duration_s=2.0,
                                               seed=seed, noise_floor_db=floor_db, onset_s=0.1)
        start = int(0.1 * SAMPLE_RATE_HZ)
        early += np.mean(response[start : start + int(window_s * SAMPLE_RATE_HZ)] ** 2)
        late += np.mean(response[-int(0.4 * SAMPLE_RATE_HZ) :] ** 2)
    # 12 x 5 ms x 5.6 kHz of noise: the early estimate scatters by about 0.2 dB.
    assert 10 * math.log10((early / late) / (early_expected / late_expected)) == pytest.approx(0.0, abs=0.6)


def test_impulse_response_onset_peak_and_seed():
    reverberation = times_s(T_SLOPED_S)
    response = impulse_response_with_decay(reverberation, sample_rate_hz=SAMPLE_RATE_HZ, duration_s=1.0,
                                           seed=5, onset_s=0.05, peak_dbfs=-3.0)
    assert not np.any(response[: int(0.05 * SAMPLE_RATE_HZ)])
    assert 20 * math.log10(np.max(np.abs(response))) == pytest.approx(-3.0, abs=1e-9)
    np.testing.assert_array_equal(
        response, impulse_response_with_decay(reverberation, sample_rate_hz=SAMPLE_RATE_HZ, duration_s=1.0,
                                              seed=5, onset_s=0.05, peak_dbfs=-3.0))
    with pytest.raises(InputError, match="positive time"):
        impulse_response_with_decay(times_s([0.5] * 20 + [0.0]), sample_rate_hz=SAMPLE_RATE_HZ, duration_s=1.0,
                                    seed=1)
    with pytest.raises(InputError, match="onset_s"):
        impulse_response_with_decay(reverberation, sample_rate_hz=SAMPLE_RATE_HZ, duration_s=1.0, seed=1,
                                    onset_s=1.0)


# --- interrupted_noise_with_decay -------------------------------------------------------------

INTERRUPTED_BANDS_HZ = (500.0, 1000.0, 2000.0)


def test_interrupted_noise_steady_level_decay_and_background():
    levels = spectrum_db([70.0, 64.0, 60.0], INTERRUPTED_BANDS_HZ)
    reverberation = times_s([0.9, 0.7, 0.5], INTERRUPTED_BANDS_HZ)
    background = spectrum_db([30.0, 25.0, 20.0], INTERRUPTED_BANDS_HZ, quantity="B")
    steady_s, decay_s = 3.0, 2.0
    n_runs = 8
    energy = np.zeros((3, int((steady_s + decay_s) * SAMPLE_RATE_HZ)))
    for seed in range(n_runs):
        samples = interrupted_noise_with_decay(levels, reverberation, steady_s=steady_s, decay_s=decay_s,
                                               sample_rate_hz=SAMPLE_RATE_HZ, seed=seed, background_db=background,
                                               level_offset_db=100.0)
        steady = samples[: int(steady_s * SAMPLE_RATE_HZ)]
        # Steady part: B·t >= 115 Hz x 3 s, so a band level scatters by 4.34/sqrt(Bt) <= 0.25 dB.
        np.testing.assert_allclose(fft_band_levels_db(steady, INTERRUPTED_BANDS_HZ, offset_db=100.0),
                                   levels.values, atol=1.0)
        # Last 0.5 s: the decays are 84 dB or more below their start: background alone, to 1 dB.
        tail = samples[-int(0.5 * SAMPLE_RATE_HZ) :]
        np.testing.assert_allclose(fft_band_levels_db(tail, INTERRUPTED_BANDS_HZ, offset_db=100.0),
                                   background.values, atol=1.0)
        for i, nominal_hz in enumerate(INTERRUPTED_BANDS_HZ):
            sos = signal.butter(4, iec_edges_hz(nominal_hz), btype="bandpass", fs=SAMPLE_RATE_HZ, output="sos")
            energy[i] += signal.sosfilt(sos, samples) ** 2
    # Ensemble-averaged band energy after switch-off (ISO 3382-2 interrupted noise): fit -5..-25 dB
    # below the steady level, allowing 3 x 1.1/sqrt(B·T·n) as for impulse responses above (n = 8 runs:
    # 11 % at 500 Hz, 7 % at 2 kHz). A factor-2 error in the rate is far outside.
    off = int(steady_s * SAMPLE_RATE_HZ)
    for i, expected_s in enumerate(reverberation.values):
        steady_level = 10 * math.log10(np.mean(energy[i, off - SAMPLE_RATE_HZ : off]))
        level_db = 10 * np.log10(energy[i, off:]) - steady_level
        smooth = np.convolve(level_db, np.ones(480) / 480, mode="same")
        time_s = np.arange(level_db.size) / SAMPLE_RATE_HZ
        fit = (smooth <= -5.0) & (smooth >= -25.0) & (time_s < expected_s)
        measured_s = -60.0 / np.polyfit(time_s[fit], level_db[fit], 1)[0]
        bandwidth_hz = np.subtract(*iec_edges_hz(INTERRUPTED_BANDS_HZ[i])[::-1])
        tolerance = 3 * 1.1 / math.sqrt(bandwidth_hz * expected_s * n_runs)
        assert measured_s / expected_s - 1 == pytest.approx(0.0, abs=tolerance), INTERRUPTED_BANDS_HZ[i]


def test_interrupted_noise_rejects_clipping_and_mismatched_bands():
    with pytest.raises(InputError, match="would clip"):
        interrupted_noise_with_decay(spectrum_db([90.0, 90.0, 90.0], INTERRUPTED_BANDS_HZ),
                                     times_s([0.5, 0.5, 0.5], INTERRUPTED_BANDS_HZ), steady_s=1.0, decay_s=1.0,
                                     sample_rate_hz=SAMPLE_RATE_HZ, seed=1, level_offset_db=90.0)
    with pytest.raises(InputError, match="different bands"):
        interrupted_noise_with_decay(spectrum_db([60.0, 60.0, 60.0], INTERRUPTED_BANDS_HZ),
                                     times_s([0.5, 0.5], INTERRUPTED_BANDS_HZ[:2]), steady_s=1.0, decay_s=1.0,
                                     sample_rate_hz=SAMPLE_RATE_HZ, seed=1, level_offset_db=90.0)


# --- calibrator_tone ---------------------------------------------------------------------------

def test_calibrator_tone_level_frequency_and_fade():
    tone = calibrator_tone(level_dbfs=-31.0, duration_s=5.0, sample_rate_hz=SAMPLE_RATE_HZ, seed=2)
    steady = tone[SAMPLE_RATE_HZ:]
    # Mean square of a sine of RMS r over whole periods is r^2; the -60 dB noise adds 0.000004 dB.
    assert 10 * math.log10(np.mean(steady**2)) == pytest.approx(-31.0, abs=0.005)
    spectrum = np.abs(np.fft.rfft(steady))
    assert np.fft.rfftfreq(steady.size, 1 / SAMPLE_RATE_HZ)[np.argmax(spectrum)] == pytest.approx(1000.0, abs=0.5)
    # Linear 0.3 s fade-in: over the first 10 ms the envelope stays below 10/300 of the sine's peak.
    assert np.max(np.abs(tone[:480])) < (10 / 300 + 0.001) * math.sqrt(2) * 10 ** (-31.0 / 20)
    np.testing.assert_array_equal(tone, calibrator_tone(level_dbfs=-31.0, duration_s=5.0,
                                                        sample_rate_hz=SAMPLE_RATE_HZ, seed=2))
    # The project's calibration reads it as a 94 dB calibrator with offset 94 - (-31) = 125 dB.
    calibration = calibration_from_tone(tone, sample_rate_hz=SAMPLE_RATE_HZ, source_name="tone", reference_db=94.0)
    assert calibration.offset_db == pytest.approx(125.0, abs=0.02)
    with pytest.raises(InputError, match="would clip"):
        calibrator_tone(level_dbfs=-2.0, duration_s=1.0, sample_rate_hz=SAMPLE_RATE_HZ, seed=2)


# --- the committed demo (sample_audio/, INVENTED data written by sample_audio/make_demo.py) ------

DEMO_DIR = Path(__file__).resolve().parents[1] / "sample_audio"


@pytest.fixture(scope="module")
def demo_expected():
    return json.loads((DEMO_DIR / "expected.json").read_text(encoding="utf-8"))


def test_demo_files_read_back_at_their_intended_band_levels(demo_expected):
    # Every steady take through fieldtl's ingest, then plain FFT integration between the IEC edges:
    # within 0.3 dB of the level it was built for (calibration: full-scale RMS = 125 dB) at 100-3150 Hz.
    survey = load_survey(DEMO_DIR / "survey.toml")
    offset_db = demo_expected["calibration"]["recordings_made_with_offset_db"]
    takes = demo_expected["as_recorded"]["takes_band_level_db"]
    required = [i for i, f in enumerate(BANDS_HZ) if 100.0 <= f <= 3150.0]
    receiving = {1: [], 2: []}
    for spec in survey.takes:
        recording = open_recording(spec.file)
        assert (recording.sample_rate_hz, recording.channels, recording.format, recording.subtype) == (
            48_000, 1, "FLAC", "PCM_16")
        if spec.role == "decay":
            continue
        levels_db = fft_band_levels_db(read_samples(recording), offset_db=offset_db)
        np.testing.assert_allclose(levels_db[required], np.array(takes[recording.name])[required], atol=0.3)
        if spec.role == "receiving":
            receiving[spec.speaker].append(levels_db)
    # The energy mean over the five microphones is the intended L2 plus background (all bands).
    for levels in receiving.values():
        mean_db = 10 * np.log10(np.mean(10 ** (np.array(levels) / 10), axis=0))
        np.testing.assert_allclose(mean_db, demo_expected["as_recorded"]["receiving_level_db"], atol=0.3)


def test_demo_truth_obeys_the_standard_identities(demo_expected):
    true = demo_expected["true"]
    geometry = demo_expected["geometry"]
    r_prime = np.array(true["apparent_sound_reduction_index_db"])
    # DnT = R' + 10 lg(0.32 V / S) and Dn = R' + 10 lg(10 / S) (derived from the ISO 16283-1 formulas with A = 0.16 V/T).
    np.testing.assert_allclose(true["standardized_level_difference_db"], r_prime + 10 * np.log10(
        0.32 * geometry["receiving_volume_m3"] / geometry["separating_area_m2"]), atol=0.011)
    np.testing.assert_allclose(true["normalized_level_difference_db"],
                               r_prime + 10 * np.log10(10 / geometry["separating_area_m2"]), atol=0.011)
    source_db = np.array(true["source_level_db"])
    # Source-room spectrum: adjacent one-third octaves differ by at most 8 dB (ISO 16283-1 source-room spectrum).
    assert np.max(np.abs(np.diff(source_db))) <= 8.0
    # ISO 16283-1 background rule: margin <= 6 dB limited, 6-10 dB corrected.
    margins = np.array(demo_expected["as_recorded"]["background_margin_db"])
    assert demo_expected["by_background_rule"]["limited"] == [bool(m <= 6.0) for m in margins]
    assert "corrected" in demo_expected["as_recorded"]["background_action"]


def test_demo_calibration_tones_give_the_invented_offsets(demo_expected):
    # 94 dB tone at -31.0 dB re full scale before, -31.1 after: offsets 125.0 and 125.1 dB.
    calibration = demo_expected["calibration"]
    for name, expected_db in (("cal_before.flac", calibration["offset_before_db"]),
                              ("cal_after.flac", calibration["offset_after_db"])):
        recording = open_recording(DEMO_DIR / name)
        found = calibration_from_tone(read_samples(recording), sample_rate_hz=recording.sample_rate_hz,
                                      source_name=name, reference_db=calibration["calibrator_db"])
        assert found.offset_db == pytest.approx(expected_db, abs=0.02)


def test_demo_script_reproduces_the_committed_files(tmp_path, demo_expected):
    # Fixed seeds: regenerating gives the committed truth and samples (to one 16-bit step, so a
    # different FFT library's last-bit rounding cannot fail it). If this fails after a numpy or
    # scipy upgrade changed random streams, rerun sample_audio/make_demo.py and commit.
    spec = importlib.util.spec_from_file_location("make_demo", DEMO_DIR / "make_demo.py")
    make_demo = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(make_demo)
    with contextlib.redirect_stdout(io.StringIO()):
        make_demo.main(tmp_path)
    regenerated = json.loads((tmp_path / "expected.json").read_text(encoding="utf-8"))
    assert regenerated.keys() == demo_expected.keys()
    assert regenerated["true"] == demo_expected["true"]
    survey_text = (DEMO_DIR / "survey.toml").read_text(encoding="utf-8")
    assert (tmp_path / "survey.toml").read_text(encoding="utf-8") == survey_text
    for name in ("rec_s1_p1.flac", "bg_p2.flac", "ir_s2_p3.flac", "cal_after.flac"):
        fresh = read_samples(open_recording(tmp_path / name))
        committed = read_samples(open_recording(DEMO_DIR / name))
        assert np.max(np.abs(fresh - committed)) <= 2.0**-15, name
