"""The project store: migrations, round trips, takes that must be real audio, the calculator's
Survey, and project archives (good ones round-trip, bad ones change nothing).

Outside references: hashlib.sha256 (FIPS 180-4) for checksums, soundfile for what was written,
the ISO 16283-1 formulas (D, DnT, R' definitions, from memory) for the synthetic survey's truth, and the zip
format's central directory layout (PKWARE APPNOTE 4.3.12) for the forged archives.
"""

import dataclasses
import hashlib
import io
import json
import math
import sqlite3
import stat
import struct
import zipfile

import make_data
import numpy as np
import pytest
import soundfile
from hypothesis import given, settings
from hypothesis import strategies as hs

import fieldtl.store.schema as schema
from fieldtl.assess import assess
from fieldtl.bands import THIRD_OCTAVES_100_3150_HZ
from fieldtl.errors import InputError, StoreError
from fieldtl.measure import measure_survey
from fieldtl.store import (MIGRATIONS, SCHEMA_VERSION, Store, TestSetup, default_data_dir, default_database_path,
                           export_project, import_project)
from fieldtl.survey import load_survey

NAMES = tuple(m.__name__ for m in MIGRATIONS)
AIRBORNE = TestSetup(title="Bedroom 4 to bedroom 7", test_type="airborne", receiving_volume_m3=31.5,
                     separating_area_m2=10.8, requirement="DnT,w + Ctr >= 45")


def wav_bytes(*, seconds=0.25, frequency_hz=1000.0, subtype="PCM_24", samples=None, channels=1):
    """A short 48 kHz WAV in memory (make_data.sine), or the given samples."""
    if samples is None:
        samples = make_data.sine(frequency_hz, amplitude=0.5, duration_s=seconds)
        if channels > 1:
            samples = np.column_stack([samples] * channels)
    buffer = io.BytesIO()
    soundfile.write(buffer, samples, make_data.SAMPLE_RATE_HZ, format="WAV", subtype=subtype)
    return buffer.getvalue()


@pytest.fixture
def store():
    with Store.open(":memory:") as opened:
        yield opened


@pytest.fixture
def test_id(store):
    return store.create_test(store.create_project("Invented project").id, AIRBORNE).id


def stored_audio(store):
    """What audio the store holds: its audio folder's listing, or a team server's blobs (its database)."""
    if hasattr(store, "cache_dir"):
        with store._database.read() as db:
            return sorted(r[0] for r in db.execute("SELECT file_name FROM audio_blobs"))
    return sorted(p.name for p in store.audio_dir.iterdir())


def lose_audio(store, take):
    """Take a take's audio away behind the store's back: its file, or a team server's blob and cached copy."""
    if hasattr(store, "cache_dir"):
        with store._database.write() as db:
            db.execute("DELETE FROM audio_blobs WHERE file_name = ?", (take.file_name,))
        (store.cache_dir / take.file_name).unlink(missing_ok=True)
    else:
        store.take_path(take).unlink()


def state(store):
    """Everything stored: every project with its tests and takes, and the stored audio."""
    return tuple(store.snapshot(p.id) for p in store.list_projects()), stored_audio(store)


# --- opening and migrations ------------------------------------------------------------------------

def test_migrations_from_an_empty_database_are_recorded_by_name():
    with Store.open(":memory:") as fresh:
        assert fresh.applied_migrations == NAMES
        assert fresh.schema_state() == (SCHEMA_VERSION, NAMES)


def test_reopening_applies_nothing_twice(tmp_path):
    database = tmp_path / "fieldtl.sqlite3"
    with Store.open(database) as first:
        project_id = first.create_project("Kept").id
    with Store.open(database) as again:
        assert again.applied_migrations == ()
        assert again.schema_state() == (SCHEMA_VERSION, NAMES)
        assert again.get_project(project_id).name == "Kept"
    assert (tmp_path / "audio").is_dir()
    raw = sqlite3.connect(database)
    assert raw.execute("PRAGMA journal_mode").fetchone()[0] == "wal"       # WAL persists in the file
    assert raw.execute("SELECT count(*) FROM schema_migrations").fetchone()[0] == len(NAMES)


