"""No internal notes in what a client reads, at the source: the core's own texts are clean.

The project's rule (DEVELOPERS.md, "Rules we keep"): provenance notes for developers ("from memory",
the facts sheet's section numbers, "(verified)", the facts sheet's tags [S], [V], [M-...], [CP]) live in
code comments and tests, never in a string the program can show. A value that is the tool's default
rather than confirmed from the standard's text is carried as data instead: the text marked with
``fieldtl.findings.unconfirmed`` (one mark, explained once per output) or ``Finding.unconfirmed``.

Three nets: every string literal in fieldtl/ (so a new wording cannot slip past), every string of the
raw core ``Assessment`` of the invented demo and of pasted-band fixtures (before any report code), and
every output written from them (JSON, text, CSV, PDF text).
"""

from __future__ import annotations

import ast
import dataclasses
import io
import json
import re
from collections.abc import Iterator
from pathlib import Path

import pytest
from pypdf import PdfReader
from test_report_pdf import _airborne, _column, _impact

from fieldtl.assess import AssessOptions, assess
from fieldtl.construction import MATERIALS, construction_from_layers
from fieldtl.construction.predict import predict
from fieldtl.findings import UNCONFIRMED_MARK, Finding, unconfirmed
from fieldtl.measure import measure_survey, takes_from_band_columns
from fieldtl.qa import check_positions
from fieldtl.report.client import EXPLANATION, client_assessment
from fieldtl.report.export import assessment_to_csv, assessment_to_json, assessment_to_text, json_text
from fieldtl.report.pdf import assessment_to_pdf
from fieldtl.survey import Geometry, Survey, load_survey
from fieldtl.uncertainty import EXAMPLE_REQUIREMENTS

ROOT = Path(__file__).resolve().parents[1]
INTERNAL = re.compile(r"from memory|facts[ -]sheet|standards\.md|\(verified\)|\[(?:S|V|CP|M|M-[^\]\s]*)\]",
                      re.IGNORECASE)


def test_the_pattern_catches_each_kind_of_internal_note():
    for note in ("(ISO 16283-1, from memory)", "(facts sheet 1.8)", "facts-sheet numbers", "scope (verified)",
                 "[V]", "[S]", "[M-ISO]", "[CP]", "/work/shared/reference/standards.md"):
        assert INTERNAL.search(note), note
    for clean in ("ISO 16283-1/-2 background correction", "common practice", "ISO 3382-2 Annex B",
                  "the value was verified on site", "[dB]", "Lmax [AF]", "[[material]] table"):
        assert not INTERNAL.search(clean), clean


def _docstrings(tree: ast.AST) -> set[int]:
    """ids of the constant nodes that are docstrings (module, class, function)."""
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.ClassDef, ast.FunctionDef, ast.AsyncFunctionDef)) and node.body:
            first = node.body[0]
            if isinstance(first, ast.Expr) and isinstance(first.value, ast.Constant) \
                    and isinstance(first.value.value, str):
                found.add(id(first.value))
    return found


def _literal_strings(path: Path) -> Iterator[tuple[int, str]]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    docstrings = _docstrings(tree)
    for node in ast.walk(tree):
        if isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in docstrings:
            yield node.lineno, node.value


def test_no_string_in_the_program_carries_an_internal_note():
    # Comments and docstrings are for developers and keep their notes; every other string literal
    # (implicitly joined pieces are one literal; f-strings' literal parts are checked one by one)
    # may reach a client one day.
    leaks = [f"{path.relative_to(ROOT)}:{line}: {text[:70]!r}"
             for path in sorted((ROOT / "fieldtl").rglob("*.py"))
             for line, text in _literal_strings(path) if INTERNAL.search(text)]
    assert leaks == []


