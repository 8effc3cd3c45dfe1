"""The occupant's diary: entries (time, what was heard, how disturbing) matched to the record.

Entries come typed (the app) or pasted/loaded as CSV: a header row naming the columns ``time``,
``heard`` and ``disturbance`` (also ``what``/``note`` and ``rating``/``how disturbing``), comma,
semicolon or tab separated, in any encoding the project's text reader accepts. A time is
``2026-11-28 23:15`` (or ISO ``2026-11-28T23:15``) or a bare ``23:15``, which is placed on the
recording's first date when that falls inside the record, otherwise the next day. Disturbance
is 0-10 or words, kept as typed.

Each entry gets the one-minute levels of the minute it names, the nearest event and its
distance, and a plain statement: outside the recording, nothing measurable (no event within
MATCH_WINDOW_S and the minute's LAeq within QUIET_MARGIN_DB of the background), or what was
measured.
"""

from __future__ import annotations

import csv
import io
import math
import re
from dataclasses import dataclass
from datetime import datetime, timedelta

from fieldtl.errors import InputError
from fieldtl.noise.record import Levels, NoiseEvent, NoiseRecord
from fieldtl.noise.settings import localize
from fieldtl.tomlfile import decode_text
from fieldtl.validate import NOTE_CHARS, echo

# Diary times are written down afterwards: an event within 5 minutes is taken as the one heard
# (our choice; shown beside each match so the adviser can judge), and a minute whose LAeq is within
# 3 dB of the background LAF90 holds nothing measurable above it (common practice: 3 dB is the
# smallest level difference a listener reliably notices).
MATCH_WINDOW_S = 300.0
QUIET_MARGIN_DB = 3.0
MAX_ENTRIES = 2000
WINDOW_TEXT = f"{MATCH_WINDOW_S / 60:g} minutes"
_TIME_NAMES = ("time", "when", "date time", "datetime")
_HEARD_NAMES = ("heard", "what", "note", "notes", "description", "what was heard")
_DISTURB_NAMES = ("disturbance", "rating", "how disturbing", "disturbing", "score")


@dataclass(frozen=True, slots=True)
class DiaryEntry:
    time: datetime                 # aware, in the record's zone
    heard: str
    disturbance: str               # "0".."10" or the occupant's words


@dataclass(frozen=True, slots=True)
class DiaryMatch:
    entry: DiaryEntry
    status: str                    # "outside", "nothing_measurable", "measured"
    minute: Levels | None
    event: NoiseEvent | None       # the nearest event within MATCH_WINDOW_S
    event_offset_s: float | None   # event start minus entry time
    statement: str


def read_diary_csv(data: bytes | str, *, zone_name: str, first_date: datetime | None = None,
                   source_name: str = "diary") -> tuple[DiaryEntry, ...]:
    """Entries from CSV text (see the module docstring); one-line InputError naming row and column."""
    from fieldtl.noise.settings import zone as named_zone
    tz = named_zone(zone_name)
    text = decode_text(data, source_name=source_name) if isinstance(data, bytes) else data
    lines = [line for line in text.splitlines() if line.strip()]
    if not lines:
        raise InputError(f"{source_name}: the diary is empty")
    delimiter = max((",", ";", "\t"), key=lines[0].count)
    rows = list(csv.reader(io.StringIO("\n".join(lines)), delimiter=delimiter))
    header = [cell.strip().lower() for cell in rows[0]]
    columns = {}
    for key, names in (("time", _TIME_NAMES), ("heard", _HEARD_NAMES), ("disturbance", _DISTURB_NAMES)):
        found = [i for i, name in enumerate(header) if name in names]
        if found:
            columns[key] = found[0]
    if "time" not in columns:
        raise InputError(f"{source_name}: no 'time' column in the first row (found {echo(rows[0])})")
    if len(rows) - 1 > MAX_ENTRIES:
        raise InputError(f"{source_name}: {len(rows) - 1} entries; at most {MAX_ENTRIES}")
    entries = []
    for number, row in enumerate(rows[1:], start=2):
        def cell(key: str) -> str:
            index = columns.get(key)
            return row[index].strip() if index is not None and index < len(row) else ""
        moment = parse_diary_time(cell("time"), tz, first_date=first_date, where=f"{source_name}: row {number}")
        entries.append(diary_entry(moment, cell("heard"), cell("disturbance"), where=f"{source_name}: row {number}"))
    return tuple(entries)