def test_a_second_migration_is_one_more_function(tmp_path, monkeypatch):
    database = tmp_path / "fieldtl.sqlite3"
    Store.open(database).close()

    def m9999_add_notes(connection):
        connection.execute("ALTER TABLE projects ADD COLUMN notes TEXT NOT NULL DEFAULT ''")

    monkeypatch.setattr(schema, "MIGRATIONS", MIGRATIONS + (m9999_add_notes,))
    with Store.open(database) as upgraded:
        assert upgraded.applied_migrations == ("m9999_add_notes",)
        assert upgraded.schema_state() == (SCHEMA_VERSION + 1, NAMES + ("m9999_add_notes",))
    monkeypatch.setattr(schema, "MIGRATIONS", MIGRATIONS)
    with pytest.raises(StoreError, match="do not match this version"):
        Store.open(database)


def test_a_failing_migration_changes_nothing(tmp_path, monkeypatch):
    database = tmp_path / "fieldtl.sqlite3"
    Store.open(database).close()

    def m0002_breaks_halfway(connection):
        connection.execute("CREATE TABLE half_done (x)")
        raise sqlite3.OperationalError("disk on fire")

    monkeypatch.setattr(schema, "MIGRATIONS", MIGRATIONS + (m0002_breaks_halfway,))
    with pytest.raises(StoreError, match="disk on fire"):
        Store.open(database)
    raw = sqlite3.connect(database)
    assert raw.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    assert raw.execute("SELECT name FROM sqlite_master WHERE name = 'half_done'").fetchone() is None


def test_a_file_that_is_not_a_database_is_refused(tmp_path):
    (tmp_path / "notes.sqlite3").write_text("shopping list\n" * 200)
    with pytest.raises(StoreError, match=r"^notes.sqlite3: not a usable fieldtl database"):
        Store.open(tmp_path / "notes.sqlite3")


def test_default_data_dir_follows_the_environment(tmp_path, monkeypatch):
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path))
    assert default_data_dir() == tmp_path
    assert default_database_path() == tmp_path / "fieldtl.sqlite3"
    monkeypatch.delenv("FIELDTL_DATA_DIR")
    assert "fieldtl" in default_data_dir().parts[-1]


# --- round trips -----------------------------------------------------------------------------------

texts = hs.text(hs.characters(blacklist_categories=("Cs",), blacklist_characters="\x00"), max_size=40)  # not NUL

names = texts.filter(lambda s: s.strip())
json_values = hs.recursive(hs.none() | hs.booleans() | hs.integers(-2**53, 2**53) | texts
                           | hs.floats(allow_nan=False, allow_infinity=False),
                           lambda inner: hs.lists(inner, max_size=3) | hs.dictionaries(texts, inner, max_size=3),
                           max_leaves=8)
# inside fieldtl.validate's physical ranges (volume 1-100 000 m3, area 0.1-10 000 m2, lab Rw 1-100 dB)
volumes, areas, lab_ratings = hs.floats(1.0, 1e5), hs.floats(0.1, 1e4), hs.floats(1.0, 100.0)


@settings(max_examples=40, deadline=None)
@given(name=names, client=texts, address=texts, engineer=texts, new_name=names)
def test_projects_round_trip(name, client, address, engineer, new_name):
    with Store.open(":memory:") as store:
        created = store.create_project(name, client=client, address=address, engineer=engineer)
        assert store.get_project(created.id) == created
        assert store.list_projects() == (created,)
        updated = store.update_project(created.id, name=new_name)
        assert (updated.name, updated.client, updated.address) == (new_name, client, address)
        assert store.get_project(created.id) == updated


@settings(max_examples=40, deadline=None)
@given(title=texts, construction=texts, receiving=volumes, area=hs.none() | areas, lab_rw=hs.none() | lab_ratings,
       requirement=hs.sampled_from([None, "DnT,w + Ctr >= 45", "R'w ≥ 53", "DnT,w >= 50"]),
       situation=hs.sampled_from("ABC"), calibrator_db=hs.floats(60.0, 150.0),
       settings_json=hs.dictionaries(texts, json_values, max_size=4))
