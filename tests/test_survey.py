"""Survey file and pasted band levels: parsing and the one-line errors for bad input."""

import textwrap

import pytest

from fieldtl.errors import InputError
from fieldtl.survey import load_survey, read_band_levels_csv

GOOD = """
[test]
title = "Invented flat A to flat B"
type = "airborne"
separating_area_m2 = 10.8
receiving_volume_m3 = 31.5
requirement = "DnT,w + Ctr >= 45"
[calibration]
file = "cal.wav"
[[recording]]
file = "s.wav"
role = "source"
[[recording]]
file = "r.wav"
role = "receiving"
speaker = 2
channel = 2
[[recording]]
file = "b.wav"
role = "background"
[[recording]]
file = "d.wav"
role = "decay"
method = "impulse"
"""


def _write(folder, text, files=("cal.wav", "s.wav", "r.wav", "b.wav", "d.wav")):
    for name in files:
        (folder / name).write_bytes(b"x")
    path = folder / "survey.toml"
    path.write_text(textwrap.dedent(text))
    return path


def test_good_survey(tmp_path):
    survey = load_survey(_write(tmp_path, GOOD))
    assert survey.test_type == "airborne" and survey.geometry.separating_area_m2 == 10.8
    assert [t.role for t in survey.takes] == ["source", "receiving", "background", "decay"]
    assert survey.takes[1].speaker == 2 and survey.takes[1].channel == 1   # 1-based in the file
    assert survey.calibration.reference_db == 94.0
    assert survey.takes[0].file == tmp_path / "s.wav"                      # relative to the survey file


@pytest.mark.parametrize("change, message", [
    (("receiving_volume_m3 = 31.5", "receiving_volume_m3 = -3"), "receiving_volume_m3 must be a number from 1 to 100000 m3, got -3"),
    (("separating_area_m2 = 10.8", "separating_area_m2 = 0"), "separating_area_m2 must be a number from 0.1 to 10000 m2, got 0"),
    (('type = "airborne"', 'type = "airborne"\ncolour = "red"'), "unknown key 'colour' in [test]"),
    (('role = "background"', 'role = "backgorund"'), "recording 3 role 'backgorund' is not one of"),
    (('method = "impulse"', 'method = "clap"'), "recording 4 method must be one of impulse, interrupted, sweep"),
    (('file = "r.wav"', 'file = "gone.wav"'), "recording 2 file 'gone.wav' not found"),
    (('title = "Invented flat A to flat B"', 'title = "unterminated'), "not valid TOML"),
    (('role = "decay"\nmethod = "impulse"', 'role = "source"'), "no recording with role 'decay'"),
])
def test_bad_surveys_give_one_line_naming_the_file(tmp_path, change, message):
    path = _write(tmp_path, GOOD.replace(*change))
    with pytest.raises(InputError) as info:
        load_survey(path)
    assert str(info.value).startswith("survey.toml: ") and message in str(info.value)
    assert "\n" not in str(info.value)


def test_missing_survey_file(tmp_path):
    with pytest.raises(InputError, match="nope.toml: survey file not found"):
        load_survey(tmp_path / "nope.toml")


def test_pasted_levels_with_semicolons_and_decimal_commas():
    text = "frequency_hz;L1_s1_a;L1_s2_a;L2_s1_a;B;T_1\n100;85,5;86,0;40,1;20,0;0,61\n125;88,2;;42,3;21,5;0,58\n"
    columns = read_band_levels_csv(text, source_name="slm.csv")
    assert [(c.role, c.speaker) for c in columns] == [("source", 1), ("source", 2), ("receiving", 1),
                                                     ("background", 1), ("decay", 1)]
    assert columns[0].spectrum.values == (85.5, 88.2)
    assert columns[1].spectrum.values == (86.0, None)          # empty cell: not measured
    assert columns[4].spectrum.unit == "s"


@pytest.mark.parametrize("text, message", [
    ("frequency_hz,L1\n", "needs a header row and at least one band row"),
    ("frequency_hz,L1\n110,80\n", "110 Hz is not a nominal one-third-octave frequency"),
    ("frequency_hz,X9\n100,80\n", "column 'X9' is not one of"),
    ("frequency_hz,L1\n100,loud\n", "row 2, column 'L1': 'loud' is not a number"),
    ("frequency_hz,T\n100,-0.5\n", "row 2, column 'T': '-0.5' is outside 0.1 to 10 s"),
    ("frequency_hz,L1\n125,80\n100,80\n", "ascending frequency order"),
])
def test_bad_pasted_levels(text, message):
    with pytest.raises(InputError, match="^slm.csv: .*" + message.replace("(", r"\(").replace(")", r"\)")):
        read_band_levels_csv(text, source_name="slm.csv")
