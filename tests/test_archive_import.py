"""An imported archive is checked like typed input: each poisoned field is refused, nothing changes.

The archive is a real export whose manifest is edited one field at a time. The expected refusals
are the physical ranges and text bounds of fieldtl.validate (the same as the survey file and
the app's forms), JSON as RFC 8259 defines it (no NaN or Infinity), and UTF-8 text.
"""

import hashlib
import io
import json
import sqlite3
import zipfile

import make_data
import pytest
import soundfile

from fieldtl.errors import InputError
from fieldtl.store import Store, TestSetup, export_project, import_project
from fieldtl.validate import NAME_CHARS, NOTE_CHARS, REQUIREMENT_CHARS

TEN_MB = "x" * 10_000_000
DEEP = "<100 000 nested lists>"       # written into the manifest's text as [[[...]]]


def wav_bytes(frequency_hz=440.0, seconds=0.2):
    buffer = io.BytesIO()
    soundfile.write(buffer, make_data.sine(frequency_hz, amplitude=0.3, duration_s=seconds), 48_000,
                    format="WAV", subtype="PCM_16")
    return buffer.getvalue()


@pytest.fixture(scope="module")
def archive(tmp_path_factory):
    """One project: an airborne test with a source take and a sweep decay, an impact test with pasted levels."""
    folder = tmp_path_factory.mktemp("source")
    with Store.open(folder / "fieldtl.sqlite3") as store:
        project = store.create_project("Invented flats", client="c", address="a", engineer="e")
        airborne = store.create_test(project.id, TestSetup(
            title="Wall", test_type="airborne", receiving_volume_m3=30.0, separating_area_m2=10.0,
            requirement="DnT,w >= 50", settings={"report_details": {"notes": "invented"},
                                                 "construction_toml": ""}))
        store.add_take(airborne.id, data=wav_bytes(), original_name="s.wav", role="source")
        store.add_take(airborne.id, data=wav_bytes(220.0), original_name="sweep.wav", role="decay", method="sweep",
                       sweep_start_hz=50.0, sweep_stop_hz=10_000.0, sweep_length_s=2.0)
        impact = store.create_test(project.id, TestSetup(title="Floor", test_type="impact", receiving_volume_m3=40.0))
        store.set_band_levels(impact.id, "frequency_hz,Li,B,T\n100,60,20,0.5\n125,61,20,0.5\n")
        export_project(store, project.id, folder / "project.zip")
    return folder / "project.zip"


def full_dump(store, database):
    """Every row of the database (SQL text) and every file of the audio folder with its SHA-256."""
    with sqlite3.connect(database) as connection:
        rows = list(connection.iterdump())
    files = sorted((p.name, hashlib.sha256(p.read_bytes()).hexdigest()) for p in store.audio_dir.iterdir())
    return rows, files


def forged(archive, tmp_path, edit=None, raw=None):
    """A copy of ``archive`` whose manifest went through ``edit`` (or is replaced by ``raw`` bytes)."""
    out = tmp_path / "forged.zip"
    with zipfile.ZipFile(archive) as source, zipfile.ZipFile(out, "w") as target:
        for name in source.namelist():
            data = source.read(name)
            if name == "manifest.json":
                if raw is not None:
                    data = raw
                else:
                    manifest = json.loads(data)
                    edit(manifest)
                    text = json.dumps(manifest)                       # allow_nan: Python writes NaN/Infinity
                    text = text.replace(f'"{DEEP}"', "[" * 100_000 + "]" * 100_000)   # beyond any recursion limit
                    data = text.encode("utf-8")
            target.writestr(name, data)
    return out


def project(m):
    return m["project"]


def wall(m):
    return m["tests"][0]


def floor(m):
    return m["tests"][1]


def take(m):
    return m["tests"][0]["takes"][0]


def sweep(m):
    return m["tests"][0]["takes"][1]