def test_tests_round_trip(title, construction, receiving, area, lab_rw, requirement, situation, calibrator_db,
                          settings_json):
    setup = TestSetup(title=title, test_type="airborne", receiving_volume_m3=receiving, separating_area_m2=area,
                      construction=construction, requirement=requirement, element_lab_rw_db=lab_rw,
                      uncertainty_situation=situation, calibrator_db=calibrator_db, settings=settings_json)
    with Store.open(":memory:") as store:
        project = store.create_project("p")
        created = store.create_test(project.id, setup)
        assert store.get_test(created.id) == created
        assert store.get_test(created.id).setup.settings == settings_json
        assert store.list_tests(project.id) == (created,)
        changed = store.update_test(created.id, dataclasses.replace(setup, test_type="impact", title=title + "'"))
        assert store.get_test(created.id) == changed


@pytest.mark.parametrize("change, message", [
    (dict(test_type="both"), "type must be one of airborne, impact"),
    (dict(receiving_volume_m3=0.0), "receiving_volume_m3 must be a number from 1 to 100000 m3, got 0.0"),
    (dict(receiving_volume_m3=0.999), "receiving_volume_m3 must be a number from 1 to 100000 m3"),
    (dict(receiving_volume_m3=100_000.5), "receiving_volume_m3 must be a number from 1 to 100000 m3"),
    (dict(separating_area_m2=math.nan), "separating_area_m2 must be a number .* got nan"),
    (dict(source_volume_m3=10 ** 400), "source_volume_m3 must be a number"),
    (dict(requirement="DnT,w <= 45"), "complies when it is at least the limit"),
    (dict(uncertainty_situation="D"), "uncertainty situation must be one of A, B, C"),
    (dict(calibrator_db=59.9), "calibrator_db must be a number from 60 to 150 dB"),
    (dict(calibrator_db=150.1), "calibrator_db must be a number from 60 to 150 dB"),
    (dict(title="x" * 121), "title is 121 characters long; at most 120"),
    (dict(construction="x" * 2001), "construction is 2001 characters long; at most 2000"),
    (dict(requirement="DnT,w >= 45" + " " * 70), "requirement is 81 characters long; at most 80"),
    (dict(settings={"when": (1, 2)}), "does not survive JSON unchanged"),
    (dict(title="\ud800"), "lone surrogates"),
])
def test_bad_test_setups_are_refused_in_one_line(change, message):
    with pytest.raises(InputError, match=message) as caught:
        dataclasses.replace(AIRBORNE, **change)
    assert "\n" not in str(caught.value)


def test_takes_round_trip_with_their_audio(store, test_id):
    data = wav_bytes(channels=2)
    settings_json = {"echoCancellation": False, "noiseSuppression": False, "autoGainControl": False,
                     "sampleRate": 48000, "deviceLabel": "Invented USB mic «Ü» 'quoted'"}
    take = store.add_take(test_id, data=data, original_name="pièce 1.WAV", role="receiving", speaker=2, channel=1,
                          source="recorder", recorder_settings=settings_json)
    assert store.get_take(take.id) == take and store.list_takes(test_id) == (take,)
    assert take.recorder_settings == settings_json
    assert take.sha256 == hashlib.sha256(data).hexdigest()                       # hashlib, FIPS 180-4
    assert take.file_name == take.sha256 + ".wav"
    assert store.take_path(take).read_bytes() == data
    info = soundfile.info(io.BytesIO(data))
    assert (take.sample_rate_hz, take.frames, take.duration_s) == (48_000, info.frames, info.frames / 48_000)
    assert store.set_take_excluded(take.id, True) == dataclasses.replace(take, excluded=True)
    assert store.get_take(take.id).excluded is True


def test_same_audio_twice_is_one_file_kept_until_pruned(store, test_id):
    data = wav_bytes()
    first = store.add_take(test_id, data=data, original_name="a.wav", role="source")
    second = store.add_take(test_id, data=data, original_name="b.wav", role="source", speaker=2)
    assert first.file_name == second.file_name and stored_audio(store) == [first.file_name]
    store.delete_take(first.id)
    assert store.clean_files() == () and store.take_path(second).read_bytes() == data
    store.delete_take(second.id)
    assert store.list_takes(test_id) == ()
    assert [p.name for p in store.clean_files()] == [first.file_name] and stored_audio(store) == []


