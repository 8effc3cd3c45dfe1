"""Noise record outputs: JSON (strict, plain keys, schema document), CSV, timeline PNG, PDF.

Expected values come from the invented tone night (tests/data/noise_night.py); PDFs are read back
with pypdf, JSON with the standard library refusing NaN.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
from datetime import datetime
from pathlib import Path
from zoneinfo import ZoneInfo

import pytest
from noise_night import Burst, night_source
from pypdf import PdfReader

from fieldtl.bands import BandSpectrum, nominal_bands_hz
from fieldtl.errors import InputError
from fieldtl.noise.chart import save_timeline
from fieldtl.noise.diary import match_diary, read_diary_csv
from fieldtl.noise.export import events_to_csv, intervals_to_csv, record_to_json
from fieldtl.noise.record import analyse_sources
from fieldtl.noise.reference import WHO_BEDROOM_NIGHT, compare
from fieldtl.noise.settings import RecordSettings
from fieldtl.noise.wall import DEFAULT_SOURCES, compare_with_wall, events_spectrum
from fieldtl.report.export import json_text
from fieldtl.report.noise_pdf import record_to_pdf

LONDON = ZoneInfo("Europe/London")
SCHEMA = Path(__file__).resolve().parents[1] / "docs" / "noise-record-schema.md"


@pytest.fixture(scope="module")
def pieces():
    source = night_source(duration_s=600.0, background_dbfs=-60.0,
                          bursts=(Burst(100.0, 3.0, -30.0), Burst(400.0, 2.0, -35.0)))
    record = analyse_sources([source], RecordSettings(zone_name="Europe/London", interval_min=5),
                             start=datetime(2026, 11, 28, 23, 30, tzinfo=LONDON), level_offset_db=90.0)
    diary = match_diary(record, read_diary_csv("time,heard,disturbance\n23:31,bass <b>beat</b>,8\n",
                                               zone_name="Europe/London", first_date=record.start))
    dnt = BandSpectrum(nominal_bands_hz(100, 3150), tuple(50.0 for _ in nominal_bands_hz(100, 3150)), "dB", "DnT")
    wall = (compare_with_wall(DEFAULT_SOURCES[0], events_spectrum(record), separation=dnt),)
    return record, diary, wall, compare(record, WHO_BEDROOM_NIGHT)


def test_json_is_strict_and_plain(pieces):
    record, diary, wall, references = pieces
    document = json.loads(json_text(record_to_json(record, diary=diary, wall=wall, references=references)),
                          parse_constant=lambda name: pytest.fail(f"non-finite {name} in JSON"))
    assert document["kind"] == "noise_record" and document["calibrated"] is True
    assert len(document["intervals"]) == 2 and len(document["events"]) == 2
    assert document["events"][0]["lafmax_db"] == pytest.approx(60.0, abs=0.5)      # -30 dB re FS + 90 dB
    assert document["diary"][0]["event_number"] == 1
    assert document["low_frequency_bands_hz"] == [20, 25, 31.5, 40, 50, 63, 80, 100, 125, 160, 200]
    text = json.dumps(document)
    assert "memory" not in text and "/tmp" not in text and "invented" in document["wall"][0]["source_origin"]


def test_schema_document_names_every_top_level_key(pieces):
    record, diary, wall, references = pieces
    schema = SCHEMA.read_text(encoding="utf-8")
    for key in record_to_json(record, diary=diary, wall=wall, references=references):
        assert f"`{key}`" in schema


def test_csv_rows(pieces):
    record = pieces[0]
    intervals = list(csv.reader(io.StringIO(intervals_to_csv(record))))
    events = list(csv.reader(io.StringIO(events_to_csv(record))))
    assert len(intervals) == 1 + 2 and len(events) == 1 + 2
    assert intervals[0][2] == "LAeq dB" and float(events[1][3]) == pytest.approx(60.0, abs=0.5)


def test_timeline_png(pieces, tmp_path: Path):
    record, diary, _, _ = pieces
    path = save_timeline(record, tmp_path / "timeline.png", diary=diary)
    header = path.read_bytes()[:24]
    assert header[:8] == b"\x89PNG\r\n\x1a\n"
    width, height = int.from_bytes(header[16:20], "big"), int.from_bytes(header[20:24], "big")
    assert (width, height) == (960, 630)          # 6.4 x 4.2 in at 150 dpi: phone-sized, never grows with titles


def test_pdf_report_reads_back(pieces):
    record, diary, wall, references = pieces
    data = record_to_pdf(record, reference="Flat 2 <b>", diary=diary, wall=wall, references=references)
    text = "\n".join(page.extract_text() for page in PdfReader(io.BytesIO(data)).pages)
    for expected in ("Noise record", "Flat 2 <b>", "not a legal determination", "WHO Guidelines for Community Noise",
                     "bass <b>beat</b>", "invented", "music with bass"):
        assert expected in text
    assert "memory" not in text


def test_wall_refuses_uncalibrated(pieces):
    record = dataclasses.replace(pieces[0], calibrated=False)
    with pytest.raises(InputError, match="not calibrated"):
        events_spectrum(record)


def test_record_read_back_from_its_json(pieces):
    from fieldtl.noise.stored import record_from_json

    record, diary, _, _ = pieces
    document = json.loads(json_text(record_to_json(record)))
    again = record_from_json(document)
    assert record_to_json(again) == document            # the JSON is a fixed point
    entries = tuple(m.entry for m in diary)
    assert [m.statement for m in match_diary(again, entries)] == [m.statement for m in diary]
    broken = dict(document, minutes=[{"start": "yesterday"}])
    with pytest.raises(InputError, match="stored record"):
        record_from_json(broken)
