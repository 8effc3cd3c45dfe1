"""Complaint files in the store: rows, the linked test, periods kept as record JSON, and privacy:
deleting a period (or the complaint) removes its audio clips."""

from __future__ import annotations

import json
from datetime import datetime, timezone

import pytest
from noise_night import Burst, night_source

from fieldtl.errors import InputError
from fieldtl.noise.export import record_to_json
from fieldtl.noise.record import analyse_sources
from fieldtl.noise.settings import RecordSettings
from fieldtl.noise.stored import record_from_json
from fieldtl.report.export import json_text
from fieldtl.store import Store, TestSetup


@pytest.fixture
def store(tmp_path):
    with Store.open(tmp_path / "fieldtl.sqlite3") as opened:
        yield opened


@pytest.fixture(scope="module")
def record_json():
    source = night_source(duration_s=120.0, background_dbfs=-50.0, bursts=(Burst(30.0, 2.0, -25.0),))
    record = analyse_sources([source], RecordSettings(interval_min=1), start=datetime(2026, 11, 28, 23, tzinfo=timezone.utc))
    return json_text(record_to_json(record))


def test_migration_named_and_applied(store):
    version, names = store.schema_state()
    assert "m0003_complaints" in names and version == len(names)


def test_complaint_rows_round_trip(store, record_json):
    complaint = store.complaints.create("Flat 2", rooms="bedroom", time_zone="Europe/London")
    period = store.complaints.add_period(complaint.id, "night 1", record_json=record_json, keep_clips=False)
    (again,) = store.complaints.periods(complaint.id)
    assert again == period
    assert record_to_json(record_from_json(json.loads(again.record_json))) == json.loads(record_json)
    updated = store.complaints.update(complaint.id, reference="Flat 2", rooms="bedroom", time_zone="Europe/London",
                                      test_id=None, diary_csv="time,heard\n23:00,bass\n")
    assert store.complaints.get(complaint.id).diary_csv == updated.diary_csv


def test_linked_test_is_unlinked_when_deleted(store):
    project = store.create_project("Invented block")
    test = store.create_test(project.id, TestSetup(title="Wall", test_type="airborne", receiving_volume_m3=30.0,
                                                   separating_area_m2=10.0))
    complaint = store.complaints.create("Flat 3")
    linked = store.complaints.update(complaint.id, reference="Flat 3", rooms="", time_zone="UTC", test_id=test.id,
                                     diary_csv="")
    assert linked.test_id == test.id
    store.delete_project(project.id)
    assert store.complaints.get(complaint.id).test_id is None
    with pytest.raises(InputError, match="not in this store"):
        store.complaints.update(complaint.id, reference="Flat 3", rooms="", time_zone="UTC", test_id=test.id,
                                diary_csv="")


@pytest.mark.parametrize("text", ["not json", '{"kind": "noise_record", "x": NaN}', '{"kind": "survey"}', "[]"])
def test_bad_record_refused_and_nothing_stored(store, text):
    complaint = store.complaints.create("Flat 4")
    with pytest.raises(InputError):
        store.complaints.add_period(complaint.id, "night", record_json=text, keep_clips=False)
    assert store.complaints.periods(complaint.id) == ()


def test_deleting_a_period_removes_its_audio(store, record_json):
    complaint = store.complaints.create("Flat 5")
    kept = store.complaints.add_period(complaint.id, "night 1", record_json=record_json, keep_clips=True)
    other = store.complaints.add_period(complaint.id, "night 2", record_json=record_json, keep_clips=True)
    for period in (kept, other):
        folder = store.complaints.clips_folder(period.id)
        folder.mkdir(parents=True)
        (folder / "event-001-20261128-230030.wav").write_bytes(b"RIFF")
    store.complaints.delete_period(kept.id)
    assert not store.complaints.clips_folder(kept.id).exists()
    assert store.complaints.clips_folder(other.id).exists()
    store.complaints.delete(complaint.id)
    assert not store.complaints.clips_folder(other.id).exists()
    assert store.complaints.list() == ()


def test_bad_texts_and_zones_refused(store):
    for reference, zone_name in (("", "UTC"), ("x" * 121, "UTC"), ("Flat 6", "Mars/Base")):
        with pytest.raises(InputError):
            store.complaints.create(reference, time_zone=zone_name)
    assert store.complaints.list() == ()