def test_deleting_a_project_deletes_its_tests_and_takes(store, test_id):
    take = store.add_take(test_id, data=wav_bytes(), original_name="a.wav", role="source")
    store.delete_project(store.get_test(test_id).project_id)
    assert store.list_projects() == ()
    for getter, row_id in ((store.get_test, test_id), (store.get_take, take.id)):
        with pytest.raises(InputError, match="no (test|take) with id"):
            getter(row_id)


def _nan_wav(tmp_path):
    samples = make_data.sine(1000, amplitude=0.5, duration_s=0.25)
    samples[5000] = np.nan
    return wav_bytes(samples=samples, subtype="FLOAT")


def _truncated_wav(tmp_path):
    whole = make_data.write(tmp_path / "whole.wav", make_data.sine(1000, amplitude=0.5, duration_s=0.5))
    return make_data.truncated_copy(whole, tmp_path / "half.wav").read_bytes()


@pytest.mark.parametrize("make, message", [
    (lambda tmp_path: b"this is text, not audio\n", "not a readable WAV or FLAC file"),
    (lambda tmp_path: b"", "file is empty"),
    (_truncated_wav, "truncated file"),
    (_nan_wav, "contains NaN or infinite samples"),
])
def test_bad_audio_stores_nothing(store, test_id, tmp_path, make, message):
    before = state(store)
    with pytest.raises(InputError, match=message) as caught:
        store.add_take(test_id, data=make(tmp_path), original_name="Take 3 (bad).wav", role="source")
    text = str(caught.value)
    assert text.startswith("Take 3 (bad).wav: ") and "\n" not in text
    assert str(store.audio_dir) not in text and ".incoming-" not in text
    assert state(store) == before and stored_audio(store) == [] and list(store.audio_dir.iterdir()) == []


def test_oversize_take_is_refused_before_anything_is_written(tmp_path):
    with Store.open(":memory:", audio_dir=tmp_path / "audio", max_take_bytes=10_000) as small:
        test_id = small.create_test(small.create_project("p").id, AIRBORNE).id
        with pytest.raises(InputError, match=r"^big.wav: .* MB allowed per recording"):
            small.add_take(test_id, data=wav_bytes(seconds=1.0), original_name="big.wav", role="source")
        assert small.list_takes(test_id) == () and list((tmp_path / "audio").iterdir()) == []


@pytest.mark.parametrize("options, message", [
    (dict(role="impact"), "role .for airborne tests. must be one of .*, got 'impact'"),
    (dict(role="decay"), "decay method must be one of impulse, interrupted, sweep, got None"),
    (dict(role="source", method="impulse"), "method applies to decay takes only"),
    (dict(role="decay", method="sweep"), "a sweep decay needs sweep_start_hz"),
    (dict(role="source", speaker=0), "position must be a whole number from 1 to 99, got 0"),
    (dict(role="source", speaker=100), "position must be a whole number from 1 to 99, got 100"),
    (dict(role="source", channel=1), "channel 2 requested but the file has 1 channel"),
    (dict(role="source", source="email"), "source must be one of upload, recorder"),
    (dict(role="source", recorder_settings={"gain": math.inf}), "not storable as JSON"),
])
def test_take_descriptions_are_checked(store, test_id, options, message):
    with pytest.raises(InputError, match=rf"^t\.wav\b.*{message}"):
        store.add_take(test_id, data=wav_bytes(), original_name="t.wav", **options)
    assert store.list_takes(test_id) == () and stored_audio(store) == []


def test_test_type_cannot_change_under_its_takes(store, test_id):
    store.add_take(test_id, data=wav_bytes(), original_name="s.wav", role="source")
    with pytest.raises(InputError, match="role .for impact tests. must be one of impact, .*got 'source'"):
        store.update_test(test_id, dataclasses.replace(AIRBORNE, test_type="impact"))
    assert store.get_test(test_id).setup == AIRBORNE


# --- the calculator's view -------------------------------------------------------------------------

