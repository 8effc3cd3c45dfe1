"""A noise record as JSON (plain key names; schema in docs/noise-record-schema.md) and CSV.

Levels are rounded to 0.1 dB, times are ISO 8601 with the UTC offset in force at that moment.
Nothing internal is written: no file paths, no storage names.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Sequence
from typing import Any

from fieldtl.cautions import INDICATIVE_CAUTION, NOISE_RECORD_CAUTION, RECORDING_CAUTION
from fieldtl.noise.diary import DiaryMatch
from fieldtl.noise.record import Levels, NoiseRecord
from fieldtl.noise.reference import Comparison
from fieldtl.noise.wall import LOW_BANDS_UP_TO_HZ, WallComparison
from fieldtl.report.export import json_number

SCHEMA_VERSION = 1


def _r(value: float, digits: int = 1) -> float | None:
    return round(value, digits) if value is not None and math.isfinite(value) else None


def _bands(values: Sequence[float]) -> list[float | None]:
    return [_r(v) for v in values]


def level_unit(record: NoiseRecord) -> str:
    return "dB" if record.calibrated else "dB re full scale"


def record_cautions(record: NoiseRecord) -> tuple[str, ...]:
    return (NOISE_RECORD_CAUTION, INDICATIVE_CAUTION) + ((RECORDING_CAUTION,) if record.settings.keep_clips else ())


def _levels(levels: Levels) -> dict[str, Any]:
    return {"start": levels.start.isoformat(), "covered_s": _r(levels.covered_s, 1), "laeq_db": _r(levels.laeq_db),
            "lafmax_db": _r(levels.lafmax_db), "lasmax_db": _r(levels.lasmax_db), "laf10_db": _r(levels.laf10_db),
            "laf90_db": _r(levels.laf90_db), "band_leq_db": _bands(levels.band_leq_db)}


def record_to_json(record: NoiseRecord, *, diary: Sequence[DiaryMatch] = (), wall: Sequence[WallComparison] = (),
                   references: Sequence[Comparison] = ()) -> dict[str, Any]:
    """The whole record as one JSON-ready dictionary (write it with fieldtl.report.export.json_text)."""
    settings = record.settings
    numbers = {id(event): i for i, event in enumerate(record.events, start=1)}
    return {
        "kind": "noise_record", "schema_version": SCHEMA_VERSION,
        "calibrated": record.calibrated, "level_unit": level_unit(record), "time_zone": settings.zone_name,
        "start": record.start.isoformat(), "end": record.end.isoformat(),
        "settings": {
            "interval_minutes": settings.interval_min,
            "periods": [{"name": p.name, "start": f"{p.start_min // 60:02d}:{p.start_min % 60:02d}",
                         "end": f"{p.end_min // 60:02d}:{p.end_min % 60:02d}", "night": p.night}
                        for p in settings.periods],
            "event_margin_db": settings.event_margin_db, "event_level_db": settings.event_level_db,
            "background_window_minutes": settings.background_window_min, "merge_gap_s": settings.merge_gap_s,
            "count_level_db": settings.count_level_db, "event_clips_kept": settings.keep_clips},
        "files": [{"name": f.name, "start": f.start.isoformat(), "duration_s": _r(f.duration_s, 3),
                   "analysed_s": _r(f.analysed_s, 3), "sample_rate_hz": f.sample_rate_hz, "start_from": f.start_from}
                  for f in record.files],
        "band_frequencies_hz": [json_number(f) for f in record.bands_hz],
        "low_frequency_bands_hz": [json_number(f) for f in record.bands_hz if f <= LOW_BANDS_UP_TO_HZ],
        "intervals": [_levels(i) for i in record.intervals],
        "minutes": [{"start": m.start.isoformat(), "covered_s": _r(m.covered_s, 1), "laeq_db": _r(m.laeq_db),
                     "lafmax_db": _r(m.lafmax_db), "laf90_db": _r(m.laf90_db)} for m in record.minutes],
        "periods": [{"name": p.name, "date": p.date, "night": p.night, "events": p.events, **_levels(p.levels)}
                    for p in record.periods],
        "events": [{"number": numbers[id(e)], "start": e.start.isoformat(timespec="milliseconds"), "duration_s": _r(e.duration_s, 2),
                    "lafmax_db": _r(e.lafmax_db), "lae_db": _r(e.lae_db), "background_db": _r(e.background_db),
                    "threshold_db": _r(e.threshold_db), "band_leq_db": _bands(e.band_leq_db)}
                   for e in record.events],
        "nights": [{"date": n.date, "events_above": n.events_above, "count_level_db": n.count_level_db,
                    "laeq_db": _r(n.laeq_db), "lafmax_db": _r(n.lafmax_db)} for n in record.nights],
        "diary": [{"time": m.entry.time.isoformat(), "heard": m.entry.heard, "disturbance": m.entry.disturbance,
                   "status": m.status, "statement": m.statement,
                   "event_number": numbers.get(id(m.event)) if m.event is not None else None,
                   "event_offset_s": _r(m.event_offset_s, 1) if m.event_offset_s is not None else None,
                   "minute_laeq_db": _r(m.minute.laeq_db) if m.minute else None,
                   "minute_lafmax_db": _r(m.minute.lafmax_db) if m.minute else None} for m in diary],
        "wall": [{"source": w.source.name, "source_origin": w.source.origin,
                  "band_frequencies_hz": [json_number(f) for f in w.nominal_hz], "expected_db": _bands(w.expected_db),
                  "recorded_db": _bands(w.recorded_db), "excess_db": _bands(w.excess_db), "conclusion": w.conclusion}
                 for w in wall],
        "references": [{"name": c.line.name, "compared_with": c.line.metric, "level_db": c.line.level_db,
                        "compared": c.compared, "above": c.above, "highest_db": _r(c.highest_db), "text": c.text}
                       for c in references],
        "cautions": list(record_cautions(record)),
        "warnings": [f.as_json() for f in record.findings],
    }


def intervals_to_csv(record: NoiseRecord) -> str:
    """One row per interval: times, A-weighted levels and the one-third-octave Leq."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    unit = level_unit(record)
    writer.writerow(["start", "covered_s", f"LAeq {unit}", f"LAFmax {unit}", f"LASmax {unit}", f"LAF10 {unit}",
                     f"LAF90 {unit}", *[f"Leq {json_number(f)} Hz {unit}" for f in record.bands_hz]])
    for levels in record.intervals:
        row = _levels(levels)
        writer.writerow([row["start"], row["covered_s"], *[_cell(row[k]) for k in
                         ("laeq_db", "lafmax_db", "lasmax_db", "laf10_db", "laf90_db")],
                         *[_cell(v) for v in row["band_leq_db"]]])
    return out.getvalue()


def events_to_csv(record: NoiseRecord) -> str:
    """One row per event: start, duration, LAFmax, LAE, background, threshold and band levels."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    unit = level_unit(record)
    writer.writerow(["number", "start", "duration_s", f"LAFmax {unit}", f"LAE {unit}", f"background LAF90 {unit}",
                     f"threshold {unit}", *[f"Leq {json_number(f)} Hz {unit}" for f in record.bands_hz]])
    for number, e in enumerate(record.events, start=1):
        writer.writerow([number, e.start.isoformat(timespec="milliseconds"), _cell(_r(e.duration_s, 2)), _cell(_r(e.lafmax_db)),
                         _cell(_r(e.lae_db)), _cell(_r(e.background_db)), _cell(_r(e.threshold_db)),
                         *[_cell(v) for v in _bands(e.band_leq_db)]])
    return out.getvalue()


def _cell(value: float | None) -> str:
    return "" if value is None else f"{value:g}"