POISONS = {
    # setup fields: geometry (validate.VOLUME_M3 1-100 000 m3, AREA_M2 0.1-10 000 m2)
    "volume NaN": (lambda m: wall(m).update(receiving_volume_m3=float("nan")), "not valid JSON .*NaN"),
    "volume Infinity": (lambda m: wall(m).update(receiving_volume_m3=float("inf")), "not valid JSON .*Infinity"),
    "volume negative": (lambda m: wall(m).update(receiving_volume_m3=-30.0), "receiving_volume_m3 must be a number"),
    "volume just below": (lambda m: wall(m).update(receiving_volume_m3=0.99), "receiving_volume_m3 must be a number"),
    "volume huge": (lambda m: wall(m).update(receiving_volume_m3=1e300), "receiving_volume_m3 must be a number"),
    "volume beyond float": (lambda m: wall(m).update(source_volume_m3=10 ** 400), "source_volume_m3 must be a number"),
    "volume as text": (lambda m: wall(m).update(receiving_volume_m3="30"), "receiving_volume_m3 must be a number"),
    "volume true": (lambda m: wall(m).update(receiving_volume_m3=True), "receiving_volume_m3 must be a number"),
    "area huge": (lambda m: wall(m).update(separating_area_m2=10_000.5), "separating_area_m2 must be a number"),
    "lab Rw": (lambda m: wall(m).update(element_lab_rw_db=500), "element_lab_rw_db must be a number"),
    "calibrator": (lambda m: wall(m).update(calibrator_db=150.5), "calibrator_db must be a number"),
    "situation": (lambda m: wall(m).update(uncertainty_situation="Z"), "uncertainty situation must be one of"),
    "test type": (lambda m: wall(m).update(test_type="flanking"), "type must be one of airborne, impact"),
    # texts (validate.NAME_CHARS, NOTE_CHARS, REQUIREMENT_CHARS)
    "title 10 MB": (lambda m: wall(m).update(title=TEN_MB), "title is 10000000 characters long"),
    "title one too long": (lambda m: wall(m).update(title="t" * (NAME_CHARS + 1)), "title is 121 characters long"),
    "title a list": (lambda m: wall(m).update(title=["Wall"]), "title must be text"),
    "title NUL": (lambda m: wall(m).update(title="Wall\x00"), "NUL character"),
    "title lone surrogate": (lambda m: wall(m).update(title="\ud800"), "lone surrogates"),
    "project name 10 MB": (lambda m: project(m).update(name=TEN_MB), "project name is 10000000 characters long"),
    "project name empty": (lambda m: project(m).update(name="  "), "project name must not be empty"),
    "project client number": (lambda m: project(m).update(client=5), "project client must be text"),
    "address": (lambda m: project(m).update(address="a" * (NOTE_CHARS + 1)), "project address is 2001 characters"),
    "construction words": (lambda m: wall(m).update(construction="c" * (NOTE_CHARS + 1)), "construction is 2001"),
    "requirement text": (lambda m: wall(m).update(requirement="louder than next door"), "requirement"),
    "requirement long": (lambda m: wall(m).update(requirement="DnT,w >= 50" + " " * REQUIREMENT_CHARS),
                         "requirement is 91 characters long"),
    "timestamp": (lambda m: project(m).update(created_at="yesterday"), "not an ISO 8601 timestamp"),
    # settings the pages read
    "construction TOML": (lambda m: wall(m)["settings"].update(construction_toml="[[[ not toml"),
                          "declared construction is not valid TOML"),
    "construction TOML number": (lambda m: wall(m)["settings"].update(construction_toml=5),
                                 "construction_toml must be text"),
    "construction unknown material": (lambda m: wall(m)["settings"].update(
        construction_toml='[[leaf]]\nlayers = ["unobtainium:100"]\n'), "unobtainium"),
    "report details text": (lambda m: wall(m)["settings"].update(report_details="notes"),
                            "report_details must be a JSON object"),
    "report notes number": (lambda m: wall(m)["settings"]["report_details"].update(notes=5), "notes must be text"),
    "report unknown key": (lambda m: wall(m)["settings"]["report_details"].update(owner="x"), "unknown key 'owner'"),
    "report notes 10 MB": (lambda m: wall(m)["settings"]["report_details"].update(notes=TEN_MB),
                           "notes is 10000000 characters long"),
    "settings a list": (lambda m: wall(m).update(settings=[1]), "expected a JSON object"),
    "settings nested deep": (lambda m: wall(m)["settings"].update(deep=DEEP), "nested too deeply"),
    # pasted band levels, checked as the Takes page and the survey's band-level file are
    "CSV garbage": (lambda m: floor(m).update(band_levels_csv="garbage"), "band levels: needs a header row"),
    "CSV bad cell": (lambda m: floor(m).update(band_levels_csv="frequency_hz,Li\n100,abc\n"), "band levels"),
    "CSV T in ms": (lambda m: floor(m).update(band_levels_csv="frequency_hz,T\n100,500\n"), "band levels"),
    "CSV wrong column": (lambda m: floor(m).update(band_levels_csv="frequency_hz,L1\n100,60\n"),
                         "column 'L1' does not belong in impact tests"),
    "CSV a number": (lambda m: floor(m).update(band_levels_csv=5), "band levels must be text"),
    "CSV 10 MB": (lambda m: floor(m).update(band_levels_csv="frequency_hz,Li\n" + "100,60\n" * 1_500_000),
                  "band levels is 10500016 characters long"),
    # takes: role, position, channel, method, sweep, header values, names
    "role unknown": (lambda m: take(m).update(role="ceiling"), "role .* must be one of"),
    "role of another type": (lambda m: take(m).update(role="impact"), "role .* must be one of"),
    "position 0": (lambda m: take(m).update(speaker=0), "position must be a whole number from 1 to 99"),
    "position 100": (lambda m: take(m).update(speaker=100), "position must be a whole number from 1 to 99"),
    "position text": (lambda m: take(m).update(speaker="1"), "position must be a whole number"),
    "channel negative": (lambda m: take(m).update(channel=-1), "channel .0-based. must be a whole number"),
    "channel absent from file": (lambda m: take(m).update(channel=3), "channel 4 requested"),
    "method on a level take": (lambda m: take(m).update(method="impulse"), "method applies to decay takes only"),
    "method unknown": (lambda m: sweep(m).update(method="clap"), "decay method must be one of"),
    "sweep length huge": (lambda m: sweep(m).update(sweep_length_s=1e9), "sweep_length_s must be a number"),
    "source": (lambda m: take(m).update(source="fax"), "source must be one of upload, recorder"),
    "frames zero": (lambda m: take(m).update(frames=0), "frames must be a positive whole number"),
    "duration disagrees": (lambda m: take(m).update(duration_s=99.0), "duration_s"),
    "excluded text": (lambda m: take(m).update(excluded="no"), "excluded must be true or false"),
    "recording name 10 MB": (lambda m: take(m).update(original_name=TEN_MB), "is 10000000 characters long"),
    "recording name empty": (lambda m: take(m).update(original_name=""), "must not be empty"),
    "recorder settings": (lambda m: take(m).update(recorder_settings="on"), "expected a JSON object"),
    # shape
    "tests an object": (lambda m: m.update(tests={}), "tests must be a list"),
    "project a list": (lambda m: m.update(project=[]), "project must be a JSON object"),
}


