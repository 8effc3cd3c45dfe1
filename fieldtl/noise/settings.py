"""What a noise record is analysed with: intervals, named periods, event rules, the time zone.

Times are aware datetimes in the zone the user names (IANA name through :mod:`zoneinfo`), so a
night that crosses a daylight-saving change lasts 7 or 9 hours of real time, as it did.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from datetime import date, datetime, timedelta, timezone
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from fieldtl.errors import InputError
from fieldtl.findings import Finding
from fieldtl.validate import echo

INTERVAL_CHOICES_MIN = (1, 5, 15, 60)


@dataclass(frozen=True, slots=True)
class PeriodSpec:
    """A named part of the day by local wall-clock time, e.g. night 23:00-07:00 (wraps midnight)."""

    name: str
    start_min: int          # minutes after local midnight
    end_min: int
    night: bool = False     # events in it are counted per night

    def __post_init__(self) -> None:
        if not (0 <= self.start_min < 1440 and 0 <= self.end_min < 1440) or self.start_min == self.end_min:
            raise InputError(f"period {echo(self.name)}: start and end must be different times of day")

    def holds(self, minute_of_day: int) -> bool:
        if self.start_min < self.end_min:
            return self.start_min <= minute_of_day < self.end_min
        return minute_of_day >= self.start_min or minute_of_day < self.end_min

    def date_of(self, local: datetime) -> date:
        """The date a period instance is named by: the date it started (a night after midnight
        belongs to the previous evening's date)."""
        minute = local.hour * 60 + local.minute
        if self.start_min > self.end_min and minute < self.end_min:
            return local.date() - timedelta(days=1)
        return local.date()


# Day 07-19, evening 19-23, night 23-07: common environmental-noise practice.
DEFAULT_PERIODS = (PeriodSpec("day", 7 * 60, 19 * 60), PeriodSpec("evening", 19 * 60, 23 * 60),
                   PeriodSpec("night", 23 * 60, 7 * 60, night=True))


@dataclass(frozen=True, slots=True)
class RecordSettings:
    """Analysis choices; every level in dB (re 20 µPa when calibrated, else re full scale)."""

    zone_name: str = "UTC"
    interval_min: int = 15
    periods: tuple[PeriodSpec, ...] = DEFAULT_PERIODS
    event_margin_db: float | None = 10.0      # above the running background LAF90 (our default)
    event_level_db: float | None = None       # or above a fixed LAF
    background_window_min: int = 5            # background = LAF90 of this many minutes either side
    merge_gap_s: float = 1.0                  # dips shorter than this do not split an event (our choice)
    count_level_db: float = 45.0              # per-night count of events with LAFmax above this
    band_range_hz: tuple[float, float] = (20.0, 5000.0)
    keep_clips: bool = False                  # privacy: audio clips of events only when switched on
    clip_max_s: float = 10.0

    def __post_init__(self) -> None:
        zone(self.zone_name)
        if self.interval_min not in INTERVAL_CHOICES_MIN:
            raise InputError(f"interval must be one of {', '.join(map(str, INTERVAL_CHOICES_MIN))} minutes, "
                             f"got {echo(self.interval_min)}")
        if self.event_margin_db is None and self.event_level_db is None:
            raise InputError("events: give a margin above the background, a fixed level, or both")
        for name, value, low, high in (("event margin", self.event_margin_db, 1.0, 60.0),
                                       ("event level", self.event_level_db, -200.0, 160.0),
                                       ("count level", self.count_level_db, -200.0, 160.0),
                                       ("merge gap", self.merge_gap_s, 0.0, 60.0),
                                       ("clip length", self.clip_max_s, 1.0, 60.0)):
            if value is not None and not (isinstance(value, (int, float)) and math.isfinite(value)
                                          and low <= value <= high):
                raise InputError(f"{name} must be between {low:g} and {high:g}, got {echo(value)}")
        if not 1 <= self.background_window_min <= 30:
            raise InputError(f"background window must be 1 to 30 minutes, got {echo(self.background_window_min)}")
        names = [p.name for p in self.periods]
        if len(set(names)) != len(names):
            raise InputError("period names must differ")

    @property
    def zone(self) -> ZoneInfo:
        return zone(self.zone_name)


def zone(name: str) -> ZoneInfo:
    """The IANA time zone ``name`` (e.g. Europe/London); one-line InputError if unknown."""
    if not isinstance(name, str) or not re.fullmatch(r"[A-Za-z0-9_+\-/]{1,64}", name):
        raise InputError(f"time zone {echo(name)} is not a zone name such as Europe/London")
    try:
        return ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError, OSError):
        raise InputError(f"time zone {echo(name)} is unknown (use a name such as Europe/London)") from None


def parse_interval(text: str) -> int:
    """'15min', '15 min', '15', '1h', '60min' → minutes (one of 1, 5, 15, 60)."""
    match = re.fullmatch(r"\s*(\d{1,3})\s*(min|m|h)?\s*", str(text).lower())
    if match is None:
        raise InputError(f"interval {echo(text)}: write it like 15min or 1h")
    minutes = int(match[1]) * (60 if match[2] == "h" else 1)
    if minutes not in INTERVAL_CHOICES_MIN:
        raise InputError(f"interval {echo(text)}: choose 1min, 5min, 15min or 60min")
    return minutes


def parse_clock(text: str) -> int:
    """'23:00' → minutes after midnight."""
    match = re.fullmatch(r"\s*(\d{1,2})[:.h](\d{2})\s*", str(text))
    if match is None or int(match[1]) > 23 or int(match[2]) > 59:
        raise InputError(f"time of day {echo(text)}: write it like 23:00")
    return int(match[1]) * 60 + int(match[2])


def localize(naive: datetime, tz: ZoneInfo, *, what: str) -> tuple[datetime, tuple[Finding, ...]]:
    """A wall-clock time in ``tz`` as an aware datetime, with a finding if the clock shows it
    twice (clocks went back: the first showing is used) and an error if it never shows it."""
    if naive.tzinfo is not None:
        return naive.astimezone(tz), ()
    first = naive.replace(tzinfo=tz, fold=0)
    if first.astimezone(timezone.utc).astimezone(tz).replace(tzinfo=None) != naive:
        raise InputError(f"{what}: {naive:%Y-%m-%d %H:%M} does not exist in {tz.key} (the clocks went forward)")
    second = naive.replace(tzinfo=tz, fold=1)
    if first.utcoffset() != second.utcoffset():
        return first, (Finding("ambiguous_local_time", "warning",
                               f"{what}: {naive:%Y-%m-%d %H:%M} occurs twice in {tz.key} (the clocks went back); "
                               "the first occurrence is used",
                               "Check the recorder's clock; give the start with its UTC offset if it was the second."),)
    return first, ()


def parse_start(text: str, tz: ZoneInfo) -> tuple[datetime, tuple[Finding, ...]]:
    """'2026-11-28T22:00' (local in ``tz``) or with an offset ('...+01:00') → aware datetime."""
    try:
        value = datetime.fromisoformat(str(text).strip())
    except ValueError:
        raise InputError(f"start time {echo(text)}: write it like 2026-11-28T22:00") from None
    return localize(value, tz, what="start time")
