"""Band Leq, weighted levels and histories from streamed blocks, against analytic truths."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from fieldtl.analysis import levels
from fieldtl.analysis.filterbank import highest_band_hz
from fieldtl.analysis.levels import analyse_levels
from fieldtl.bands import band_edges_hz, exact_centre_hz, nominal_bands_hz, thirds_of_octave
from fieldtl.errors import InputError
from fieldtl.units import energetic_sum_db

RATE_HZ = 48_000.0
G = 10 ** 0.3


def tone(frequency_hz: float, amplitude: float, duration_s: float, *, sample_rate_hz: float = RATE_HZ,
         phase: float = 0.0) -> np.ndarray:
    time_s = np.arange(round(duration_s * sample_rate_hz)) / sample_rate_hz
    return amplitude * np.sin(2 * np.pi * frequency_hz * time_s + phase)


def sine_level_db(amplitude: float) -> float:
    return 20 * math.log10(amplitude / math.sqrt(2))   # analytic mean square of a sine: a²/2


@pytest.mark.parametrize("fraction", [3, 1])
@pytest.mark.parametrize("sample_rate_hz", [44_100.0, 48_000.0, 96_000.0])
def test_sine_at_each_band_centre_reads_its_rms_level(sample_rate_hz, fraction):
    # analytic: amplitude a at the exact mid-band frequency reads 20 lg(a/√2) (IEC 61260-1 bands
    # are 0 dB at fm). Tones sit in every third one-third octave (every second octave) at once;
    # the neighbours are then an octave away and 48 dB down, which adds less than 0.001 dB.
    low_hz = 20.0 if fraction == 3 else 31.5
    high_hz = highest_band_hz(sample_rate_hz=sample_rate_hz, fraction=fraction)
    bands_hz = nominal_bands_hz(low_hz, high_hz, fraction=fraction)
    step = 3 if fraction == 3 else 2
    amplitude = 0.05
    for offset in range(step):
        tones_hz = bands_hz[offset::step]
        samples = sum(tone(exact_centre_hz(f, fraction=fraction), amplitude, 3.0, sample_rate_hz=sample_rate_hz,
                           phase=k) for k, f in enumerate(tones_hz))
        result = analyse_levels([samples], sample_rate_hz=sample_rate_hz, fraction=fraction,
                                band_range_hz=(low_hz, high_hz))
        for f in tones_hz:
            assert result.band_leq.at(f) == pytest.approx(sine_level_db(amplitude), abs=0.05), f


def test_full_scale_sine_reads_minus_3_01_db_and_the_offset_adds():
    # dB re full scale: a full-scale sine is 20 lg(1/√2) = -3.0103 dB in its band and (A and C are
    # 0 dB at 1 kHz, IEC 61672-1) in LAeq and LCeq; a calibration offset adds to every level
    samples = tone(1000.0, 1.0, 2.0)
    plain = analyse_levels([samples], sample_rate_hz=RATE_HZ)
    assert plain.band_leq.at(1000.0) == pytest.approx(-3.0103, abs=0.01)
    assert plain.laeq_db == pytest.approx(-3.0103, abs=0.01)
    assert plain.lceq_db == pytest.approx(-3.0103, abs=0.01)
    offset = analyse_levels([samples], sample_rate_hz=RATE_HZ, level_offset_db=93.98)
    assert offset.band_leq.as_array() - plain.band_leq.as_array() == pytest.approx(np.full(21, 93.98), abs=1e-9)
    for name in ("laeq_db", "lceq_db", "lafmax_db", "lasmax_db"):
        assert getattr(offset, name) - getattr(plain, name) == pytest.approx(93.98, abs=1e-9)


@pytest.mark.parametrize(("frequency_hz", "a_db", "c_db"), [(100.0, -19.1, -0.3), (10 ** 3.9, -1.1, -3.0)])
def test_laeq_and_lceq_of_a_sine_follow_the_weighting_table(frequency_hz, a_db, c_db):
    # IEC 61672-1:2013 weighting table (checked against python-acoustics iec_61672_1_2013.csv) at
    # 100 Hz and 8 kHz (exact 7943 Hz): 0.05 dB table rounding plus 0.01 dB digital filter
    result = analyse_levels([tone(frequency_hz, 0.1, 2.0)], sample_rate_hz=RATE_HZ)
    assert result.laeq_db == pytest.approx(sine_level_db(0.1) + a_db, abs=0.06)
    assert result.lceq_db == pytest.approx(sine_level_db(0.1) + c_db, abs=0.06)


def random_error_db(bandwidth_hz: float, averaging_s: float) -> float:
    # standard deviation of a mean-square estimate of Gaussian noise in dB: 4.34 / √(B T)
    # (normalised random error 1/√(B T); Bendat & Piersol, Random Data, from memory)
    return 10 / math.log(10) / math.sqrt(bandwidth_hz * averaging_s)


def butterworth_excess_db(order: int = 3) -> float:
    # analytic noise bandwidth of an analog order-N Butterworth band-pass: B (π/2N) / sin(π/2N)
    return 10 * math.log10((math.pi / (2 * order)) / math.sin(math.pi / (2 * order)))


def test_white_noise_band_levels_match_analytic_band_power():
    # White noise of variance σ² has one-sided density 2σ²/fs, so an ideal band holds 2σ²B/fs and
    # the Butterworth band 10 lg((π/6)/sin(π/6)) = 0.20 dB more. Tolerance: 3.5 standard deviations
    # of the random error, plus 0.03 dB because bilinear warping trims the digital noise bandwidth
    # by up to 0.02 dB (computed).
    sigma = 0.1
    samples = sigma * np.random.default_rng(21).standard_normal(int(60 * RATE_HZ))
    result = analyse_levels([samples], sample_rate_hz=RATE_HZ)
    for nominal_hz, level_db, averaging_s in zip(result.band_leq.nominal_hz, result.band_leq.values,
                                                 result.band_averaging_s):
        low_hz, high_hz = band_edges_hz(nominal_hz)
        expected_db = 10 * math.log10(2 * sigma**2 * (high_hz - low_hz) / RATE_HZ) + butterworth_excess_db()
        tolerance_db = 3.5 * random_error_db(high_hz - low_hz, averaging_s) + 0.03
        assert level_db == pytest.approx(expected_db, abs=tolerance_db), nominal_hz


PINK_DENSITY = 1e-3   # one-sided power density c/f of the pink noise below, in full-scale² per Hz·Hz


@pytest.fixture(scope="module")
def pink_noise() -> np.ndarray:
    """60 s of Gaussian noise with expected one-sided density PINK_DENSITY / f, built in the
    frequency domain: E|X_k|² = c n fs / (2 f_k) gives c Δf / f_k of mean square per bin."""
    samples = int(60 * RATE_HZ)
    rng = np.random.default_rng(22)
    spectrum = rng.standard_normal(samples // 2 + 1) + 1j * rng.standard_normal(samples // 2 + 1)
    frequency_hz = np.fft.rfftfreq(samples, 1 / RATE_HZ)
    spectrum[1:] *= np.sqrt(PINK_DENSITY * samples * RATE_HZ / (4 * frequency_hz[1:]))
    spectrum[0] = spectrum[-1] = 0.0
    return np.fft.irfft(spectrum, samples)


def analog_band_power(nominal_hz: float, fraction: int) -> float:
    # expected mean square of the pink noise through the analog Butterworth band-pass
    # |H|² = 1 / (1 + u⁶), u = (f/fm - fm/f) / (B/fm) (the prototype the digital bands are made from)
    centre_hz = exact_centre_hz(nominal_hz, fraction=fraction)
    low_hz, high_hz = band_edges_hz(nominal_hz, fraction=fraction)
    relative_bandwidth = (high_hz - low_hz) / centre_hz

    def density(f: float) -> float:
        u = (f / centre_hz - centre_hz / f) / relative_bandwidth
        return PINK_DENSITY / f / (1 + u**6)

    power, _ = integrate.quad(density, centre_hz / 30, centre_hz * 30, points=[low_hz, centre_hz, high_hz], limit=200)
    return power


@pytest.fixture(scope="module")
def pink_thirds(pink_noise):
    return analyse_levels([pink_noise], sample_rate_hz=RATE_HZ, fraction=3)


@pytest.fixture(scope="module")
def pink_octaves(pink_noise):
    return analyse_levels([pink_noise], sample_rate_hz=RATE_HZ, fraction=1)


@pytest.fixture(scope="module")
def pink_spectral(pink_noise):
    return {fraction: analyse_levels([pink_noise], sample_rate_hz=RATE_HZ, fraction=fraction, band_route="spectral")
            for fraction in (3, 1)}


@pytest.mark.parametrize("route", ["filtered", "spectral"])
@pytest.mark.parametrize(("fraction", "warping_db"), [(3, 0.03), (1, 0.06)])
def test_pink_noise_band_levels_match_analytic_band_power(fraction, warping_db, route, pink_thirds, pink_octaves,
                                                          pink_spectral):
    # Ideal bands would each hold c ln(f2/f1), the same in every band; the analog Butterworth shape
    # adds 0.20 dB (thirds) or 0.17 dB (octaves), integrated here. Tolerance: 3.5 standard
    # deviations of the random error plus the digital noise-bandwidth trim from bilinear warping
    # (up to 0.02 dB for thirds, 0.05 dB for octaves, computed). The spectral route averages the
    # whole recording (band_averaging_s), its ends tapered: the same random-error bound holds.
    result = pink_spectral[fraction] if route == "spectral" else pink_thirds if fraction == 3 else pink_octaves
    for nominal_hz, level_db, averaging_s in zip(result.band_leq.nominal_hz, result.band_leq.values,
                                                 result.band_averaging_s):
        low_hz, high_hz = band_edges_hz(nominal_hz, fraction=fraction)
        ideal_db = 10 * math.log10(PINK_DENSITY * math.log(high_hz / low_hz))
        expected_db = 10 * math.log10(analog_band_power(nominal_hz, fraction))
        assert 0.15 < expected_db - ideal_db < 0.21
        tolerance_db = 3.5 * random_error_db(high_hz - low_hz, averaging_s) + warping_db
        assert level_db == pytest.approx(expected_db, abs=tolerance_db), nominal_hz


def test_octave_is_the_energy_sum_of_its_thirds_for_pink_noise(pink_thirds, pink_octaves):
    # L_oct = 10 lg Σ 10^(L_i/10) over its three thirds (energy sum, analytic) holds exactly for ideal
    # filters. Tolerance 0.15 dB: the Butterworth octave and thirds have slightly different noise
    # bandwidths for pink noise (0.17 vs 0.20 dB analog excess, warping trims the octave more, so the
    # octave reads about 0.06 dB low, computed) and see the noise where their shapes differ at random.
    for octave_hz, level_db in zip(pink_octaves.band_leq.nominal_hz, pink_octaves.band_leq.values):
        thirds_db = [pink_thirds.band_leq.at(f) for f in thirds_of_octave(octave_hz)]
        assert level_db == pytest.approx(float(energetic_sum_db(thirds_db)), abs=0.15), octave_hz


def all_levels_db(result) -> np.ndarray:
    history = result.history
    return np.concatenate([result.band_leq.as_array(), [result.laeq_db, result.lceq_db, result.lafmax_db,
                                                        result.lasmax_db], history.band_leq_db.ravel(),
                           history.laeq_db, history.lceq_db, history.lafmax_db, history.lasmax_db])


def test_levels_do_not_depend_on_block_size(monkeypatch):
    # one block against many blocks of random sizes, with the internal chunk made small and odd so
    # the filter, decimation and time-weighting states really cross chunk boundaries
    rng = np.random.default_rng(23)
    samples = 0.1 * rng.standard_normal(int(6.3 * RATE_HZ)) + tone(440.0, 0.3, 6.3) * (np.arange(int(6.3 * RATE_HZ)) > 3 * RATE_HZ)
    whole = analyse_levels([samples], sample_rate_hz=RATE_HZ)
    monkeypatch.setattr(levels, "CHUNK_FRAMES", 4099)
    cuts = np.cumsum(rng.integers(1, 9000, size=200))
    blocks = np.split(samples, cuts[cuts < samples.size])
    pieces = analyse_levels(blocks, sample_rate_hz=RATE_HZ)
    np.testing.assert_allclose(all_levels_db(pieces), all_levels_db(whole), rtol=0, atol=1e-9)
    assert whole.history.laeq_db.size == 7   # 6.3 s in 1 s intervals, the last one partial


def test_fast_and_slow_maxima_of_tone_bursts():
    # analytic: exponential averaging of a mean square switched on for d seconds peaks at
    # 1 - exp(-d/τ) of the steady value, i.e. 10 lg(1 - e^(-d/τ)) dB: -0.98 dB for a 0.2 s burst
    # with F (τ = 0.125 s), -4.06 dB for 0.5 s with S (τ = 1 s). Tolerance 0.05 dB for the sine's
    # ripple and the A filter's own response to the switching.
    def burst(duration_s: float) -> np.ndarray:
        return np.concatenate([np.zeros(int(RATE_HZ)), tone(1000.0, 0.2, duration_s), np.zeros(int(2 * RATE_HZ))])

    steady_db = sine_level_db(0.2)
    fast = analyse_levels([burst(0.2)], sample_rate_hz=RATE_HZ)
    assert fast.lafmax_db == pytest.approx(steady_db + 10 * math.log10(1 - math.exp(-0.2 / 0.125)), abs=0.05)
    slow = analyse_levels([burst(0.5)], sample_rate_hz=RATE_HZ)
    assert slow.lasmax_db == pytest.approx(steady_db + 10 * math.log10(1 - math.exp(-0.5 / 1.0)), abs=0.05)
    steady = analyse_levels([tone(1000.0, 0.2, 8.0)], sample_rate_hz=RATE_HZ)
    assert steady.lasmax_db == pytest.approx(steady_db, abs=0.01)
    assert steady.lafmax_db == pytest.approx(steady_db, abs=0.01)


def test_history_follows_a_level_step_second_by_second():
    # a 1 kHz sine doubles its amplitude (+6.02 dB) at exactly 2 s, 4.5 s long: 1 s rows start at
    # 0, 1, 2, 3, 4 s (the last covers half a second); a row's level is the mean square within it
    frequency_hz = 1000.0
    samples = tone(frequency_hz, 0.1, 4.5)
    samples[int(2 * RATE_HZ):] *= 2
    result = analyse_levels([samples], sample_rate_hz=RATE_HZ)
    history = result.history
    assert history.start_s == pytest.approx([0, 1, 2, 3, 4])
    expected_db = [sine_level_db(0.1)] * 2 + [sine_level_db(0.2)] * 3
    assert history.laeq_db == pytest.approx(expected_db, abs=0.02)
    # the band's group delay (about 6 ms at 1 kHz, through guard and anti-alias filters) holds back
    # 0.75 x 6 ms of the step's extra energy from the 2-3 s row: -0.02 dB there
    assert history.band_leq_db[:, result.band_leq.nominal_hz.index(1000.0)] == pytest.approx(expected_db, abs=0.03)
    # energy bookkeeping: rows weighted by their averaging time give the overall LAeq
    # (row 0 loses the 0.1 s weighting start-up, the last row is 0.5 s)
    seconds = np.array([1 - levels.WEIGHTING_SETTLE_S, 1, 1, 1, 0.5])
    overall_db = 10 * math.log10(np.sum(seconds * 10 ** (history.laeq_db / 10)) / seconds.sum())
    assert result.laeq_db == pytest.approx(overall_db, abs=1e-9)
    assert result.duration_s == pytest.approx(4.5)


def test_too_short_recording_is_refused_in_one_line_naming_the_file():
    # the 50 Hz band needs its 5/B start-up plus 1/B of averaging: 6 / 11.566 Hz = 0.519 s
    with pytest.raises(InputError) as raised:
        analyse_levels([np.zeros(int(0.3 * RATE_HZ))], sample_rate_hz=RATE_HZ, source_name="take1.wav")
    message = str(raised.value)
    assert message.startswith("take1.wav: 0.300 s is too short; at least 0.519 s is needed (the 50 Hz")
    assert "\n" not in message
    with pytest.raises(InputError, match="take1.wav"):
        analyse_levels([], sample_rate_hz=RATE_HZ, source_name="take1.wav")
    # from 1 kHz up the bands settle within 0.03 s; the weighted levels' 0.1 s + 0.125 s then rule
    with pytest.raises(InputError, match=r"at least 0\.225 s is needed \(the A and C weighting"):
        analyse_levels([np.zeros(4800)], sample_rate_hz=RATE_HZ, band_range_hz=(1000.0, 5000.0))


def test_known_too_short_length_is_refused_before_reading():
    def blocks():
        raise AssertionError("read although the length was known to be too short")
        yield np.zeros(1)  # pragma: no cover

    with pytest.raises(InputError, match=r"^b\.wav: 0\.100 s is too short"):
        analyse_levels(blocks(), sample_rate_hz=RATE_HZ, total_frames=4800, source_name="b.wav")


def test_bad_blocks_and_samples_are_refused_naming_the_file():
    good = np.zeros(70_000)
    with pytest.raises(InputError, match=r"^c\.wav: block 1 has shape \(2, 3\); expected 1-D samples$"):
        analyse_levels([good, np.zeros((2, 3))], sample_rate_hz=RATE_HZ, source_name="c.wav")
    bad = np.zeros(10)
    bad[4] = np.nan
    with pytest.raises(InputError, match=r"^c\.wav: non-finite sample \(nan or inf\) at frame 70004$"):
        analyse_levels([good, bad], sample_rate_hz=RATE_HZ, source_name="c.wav")


def test_band_the_rate_cannot_hold_is_refused_naming_the_file():
    with pytest.raises(InputError, match=r"^d\.wav: 10000 Hz band needs a sample rate of at least"):
        analyse_levels([np.zeros(64_000)], sample_rate_hz=24_000.0, band_range_hz=(50.0, 10_000.0),
                       source_name="d.wav")


def test_progress_reports_fractions_up_to_one():
    samples = np.zeros(int(60 * RATE_HZ))      # several internal chunks (levels.CHUNK_FRAMES)
    seen: list[float] = []
    analyse_levels(np.split(samples, 60), sample_rate_hz=RATE_HZ, total_frames=samples.size, progress=seen.append)
    assert seen == sorted(seen) and seen[-1] == 1.0 and len(seen) > 2 and 0 < seen[0] < 1
    unknown: list[float] = []
    analyse_levels([samples], sample_rate_hz=RATE_HZ, progress=unknown.append)
    assert unknown == [1.0]


def test_silence_gives_no_band_value_rather_than_a_number():
    # digital silence has no finite level: the bands are None (BandSpectrum's "no valid value")
    result = analyse_levels([np.zeros(int(RATE_HZ))], sample_rate_hz=RATE_HZ)
    assert set(result.band_leq.values) == {None}
    assert result.laeq_db == -math.inf


def test_stationary_levels_read_a_tone_step_and_band_levels_of_a_sine():
    # analytic: a 1 kHz sine of amplitude 0.1 doubling at 3 s, 6.5 s long. 1 s rows of LAeq
    # (A is 0 dB at 1 kHz, IEC 61672-1) read 20 lg(a/√2) before the step and +6.02 dB after.
    samples = tone(1000.0, 0.1, 6.5)
    samples[int(3 * RATE_HZ):] *= 2
    result = levels.stationary_levels([samples[:100_000], samples[100_000:]], sample_rate_hz=RATE_HZ,
                                      level_offset_db=94.0, band_range_hz=(50.0, 5000.0))
    expected_db = np.array([sine_level_db(0.1)] * 3 + [sine_level_db(0.2)] * 4) + 94.0
    assert result.laeq_history_db == pytest.approx(expected_db, abs=0.02)
    seconds = np.array([1 - levels.WEIGHTING_SETTLE_S, 1, 1, 1, 1, 1, 0.5])
    overall_db = 10 * math.log10(np.sum(seconds * 10 ** (result.laeq_history_db / 10)) / seconds.sum())
    assert result.laeq_db == pytest.approx(overall_db, abs=1e-9)
    assert result.duration_s == pytest.approx(6.5)
    with pytest.raises(ValueError):
        result.laeq_history_db[0] = 0.0                      # read-only
    # the same values as the spectral route of the full analysis, which also filters C and F/S
    full = analyse_levels([samples], sample_rate_hz=RATE_HZ, level_offset_db=94.0, band_range_hz=(50.0, 5000.0),
                          band_route="spectral")
    assert result.band_leq.values == pytest.approx(full.band_leq.values, abs=1e-9)
    assert result.laeq_history_db == pytest.approx(full.history.laeq_db, abs=1e-9)
    # a steady sine (the route is for stationary takes) reads 20 lg(a/√2) in its band (0 dB at fm,
    # IEC 61260-1) and nothing near it an octave away
    steady = levels.stationary_levels([tone(exact_centre_hz(1000.0), 0.1, 6.5)], sample_rate_hz=RATE_HZ,
                                      band_range_hz=(50.0, 5000.0))
    assert steady.band_leq.at(1000.0) == pytest.approx(sine_level_db(0.1), abs=0.02)
    assert steady.band_leq.at(500.0) < sine_level_db(0.1) - 40


def test_stationary_levels_refuse_what_the_full_analysis_refuses():
    with pytest.raises(InputError, match=r"^short\.wav: .* too short"):
        levels.stationary_levels([tone(1000.0, 0.1, 0.3)], sample_rate_hz=RATE_HZ, source_name="short.wav")
    with pytest.raises(InputError, match=r"^nan\.wav: non-finite sample"):
        levels.stationary_levels([np.full(48_000, np.nan)], sample_rate_hz=RATE_HZ, source_name="nan.wav")


@pytest.mark.parametrize("duration_s", [6.0, 6.5])
def test_inner_history_reads_the_inner_seconds_of_the_whole_signal_filtered_from_rest(duration_s):
    # reference computed here the straightforward way: the whole recording through the A filter
    # (scipy.signal.sosfilt from rest), mean square per 1 s interval; the inner history holds
    # intervals 1 .. last-1 of it, although its filter only starts 0.1 s before interval 1
    from scipy import signal

    from fieldtl.analysis.weighting import weighting_sos

    rng = np.random.default_rng(3)
    samples = rng.normal(0.0, 0.1, round(duration_s * RATE_HZ)) * np.repeat(rng.uniform(0.5, 2.0, 7), RATE_HZ)[
        : round(duration_s * RATE_HZ)]                                  # a different level every second
    weighted = signal.sosfilt(weighting_sos("A", sample_rate_hz=RATE_HZ).copy(), samples)
    seconds = math.ceil(duration_s)
    expected_db = [10 * math.log10(np.mean(np.square(weighted[k * 48_000:(k + 1) * 48_000]))) + 94.0
                   for k in range(1, seconds - 1)]
    blocks = [samples[i:i + 65_536] for i in range(0, samples.size, 65_536)]
    inner = levels.stationary_levels(blocks, sample_rate_hz=RATE_HZ, level_offset_db=94.0, band_range_hz=(50.0, 5000.0),
                                     total_frames=samples.size, inner_history=True)
    assert inner.history_first_interval == 1 and inner.laeq_history_db.size == seconds - 2
    assert inner.laeq_history_db == pytest.approx(expected_db, abs=1e-6)
    assert inner.laeq_db == pytest.approx(energetic_mean(expected_db), abs=1e-6)
    full = levels.stationary_levels(blocks, sample_rate_hz=RATE_HZ, level_offset_db=94.0, band_range_hz=(50.0, 5000.0),
                                    total_frames=samples.size)
    assert full.history_first_interval == 0
    assert inner.laeq_history_db == pytest.approx(full.laeq_history_db[1:-1], abs=1e-6)
    assert inner.band_leq.values == full.band_leq.values                 # the bands do not change


def energetic_mean(levels_db: list[float]) -> float:
    return 10 * math.log10(np.mean(10 ** (np.asarray(levels_db) / 10)))


def test_inner_history_of_a_take_too_short_for_one_inner_second_is_empty_and_needs_the_length():
    samples = tone(1000.0, 0.1, 1.9)                  # intervals 0 and 1 (partial): nothing inner
    short = levels.stationary_levels([samples], sample_rate_hz=RATE_HZ, band_range_hz=(50.0, 5000.0),
                                     total_frames=samples.size, inner_history=True)
    assert short.laeq_history_db.size == 0
    longer = tone(1000.0, 0.1, 2.01)                  # 10 ms into a third interval: interval 1 is inner
    one = levels.stationary_levels([longer], sample_rate_hz=RATE_HZ, band_range_hz=(50.0, 5000.0),
                                   total_frames=longer.size, inner_history=True)
    assert one.laeq_history_db == pytest.approx([sine_level_db(0.1)], abs=0.02)   # A is 0 dB at 1 kHz
    with pytest.raises(ValueError, match="total_frames"):
        levels.stationary_levels([samples], sample_rate_hz=RATE_HZ, inner_history=True)