def _strings(value: object, where: str = "assessment") -> Iterator[tuple[str, str]]:
    """Every string inside a frozen value: dataclass fields, tuples, lists, dicts (keys and values)."""
    if isinstance(value, str):
        yield where, value
    elif dataclasses.is_dataclass(value) and not isinstance(value, type):
        for field in dataclasses.fields(value):
            yield from _strings(getattr(value, field.name), f"{where}.{field.name}")
    elif isinstance(value, dict):
        for key, item in value.items():
            yield from _strings(key, f"{where} key")
            yield from _strings(item, f"{where}[{key!r}]")
    elif isinstance(value, (tuple, list)):
        for i, item in enumerate(value):
            yield from _strings(item, f"{where}[{i}]")


def _small_rooms_too_few_positions():
    """Pasted bands: loudspeakers run together, two microphones per room, three decays, no background,
    a small separating element (S < V/7.5): positions findings, the small-element rule, no background."""
    columns = [_column("source", "L1", 95.0, 1, f"L1_m{m}") for m in range(2)]
    columns += [_column("receiving", "L2", 50.0, 1, f"L2_m{m}") for m in range(2)]
    columns += [_column("decay", "T", 0.6, 1, f"T_{i}") for i in range(3)]
    survey = Survey(title="Invented small wall", test_type="airborne",
                    geometry=Geometry(receiving_volume_m3=60.0, separating_area_m2=4.0, source_volume_m3=60.0),
                    source_name="invented-small.toml", band_columns=tuple(columns), requirement="R'w >= 50")
    return assess(survey, takes_from_band_columns(survey.band_columns), calibrated=True,
                  options=AssessOptions(source_combination="simultaneous"))


@pytest.fixture(scope="module")
def raw_assessments():
    survey = load_survey(ROOT / "sample_audio" / "survey.toml")
    measured = measure_survey(survey)
    return {
        "demo": assess(survey, measured.takes, calibrated=measured.calibrated, findings=measured.findings),
        "airborne": _airborne()[0],
        "airborne with a gap and background limits": _airborne(decay_gap_hz=100.0, background_db=40.0,
                                                               l2_db=42.0)[0],
        "impact": _impact()[0],
        "small rooms, too few positions": _small_rooms_too_few_positions(),
    }


def test_the_raw_core_assessments_carry_no_internal_notes(raw_assessments):
    for name, assessment in raw_assessments.items():
        leaks = [(where, text) for where, text in _strings(assessment) if INTERNAL.search(text)]
        assert leaks == [], name


def test_the_fixtures_reach_the_texts_that_once_carried_notes(raw_assessments):
    # The nets above only mean something if the fixtures produce those texts: the background rule,
    # the T mean, the energy and simultaneous combinations, the small-element rule, the positions,
    # decays and background findings, and the demo's decay findings.
    rules = [rule for a in raw_assessments.values() for rule in a.rules_applied]
    for start in ("background correction per band", "T per band: arithmetic mean", "loudspeaker positions combined",
                  "loudspeakers operating simultaneously", "small-element rule"):
        assert any(start in rule for rule in rules), start
    codes = {f.code for a in raw_assessments.values() for f in a.findings}
    assert {"too_few_microphone_positions", "too_few_decays", "background_not_measured",
            "small_separating_area", "decay_range_short", "background_limit"} <= codes


def test_unconfirmed_values_are_data(raw_assessments):
    # ISO 16283-1/-2's minimum of 6 decays and ISO 3382-2's 10 dB range above the noise are recalled,
    # not read from the standards: the findings say so as data; the background rule's 6/10 dB margins
    # come from the standard, so "no background" is not marked.
    findings = {f.code: f for a in raw_assessments.values() for f in a.findings}
    assert findings["too_few_decays"].unconfirmed and findings["decay_range_short"].unconfirmed
    assert findings["small_separating_area"].unconfirmed
    assert not findings["background_not_measured"].unconfirmed and not findings["background_limit"].unconfirmed
    assert findings["too_few_decays"].clause == "ISO 16283-1/-2"
    rules = raw_assessments["airborne"].rules_applied
    assert sum(rule.endswith(UNCONFIRMED_MARK) for rule in rules) == 3   # combination, background, T mean
    assert not any(rule.endswith(UNCONFIRMED_MARK) for rule in rules if rule.startswith("A = 0.16 V/T"))


