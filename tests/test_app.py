"""The app driven headless with Streamlit's AppTest: the site workflow from an empty store to a verdict."""

from pathlib import Path

import make_data
import pytest
from streamlit.testing.v1 import AppTest

from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, BandSpectrum
from fieldtl.store import Store, TestSetup

APP = str(Path(__file__).resolve().parents[1] / "fieldtl" / "ui" / "app.py")
BANDS = THIRD_OCTAVES_50_5000_HZ


def _app() -> AppTest:
    at = AppTest.from_file(APP, default_timeout=180)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _button(at, text):
    return next(b for b in at.button if text in b.label)


def test_demo_opens_on_first_start_and_reaches_a_verdict(data_dir):
    at = _app()
    assert at.title[0].value == "Projects"
    _button(at, "INVENTED DEMO").click().run()
    assert at.title[0].value == "Takes" and not at.exception
    assert "Checklist: " in at.get("progress")[0].proto.text
    at.switch_page("views/results.py").run()
    assert not at.exception, [e.value for e in at.exception]
    assert "PASS" in at.success[0].value and "DnT,w" in at.success[0].value
    ratings = at.table[0].value
    # The invented truth rates DnT,w 54 (sample_audio/expected.json, computed with ISO 717-1).
    assert int(ratings.loc["DnT,w", "dB"]) == 54


def _write_takes(folder):
    folder.mkdir()
    r_true = BandSpectrum(BANDS, tuple(36.0 + 1.2 * i for i in range(len(BANDS))), "dB", "R'")
    survey = make_data.airborne_survey(
        folder, reduction_db=r_true, source_db=BandSpectrum(BANDS, (94.0,) * len(BANDS), "dB", "L1"),
        background_db=BandSpectrum(BANDS, tuple(26.0 - i for i in range(len(BANDS))), "dB", "B"),
        reverberation_s=BandSpectrum(BANDS, (0.6,) * len(BANDS), "s", "T"), area_m2=10.0,
        receiving_volume_m3=40.0, source_volume_m3=45.0, speakers=1, microphones=2)
    return survey.parent


def _upload(at, role, files):
    at.selectbox[0].set_value(role).run()
    uploader = at.get("file_uploader")[0]
    for path in files:
        uploader.upload(path.name, path.read_bytes(), "audio/wav")
    at.run()


def test_create_project_and_test_upload_takes_and_read_the_verdict(data_dir, tmp_path, monkeypatch):
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    folder = _write_takes(tmp_path / "takes")
    at = _app()
    at.text_input[0].input("Invented project")           # form fields are sent with the submit click
    _button(at, "Create project").click().run()
    _button(at, "New test in this project").click().run()
    assert at.title[0].value == "Test set-up"
    at.text_input[0].input("Invented room A to room B")
    at.number_input[0].set_value(10.0)       # S
    at.number_input[1].set_value(40.0)       # V receiving
    at.number_input[2].set_value(45.0)       # V source
    at.text_input[1].input("DnT,w >= 40")
    _button(at, "Save test").click().run()
    assert "Saved" in at.success[0].value, [e.value for e in at.error]

    at.switch_page("views/takes.py").run()
    before = at.get("progress")[0].proto.text
    _upload(at, "calibration", [folder / "cal.wav"])
    _upload(at, "source", sorted(folder.glob("src_*.wav")))
    _upload(at, "receiving", sorted(folder.glob("rec_*.wav")))
    _upload(at, "background", sorted(folder.glob("bg_*.wav")))
    at.radio[0].set_value("impulse") if at.radio else None
    _upload(at, "decay", sorted(folder.glob("ir_*.wav")))
    assert not at.error, [e.value for e in at.error]
    assert at.get("progress")[0].proto.text != before            # the checklist advanced
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        test = store.list_tests(store.list_projects()[0].id)[0]
        assert store.missing_roles(test.id) == ()

    at.switch_page("views/results.py").run()
    assert not at.exception, [e.value for e in at.exception]
    verdicts = at.success or at.warning or at.error
    assert "DnT,w" in verdicts[0].value
    assert any(word in verdicts[0].value for word in ("PASS", "FAIL", "UNDECIDED"))


def test_an_invalid_upload_shows_one_clear_message_and_stores_nothing(data_dir, tmp_path, monkeypatch):
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    data_dir.mkdir(parents=True)
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        project = store.create_project("Invented")
        store.create_test(project.id, TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0))
    at = _app()
    _button(at, "t — airborne").click().run()
    bad = tmp_path / "notes.wav"
    bad.write_text("this is not audio " * 40)
    _upload(at, "receiving", [bad])
    shown = at.error[0].value.replace("\\", "")          # markdown escapes of the file name removed
    assert len(at.error) == 1 and "notes.wav: not a readable WAV or FLAC file" in shown
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        assert store.list_takes(store.list_tests(store.list_projects()[0].id)[0].id) == ()
    assert not list((data_dir / "audio").glob("*.wav"))


def test_user_text_is_shown_literally(data_dir, monkeypatch):
    # Streamlit renders labels and captions as markdown: user text is escaped so that a link, bold
    # marks or tags typed into a name print as typed (CommonMark: a backslash makes punctuation literal).
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    hostile = "[click](http://x) **bold** <b>x</b>"
    data_dir.mkdir(parents=True)
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        project = store.create_project(hostile)
        store.create_test(project.id, TestSetup(title=hostile, test_type="airborne", receiving_volume_m3=30.0))
    at = _app()
    _button(at, "airborne").click().run()
    caption = next(c.value for c in at.caption if "click" in c.value)      # the heading under the title
    assert "\\[click\\]\\(http\\://x\\) \\*\\*bold\\*\\* \\<b\\>x\\</b\\>" in caption
    assert "[click](http" not in caption


@pytest.mark.parametrize("length, said", [(119, False), (120, True), (121, True)])   # names: at most 120
def test_a_project_name_is_bounded_with_a_line_saying_so(data_dir, monkeypatch, length, said):
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    at = _app()
    assert at.text_input[0].max_chars == 120                     # the browser stops typing here
    at.text_input[0].set_value("n" * length)                     # as a client sending more would
    _button(at, "Create project").click().run()
    assert not at.exception
    lines = [c.value for c in at.caption if "the most allowed" in c.value]
    assert lines == (["Project name: 120 characters, the most allowed; anything longer was cut."] if said else [])
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        assert [p.name for p in store.list_projects()] == ["n" * min(length, 120)]


def test_a_page_error_from_one_project_is_one_line_not_a_traceback(data_dir, monkeypatch):
    # A row the code cannot read (here: the tests of the open project) stops that page's content only.
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    data_dir.mkdir(parents=True)
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        store.create_project("Invented")

    def unreadable(self, project_id):
        raise KeyError("setup")

    monkeypatch.setattr(Store, "list_tests", unreadable)
    at = _app()
    assert not at.exception and at.title[0].value == "Projects"
    assert [e.value for e in at.error] == ["This page could not show the open project (KeyError). Other projects "
                                           "are not affected; try another test or project."]
    assert any("accredited" in c.value for c in at.caption)         # the cautions still close the page
