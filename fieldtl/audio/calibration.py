"""Calibration from a sound calibrator recording, and the before/after drift check.

A level is ``10 lg(mean square of samples scaled to +-1) + offset_db``. Without calibration the
offset is 0 and levels are in dB re full scale (a full-scale sine reads -3.01 dB); level
differences (D, NR) are valid either way because both rooms use the same chain.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from fieldtl.errors import CalibrationError, InputError
from fieldtl.findings import Finding

DEFAULT_CALIBRATOR_DB = 94.0        # 1 Pa = 93.98 dB re 20 µPa; calibrators are labelled 94.0 or 114.0 (IEC 60942)
CALIBRATOR_FREQUENCY_HZ = 1000.0
FREQUENCY_TOLERANCE = 0.02          # IEC 60942 class 1 allows ±1 % (from memory); 2 % leaves room for sample clocks
SETTLE_S = 1.0                      # skip the start: the operator is still seating the calibrator
MIN_STEADY_S = 2.0
SEGMENT_S = 0.1                     # steadiness is judged on 100 ms levels
UNSTEADY_RANGE_DB = 0.5             # warning above this range of 100 ms levels (common practice)
BROKEN_RANGE_DB = 3.0               # above this the tone is not a calibrator tone held in place
DRIFT_LIMIT_DB = 0.5                # before/after difference that calls for a repeat (common practice; some schemes use 0.3)
MIN_TONE_TO_RESIDUE_DB = 20.0       # the 1 kHz band must hold nearly all the energy


@dataclass(frozen=True, slots=True)
class Calibration:
    """Offset that turns dB re full scale into dB re 20 µPa, with what the tone showed."""

    offset_db: float
    reference_db: float
    tone_level_dbfs: float
    tone_frequency_hz: float
    steady_range_db: float
    source_name: str
    findings: tuple[Finding, ...] = ()


def calibration_from_tone(samples: np.ndarray, *, sample_rate_hz: float, source_name: str,
                          reference_db: float = DEFAULT_CALIBRATOR_DB, settle_s: float = SETTLE_S) -> Calibration:
    """Derive the level offset from a recording of a calibrator tone at ``reference_db``.

    Uses the 1 kHz one-third-octave band level of the part after ``settle_s`` (the settling start
    is skipped). Raises CalibrationError if the tone is too short, not near 1 kHz, clipped, buried
    in noise or clearly unsteady; mild unsteadiness is a finding. Does not correct for the
    microphone's free-field/pressure response or the calibrator's own tolerance.
    """
    if not 60.0 <= reference_db <= 150.0:
        raise InputError(f"{source_name}: calibrator level {reference_db} dB is not plausible (expected 60-150 dB)")
    start = int(round(settle_s * sample_rate_hz))
    steady = np.asarray(samples, dtype=float)[start:]
    if steady.size < MIN_STEADY_S * sample_rate_hz:
        raise CalibrationError(f"{source_name}: calibration tone too short: need {settle_s + MIN_STEADY_S:.0f} s "
                               f"or more, got {samples.size / sample_rate_hz:.1f} s")
    if np.max(np.abs(steady)) >= 0.999:
        raise CalibrationError(f"{source_name}: calibration tone is clipped; lower the input gain")
    frequency_hz = _dominant_frequency_hz(steady, sample_rate_hz=sample_rate_hz)
    if abs(frequency_hz / CALIBRATOR_FREQUENCY_HZ - 1.0) > FREQUENCY_TOLERANCE:
        raise CalibrationError(f"{source_name}: strongest tone is at {frequency_hz:.0f} Hz, expected a "
                               f"calibrator tone near {CALIBRATOR_FREQUENCY_HZ:.0f} Hz")
    from scipy import signal          # here, not above: the drift check alone needs no filters (fast cached runs)

    from fieldtl.analysis.filterbank import band_sos

    sos = band_sos(CALIBRATOR_FREQUENCY_HZ, sample_rate_hz=sample_rate_hz)
    # Filter from the raw start so the band filter has settled before the steady part begins.
    band = signal.sosfilt(sos, np.asarray(samples, dtype=float))[start:]
    tone_ms = float(np.mean(band**2))
    residue_ms = max(float(np.mean(steady**2)) - tone_ms, 1e-30)
    if 10 * math.log10(tone_ms / residue_ms) < MIN_TONE_TO_RESIDUE_DB:
        raise CalibrationError(f"{source_name}: the 1 kHz tone is less than {MIN_TONE_TO_RESIDUE_DB:.0f} dB above "
                               "the other sound in the recording; is the calibrator seated and switched on?")
    steady_range_db = _segment_range_db(band, sample_rate_hz=sample_rate_hz)
    if steady_range_db > BROKEN_RANGE_DB:
        raise CalibrationError(f"{source_name}: tone level varies by {steady_range_db:.1f} dB; the calibrator "
                               "was not held steadily on the microphone")
    findings: tuple[Finding, ...] = ()
    if steady_range_db > UNSTEADY_RANGE_DB:
        findings = (Finding("calibration_unsteady", "warning",
                            f"{source_name}: calibration tone level varies by {steady_range_db:.2f} dB",
                            "Reseat the calibrator fully on the microphone and record the tone again.",
                            band_hz=CALIBRATOR_FREQUENCY_HZ, clause="common practice"),)
    tone_level_dbfs = 10 * math.log10(tone_ms)
    return Calibration(offset_db=reference_db - tone_level_dbfs, reference_db=reference_db,
                       tone_level_dbfs=tone_level_dbfs, tone_frequency_hz=float(frequency_hz),
                       steady_range_db=steady_range_db, source_name=source_name, findings=findings)


def calibration_drift(before: Calibration, after: Calibration, *,
                      limit_db: float = DRIFT_LIMIT_DB) -> tuple[float, tuple[Finding, ...]]:
    """Difference of the two offsets (after - before) and a finding if it exceeds ``limit_db``."""
    drift_db = after.offset_db - before.offset_db
    if abs(drift_db) <= limit_db:
        return drift_db, ()
    return drift_db, (Finding("calibration_drift", "error",
                              f"calibration changed by {drift_db:+.2f} dB between {before.source_name} "
                              f"and {after.source_name} (limit {limit_db:.1f} dB)",
                              "Check the microphone, cable and battery; repeat the calibration and the "
                              "measurements made since the first one.", clause="common practice"),)


def _dominant_frequency_hz(samples: np.ndarray, *, sample_rate_hz: float) -> float:
    """Frequency of the strongest spectral peak, refined by parabolic interpolation of log magnitude."""
    frames = samples[: int(sample_rate_hz * 4)]  # 4 s are plenty for a 0.25 Hz resolution
    spectrum = np.abs(np.fft.rfft(frames * _hann(frames.size)))
    k = int(np.argmax(spectrum[1:-1])) + 1
    a, b, c = np.log(spectrum[k - 1 : k + 2] + 1e-300)
    shift = 0.5 * (a - c) / (a - 2 * b + c) if (a - 2 * b + c) != 0 else 0.0
    return (k + shift) * sample_rate_hz / frames.size


@functools.lru_cache(maxsize=4)
def _hann(frames: int) -> np.ndarray:
    """numpy's Hann window of ``frames`` samples, made once per length (calibrator takes share one)."""
    window = np.hanning(frames)
    window.flags.writeable = False
    return window


def _segment_range_db(band: np.ndarray, *, sample_rate_hz: float) -> float:
    """Range (max - min) of consecutive 100 ms levels."""
    length = int(SEGMENT_S * sample_rate_hz)
    count = band.size // length
    segments = band[: count * length].reshape(count, length)
    levels_db = 10 * np.log10(np.mean(segments**2, axis=1) + 1e-30)
    return float(levels_db.max() - levels_db.min())
