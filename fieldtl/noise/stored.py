"""A noise record read back from its JSON (fieldtl.noise.export.record_to_json), for the store.

The store keeps a period's record as that JSON (levels and spectra only, no audio), so the app
draws, matches and reports a period without its recordings. Values come back rounded as written
(0.1 dB). Every key is checked; a malformed document raises InputError in one line.
"""

from __future__ import annotations

import math
from datetime import datetime
from typing import Any

from fieldtl.errors import InputError
from fieldtl.findings import Finding
from fieldtl.noise.record import Levels, NightCount, NoiseEvent, NoiseRecord, PeriodLevels, PlacedFile
from fieldtl.noise.settings import PeriodSpec, RecordSettings, parse_clock


def _number(value: Any, where: str) -> float:
    if value is None:
        return math.nan
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"stored record: {where} is not a number")
    return float(value)


def _time(value: Any, where: str) -> datetime:
    try:
        moment = datetime.fromisoformat(value)
    except (TypeError, ValueError):
        raise InputError(f"stored record: {where} is not a time") from None
    if moment.tzinfo is None:
        raise InputError(f"stored record: {where} has no UTC offset")
    return moment


def _levels(row: dict[str, Any], where: str, zone) -> Levels:
    bands = tuple(_number(v, f"{where} band") for v in row.get("band_leq_db", []))
    return Levels(start=_time(row["start"], where).astimezone(zone), covered_s=_number(row["covered_s"], where),
                  laeq_db=_number(row["laeq_db"], where), lafmax_db=_number(row["lafmax_db"], where),
                  lasmax_db=_number(row.get("lasmax_db"), where), laf10_db=_number(row.get("laf10_db"), where),
                  laf90_db=_number(row["laf90_db"], where), band_leq_db=bands)


def record_from_json(document: dict[str, Any]) -> NoiseRecord:
    """The record a JSON document describes (InputError naming the first bad key)."""
    try:
        return _record(document)
    except (KeyError, TypeError, AttributeError) as exc:
        raise InputError(f"stored record: missing or malformed entry ({type(exc).__name__}: {str(exc)[:60]})") from None


def _record(document: dict[str, Any]) -> NoiseRecord:
    if document.get("kind") != "noise_record":
        raise InputError("stored record: not a noise record")
    given = document["settings"]
    periods = tuple(PeriodSpec(p["name"], parse_clock(p["start"]), parse_clock(p["end"]), bool(p["night"]))
                    for p in given["periods"])
    settings = RecordSettings(zone_name=document["time_zone"], interval_min=given["interval_minutes"], periods=periods,
                              event_margin_db=given["event_margin_db"], event_level_db=given["event_level_db"],
                              background_window_min=given["background_window_minutes"],
                              merge_gap_s=given["merge_gap_s"], count_level_db=given["count_level_db"],
                              keep_clips=bool(given["event_clips_kept"]))
    zone = settings.zone
    files = tuple(PlacedFile(f["name"], _time(f["start"], "file start").astimezone(zone),
                             _number(f["duration_s"], "file"), _number(f["analysed_s"], "file"),
                             int(f["sample_rate_hz"]), f["start_from"]) for f in document["files"])
    events = tuple(NoiseEvent(start=_time(e["start"], "event start").astimezone(zone),
                              duration_s=_number(e["duration_s"], "event"), lafmax_db=_number(e["lafmax_db"], "event"),
                              lae_db=_number(e["lae_db"], "event"), background_db=_number(e["background_db"], "event"),
                              threshold_db=_number(e["threshold_db"], "event"),
                              band_leq_db=tuple(_number(v, "event band") for v in e["band_leq_db"]))
                   for e in document["events"])
    return NoiseRecord(
        settings=settings, calibrated=bool(document["calibrated"]), level_offset_db=0.0,
        bands_hz=tuple(_number(f, "band") for f in document["band_frequencies_hz"]), files=files,
        intervals=tuple(_levels(row, "interval", zone) for row in document["intervals"]),
        minutes=tuple(_levels(row, "minute", zone) for row in document["minutes"]),
        periods=tuple(PeriodLevels(p["name"], p["date"], bool(p["night"]), _levels(p, "period", zone), int(p["events"]))
                      for p in document["periods"]),
        events=events,
        nights=tuple(NightCount(n["date"], int(n["events_above"]), _number(n["count_level_db"], "night"),
                                _number(n["laeq_db"], "night"), _number(n["lafmax_db"], "night"))
                     for n in document["nights"]),
        findings=tuple(Finding(w["code"], w["severity"], w["message"], w.get("action", ""), w.get("band_hz"))
                       for w in document["warnings"]))
