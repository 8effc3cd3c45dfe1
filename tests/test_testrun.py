"""One path for a test, each take measured once (issue 10 items 1 and 2).

The checks are identities a cache must keep, not values: the assessment read from kept
measurements is byte-for-byte the one measured afresh (JSON as written by the CLI); the CLI and the
app's core call give the same document for the invented demo; and a kept measurement is used only
while the audio (SHA-256, FIPS 180-4 via hashlib) and every setting its analysis depends on are
unchanged. The store's own calibrator rule decides which tone calibrates the takes.
"""

import dataclasses
import hashlib
import io
import json
import math
import os
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import soundfile

import fieldtl.measure_cache as measure_cache
import fieldtl.store.schema as schema
from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, BandSpectrum
from fieldtl.errors import InputError
from fieldtl.cli import main
from fieldtl.findings import Finding
from fieldtl.qa import TakeSummary
from fieldtl.report.export import assessment_to_json, json_text
from fieldtl.store import MIGRATIONS, SCHEMA_VERSION, Store, TestSetup
from fieldtl.store.survey_import import import_survey
from fieldtl.survey import load_survey
from fieldtl.testrun import BackgroundMeasurer, assess_survey, assess_test, measure_test_takes, store_cache

DEMO = Path(__file__).resolve().parents[1] / "sample_audio"
AIRBORNE = TestSetup(title="Invented room pair", test_type="airborne", receiving_volume_m3=38.0,
                     separating_area_m2=11.5, source_volume_m3=48.0)


def document(assessment) -> str:
    """The JSON text `fieldtl assess --json` writes."""
    return json_text(assessment_to_json(assessment))


@pytest.fixture(scope="module")
def fresh_demo_json():
    return document(assess_survey(load_survey(DEMO / "survey.toml")))


class Counting:
    """measure_take and calibrate_file wrapped to record which files were really analysed."""

    def __init__(self, monkeypatch):
        self.files: list[str] = []
        take, calibrate = measure_cache.measure_take, measure_cache.calibrate_file

        def counted_take(spec, **options):
            self.files.append(spec.file.name)
            return take(spec, **options)

        def counted_calibration(file, channel, reference_db):
            self.files.append(file.name)
            return calibrate(file, channel, reference_db)

        monkeypatch.setattr(measure_cache, "measure_take", counted_take)
        monkeypatch.setattr(measure_cache, "calibrate_file", counted_calibration)

    def since(self, mark: int) -> list[str]:
        return self.files[mark:]


# --- cached and fresh give the same assessment ------------------------------------------------------

def test_cached_and_fresh_assessments_are_byte_identical_also_after_a_restart(tmp_path, monkeypatch, fresh_demo_json):
    survey = load_survey(DEMO / "survey.toml")
    with Store.open(tmp_path / "fieldtl.sqlite3") as store:
        measuring = document(assess_survey(survey, cache=store_cache(store)))     # measures and keeps
        assert len(store.measurements.keys()) == len(survey.takes) + 2            # + both calibrator tones
    counting = Counting(monkeypatch)
    with Store.open(tmp_path / "fieldtl.sqlite3") as reopened:                    # a restart
        kept = document(assess_survey(survey, cache=store_cache(reopened)))
    assert counting.files == []                                                   # nothing analysed again
    assert measuring == fresh_demo_json
    assert kept == fresh_demo_json


def test_the_cli_and_the_app_give_the_same_assessment_of_the_demo(tmp_path, monkeypatch, fresh_demo_json):
    from fieldtl.ui import cached
    import streamlit as st

    out = tmp_path / "cli.json"
    assert main(["assess", str(DEMO / "survey.toml"), "--json", str(out)]) == 0
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "app"))      # the app's own store, demo imported
    monkeypatch.delenv("FIELDTL_NO_DEMO", raising=False)
    st.cache_resource.clear()
    st.cache_data.clear()
    try:
        store = cached.store()
        project = store.list_projects()[0]
        test = store.list_tests(project.id)[0]
        app = document(cached.assessment(store.survey_for_test(test.id)))       # what the Results page reads
        for take in store.list_takes(test.id):                                    # storage names → file names
            app = app.replace(take.file_name, take.original_name)
    finally:
        st.cache_resource.clear()
        st.cache_data.clear()
    assert out.read_text(encoding="utf-8") == app == fresh_demo_json