@pytest.mark.parametrize("poison", POISONS)
def test_each_poisoned_field_is_refused_and_nothing_changes(archive, tmp_path, poison):
    edit, message = POISONS[poison]
    database = tmp_path / "target" / "fieldtl.sqlite3"
    with Store.open(database) as store:
        kept = store.create_project("Already here")
        kept_test = store.create_test(kept.id, TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0))
        store.add_take(kept_test.id, data=wav_bytes(330.0), original_name="kept.wav", role="source")
        before = full_dump(store, database)
        with pytest.raises(InputError, match=message) as caught:
            import_project(store, forged(archive, tmp_path, edit))
        text = str(caught.value)
        assert text.startswith("forged.zip: ") and "\n" not in text and len(text) < 400
        assert full_dump(store, database) == before
        assert sorted(p.name for p in store.audio_dir.iterdir()) == [f for f, _ in before[1]]


@pytest.mark.parametrize("raw, message", [
    ("{\"format\": \"fieldtl-project-archive\"}".encode("utf-16"), "not valid JSON"),     # not UTF-8
    (b"\xff\xfe\x00garbage", "not valid JSON"),
    (b"[" * 200_000 + b"]" * 200_000, "nested too deeply|not valid JSON"),
])
def test_undecodable_manifests_are_refused(archive, tmp_path, raw, message):
    with Store.open(tmp_path / "t.sqlite3") as store:
        with pytest.raises(InputError, match=message) as caught:
            import_project(store, forged(archive, tmp_path, raw=raw))
        assert "\n" not in str(caught.value) and store.list_projects() == ()


def test_the_unpoisoned_archive_imports(archive, tmp_path):
    # The same path with an edit that changes nothing: proves the refusals above come from the poison.
    with Store.open(tmp_path / "t.sqlite3") as store:
        imported = import_project(store, forged(archive, tmp_path, lambda m: None))
        tests = store.list_tests(imported.id)
        assert [t.setup.title for t in tests] == ["Wall", "Floor"]
        assert store.survey_for_test(tests[1].id).band_columns          # the pasted levels parse
        assert len(store.list_takes(tests[0].id)) == 2


def test_archive_names_with_newlines_stay_one_line(archive, tmp_path):
    with Store.open(tmp_path / "t.sqlite3") as store:
        bad = forged(archive, tmp_path, lambda m: wall(m).update(title=TEN_MB))
        with pytest.raises(InputError) as caught, open(bad, "rb") as handle:
            import_project(store, handle, source_name="line one\nline two.zip" + "z" * 200)
        assert "\n" not in str(caught.value) and str(caught.value).startswith("line one?line two.zip")
