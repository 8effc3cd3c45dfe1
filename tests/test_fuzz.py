"""Fuzzing: malformed band-level CSV, survey and construction TOML, audio headers and CLI options.

The rule under test (project rule, issue 8): bad input never gives a traceback; the command exits
with status 2 and exactly one line `fieldtl: ...` on stderr, echoing at most 80 characters of the
input. Everything is seeded: the same cases run on every machine. A bigger run is
benchmarks/fuzz.py.
"""

import sys
import warnings
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fieldtl.construction import construction_from_dict
from fieldtl.errors import InputError
from fieldtl.survey import read_band_levels_csv, survey_from_dict
from fieldtl.tomlfile import decode_text

sys.path.insert(0, str(Path(__file__).parent / "fuzz"))
from cases import _LONG_ECHO, good_csv, run_case  # noqa: E402
from cases import cases as fuzz_cases  # noqa: E402

CORPUS_SEED = 20240801
CORPUS_CASES = 360          # 60 of each kind: band CSV, survey, construction, layers, audio, options


def test_seeded_corpus_through_the_command(tmp_path, monkeypatch):
    warnings.simplefilter("ignore")
    work = tmp_path / "work"        # the working folder: an output name that resolves to it lands here
    work.mkdir()
    monkeypatch.chdir(work)
    outcomes = [run_case(kind, argv) for kind, argv in fuzz_cases(CORPUS_SEED, CORPUS_CASES, tmp_path)]
    assert list(work.iterdir()) == []
    problems = [(o.problem, o.cause, o.argv[:3]) for o in outcomes if o.problem]
    assert problems == []
    refused = sum(o.code == 2 for o in outcomes)
    assert refused > 0.7 * CORPUS_CASES          # the corpus is mostly bad input, not a pass-through


def _one_line(exc: InputError) -> None:
    message = str(exc)
    assert "\n" not in message and "\r" not in message and not _LONG_ECHO.search(message), message


_SETTINGS = settings(derandomize=True, max_examples=150, deadline=None,
                     suppress_health_check=[HealthCheck.too_slow])


@_SETTINGS
@given(st.binary(max_size=600))
def test_any_bytes_as_a_band_level_file(data):
    try:
        read_band_levels_csv(decode_text(data, source_name="slm.csv"), source_name="slm.csv")
    except InputError as exc:
        _one_line(exc)


_CELL = st.one_of(st.text(max_size=12), st.floats(allow_nan=True, allow_infinity=True).map(repr),
                  st.integers(-10**6, 10**6).map(str), st.sampled_from(["", "0.5", "500", "1e400", "9" * 200]))


@_SETTINGS
@given(st.lists(st.tuples(st.integers(1, 16), st.integers(1, 7), _CELL), max_size=6),
       st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "utf-16-be", "cp1252"]))
def test_edited_cells_of_a_band_level_file(edits, encoding):
    rows = [r.split(",") for r in good_csv().splitlines()]
    for row, column, cell in edits:
        rows[row][column] = cell
    text = "\n".join(",".join(r) for r in rows)
    try:
        data = text.encode(encoding)
    except UnicodeEncodeError:
        data = text.encode("utf-8")
    try:
        read_band_levels_csv(decode_text(data, source_name="slm.csv"), source_name="slm.csv")
    except InputError as exc:
        _one_line(exc)


_SCALAR = st.one_of(st.none(), st.booleans(), st.integers(-2**63, 2**63 - 1), st.floats(), st.text(max_size=30),
                    st.sampled_from(["airborne", "impact", "DnT,w >= 45", "slm.csv", "full", "timber",
                                     "gypsum_board:12.5", "concrete_dense:1e308", 36.0, 0.0, 1e308]))
_VALUE = st.recursive(_SCALAR, lambda inner: st.one_of(st.lists(inner, max_size=3),
                                                       st.dictionaries(st.text(max_size=8), inner, max_size=3)),
                      max_leaves=8).filter(lambda v: v is not None)
_SURVEY_KEYS = st.sampled_from(["title", "type", "separating_area_m2", "receiving_volume_m3", "source_volume_m3",
                                "requirement", "band_levels", "construction", "uncertainty_situation",
                                "element_lab_rw_db", "construction_file"])


@_SETTINGS
@given(st.dictionaries(_SURVEY_KEYS, _VALUE, max_size=8),
       st.one_of(st.just([]), st.lists(st.dictionaries(st.sampled_from(["file", "role", "speaker", "channel",
                                                                         "method", "sweep_length_s"]), _VALUE),
                                       max_size=3)))
def test_any_values_in_a_survey(tmp_path_factory, test, recordings):
    folder = tmp_path_factory.mktemp("survey", numbered=True)
    (folder / "slm.csv").write_text(good_csv())
    try:
        survey_from_dict({"test": test, "recording": recordings}, base_dir=folder, source_name="survey.toml")
    except InputError as exc:
        _one_line(exc)


@_SETTINGS
@given(st.dictionaries(st.sampled_from(["name", "area_m2", "leaf", "cavity", "material"]), _VALUE, max_size=5),
       st.lists(st.lists(_VALUE, max_size=3), min_size=1, max_size=2),
       st.dictionaries(st.sampled_from(["depth_mm", "fill", "studs", "stud_spacing_mm"]), _VALUE))
def test_any_values_in_a_construction(top, layers, cavity):
    data = {"leaf": [{"layers": layer} for layer in layers], **({"cavity": cavity} if len(layers) == 2 else {}),
            **top}
    try:
        construction_from_dict(data, source_name="wall.toml")
    except InputError as exc:
        _one_line(exc)


@pytest.mark.parametrize("argv", [
    ["signal", "pink", "s.wav", "--seconds", "x" * 500],
    ["decay", "x.wav", "--method", "clap" * 50],
    ["bands"],
    ["--no-such-option"],
])
def test_malformed_options_are_one_short_line(capsys, argv):
    from fieldtl.cli import main
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and err.startswith("fieldtl: ") and not _LONG_ECHO.search(err)
    assert "usage:" not in err
