"""Every JSON the project writes is strict JSON (RFC 8259 §6: NaN and Infinity are not numbers).

Python's json module writes and reads NaN/Infinity unless told otherwise; the strict reader
below refuses them, as JavaScript's JSON.parse and most other readers do.
"""

import json
import math
import zipfile
from pathlib import Path

import make_data
import numpy as np
import pytest

from fieldtl.cli import main
from fieldtl.report.export import json_text
from fieldtl.store import Store, TestSetup, export_project

DEMO_SURVEY = Path(__file__).resolve().parents[1] / "sample_audio" / "survey.toml"


def _refuse(constant):
    raise ValueError(f"{constant} is not JSON")


def strict_load(text):
    """json.loads that refuses NaN, Infinity and -Infinity (RFC 8259 §6)."""
    return json.loads(text, parse_constant=_refuse)


def test_the_strict_reader_can_fail():
    with pytest.raises(ValueError, match="NaN is not JSON"):
        strict_load('{"a": NaN}')
    with pytest.raises(ValueError, match="-Infinity is not JSON"):
        strict_load("[-Infinity]")


def test_non_finite_values_become_null_with_a_finding():
    document = {"bands": {"L2": [40.0, math.nan, -math.inf]}, "peak_db": math.inf, "ok": 1.5, "warnings": []}
    written = strict_load(json_text(document))
    assert written["bands"]["L2"] == [40.0, None, None] and written["peak_db"] is None and written["ok"] == 1.5
    assert [(w["code"], w["message"]) for w in written["warnings"]] == [
        ("non_finite_value", "bands.L2[1]: not a finite number; written as null"),
        ("non_finite_value", "bands.L2[2]: not a finite number; written as null"),
        ("non_finite_value", "peak_db: not a finite number; written as null")]
    assert document["warnings"] == [] and math.isnan(document["bands"]["L2"][1])      # the input is unchanged
    assert strict_load(json_text({"finite": [0.0, -1e308, 1e308]})) == {"finite": [0.0, -1e308, 1e308]}


def test_bands_json_of_digital_silence_is_strict(tmp_path):
    # All-zero samples have levels of -inf dB (10 log10 0): the one input that makes them non-finite.
    silent = make_data.write(tmp_path / "silent.wav", np.zeros(48_000), subtype="PCM_16")
    assert main(["bands", str(silent), "--json", str(tmp_path / "bands.json")]) == 0
    written = strict_load((tmp_path / "bands.json").read_text(encoding="utf-8"))
    assert written["laeq_db"] is None
    assert "digital_silence" in [w["code"] for w in written["warnings"]]


def test_decay_json_is_strict(tmp_path):
    # An exponential decay (T = 0.5 s: -60 dB in 0.5 s) in faint noise.
    rate = 48_000
    t = np.arange(rate) / rate
    response = np.random.default_rng(4).standard_normal(rate) * 10 ** (-3 * t / 0.5) * 0.5
    response += 1e-5 * np.random.default_rng(5).standard_normal(rate)
    path = make_data.write(tmp_path / "ir.wav", response, subtype="FLOAT")
    assert main(["decay", str(path), "--method", "impulse", "--json", str(tmp_path / "decay.json")]) == 0
    written = strict_load((tmp_path / "decay.json").read_text(encoding="utf-8"))
    assert len(written["T20_s"]) == len(written["frequencies_hz"])


def test_predict_json_is_strict(tmp_path):
    assert main(["predict", "--layer", "concrete_dense:100", "--json", str(tmp_path / "predict.json")]) == 0
    strict_load((tmp_path / "predict.json").read_text(encoding="utf-8"))


def test_assess_json_is_strict(tmp_path):
    assert main(["assess", str(DEMO_SURVEY), "--json", str(tmp_path / "assess.json")]) == 0
    written = strict_load((tmp_path / "assess.json").read_text(encoding="utf-8"))
    assert written["ratings"]


def test_archive_manifest_is_strict(tmp_path):
    with Store.open(tmp_path / "fieldtl.sqlite3") as store:
        project = store.create_project("p")
        test = store.create_test(project.id, TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0,
                                                       settings={"report_details": {"notes": "n"}}))
        tone = make_data.sine(500, amplitude=0.2, duration_s=0.2)
        store.add_take(test.id, data=make_data.write(tmp_path / "s.wav", tone).read_bytes(), original_name="s.wav",
                       role="source")
        export_project(store, project.id, tmp_path / "p.zip")
    with zipfile.ZipFile(tmp_path / "p.zip") as archive:
        manifest = strict_load(archive.read("manifest.json").decode("utf-8"))
    assert manifest["tests"][0]["takes"][0]["duration_s"] == pytest.approx(0.2)
