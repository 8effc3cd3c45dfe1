"""The Noise complaints page driven headless with AppTest: a complaint file, a period analysed from an
uploaded recording (invented tone night), a typed diary entry matched to its event, deleting the period."""

from datetime import datetime
from pathlib import Path

import numpy as np
import pytest
from noise_night import amplitude, write_wav
from streamlit.testing.v1 import AppTest

from fieldtl.store import Store

APP = str(Path(__file__).resolve().parents[1] / "fieldtl" / "ui" / "app.py")
RATE_HZ = 44_100


@pytest.fixture
def data_dir(data_dir, monkeypatch):
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    return data_dir


def _button(at, text):
    return next(b for b in at.button if text in b.label)


def test_complaint_period_diary_and_deletion(data_dir, tmp_path):
    t_s = np.arange(90 * RATE_HZ) / RATE_HZ
    a = np.where((t_s >= 30.0) & (t_s < 33.0), amplitude(-25.0), amplitude(-50.0))
    night = write_wav(tmp_path / "night.wav", a * np.sin(2 * np.pi * 1000.0 * t_s), sample_rate_hz=RATE_HZ,
                      local_start=datetime(2026, 11, 28, 23, 0))
    at = AppTest.from_file(APP, default_timeout=180)
    at.run()
    at.switch_page("views/complaints.py").run()
    assert not at.exception, [e.value for e in at.exception]
    assert at.title[0].value == "Noise complaints"
    at.text_input[0].input("Flat 2 (invented)")
    _button(at, "Create complaint file").click().run()
    assert not at.exception, [e.value for e in at.exception]
    uploader = at.get("file_uploader")[0]
    uploader.upload(night.name, night.read_bytes(), "audio/wav")
    name = next(t for t in at.text_input if t.label.startswith("Name"))
    name.input("night of 28 November")
    _button(at, "Analyse and keep the levels").click().run()
    assert not at.exception, [e.value for e in at.exception]
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        (complaint,) = store.complaints.list()
        (period,) = store.complaints.periods(complaint.id)
    assert period.name == "night of 28 November" and not period.keep_clips
    when = next(t for t in at.text_input if t.label.startswith("When"))
    when.input("23:00")
    heard = next(t for t in at.text_input if t.label.startswith("What was heard"))
    heard.input("a bang")
    _button(at, "Add the entry").click().run()
    assert not at.exception, [e.value for e in at.exception]
    captions = " ".join(c.value for c in at.caption)
    assert "Diary 1 (23:00, a bang): event at 23:00:30 (+30 s), LAFmax -25.0 dB re full scale" in captions
    _button(at, "Delete").click().run()
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        assert store.complaints.periods(complaint.id) == ()


def test_clips_only_when_switched_on_and_gone_with_the_period(data_dir, tmp_path):
    t_s = np.arange(60 * RATE_HZ) / RATE_HZ
    a = np.where((t_s >= 20.0) & (t_s < 22.0), amplitude(-25.0), amplitude(-50.0))
    night = write_wav(tmp_path / "night.wav", a * np.sin(2 * np.pi * 1000.0 * t_s), sample_rate_hz=RATE_HZ,
                      local_start=datetime(2026, 11, 28, 23, 0))
    at = AppTest.from_file(APP, default_timeout=180)
    at.run()
    at.switch_page("views/complaints.py").run()
    at.text_input[0].input("Flat 9 (invented)")
    _button(at, "Create complaint file").click().run()
    for keep in (False, True):
        at.get("file_uploader")[0].upload(night.name, night.read_bytes(), "audio/wav")
        next(t for t in at.text_input if t.label.startswith("Name")).input(f"clips {keep}")
        next(c for c in at.checkbox if c.label.startswith("Keep short audio clips")).set_value(keep)
        _button(at, "Analyse and keep the levels").click().run()
        assert not at.exception, [e.value for e in at.exception]
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        (complaint,) = store.complaints.list()
        without, with_clips = store.complaints.periods(complaint.id)
        folders = [store.complaints.clips_folder(p.id) for p in (without, with_clips)]
    assert (without.keep_clips, with_clips.keep_clips) == (False, True)
    assert not folders[0].exists() and len(list(folders[1].glob("event-001-*.wav"))) == 1
    next(b for b in at.button if b.key == f"delete-period-{with_clips.id}").click().run()
    assert not folders[1].exists()


PASTED = "frequency_hz,L1_s1,L2_s1,B,T\n" + "\n".join(
    f"{f},95.0,{45.0 - i * 0.5:.1f},{25.0 - i:.1f},0.6" for i, f in enumerate(
        (100, 125, 160, 200, 250, 315, 400, 500, 630, 800, 1000, 1250, 1600, 2000, 2500, 3150)))


def test_link_to_a_separation_test_of_the_store(data_dir):
    import json as json_module
    from datetime import timezone

    from noise_night import Burst, night_source

    from fieldtl.noise.export import record_to_json
    from fieldtl.noise.record import analyse_sources
    from fieldtl.noise.settings import RecordSettings
    from fieldtl.report.export import json_text
    from fieldtl.store import TestSetup

    source = night_source(duration_s=120.0, background_dbfs=-70.0, bursts=(Burst(30.0, 3.0, -45.0),))
    record = analyse_sources([source], RecordSettings(interval_min=1), level_offset_db=90.0,
                             start=datetime(2026, 11, 28, 23, 0, tzinfo=timezone.utc))
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        project = store.create_project("Invented block")
        test = store.create_test(project.id, TestSetup(title="Party wall (invented)", test_type="airborne",
                                                       receiving_volume_m3=30.0, separating_area_m2=10.0))
        store.set_band_levels(test.id, PASTED)
        complaint = store.complaints.create("Flat 7 (invented)")
        store.complaints.update(complaint.id, reference=complaint.reference, rooms="", time_zone="UTC",
                                test_id=test.id, diary_csv="")
        store.complaints.add_period(complaint.id, "night 1", record_json=json_text(record_to_json(record)),
                                    keep_clips=False)
    at = AppTest.from_file(APP, default_timeout=180)
    at.run()
    at.switch_page("views/complaints.py").run()
    assert not at.exception, [e.value for e in at.exception]
    texts = " ".join(c.value for c in at.caption) + " ".join(m.value for m in at.markdown)
    assert "Source spectrum: invented (not measured)" in texts
    # the 1 kHz tone bursts read 45 dB in the 1 kHz band, far above music through DnT there: an excess above 200 Hz
    assert "Excess concentrated above 200 Hz" in texts
    assert json_module.loads(json_text(record_to_json(record)))["calibrated"] is True