S_M2, V2_M3, V1_M3 = make_data.WALL_S_M2, make_data.WALL_V2_M3, make_data.WALL_V1_M3
R_TRUE, L1_TRUE, B_TRUE, T_TRUE = make_data.WALL_R_TRUE, make_data.WALL_L1_TRUE, make_data.WALL_B_TRUE, make_data.WALL_T_TRUE


def test_survey_for_test_is_what_the_calculator_measures(store, tmp_path):
    # The invented survey of test_end_to_end (one loudspeaker, one microphone) entered take by take.
    survey_file = make_data.airborne_survey(tmp_path, reduction_db=R_TRUE, source_db=L1_TRUE, background_db=B_TRUE,
                                            reverberation_s=T_TRUE, area_m2=S_M2, receiving_volume_m3=V2_M3,
                                            source_volume_m3=V1_M3, speakers=1, microphones=1)
    from_file = load_survey(survey_file)
    setup = TestSetup(title=from_file.title, test_type="airborne", receiving_volume_m3=V2_M3, separating_area_m2=S_M2,
                      source_volume_m3=V1_M3, requirement=from_file.requirement)
    test_id = store.create_test(store.create_project("Invented").id, setup).id
    assert store.missing_roles(test_id) == ("source", "receiving", "background", "decay")
    with pytest.raises(InputError, match="^test 'Invented end-to-end check': no included take with role source"):
        store.survey_for_test(test_id)
    store.add_take(test_id, data=from_file.calibration.file.read_bytes(), original_name="cal.wav", role="calibration")
    for spec in from_file.takes:
        store.add_take(test_id, data=spec.file.read_bytes(), original_name=spec.file.name, role=spec.role,
                       speaker=spec.speaker, method=spec.method)
    stray = store.add_take(test_id, data=wav_bytes(), original_name="door slam.wav", role="receiving")
    store.set_take_excluded(stray.id, True)
    assert store.missing_roles(test_id) == ()

    survey = store.survey_for_test(test_id)
    assert [(t.role, t.speaker, t.method, hashlib.sha256(t.file.read_bytes()).hexdigest()) for t in survey.takes] == [
        (t.role, t.speaker, t.method, hashlib.sha256(t.file.read_bytes()).hexdigest()) for t in from_file.takes]
    assert all(t.file.is_absolute() for t in survey.takes)
    assert survey.calibration.reference_db == 94.0 and survey.calibration.file_after is None
    assert (survey.geometry, survey.requirement) == (from_file.geometry, from_file.requirement)

    measured = measure_survey(survey)
    result = assess(survey, measured.takes, calibrated=measured.calibrated, findings=measured.findings).result
    t_s = T_TRUE.as_array()
    d_db = R_TRUE.as_array() - 10 * np.log10(S_M2 / (0.16 * V2_M3 / t_s))       # ISO 16283-1: R' = D + 10 lg(S/A)
    dnt_db = d_db + 10 * np.log10(t_s / 0.5)                                    # DnT = D + 10 lg(T/T0), T0 = 0.5 s
    required = [make_data.WALL_BANDS.index(f) for f in THIRD_OCTAVES_100_3150_HZ]
    assert measured.calibrated
    assert np.abs(result.standardized_level_difference_db.as_array()[required] - dnt_db[required]).max() < 0.5


def test_band_levels_alone_make_a_survey(store, test_id):
    csv_text = "frequency_hz,L1,L2,B,T\n" + "".join(f"{f:g},90,50,20,0.6\n" for f in THIRD_OCTAVES_100_3150_HZ)
    assert store.set_band_levels(test_id, csv_text).band_levels_csv == csv_text
    survey = store.survey_for_test(test_id)
    assert survey.takes == () and [c.role for c in survey.band_columns] == ["source", "receiving", "background",
                                                                            "decay"]
    with pytest.raises(InputError, match="column 'Li' does not belong in airborne tests"):
        store.set_band_levels(test_id, "frequency_hz,Li\n100,60\n")
    with pytest.raises(InputError, match="is not a nominal one-third-octave frequency"):
        store.set_band_levels(test_id, "frequency_hz,L1\n101,60\n")
    assert store.get_test(test_id).band_levels_csv == csv_text
    assert store.set_band_levels(test_id, None).band_levels_csv is None


