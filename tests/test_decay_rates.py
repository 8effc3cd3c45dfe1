"""Decay bands filtered at lowered rates give what full-rate filtering gives.

The expected values are computed here independently: the noise-free modal impulse response of
tests/test_decay.py filtered time-reversed at the full 48 kHz by the same Butterworth band-pass
(ISO 3382-2 time-reversed filtering, from memory), integrated backwards (Schroeder) and fitted over
-5 to -25 dB (T20) and -5 to -35 dB (T30) (ISO 3382-2), with no decimation at all.
"""

import numpy as np
import pytest
from scipy import signal
from test_decay import FS, modal_impulse_response

from fieldtl.analysis.decay import decay_band_sets, reverberation_from_impulse_response
from fieldtl.analysis.edc import fit_decay_line, schroeder_decay_db
from fieldtl.analysis.filterbank import DECAY_EDGE_FRACTION, DECAY_MIN_RATE_HZ, band_sos, decay_stage
from fieldtl.bands import band_edges_hz


@pytest.mark.parametrize("nominal_hz", [63.0, 125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0])
def test_t20_and_t30_of_lowered_rates_match_full_rate_filtering(nominal_hz):
    response = modal_impulse_response(0.7, odd_bands=nominal_hz in (63.0, 250.0, 1000.0, 4000.0), length_s=3.0)
    start = round(0.01 * FS)                    # the modes start after 10 ms of silence
    full_rate = signal.sosfilt(band_sos(nominal_hz, sample_rate_hz=FS), response[start:][::-1])[::-1]
    level_db = schroeder_decay_db(full_rate ** 2)
    time_s = np.arange(level_db.size) / FS
    band = reverberation_from_impulse_response(response, sample_rate_hz=FS, nominal_hz=[nominal_hz],
                                               noise_handling="none").bands[0]
    for measured, (top_db, bottom_db) in ((band.t20_s, (-5.0, -25.0)), (band.t30_s, (-5.0, -35.0))):
        expected = fit_decay_line(time_s, level_db, top_db=top_db, bottom_db=bottom_db).reverberation_time_s
        assert measured == pytest.approx(expected, rel=0.002), nominal_hz


@pytest.mark.parametrize(("nominal_hz", "sample_rate_hz", "stage"), [
    (50.0, 48_000.0, 3), (630.0, 48_000.0, 3), (800.0, 48_000.0, 2), (1250.0, 48_000.0, 2), (1600.0, 48_000.0, 1),
    (2500.0, 48_000.0, 1), (3150.0, 48_000.0, 0), (5000.0, 48_000.0, 0), (500.0, 44_100.0, 3), (630.0, 44_100.0, 2),
    (50.0, 96_000.0, 4)])
def test_each_band_runs_at_the_lowest_rate_its_edge_and_the_curve_step_allow(nominal_hz, sample_rate_hz, stage):
    # IEC 61260-1 upper band edges: 630 Hz -> 707.9 Hz fits 0.12 x 6 kHz = 720 Hz (stage 3), 800 Hz ->
    # 891 Hz does not (stage 2); at 44.1 kHz the 630 Hz edge misses 0.12 x 5512.5 Hz = 661.5 Hz
    assert decay_stage(nominal_hz, fraction=3, sample_rate_hz=sample_rate_hz) == stage
    high_hz = band_edges_hz(nominal_hz)[1]
    rate_hz = sample_rate_hz / 2**stage
    assert high_hz <= DECAY_EDGE_FRACTION * rate_hz or stage == 0
    assert rate_hz >= DECAY_MIN_RATE_HZ
    assert high_hz > DECAY_EDGE_FRACTION * rate_hz / 2 or rate_hz / 2 < DECAY_MIN_RATE_HZ   # one more halving fails


def test_what_lies_above_the_lowered_rate_does_not_fold_into_a_band():
    # A 125 Hz mode (T = 0.7 s) and, 20 dB stronger, a mode at 6125 Hz (T = 0.2 s), which sampling at
    # 6 kHz would fold exactly onto 125 Hz: full-rate filtering keeps the 6125 Hz mode out (the 6th
    # order band-pass is far down there), so the 125 Hz band must read T20 = 0.7 s (analytic, 60 dB in T)
    time_s = np.arange(round(2.0 * FS)) / FS
    response = (np.exp(-3 * np.log(10) * time_s / 0.7) * np.cos(2 * np.pi * 125.0 * time_s)
                + 10 * np.exp(-3 * np.log(10) * time_s / 0.2) * np.cos(2 * np.pi * 6125.0 * time_s))
    band = reverberation_from_impulse_response(response, sample_rate_hz=FS, nominal_hz=[125.0],
                                               noise_handling="none").bands[0]
    assert decay_stage(125.0, fraction=3, sample_rate_hz=FS) == 3
    assert band.t20_s == pytest.approx(0.7, rel=0.01)


def test_band_sets_prepared_once_give_what_each_analysis_gives_alone():
    # the same response, thirds and an octave together or one set at a time: identical results
    response = modal_impulse_response(0.6, odd_bands=False, length_s=2.0, noise_below_db=50.0)
    thirds, octave = decay_band_sets(response, sample_rate_hz=FS, band_sets=(([100.0, 1000.0, 4000.0], 3),
                                                                              ([63.0], 1)))
    alone = [reverberation_from_impulse_response(response, sample_rate_hz=FS, nominal_hz=bands, fraction=fraction)
             for bands, fraction in (([100.0, 1000.0, 4000.0], 3), ([63.0], 1))]
    for together, single in zip((thirds, octave), alone):
        assert together.nominal_hz == single.nominal_hz
        for name in ("T20", "T30", "EDT"):
            assert together.spectrum(name).values == single.spectrum(name).values
        assert together.all_findings() == single.all_findings()


@pytest.mark.parametrize("sample_rate_hz", [44_100.0, 48_000.0, 96_000.0])
def test_every_decay_band_filter_meets_iec_61260_1_class_1_at_its_rate(sample_rate_hz):
    # IEC 61260-1:2014 class 1 relative attenuation (the limits of tests/test_filterbank.py) for each
    # 50-5000 Hz band filter at the rate it runs at, with the anti-alias low-passes before it; aliases
    # of the decimations are left to the fold test above
    from test_filterbank import mask_limits_db, mask_x

    from fieldtl.analysis.filterbank import anti_alias_sos
    from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, exact_centre_hz

    for nominal_hz in THIRD_OCTAVES_50_5000_HZ:
        stage = decay_stage(nominal_hz, fraction=3, sample_rate_hz=sample_rate_hz)
        rate_hz = sample_rate_hz / 2**stage
        frequency_hz = np.geomspace(1.0, 0.4999 * rate_hz, 5_000)
        magnitude = np.abs(signal.sosfreqz(band_sos(nominal_hz, sample_rate_hz=rate_hz), worN=frequency_hz,
                                           fs=rate_hz)[1])
        for k in range(stage):
            magnitude *= np.abs(signal.sosfreqz(anti_alias_sos(), worN=frequency_hz, fs=sample_rate_hz / 2**k)[1])
        attenuation_db = -20 * np.log10(np.maximum(magnitude, 1e-300))
        low_db, high_db = mask_limits_db(mask_x(frequency_hz, exact_centre_hz(nominal_hz), 3))
        assert np.all(attenuation_db >= low_db) and np.all(attenuation_db <= high_db), (nominal_hz, stage)
