"""Takes are named as people know them (issue 11 item 1): file name and role and positions, never the
store's 64-hex content names, in findings, text, CSV, JSON and the PDF of a stored test."""

from __future__ import annotations

import json
import re
from io import BytesIO
from pathlib import Path
from types import SimpleNamespace

import pytest
from pypdf import PdfReader

from fieldtl.assess import assess
from fieldtl.findings import Finding
from fieldtl.measure import measure_survey
from fieldtl.naming import grouped_by_take, microphone_numbers, renamed_assessment, renamed_text, take_names
from fieldtl.report.export import assessment_to_csv, assessment_to_json, assessment_to_text, json_text
from fieldtl.report.pdf import assessment_to_pdf
from fieldtl.store import Store
from fieldtl.store.survey_import import import_survey
from fieldtl.survey import load_survey

DEMO = Path(__file__).resolve().parents[1] / "sample_audio"
HEX_NAME = re.compile(r"[0-9a-f]{64}")


def _take(take_id, role, speaker=1, name="x.wav"):
    return SimpleNamespace(id=take_id, role=role, speaker=speaker, original_name=name, file_name=f"{take_id:064x}.wav")


def test_microphone_positions_count_per_role_and_loudspeaker_in_the_order_added():
    takes = [_take(1, "source"), _take(2, "source", 2), _take(3, "source"), _take(4, "background", 1),
             _take(5, "background", 2), _take(6, "receiving", 2)]
    assert microphone_numbers(takes) == {1: 1, 2: 1, 3: 2, 4: 1, 5: 2, 6: 1}


def test_names_say_room_loudspeaker_and_microphone_and_none_for_background_or_calibrator():
    takes = [_take(1, "receiving", 2, "r.wav"), _take(2, "background", 3, "b.wav"), _take(3, "calibration", 1, "c.wav"),
             _take(4, "impact", 3, "i.wav")]
    names = take_names(takes[:3], test_type="airborne")
    assert names[takes[0].file_name] == "r.wav (receiving room, loudspeaker 2, microphone 1)"
    assert names[takes[1].file_name] == "b.wav (background noise in the receiving room, microphone 1)"
    assert names[takes[2].file_name] == "c.wav (calibrator tone at the start)"
    assert take_names(takes[3:], test_type="impact")[takes[3].file_name] == \
        "i.wav (receiving room, tapping machine 3, microphone 1)"
    # an unknown content name still never shows its hexadecimal digits
    assert renamed_text(f"{'ab' * 32}.flac: damaged", names) == "a stored take: damaged"


def test_findings_fold_per_take_and_kind():
    title = "ir.wav (decay in the receiving room, loudspeaker 1, microphone 1)"
    findings = [Finding("decay_range_short", "warning", f"{title}, {hz} Hz: short", "redo", band_hz=hz)
                for hz in (50.0, 63.0)] + [Finding("background_limit", "warning", "5000 Hz: low", "x", band_hz=5000.0)]
    groups = grouped_by_take(findings, [title])
    assert [(g.take, g.first.code, g.bands_hz) for g in groups] == [
        (title, "decay_range_short", (50.0, 63.0)), (None, "background_limit", (5000.0,))]


@pytest.fixture(scope="module")
def stored_demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("store")
    with Store.open(folder / "fieldtl.sqlite3") as store:
        project = store.create_project("Invented demo")
        import_survey(store, load_survey(DEMO / "survey.toml"), project_id=project.id)
        test = store.list_tests(project.id)[0]
        survey = store.survey_for_test(test.id)
        measured = measure_survey(survey)
        raw = assess(survey, measured.takes, calibrated=measured.calibrated, findings=measured.findings)
        names = take_names(store.list_takes(test.id), test_type="airborne")
    return raw, renamed_assessment(raw, names)


def test_a_stored_test_names_no_storage_file_anywhere(stored_demo):
    raw, named = stored_demo
    assert any(HEX_NAME.search(f.message) for f in raw.findings)     # the calculator read content names
    outputs = {"text": assessment_to_text(named), "csv": assessment_to_csv(named),
               "json": json_text(assessment_to_json(named))}
    for kind, text in outputs.items():
        assert not HEX_NAME.search(text), kind
        assert "from memory" not in text.lower() and "facts sheet" not in text.lower(), kind
        if "†" in text:                              # a mark is always explained in the same output
            assert "the tool's default, check against your copy of the standard" in text, kind
    assert "the tool's default" in outputs["json"]     # the demo's rules hold values to check
    warnings = json.loads(outputs["json"])["warnings"]
    assert any(w["message"].startswith("ir_s2_p3.flac (decay in the receiving room, loudspeaker 2, microphone 3)")
               for w in warnings)


def test_the_pdf_of_a_stored_test_names_no_storage_file(stored_demo):
    _, named = stored_demo
    reader = PdfReader(BytesIO(assessment_to_pdf(named)))
    text = "\n".join(page.extract_text() for page in reader.pages)
    assert not HEX_NAME.search(text.replace("\n", ""))
    assert "ir_s2_p3.flac" in text.replace("\n", "")


def test_the_pdf_leads_with_the_verdict_single_numbers_and_cautions_and_has_no_internal_notes(stored_demo):
    _, named = stored_demo
    pages = [page.extract_text().replace("\n", " ") for page in PdfReader(BytesIO(assessment_to_pdf(named))).pages]
    first = pages[0]
    # the demo's truth: DnT,w 54, Ctr -4, so DnT,w + Ctr = 50 dB (sample_audio/expected.json, ISO 717-1)
    assert "PASS against the requirement DnT,w + Ctr >= 45 dB (value 50 dB)" in first
    assert "DnT,w + Ctr = 54 - 4 = 50 dB" in first and "Expanded uncertainty U =" in first
    assert "Single-number results" in first and re.search(r"DnT,w ISO 717-1 54 ", first)
    assert "hearing protection" in first and "accredited procedure" in first
    for page in pages:
        lowered = page.lower()
        assert "from memory" not in lowered and "facts sheet" not in lowered
        assert not HEX_NAME.search(page.replace(" ", ""))
    # unconfirmed values are marked, and the mark is explained once, in the method section
    whole = " ".join(pages)
    sentence = "the tool's default, check against your copy of the standard"
    assert whole.count(sentence) == 1 and whole.index("Method") < whole.index(sentence)
    assert whole.count("†") >= 2                  # the mark beside the values, and once in the explanation