def test_calibration_takes_must_be_unambiguous(store, test_id):
    tone = wav_bytes(seconds=0.5)
    for role in ("source", "receiving", "background"):
        store.add_take(test_id, data=wav_bytes(frequency_hz=500.0), original_name=f"{role}.wav", role=role)
    store.add_take(test_id, data=wav_bytes(frequency_hz=250.0), original_name="ir.wav", role="decay", method="impulse")
    after = store.add_take(test_id, data=tone, original_name="cal_end.wav", role="calibration_after")
    with pytest.raises(InputError, match="calibration_after take needs a calibration take"):
        store.survey_for_test(test_id)
    first = store.add_take(test_id, data=tone, original_name="cal_a.wav", role="calibration")
    assert store.survey_for_test(test_id).calibration.file_after == store.take_path(after)
    second = store.add_take(test_id, data=tone, original_name="cal_b.wav", role="calibration")
    with pytest.raises(InputError, match="2 included takes with role calibration; exclude all but one"):
        store.survey_for_test(test_id)
    store.set_take_excluded(first.id, True)
    assert store.survey_for_test(test_id).calibration.file == store.take_path(second)


def test_missing_audio_file_is_a_store_error(store, test_id):
    for role in ("source", "receiving", "background"):
        take = store.add_take(test_id, data=wav_bytes(frequency_hz=300.0 + len(role)), original_name=f"{role}.wav",
                              role=role)
    store.add_take(test_id, data=wav_bytes(), original_name="ir.wav", role="decay", method="impulse")
    lose_audio(store, take)
    with pytest.raises(StoreError, match="the audio of 'background.wav'"):
        store.survey_for_test(test_id)


# --- archives --------------------------------------------------------------------------------------

@pytest.fixture
def exported(tmp_path):
    """A store with one project of two tests (one sweep decay, one pasted-levels impact test) and its archive."""
    with Store.open(tmp_path / "a" / "fieldtl.sqlite3") as source:
        project = source.create_project("Invented «flats» 'B'", client="Ü client", engineer='E "q"')
        airborne = source.create_test(project.id, dataclasses.replace(AIRBORNE, settings={"speaker_rule": "energy"}))
        shared = wav_bytes(frequency_hz=440.0)
        source.add_take(airborne.id, data=shared, original_name="s1.wav", role="source", source="recorder",
                        recorder_settings={"autoGainControl": False, "deviceLabel": "mic ☺"})
        source.add_take(airborne.id, data=shared, original_name="s1 again.wav", role="source", speaker=2)
        excluded = source.add_take(airborne.id, data=wav_bytes(frequency_hz=880.0), original_name="r.wav",
                                   role="receiving")
        source.set_take_excluded(excluded.id, True)
        source.add_take(airborne.id, data=wav_bytes(frequency_hz=220.0), original_name="sweep.wav", role="decay",
                        method="sweep", sweep_start_hz=50.0, sweep_stop_hz=10_000.0, sweep_length_s=2.0)
        impact = source.create_test(project.id, TestSetup(title="Floor", test_type="impact", receiving_volume_m3=40.0))
        source.set_band_levels(impact.id, "frequency_hz,Li,B,T\n100,60,20,0.5\n125,61,20,0.5\n")
        snapshot = source.snapshot(project.id)
        export_project(source, project.id, tmp_path / "project.zip")
    return snapshot, tmp_path / "project.zip"


def _same_content(a, b):
    """Snapshots equal apart from ids and the imported project's updated_at."""
    return (dataclasses.replace(a.project, id=0, updated_at="") == dataclasses.replace(b.project, id=0, updated_at="")
            and [dataclasses.replace(t, id=0, project_id=0) for t in a.tests]
            == [dataclasses.replace(t, id=0, project_id=0) for t in b.tests]
            and [dataclasses.replace(t, id=0, test_id=0) for t in a.takes]
            == [dataclasses.replace(t, id=0, test_id=0) for t in b.takes])


