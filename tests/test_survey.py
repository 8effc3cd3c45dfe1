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


# --- issue 8: causes of tracebacks in survey and band-level files, one test each --------------------------

_CSV = "frequency_hz,L1_s1_é,L2,B,T\n100,92.0,40.0,20.0,0.5\n125,91.0,41.0,21.0,0.55\n"


def _csv_survey(folder, data: bytes):
    (folder / "slm.csv").write_bytes(data)
    path = folder / "survey.toml"
    path.write_text('[test]\ntype = "airborne"\nreceiving_volume_m3 = 31.5\nband_levels = "slm.csv"\n'
                    '[[recording]]\nfile = "slm.csv"\nrole = "source"\n')
    return path


@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig", "utf-16", "utf-16-le", "utf-16-be", "cp1252"])
def test_cause_csv_saved_by_a_spreadsheet_in_another_encoding(tmp_path, encoding):
    # "utf-16" writes a byte-order mark; "utf-16-le"/"-be" do not (the NUL pattern tells the order).
    survey = load_survey(_csv_survey(tmp_path, _CSV.encode(encoding)))
    assert [c.label for c in survey.band_columns] == ["L1_s1_é", "L2", "B", "T"]
    assert survey.band_columns[0].spectrum.values == (92.0, 91.0)


@pytest.mark.parametrize("data", [b"\x81\x8d\x8f\x90\x9d frequency_hz", b"\x00\x01\x02\x03binary\x00", b"\xff\xfe\x00\xd8"])
def test_cause_csv_in_no_known_encoding_is_one_line(tmp_path, data):
    with pytest.raises(InputError, match=r"^slm.csv: not (a text file|valid UTF-16-LE text)") as info:
        load_survey(_csv_survey(tmp_path, data))
    assert "\n" not in str(info.value)


def test_cause_huge_csv_cell(tmp_path):
    # Python's csv module raises its own csv.Error above 131072 characters; a cell is bounded far below.
    with pytest.raises(InputError, match=r"^slm.csv: a cell of 100,000 characters; at most 64") as info:
        read_band_levels_csv("frequency_hz,L1\n100," + "9" * 100_000 + "\n", source_name="slm.csv")
    assert len(str(info.value)) < 160
    with pytest.raises(InputError, match=r"^slm.csv: not readable as CSV \(field larger than field limit"):
        read_band_levels_csv("frequency_hz,L1\n100," + "9" * 200_000 + "\n", source_name="slm.csv")


def test_cause_huge_csv_file(tmp_path):
    big = ("frequency_hz,L1\n" + "100,80\n" * 200_000).encode()
    with pytest.raises(InputError, match="slm.csv: band-level file is larger than 1,000,000 bytes"):
        load_survey(_csv_survey(tmp_path, big))


def test_cause_huge_position_number_in_a_column_title():
    # int() of a 5000-digit text raises ValueError (Python's digit limit); positions are 1-99.
    with pytest.raises(InputError, match="column 'L1_s9{50}' is not one of"):
        read_band_levels_csv("frequency_hz,L1_s" + "9" * 50 + "\n100,80\n", source_name="slm.csv")
    with pytest.raises(InputError, match="_s<position 1-99>"):
        read_band_levels_csv("frequency_hz,L1_s0\n100,80\n", source_name="slm.csv")


@pytest.mark.parametrize("cell", ["1e400", "-1e400", "nan", "inf"])
def test_cause_float_overflow_in_a_csv_cell(cell):
    with pytest.raises(InputError, match=f"row 2, column 'L1': '{cell}' is outside -20 to 160 dB"):
        read_band_levels_csv(f"frequency_hz,L1\n100,{cell}\n", source_name="slm.csv")


def test_cause_deeply_nested_toml(tmp_path):
    # tomllib parses arrays recursively and raises RecursionError deep enough.
    path = _write(tmp_path, GOOD + "\n[extra]\ndeep = " + "[" * 100_000 + "]" * 100_000 + "\n")
    with pytest.raises(InputError, match=r"^survey.toml: not valid TOML \(arrays or tables nested too deeply\)$"):
        load_survey(path)


def test_cause_byte_order_mark_before_a_toml_file(tmp_path):
    path = _write(tmp_path, GOOD)
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    assert load_survey(path).title == "Invented flat A to flat B"