HEAVY = ("scipy.signal", "scipy.stats", "matplotlib", "fieldtl.analysis.levels", "fieldtl.analysis.decay")
PROBE = ("import io, contextlib, sys\n"
         "from fieldtl.cli import main\n"
         "out = io.StringIO()\n"
         "with contextlib.redirect_stdout(out): code = main(sys.argv[1:])\n"
         f"print(code, sorted(m for m in {HEAVY!r} if m in sys.modules))\n"
         "print(out.getvalue())\n")


def run_cli(*args, env):
    done = subprocess.run([sys.executable, "-c", PROBE, *args], capture_output=True, text=True, env=env, timeout=600)
    assert done.returncode == 0, done.stderr
    status, _, text = done.stdout.partition("\n")
    return status, text


def test_a_second_fieldtl_assess_reads_kept_measurements_and_loads_no_analysis(tmp_path):
    # Module lists, not timings: what a run imports is the cost the issue is about (scipy.signal
    # alone pulls in scipy.stats), and it is the same on any machine.
    env = dict(os.environ, FIELDTL_DATA_DIR=str(tmp_path))
    env.pop("FIELDTL_NO_CACHE", None)
    assert run_cli("--help", env=env)[0] == f"0 {[]}"                             # the parser alone
    first_status, first = run_cli("assess", str(DEMO / "survey.toml"), env=env)
    assert first_status.startswith("0 ") and "scipy.signal" in first_status      # measured: analysis loaded
    second_status, second = run_cli("assess", str(DEMO / "survey.toml"), env=env)
    assert second_status == f"0 {[]}" and second == first                         # read back, same report
    fresh_status, fresh = run_cli("assess", str(DEMO / "survey.toml"), env=dict(env, FIELDTL_NO_CACHE="1"))
    assert "scipy.signal" in fresh_status and fresh == first
    flag_status, flagged = run_cli("assess", str(DEMO / "survey.toml"), "--fresh", env=env)
    assert "scipy.signal" in flag_status and flagged == first


# --- what invalidates a kept measurement -------------------------------------------------------------

def flac_bytes(*names: str) -> bytes:
    """Demo recordings side by side as the channels of one FLAC file."""
    channels = [soundfile.read(DEMO / name)[0] for name in names]
    buffer = io.BytesIO()
    soundfile.write(buffer, np.column_stack(channels), 48_000, format="FLAC", subtype="PCM_24")
    return buffer.getvalue()


@pytest.fixture
def three_takes():
    with Store.open(":memory:") as store:
        test_id = store.create_test(store.create_project("Invented").id, AIRBORNE).id
        two = store.add_take(test_id, data=flac_bytes("rec_s1_p1.flac", "rec_s1_p2.flac"), original_name="two.flac",
                             role="receiving")
        one = store.add_take(test_id, data=(DEMO / "src_s1_p1.flac").read_bytes(), original_name="src.flac",
                             role="source")
        decay = store.add_take(test_id, data=(DEMO / "ir_s1_p1.flac").read_bytes(), original_name="ir.flac",
                               role="decay", method="impulse")
        yield store, test_id, two, one, decay


def test_each_take_is_measured_once_and_a_setting_change_remeasures_that_take_only(three_takes, monkeypatch):
    store, test_id, two, one, decay = three_takes
    counting = Counting(monkeypatch)
    first = measure_test_takes(store, test_id)
    assert sorted(counting.files) == sorted([two.file_name, one.file_name, decay.file_name])
    keys = store.measurements.keys()
    assert len(keys) == 3

    mark = len(counting.files)
    assert measure_test_takes(store, test_id) == first                    # all read back, equal
    assert counting.since(mark) == []

    store.set_take_channel(two.id, 1)                                     # channel: that take only
    mark = len(counting.files)
    second = measure_test_takes(store, test_id)
    assert counting.since(mark) == [two.file_name]
    assert store.measurements.keys() > keys and len(store.measurements.keys()) == 4
    assert second.outcomes[two.id].summary.level_db != first.outcomes[two.id].summary.level_db
    assert second.outcomes[one.id] == first.outcomes[one.id]

    store.update_take(decay.id, role="decay", speaker=1, method="interrupted")   # decay method: that take only
    mark = len(counting.files)
    measure_test_takes(store, test_id)
    assert counting.since(mark) == [decay.file_name]

    store.update_take(one.id, role="receiving", speaker=2)      # role and position label, they change no analysis
    mark = len(counting.files)
    third = measure_test_takes(store, test_id)
    assert counting.since(mark) == []
    assert (third.outcomes[one.id].summary.role, third.outcomes[one.id].summary.speaker) == ("receiving", 2)