def test_export_then_import_round_trips_a_project(exported, tmp_path):
    original, archive = exported
    with zipfile.ZipFile(archive) as opened:
        manifest = json.loads(opened.read("manifest.json"))
        for take in (t for test in manifest["tests"] for t in test["takes"]):
            assert hashlib.sha256(opened.read(take["file"])).hexdigest() == take["sha256"]
        assert len([n for n in opened.namelist() if n.startswith("audio/")]) == 3     # shared audio once
    with Store.open(tmp_path / "b" / "fieldtl.sqlite3") as target:
        kept = target.create_project("Already here")
        imported = import_project(target, archive)
        assert imported.id != kept.id and target.get_project(kept.id) == kept
        copy = target.snapshot(imported.id)
        assert _same_content(original, copy)
        for take in copy.takes:
            assert hashlib.sha256(target.take_path(take).read_bytes()).hexdigest() == take.sha256
        again = import_project(target, archive)                 # a second import is another new project
        assert again.id not in (kept.id, imported.id) and len(target.list_projects()) == 3
        assert len(list(target.audio_dir.iterdir())) == 3       # same content, same files


def test_export_refuses_audio_that_changed_on_disk(tmp_path, store, test_id):
    take = store.add_take(test_id, data=wav_bytes(), original_name="s.wav", role="source")
    store.take_path(take).write_bytes(wav_bytes(frequency_hz=999.0))
    with pytest.raises(StoreError, match="no longer matches its SHA-256"):
        export_project(store, store.get_test(test_id).project_id, tmp_path / "out.zip")
    assert not (tmp_path / "out.zip").exists() and not (tmp_path / "out.zip.part").exists()


def _rebuild(archive, tmp_path, *, change=lambda name, data: (name, data), extra=()):
    """A copy of ``archive`` with each member passed through ``change`` (None drops it) plus ``extra`` ZipInfos."""
    out = tmp_path / "forged.zip"
    with zipfile.ZipFile(archive) as source, zipfile.ZipFile(out, "w") as target:
        for name in source.namelist():
            changed = change(name, source.read(name))
            if changed is not None:
                target.writestr(*changed)
        for info, data in extra:
            target.writestr(info, data)
    return out


def _manifest_change(edit):
    def change(name, data):
        if name != "manifest.json":
            return name, data
        manifest = json.loads(data)
        edit(manifest)
        return name, json.dumps(manifest)
    return change


def _set_declared_size(archive, member, size):
    """Rewrite a member's uncompressed size in the central directory (APPNOTE 4.3.12: offset 24, 4 bytes LE)."""
    data = bytearray(archive.read_bytes())
    position = data.find(b"PK\x01\x02")
    while position >= 0:
        name_length = struct.unpack_from("<H", data, position + 28)[0]
        if data[position + 46: position + 46 + name_length].decode() == member:
            struct.pack_into("<I", data, position + 24, size)
        position = data.find(b"PK\x01\x02", position + 4)
    archive.write_bytes(bytes(data))
    return archive


def _first_audio(archive):
    with zipfile.ZipFile(archive) as opened:
        return next(n for n in opened.namelist() if n.startswith("audio/"))


def _write(path, data):
    path.write_bytes(data)
    return path


def _flip_last_audio_bytes(name, data):
    return (name, data[:-2] + bytes(255 - b for b in data[-2:])) if name.startswith("audio/") else (name, data)


def _symlink(name):
    info = zipfile.ZipInfo(name)
    info.external_attr = (stat.S_IFLNK | 0o777) << 16
    return info, "/etc/passwd"


