"""Calibration from a calibrator tone and the before/after drift check."""

import make_data
import numpy as np
import pytest

from fieldtl.audio.calibration import calibration_drift, calibration_from_tone
from fieldtl.audio.ingest import open_recording, read_samples
from fieldtl.errors import CalibrationError


def _calibrate(path, **kwargs):
    recording = open_recording(path)
    return calibration_from_tone(read_samples(recording), sample_rate_hz=recording.sample_rate_hz,
                                 source_name=recording.name, **kwargs)


@pytest.mark.parametrize("reference_db", [94.0, 114.0])
def test_offset_maps_tone_rms_to_the_declared_level(tmp_path, reference_db):
    # Tone RMS -26.0 dBFS (analytic: amplitude sqrt2 * 10^(-26/20)); declared level L -> offset L + 26.
    calibration = _calibrate(make_data.calibrator_tone(tmp_path / "cal.wav", rms_dbfs=-26.0),
                             reference_db=reference_db)
    assert calibration.offset_db == pytest.approx(reference_db + 26.0, abs=0.01)
    assert calibration.tone_frequency_hz == pytest.approx(1000.0, abs=0.5)
    assert calibration.findings == ()


def test_settling_start_is_skipped(tmp_path):
    # A loud knock in the first second (operator seating the calibrator) must not move the result.
    path = make_data.calibrator_tone(tmp_path / "cal.wav", rms_dbfs=-30.0)
    samples = read_samples(open_recording(path))
    samples[2000:2400] = 0.9
    knocked = make_data.write(tmp_path / "knock.wav", samples)
    assert _calibrate(knocked).offset_db == pytest.approx(94.0 + 30.0, abs=0.01)


def test_tone_not_near_1khz_is_rejected(tmp_path):
    with pytest.raises(CalibrationError, match="250 Hz, expected a calibrator tone near 1000 Hz"):
        _calibrate(make_data.calibrator_tone(tmp_path / "c.wav", frequency_hz=250.0))


def test_unsteady_tone_is_a_finding_or_an_error(tmp_path):
    tone = read_samples(open_recording(make_data.calibrator_tone(tmp_path / "c.wav")))
    wobble = tone.copy()
    wobble[3 * 48_000:] *= 10 ** (1.0 / 20)      # a 1 dB step: warn
    cal = _calibrate(make_data.write(tmp_path / "w.wav", wobble))
    assert [f.code for f in cal.findings] == ["calibration_unsteady"]
    broken = tone.copy()
    broken[3 * 48_000:] *= 10 ** (-6.0 / 20)     # a 6 dB drop: the calibrator came off
    with pytest.raises(CalibrationError, match="varies by 6.0 dB"):
        _calibrate(make_data.write(tmp_path / "b.wav", broken))


def test_short_clipped_or_noisy_tones_are_rejected(tmp_path):
    with pytest.raises(CalibrationError, match="too short"):
        _calibrate(make_data.calibrator_tone(tmp_path / "s.wav", duration_s=2.0))
    with pytest.raises(CalibrationError, match="clipped"):
        _calibrate(make_data.calibrator_tone(tmp_path / "k.wav", rms_dbfs=0.0))
    noisy = make_data.calibrator_tone(tmp_path / "n.wav", rms_dbfs=-40.0)
    samples = read_samples(open_recording(noisy)) + 0.05 * np.random.default_rng(3).standard_normal(240_000)
    with pytest.raises(CalibrationError, match="less than 20 dB above"):
        _calibrate(make_data.write(tmp_path / "nn.wav", samples))


def test_drift_above_half_a_decibel_is_flagged(tmp_path):
    # 0.5 dB before/after limit: common practice (some schemes use 0.3 dB).
    before = _calibrate(make_data.calibrator_tone(tmp_path / "a.wav", rms_dbfs=-26.0))
    small = _calibrate(make_data.calibrator_tone(tmp_path / "b.wav", rms_dbfs=-26.4))
    large = _calibrate(make_data.calibrator_tone(tmp_path / "c.wav", rms_dbfs=-26.7))
    drift_db, findings = calibration_drift(before, small)
    assert drift_db == pytest.approx(0.4, abs=0.01) and findings == ()
    drift_db, findings = calibration_drift(before, large)
    assert drift_db == pytest.approx(0.7, abs=0.01)
    assert [f.code for f in findings] == ["calibration_drift"]