def test_check_positions_marks_recalled_minimums_as_unconfirmed():
    found = check_positions((), test_type="airborne")
    assert found and all(f.unconfirmed and not INTERNAL.search(f.clause) for f in found)


def _outputs(assessment) -> dict[str, str]:
    pdf = assessment_to_pdf(assessment)
    return {"json": json_text(assessment_to_json(assessment)), "text": assessment_to_text(assessment),
            "csv": assessment_to_csv(assessment),
            "pdf": " ".join(page.extract_text() for page in PdfReader(io.BytesIO(pdf)).pages)}


def test_every_output_is_clean_and_explains_the_mark_once(raw_assessments):
    for name, assessment in raw_assessments.items():
        outputs = _outputs(assessment)
        for kind, text in outputs.items():
            assert not INTERNAL.search(text), (name, kind, INTERNAL.search(text))
        rules = json.loads(outputs["json"])["rules_applied"]
        marked = [rule for rule in rules if rule.endswith(UNCONFIRMED_MARK)]
        assert marked, name                   # every fixture uses the background rule or the T mean
        assert rules.count(EXPLANATION) == 1 and rules[-1] == EXPLANATION
        # wherever the mark stands beside a text, the output explains it exactly once (the text report
        # lists no rules, so it has neither)
        explanation = " ".join(EXPLANATION.split())
        flat = {kind: " ".join(json.dumps(json.loads(text), ensure_ascii=False).split() if kind == "json"
                               else text.split()) for kind, text in outputs.items()}
        for kind, text in flat.items():
            beside_texts = text.replace(explanation, "").count(UNCONFIRMED_MARK)
            assert text.count(explanation) == (1 if beside_texts else 0), (name, kind)
        assert UNCONFIRMED_MARK in flat["pdf"].replace(explanation, ""), name


def test_client_assessment_adds_the_explanation_only_for_a_marked_text(raw_assessments):
    assessment = raw_assessments["airborne"]
    once = client_assessment(assessment)
    assert once.rules_applied == (*assessment.rules_applied, EXPLANATION)
    assert client_assessment(once) == once
    plain = dataclasses.replace(assessment, rules_applied=("plain rule",), findings=(), verdict=None,
                                uncertainty_note="")
    assert client_assessment(plain).rules_applied == ("plain rule",)
    finding = Finding("x", "info", unconfirmed("a value the tool assumed"))
    assert client_assessment(dataclasses.replace(plain, findings=(finding,))).rules_applied == \
        ("plain rule", EXPLANATION)


def test_a_findings_json_names_its_rule_and_whether_the_value_is_the_tools_default(raw_assessments):
    recalled = Finding("x", "warning", "seen", clause="ISO 16283-1 positions", unconfirmed=True)
    confirmed = Finding("y", "warning", "seen", clause="ISO 16283-1 positions")
    assert (recalled.as_json()["clause"], recalled.as_json()["tool_default"]) == ("ISO 16283-1 positions", True)
    assert (confirmed.as_json()["clause"], confirmed.as_json()["tool_default"]) == ("ISO 16283-1 positions", False)
    # in the demo: every warning names its rule, and the weak decay's range limit is the tool's default
    demo = json.loads(json_text(assessment_to_json(raw_assessments["demo"])))["warnings"]
    assert demo and all(w["clause"] and not INTERNAL.search(w["clause"]) for w in demo)
    assert {w["tool_default"] for w in demo} == {True, False}


def test_prediction_notes_and_example_requirements_are_clean_and_marked():
    prediction = predict(construction_from_layers(["concrete_dense:200"]))
    texts = [prediction.method, *prediction.notes, *(material.source for material in MATERIALS.values())]
    assert not any(INTERNAL.search(t) for t in texts)
    assert any(note.endswith(UNCONFIRMED_MARK) and "edge-loss" in note for note in prediction.notes)
    assert all(label.endswith(UNCONFIRMED_MARK) and not INTERNAL.search(label) for label in EXAMPLE_REQUIREMENTS)