@pytest.mark.parametrize("change, message", [
    (("receiving_volume_m3 = 31.5", "receiving_volume_m3 = 1e400"), "receiving_volume_m3 must be a number from 1 to 100000 m3, got inf"),
    (("receiving_volume_m3 = 31.5", "receiving_volume_m3 = true"), "receiving_volume_m3 must be a number from 1 to 100000 m3, got true/false True"),
    (("receiving_volume_m3 = 31.5", "receiving_volume_m3 = [31.5]"), "must be a number from 1 to 100000 m3, got a list [31.5]"),
    (("receiving_volume_m3 = 31.5", 'receiving_volume_m3 = "31.5"'), "got text '31.5'"),
    (('type = "airborne"', 'type = ["airborne"]'), "[test] type must be one of airborne, impact, got ['airborne']"),
    (('type = "airborne"', 'type = {a = 1}'), "[test] type must be one of airborne, impact, got {'a': 1}"),
    (('title = "Invented flat A to flat B"', "title = 5"), "[test] title must be text, got a number 5"),
    (('title = "Invented flat A to flat B"', 'title = "' + "T" * 121 + '"'), "title is 121 characters long; at most 120"),
    (('requirement = "DnT,w + Ctr >= 45"', "requirement = 45"), "[test] requirement must be text"),
    (('requirement = "DnT,w + Ctr >= 45"', 'requirement = "' + "D" * 81 + '"'), "requirement is 81 characters"),
    (('role = "source"', "role = [1]"), "recording 1 role [1] is not one of"),
    (('role = "decay"\nmethod = "impulse"', 'role = "decay"\nmethod = ["impulse"]'), "method must be one of"),
    (("speaker = 2", "speaker = 2.0"), "speaker must be a whole number from 1 to 99, got 2.0"),
    (("speaker = 2", "speaker = 100"), "speaker must be a whole number from 1 to 99, got 100"),
    (("channel = 2", "channel = 9223372036854775807"), "channel must be a whole number from 1 to 1024"),
    (('file = "s.wav"', 'file = "s\\u0000.wav"'), "recording 1 holds a NUL character"),
    (('file = "s.wav"', "file = 3"), "recording 1 must be a file name, got 3"),
])
def test_cause_wrong_types_and_overflowing_numbers_in_a_survey(tmp_path, change, message):
    path = _write(tmp_path, GOOD.replace(*change, 1))
    with pytest.raises(InputError) as info:
        load_survey(path)
    assert str(info.value).startswith("survey.toml: ") and message in str(info.value), str(info.value)
    assert "\n" not in str(info.value) and len(str(info.value)) < 250


# --- issue 8 item 3: plausibility of typed and pasted values, at the edges -----------------------------

@pytest.mark.parametrize("kind, inside, outside", [
    ("T", ("0.1", "10", "10.0"), ("0.099", "10.01", "500", "0")),       # 500: T typed in milliseconds
    ("L1", ("-20", "160", "159.9"), ("-20.1", "160.1")),
    ("B", ("-20", "160"), ("-20.01", "1000")),
])
def test_pasted_values_inside_the_physical_range_pass_and_outside_are_refused(kind, inside, outside):
    for cell in inside:
        (column,) = read_band_levels_csv(f"frequency_hz,{kind}\n100,{cell}\n", source_name="slm.csv")
        assert column.spectrum.values == (float(cell),)
    for cell in outside:
        with pytest.raises(InputError, match=f"^slm.csv: row 2, column '{kind}': '{cell}' is outside"):
            read_band_levels_csv(f"frequency_hz,{kind}\n100,{cell}\n", source_name="slm.csv")


def test_t_typed_in_milliseconds_is_named_as_such():
    with pytest.raises(InputError, match=r"'500' is outside 0.1 to 10 s \(a reverberation time in seconds, not milliseconds\)"):
        read_band_levels_csv("frequency_hz,T\n100,500\n", source_name="slm.csv")


@pytest.mark.parametrize("key, inside, outside", [
    ("receiving_volume_m3", (1, 100_000), (0.99, 100_001)),
    ("source_volume_m3", (1.0, 100_000.0), (0.999, 1e6)),
    ("separating_area_m2", (0.1, 10_000), (0.099, 10_000.5)),
])
def test_geometry_physical_range_at_its_edges(tmp_path, key, inside, outside):
    base = GOOD if key != "source_volume_m3" else GOOD.replace("receiving_volume_m3 = 31.5",
                                                                 "receiving_volume_m3 = 31.5\nsource_volume_m3 = 40")
    current = {"receiving_volume_m3": "31.5", "source_volume_m3": "40", "separating_area_m2": "10.8"}[key]
    for value in inside:
        survey = load_survey(_write(tmp_path, base.replace(f"{key} = {current}", f"{key} = {value}")))
        assert getattr(survey.geometry, key) == value
    for value in outside:
        with pytest.raises(InputError, match=f"{key} must be a number from"):
            load_survey(_write(tmp_path, base.replace(f"{key} = {current}", f"{key} = {value}")))


def test_geometry_is_checked_whoever_builds_it():
    from fieldtl.survey import Geometry
    with pytest.raises(InputError, match="receiving_volume_m3 must be a number from 1 to 100000 m3, got 31500000.0"):
        Geometry(receiving_volume_m3=31.5e6)