def test_a_new_analysis_version_remeasures(three_takes, monkeypatch):
    store, test_id, two, one, decay = three_takes
    measure_test_takes(store, test_id)
    counting = Counting(monkeypatch)
    monkeypatch.setattr(measure_cache, "ANALYSIS_VERSION", measure_cache.ANALYSIS_VERSION + 1)
    measure_cache.analysis_version.cache_clear()
    try:
        measure_test_takes(store, test_id)
        assert sorted(counting.files) == sorted([two.file_name, one.file_name, decay.file_name])
        assert store.measurements.forget_other_versions(measure_cache.analysis_version()) == 3   # the old rows
    finally:
        measure_cache.analysis_version.cache_clear()


def test_store_clean_removes_measurements_of_another_analysis_version_only(tmp_path, capsys):
    with Store.open(tmp_path / "fieldtl.sqlite3") as store:
        rows = store.measurements
        for key, version in (("a" * 64, "0-old"), ("b" * 64, "0-old"), ("c" * 64, measure_cache.analysis_version())):
            rows.put(key, sha256="d" * 64, analysis_version=version, settings_json="{}", measurement_json="{}")
    assert main(["store", "clean", "--data-dir", str(tmp_path)]) == 0
    assert capsys.readouterr().out.splitlines()[0] == "2 kept measurements of an earlier analysis version removed"
    with Store.open(tmp_path / "fieldtl.sqlite3") as store:
        assert store.measurements.keys() == {"c" * 64}


def test_two_included_calibrator_takes_follow_the_stores_rule(three_takes):
    store, test_id, two, one, decay = three_takes
    tone = (DEMO / "cal_before.flac").read_bytes()
    store.add_take(test_id, data=tone, original_name="cal.flac", role="calibration")
    calibrated = measure_test_takes(store, test_id)
    assert calibrated.calibration is not None and calibrated.calibration_problem is None
    store.add_take(test_id, data=(DEMO / "cal_after.flac").read_bytes(), original_name="cal2.flac", role="calibration")
    refused = measure_test_takes(store, test_id)
    assert refused.calibration is None and refused.offset_db == 0.0
    assert "2 included takes with role calibration" in refused.calibration_problem
    # Uncalibrated levels are the calibrated ones less the calibration offset (dB re full scale).
    db = calibrated.outcomes[one.id].summary.level_db.as_array() - calibrated.offset_db
    assert np.allclose(refused.outcomes[one.id].summary.level_db.as_array(), db, atol=1e-9, equal_nan=True)
    store.add_take(test_id, data=(DEMO / "bg_p1.flac").read_bytes(), original_name="bg.flac", role="background")
    with pytest.raises(InputError, match="2 included takes with role calibration"):
        assess_test(store, test_id)                     # the assessment refuses the same way


def test_the_background_measurer_leaves_every_take_measured_in_the_store(three_takes, monkeypatch):
    store, test_id, two, one, decay = three_takes
    counting = Counting(monkeypatch)
    measurer = BackgroundMeasurer(store, every_test=True)
    try:
        deadline = time.monotonic() + 120
        while not measurer.idle() and time.monotonic() < deadline:
            time.sleep(0.05)
        assert measurer.idle() and measurer.pending(test_id) is None
    finally:
        measurer.stop()
    assert sorted(counting.files) == sorted([two.file_name, one.file_name, decay.file_name])
    mark = len(counting.files)
    measure_test_takes(store, test_id)                       # what a page does next: nothing to analyse
    assert counting.since(mark) == []
    measurer.request(test_id)                                # a stopped measurer takes no more work
    assert measurer.pending(test_id) is None


# --- how measurements are kept ----------------------------------------------------------------------

