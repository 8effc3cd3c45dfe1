"""The invented demo shows what a good test looks like: a handful of findings, each true of its data.

The checks below redo each finding's evidence outside fieldtl: the background margins from the
demo's recorded band levels (sample_audio/expected.json, written from the synthesis inputs) with
the ISO 16283-1 background rule (margin under 10 dB corrected, 6 dB or less a measurement limit),
and the weak decay's range above its noise floor by plain scipy band filtering of the file.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import soundfile
from scipy import signal

from fieldtl.assess import assess
from fieldtl.measure import measure_survey
from fieldtl.survey import load_survey

DEMO = Path(__file__).resolve().parents[1] / "sample_audio"
MOST_FINDINGS = 8          # "a handful": the weak take's three bands, three background bands, one construction note
T20_RANGE_DB = 35.0        # ISO 3382-2: T20 evaluates -5..-25 dB and needs the curve 10 dB above the noise


@pytest.fixture(scope="module")
def demo():
    survey = load_survey(DEMO / "survey.toml")
    measured = measure_survey(survey)
    assessment = assess(survey, measured.takes, calibrated=measured.calibrated, findings=measured.findings)
    return assessment, json.loads((DEMO / "expected.json").read_text(encoding="utf-8"))


def _range_above_noise_db(path: Path, nominal_hz: float) -> float:
    """Energy of the first 100 ms after the impulse over 0.8-1.4 s after it (away from the file's
    end), one-third-octave band (IEC 61260-1 base-2 edges), 4th-order Butterworth run forwards
    and backwards."""
    samples, rate_hz = soundfile.read(path)
    edges = (nominal_hz * 2 ** (-1 / 6), nominal_hz * 2 ** (1 / 6))
    band = signal.sosfiltfilt(signal.butter(4, edges, btype="bandpass", fs=rate_hz, output="sos"), samples)
    start = int(np.argmax(np.abs(samples)))
    early = np.mean(band[start:start + int(0.1 * rate_hz)] ** 2)
    late = np.mean(band[start + int(0.8 * rate_hz):start + int(1.4 * rate_hz)] ** 2)
    return float(10 * np.log10(early / late))


def test_demo_has_a_handful_of_findings(demo):
    assessment, _ = demo
    assert 0 < len(assessment.findings) <= MOST_FINDINGS
    assert not [f for f in assessment.findings if f.code in ("decay_nonlinear", "decay_curved", "decay_disagreement")]


def test_each_background_finding_matches_the_recorded_margin(demo):
    assessment, expected = demo
    actions = dict(zip(expected["bands_hz"], expected["as_recorded"]["background_action"]))
    found = {f.band_hz: f.code for f in assessment.findings if f.code.startswith("background_")}
    assert found == {hz: {"corrected": "background_margin", "limited": "background_limit"}[a]
                     for hz, a in actions.items() if a != "none"}


def test_decay_findings_only_on_the_weak_take_where_its_range_is_short(demo):
    assessment, _ = demo
    decay = [f for f in assessment.findings if f.code.startswith("decay_")]
    assert decay and all(f.message.startswith("ir_s2_p3.flac") for f in decay)
    t20_refused = {f.band_hz for f in decay if "T20 and T30 not evaluated" in f.message}
    assert t20_refused == {50.0, 63.0}
    for band_hz in (50.0, 63.0):
        assert _range_above_noise_db(DEMO / "ir_s2_p3.flac", band_hz) < T20_RANGE_DB
    # the same bands of a good take have the range T30 needs (45 dB) and more
    assert _range_above_noise_db(DEMO / "ir_s1_p1.flac", 63.0) > 45.0