def diary_entry(moment: datetime, heard: str, disturbance: str, *, where: str = "diary") -> DiaryEntry:
    """One entry as typed; the disturbance is 0-10 or words."""
    if len(heard) > NOTE_CHARS or len(disturbance) > NOTE_CHARS:
        raise InputError(f"{where}: text longer than {NOTE_CHARS} characters")
    text = disturbance.strip()
    if re.fullmatch(r"[+-]?\d+(\.\d+)?", text):
        value = float(text)
        if not 0 <= value <= 10:
            raise InputError(f"{where}: disturbance {echo(text)} is outside 0 to 10")
    return DiaryEntry(moment, heard.strip(), text)


def parse_diary_time(text: str, tz, *, first_date: datetime | None, where: str) -> datetime:
    text = text.strip()
    match = re.fullmatch(r"(\d{1,2})[:.h](\d{2})", text)
    if match:
        if first_date is None:
            raise InputError(f"{where}: time {echo(text)} has no date and the record has no start")
        hour, minute = int(match[1]), int(match[2])
        if hour > 23 or minute > 59:
            raise InputError(f"{where}: time {echo(text)} is not a time of day")
        local_first = first_date.astimezone(tz)
        candidate = datetime.combine(local_first.date(), datetime.min.time()).replace(hour=hour, minute=minute)
        if candidate < local_first.replace(tzinfo=None, second=0, microsecond=0):
            candidate += timedelta(days=1)          # after midnight: the next day of the record
        return localize(candidate, tz, what=where)[0]
    try:
        value = datetime.fromisoformat(text.replace("/", "-"))
    except ValueError:
        raise InputError(f"{where}: time {echo(text)}: write it like 2026-11-28 23:15 or 23:15") from None
    return localize(value, tz, what=where)[0]


def match_diary(record: NoiseRecord, entries: tuple[DiaryEntry, ...]) -> tuple[DiaryMatch, ...]:
    """Each entry beside the levels of its minute and the nearest event (module docstring)."""
    unit = "dB" if record.calibrated else "dB re full scale"
    minutes = {m.start: m for m in record.minutes}
    matches = []
    for entry in entries:
        if not record.covers(entry.time):
            matches.append(DiaryMatch(entry, "outside", None, None, None,
                                      f"{entry.time:%Y-%m-%d %H:%M} is outside the recording"))
            continue
        minute = minutes.get(entry.time.replace(second=0, microsecond=0))
        event, offset_s = _nearest_event(record.events, entry.time)
        if event is not None:
            statement = (f"event at {event.start:%H:%M:%S} ({offset_s:+.0f} s), LAFmax {event.lafmax_db:.1f} {unit}, "
                         f"{event.lafmax_db - event.background_db:.0f} dB above the background")
            status = "measured"
        elif minute is not None and _quiet(minute):
            statement = f"nothing measurable: no event within {WINDOW_TEXT} and the level was at the background"
            status = "nothing_measurable"
        elif minute is not None:
            statement = (f"no event within {WINDOW_TEXT}; LAeq over that minute {minute.laeq_db:.1f} {unit}, "
                         f"{minute.laeq_db - minute.laf90_db:.0f} dB above its LAF90")
            status = "measured"
        else:
            statement = "nothing measurable: no level for that minute"
            status = "nothing_measurable"
        matches.append(DiaryMatch(entry, status, minute, event, offset_s, statement))
    return tuple(matches)


def _nearest_event(events: tuple[NoiseEvent, ...], moment: datetime) -> tuple[NoiseEvent | None, float | None]:
    """The event closest to ``moment`` (0 s when it falls inside one) within MATCH_WINDOW_S, and its
    start minus ``moment`` in seconds."""
    best, best_distance = None, math.inf
    for event in events:
        from_start_s = (moment - event.start).total_seconds()
        distance = max(0.0, -from_start_s, from_start_s - event.duration_s)
        if distance <= MATCH_WINDOW_S and distance < best_distance:
            best, best_distance = event, distance
    return best, None if best is None else (best.start - moment).total_seconds()


def _quiet(minute: Levels) -> bool:
    return not (math.isfinite(minute.laeq_db) and math.isfinite(minute.laf90_db)) or \
        minute.laeq_db - minute.laf90_db <= QUIET_MARGIN_DB