def every_field_set() -> TakeSummary:
    spectrum = BandSpectrum(THIRD_OCTAVES_50_5000_HZ, (None,) + (0.1,) * 19 + (1e-300,), "dB", "L")
    values = dict(label="a.wav", role="decay", speaker=3, duration_s=float("inf"), level_db=spectrum,
                  level_history_std_db=float("nan"), background_event_db=-0.0, reverberation_time_s=spectrum,
                  octave_63_reverberation_time_s=1 / 3)
    assert set(values) == {f.name for f in dataclasses.fields(TakeSummary)}   # a new field must be covered here
    return TakeSummary(**values)


def test_every_field_round_trips_exactly_including_non_finite_floats():
    summary = every_field_set()
    findings = (Finding("clipping", "warning", "a.wav: clipped", "Lower the gain.", band_hz=63.0, clause="x"),)
    text = measure_cache.encode_take(summary, findings)
    json.loads(text, parse_constant=lambda name: pytest.fail(f"{name} in stored JSON"))   # strict JSON only
    back, back_findings = measure_cache.decode_take(text)
    assert back_findings == findings
    for field in dataclasses.fields(TakeSummary):
        want, got = getattr(summary, field.name), getattr(back, field.name)
        if isinstance(want, float) and math.isnan(want):
            assert math.isnan(got)
        else:
            assert got == want and type(got) is type(want), field.name
    assert math.copysign(1.0, back.background_event_db) == -1.0           # -0.0 stays negative zero
    assert measure_cache.encode_take(back, back_findings) == text


@pytest.mark.parametrize("text", [
    "[]", "{}", '{"summary": {}, "findings": []}', "not json",
    '{"summary": {"label": "a"}, "findings": []}',
    b"\x80\x04\x95".decode("latin-1"),                   # the start of a pickle: never unpickled, just not ours
])
def test_a_row_that_is_not_exactly_a_measurement_is_not_used(text):
    assert measure_cache.decode_take(text) is None


def test_a_damaged_row_is_measured_again(three_takes, monkeypatch):
    store, test_id, two, one, decay = three_takes
    first = measure_test_takes(store, test_id)
    key = next(iter(store.measurements.keys(one.sha256)))
    store.measurements.put(key, sha256=one.sha256, analysis_version=measure_cache.analysis_version(),
                           settings_json="{}", measurement_json='{"summary": {"label": 1}, "findings": []}')
    counting = Counting(monkeypatch)
    assert measure_test_takes(store, test_id) == first
    assert counting.files == [one.file_name]


def test_a_file_that_cannot_be_read_fails_as_measuring_it_would(tmp_path):
    from fieldtl.survey import TakeSpec

    folder = tmp_path / "take.wav"
    folder.mkdir()
    spec = TakeSpec(file=folder, role="receiving", speaker=1)
    with Store.open(":memory:") as store:
        with pytest.raises(InputError, match=r"^take.wav: is a folder, not an audio file$"):
            store_cache(store).take(spec, level_offset_db=0.0)
        assert store.measurements.keys() == frozenset()


def test_the_key_is_the_sha256_of_the_settings():
    settings = {"sha256": "0" * 64, "channel": 0, "level_offset_db": 0.1}
    canonical = '{"channel":0,"level_offset_db":0.1,"sha256":"' + "0" * 64 + '"}'
    assert measure_cache.settings_key(settings) == hashlib.sha256(canonical.encode()).hexdigest()


# --- the named migration ----------------------------------------------------------------------------

def test_the_measurements_migration_is_named_and_recorded():
    with Store.open(":memory:") as store:
        assert "m0002_take_measurements" in store.applied_migrations
        assert store.schema_state() == (SCHEMA_VERSION, tuple(m.__name__ for m in MIGRATIONS))


def test_an_older_store_gains_the_table_and_keeps_its_rows(tmp_path, monkeypatch):
    database = tmp_path / "fieldtl.sqlite3"
    monkeypatch.setattr(schema, "MIGRATIONS", MIGRATIONS[:1])           # a store made before the table
    with Store.open(database) as old:
        project_id = old.create_project("Kept").id
    monkeypatch.setattr(schema, "MIGRATIONS", MIGRATIONS)
    with Store.open(database) as upgraded:
        assert upgraded.applied_migrations == tuple(m.__name__ for m in MIGRATIONS[1:])   # m0002 and any later
        assert upgraded.get_project(project_id).name == "Kept"
        assert upgraded.measurements.keys() == frozenset()
    raw = sqlite3.connect(database)
    with pytest.raises(sqlite3.IntegrityError):                          # JSON only, checked by SQLite
        raw.execute("INSERT INTO take_measurements VALUES (?, ?, '1', '{}', 'not json', 'now')", ("a" * 64, "b" * 64))