FORGERIES = {
    "path traversal": (lambda a, p: _rebuild(a, p, extra=[(zipfile.ZipInfo("../x"), "x")]), "points outside"),
    "absolute path": (lambda a, p: _rebuild(a, p, extra=[(zipfile.ZipInfo("/tmp/x"), "x")]), "absolute path"),
    "windows path": (lambda a, p: _rebuild(a, p, extra=[(zipfile.ZipInfo("C:\\x"), "x")]), "absolute path"),
    "symbolic link": (lambda a, p: _rebuild(a, p, extra=[_symlink("audio/" + "0" * 64 + ".wav")]), "symbolic link"),
    "stray member": (lambda a, p: _rebuild(a, p, extra=[(zipfile.ZipInfo("notes.txt"), "x")]), "unexpected member"),
    "audio changed": (lambda a, p: _rebuild(a, p, change=_flip_last_audio_bytes), "does not match its SHA-256 checksum"),
    "manifest checksum": (lambda a, p: _rebuild(a, p, change=_manifest_change(
        lambda m: m["tests"][0]["takes"][0].update(sha256="f" * 64))), "is not audio/<its sha256>"),
    "missing audio": (lambda a, p: _rebuild(a, p, change=lambda n, d: None if n == _first_audio(a) else (n, d)),
                      "named in the manifest is missing"),
    "oversize declared": (lambda a, p: _set_declared_size(_rebuild(a, p), _first_audio(a), 0xFFFF_FFF0),
                          "declares 4294967280 bytes, more than the"),
    "undersize declared": (lambda a, p: _set_declared_size(_rebuild(a, p), _first_audio(a), 100), "damaged"),
    "wrong role": (lambda a, p: _rebuild(a, p, change=_manifest_change(
        lambda m: m["tests"][1].update(takes=[dict(m["tests"][0]["takes"][0])]))), "role .for impact tests. must be one of .*got 'source'"),
    "unknown key": (lambda a, p: _rebuild(a, p, change=_manifest_change(lambda m: m["project"].update(owner="x"))),
                    "unknown key 'owner'"),
    "newer format": (lambda a, p: _rebuild(a, p, change=_manifest_change(lambda m: m.update(format_version=2))),
                     "archive format version 2"),
    "bad json": (lambda a, p: _rebuild(a, p, change=lambda n, d: (n, d[:-1]) if n == "manifest.json" else (n, d)),
                 "manifest.json is not valid JSON"),
    "not a zip": (lambda a, p: _write(p / "forged.zip", b"PK\x03\x04 nothing"), "damaged or unsupported zip archive"),
}


@pytest.mark.parametrize("forgery", FORGERIES)
def test_bad_archives_change_nothing(exported, tmp_path, forgery):
    make, message = FORGERIES[forgery]
    forged = make(exported[1], tmp_path)
    with Store.open(tmp_path / "b" / "fieldtl.sqlite3") as target:
        project = target.create_project("Already here")
        target.add_take(target.create_test(project.id, AIRBORNE).id, data=wav_bytes(), original_name="s.wav",
                        role="source")
        before = state(target)
        with pytest.raises(InputError, match=message) as caught:
            import_project(target, forged)
        assert str(caught.value).startswith("forged.zip: ") and "\n" not in str(caught.value)
        assert state(target) == before


def test_zip_bomb_is_refused_by_its_declared_size(tmp_path, store):
    # 4 MB of zeros deflates to a few kB; the limit applies to what it would unpack to.
    bomb = tmp_path / "bomb.zip"
    with zipfile.ZipFile(bomb, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("manifest.json", "{}")
        archive.writestr("audio/" + "a" * 64 + ".wav", bytes(4_000_000))
    assert bomb.stat().st_size < 50_000
    with pytest.raises(InputError, match="declares 4000000 bytes, more than the 1000000 allowed"):
        import_project(store, bomb, max_member_bytes=1_000_000)
    assert store.list_projects() == ()


def test_a_take_can_be_reanalysed_on_another_channel(tmp_path):
    import numpy as np
    import soundfile

    from fieldtl.errors import InputError
    from fieldtl.store import Store, TestSetup

    path = tmp_path / "two.wav"
    soundfile.write(str(path), np.column_stack([np.zeros(48_000), 0.1 * np.ones(48_000)]), 48_000, subtype="FLOAT")
    with Store.open(":memory:") as store:
        test = store.create_test(store.create_project("p").id,
                                 TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0))
        take = store.add_take(test.id, data=path.read_bytes(), original_name="two.wav", role="background")
        assert store.set_take_channel(take.id, 1).channel == 1 == store.get_take(take.id).channel
        with pytest.raises(InputError, match="channel 3 requested but the file has 2 channels"):
            store.set_take_channel(take.id, 2)
        assert store.get_take(take.id).channel == 1        # nothing changed by the refused request
