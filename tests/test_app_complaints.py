"""The Noise complaints page driven headless with AppTest: a complaint file, a period analysed from an
uploaded recording (invented tone night), a typed diary entry matched to its event, deleting the period."""

from datetime import datetime
from pathlib import Path

import numpy as np
import pytest
import streamlit as st
from noise_night import amplitude, write_wav
from streamlit.testing.v1 import AppTest

from fieldtl.store import Store

APP = str(Path(__file__).resolve().parents[1] / "fieldtl" / "ui" / "app.py")
RATE_HZ = 44_100


@pytest.fixture
def data_dir(tmp_path, monkeypatch):
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "store"))
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    monkeypatch.delenv("FIELDTL_ACCESS_CODE", raising=False)
    st.cache_resource.clear()
    st.cache_data.clear()
    yield tmp_path / "store"
    st.cache_resource.clear()
    st.cache_data.clear()


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