# --- takes measured on several threads ----------------------------------------------------------------

def test_one_thread_and_several_give_the_same_assessment(fresh_demo_json):
    # fresh_demo_json was measured with the default workers (fieldtl.measure.default_workers)
    survey = load_survey(DEMO / "survey.toml")
    assert document(assess_survey(survey, workers=1)) == fresh_demo_json
    assert document(assess_survey(survey, workers=4)) == fresh_demo_json


@pytest.mark.parametrize("workers", [1, 4])
def test_the_error_is_the_first_bad_take_in_survey_order_whatever_the_threads(tmp_path, workers):
    from fieldtl.measure import measure_survey

    survey = load_survey(DEMO / "survey.toml")
    (tmp_path / "second.flac").write_bytes(b"not audio at all")
    (tmp_path / "last.flac").write_bytes(b"")
    takes = list(survey.takes)
    takes[1] = dataclasses.replace(takes[1], file=tmp_path / "second.flac")
    takes[-1] = dataclasses.replace(takes[-1], file=tmp_path / "last.flac")
    with pytest.raises(InputError, match=r"^second\.flac: not a readable"):
        measure_survey(dataclasses.replace(survey, takes=tuple(takes)), workers=workers)


def test_progress_is_reported_from_the_calling_thread_only():
    import threading

    from fieldtl.measure import measure_survey

    survey = load_survey(DEMO / "survey.toml")
    threads, names = set(), set()

    def progress(name, done):
        threads.add(threading.get_ident())
        names.add(name)

    measure_survey(dataclasses.replace(survey, takes=survey.takes[:4]), progress=progress, workers=4)
    assert threads == {threading.get_ident()}
    assert names == {take.file.name for take in survey.takes[:4]}


def test_an_error_stops_the_takes_still_being_measured(tmp_path, monkeypatch):
    # the first take fails at once; a long take running beside it stops at its next block instead of
    # being measured to its end (the error comes back as soon as the running takes have stopped)
    import threading

    import fieldtl.measure as measure

    survey = load_survey(DEMO / "survey.toml")
    started, blocks_after_error = threading.Event(), []
    real = measure.measure_take

    def slow_or_failing(spec, *, level_offset_db, progress=None):
        if spec.file.name == "bad.flac":
            started.wait(5)
            raise InputError("bad.flac: not a readable WAV or FLAC file")
        started.set()
        for block in range(200):
            time.sleep(0.01)
            progress(spec.file.name, block / 200)     # a level take reports after every block
            blocks_after_error.append(block)
        return real(spec, level_offset_db=level_offset_db)

    monkeypatch.setattr(measure, "measure_take", slow_or_failing)
    takes = (dataclasses.replace(survey.takes[0], file=tmp_path / "bad.flac"), survey.takes[1])
    (tmp_path / "bad.flac").write_bytes(b"")
    with pytest.raises(InputError, match="^bad.flac"):
        measure.measure_survey(dataclasses.replace(survey, takes=takes, calibration=None), workers=2)
    assert len(blocks_after_error) < 100


@pytest.mark.parametrize(("cores", "load", "workers"), [(2, 0.0, 2), (2, 1.99, 2), (2, 2.0, 1), (2, 7.5, 1),
                                                         (8, 0.2, 4), (8, 5.0, 4), (8, 6.0, 3), (1, 0.0, 1)])
def test_the_default_threads_follow_the_cores_and_the_load(monkeypatch, cores, load, workers):
    import fieldtl.measure as measure

    monkeypatch.setattr(measure.os, "sched_getaffinity", lambda pid: set(range(cores)), raising=False)
    monkeypatch.setattr(measure.os, "getloadavg", lambda: (load, 0.0, 0.0), raising=False)
    assert measure.default_workers() == workers
