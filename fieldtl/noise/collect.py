"""Gathers the kernel's steps and segments into clock minutes, intervals and named periods.

Minutes are aligned to the local clock of the record's start (the zone's UTC offset then), so
intervals of 1, 5, 15 and 60 minutes start on the quarter hours and hours of that clock, also
across a daylight-saving change of a whole hour. A minute is closed once both the steps and the
segments have passed its end; it then goes to its interval, its period and the event detector.
Memory: the minute being filled, the event detector's window, and one row per interval, period
and minute of results (a few numbers each).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime
from zoneinfo import ZoneInfo

import numpy as np

from fieldtl.noise.events import HIST_BINS, EventDetector, MinuteData, exceeded_db, histogram
from fieldtl.noise.meter import Segments, Steps
from fieldtl.noise.settings import RecordSettings


@dataclass(frozen=True, slots=True)
class Totals:
    """Sums over a stretch of time in full-scale units (see :class:`Collector`)."""

    start_s: float                # epoch seconds of the stretch's nominal start
    covered_s: float              # seconds of A-weighted steps in it
    energy: float                 # A-weighted mean square x seconds
    lafmax_ms: float
    lasmax_ms: float
    laf10_db: float               # dB re full scale, nan without steps
    laf90_db: float
    band_energy: tuple[float, ...]
    band_covered_s: float


class _Sums:
    def __init__(self, start_s: float, bands: int, *, with_histogram: bool) -> None:
        self.start_s = start_s
        self.covered_s = 0.0
        self.energy = 0.0
        self.lafmax = 0.0
        self.lasmax = 0.0
        self.histogram = np.zeros(HIST_BINS, dtype=np.int64) if with_histogram else None
        self.band_energy = np.zeros(bands)
        self.band_covered_s = 0.0

    def add(self, other: _Sums) -> None:
        self.covered_s += other.covered_s
        self.energy += other.energy
        self.lafmax = max(self.lafmax, other.lafmax)
        self.lasmax = max(self.lasmax, other.lasmax)
        if self.histogram is not None and other.histogram is not None:
            self.histogram += other.histogram
        self.band_energy += other.band_energy
        self.band_covered_s += other.band_covered_s

    def totals(self) -> Totals:
        counts = self.histogram if self.histogram is not None else np.zeros(HIST_BINS, dtype=np.int64)
        return Totals(self.start_s, self.covered_s, self.energy, self.lafmax, self.lasmax, exceeded_db(counts, 10.0),
                      exceeded_db(counts, 90.0), tuple(float(v) for v in self.band_energy), self.band_covered_s)


class Collector:
    """Mutable: the minute being filled and the finished rows."""

    def __init__(self, settings: RecordSettings, *, first_start: datetime, bands: int, step_s: float,
                 level_offset_db: float) -> None:
        self._settings = settings
        self._zone: ZoneInfo = settings.zone
        offset = first_start.utcoffset()
        self._align_s = offset.total_seconds() if offset is not None else 0.0
        self._bands = bands
        self._open: dict[int, tuple[_Sums, MinuteData]] = {}
        self._steps_until_s = -math.inf
        self._segments_until_s = -math.inf
        self._interval: _Sums | None = None
        self._interval_index: int | None = None
        self.intervals: list[Totals] = []
        self.minutes: list[Totals] = []
        self.periods: dict[tuple[str, str], _Sums] = {}
        level_dbfs = None if settings.event_level_db is None else settings.event_level_db - level_offset_db
        self.detector = EventDetector(margin_db=settings.event_margin_db, level_dbfs=level_dbfs,
                                      window_min=settings.background_window_min, merge_gap_s=settings.merge_gap_s,
                                      step_s=step_s)

    def minute_start_s(self, index: int) -> float:
        return index * 60.0 - self._align_s

    def _minute_of(self, time_s: np.ndarray) -> np.ndarray:
        return np.floor((time_s + self._align_s + 1e-6) / 60.0).astype(np.int64)

    def _minute(self, index: int) -> tuple[_Sums, MinuteData]:
        if index not in self._open:
            self._open[index] = (_Sums(self.minute_start_s(index), self._bands, with_histogram=False),
                                 MinuteData(index, np.zeros(HIST_BINS, dtype=np.int64)))
        return self._open[index]

    def add_steps(self, steps: Steps) -> None:
        minutes = self._minute_of(steps.time_s)
        for index in np.unique(minutes):
            mask = minutes == index
            sums, data = self._minute(int(index))
            sums.covered_s += steps.step_s * int(mask.sum())
            sums.energy += float(steps.energy[mask].sum())
            sums.lafmax = max(sums.lafmax, float(steps.lafmax[mask].max()))
            sums.lasmax = max(sums.lasmax, float(steps.lasmax[mask].max()))
            data.histogram += histogram(steps.laf[mask])
            data.step_time_s.append(steps.time_s[mask])
            data.step_lafmax.append(steps.lafmax[mask])
            data.step_energy.append(steps.energy[mask])
        self._steps_until_s = float(steps.time_s[-1]) + steps.step_s
        self._close_passed()

    def add_segments(self, segments: Segments) -> None:
        minutes = self._minute_of(segments.time_s)
        for index in np.unique(minutes):
            mask = minutes == index
            sums, data = self._minute(int(index))
            sums.band_energy += segments.band_energy[mask].sum(axis=0)
            sums.band_covered_s += float(segments.duration_s[mask].sum())
            data.segment_time_s.append(segments.time_s[mask])
            data.segment_duration_s.append(segments.duration_s[mask])
            data.segment_energy.append(segments.band_energy[mask])
        self._segments_until_s = float(segments.time_s[-1] + segments.duration_s[-1])
        self._close_passed()

    def skip_to(self, time_s: float) -> None:
        """Nothing more will come before ``time_s`` (the next file starts there)."""
        self._steps_until_s = max(self._steps_until_s, time_s)
        self._segments_until_s = max(self._segments_until_s, time_s)
        self._close_passed()

    def finish(self) -> None:
        self._close_passed(everything=True)
        self.detector.finish()
        self._close_interval()

    def _close_passed(self, *, everything: bool = False) -> None:
        until_s = min(self._steps_until_s, self._segments_until_s)
        for index in sorted(self._open):
            if not everything and self.minute_start_s(index + 1) > until_s + 1e-6:
                break
            sums, data = self._open.pop(index)
            sums.histogram = data.histogram
            self._close_minute(index, sums, data)

    def _close_minute(self, index: int, sums: _Sums, data: MinuteData) -> None:
        self.minutes.append(sums.totals())
        interval_index = index // self._settings.interval_min
        if interval_index != self._interval_index:
            self._close_interval()
            self._interval_index = interval_index
            self._interval = _Sums(self.minute_start_s(interval_index * self._settings.interval_min), self._bands,
                                   with_histogram=True)
        assert self._interval is not None
        self._interval.add(sums)
        local = datetime.fromtimestamp(sums.start_s, tz=self._zone)
        minute_of_day = local.hour * 60 + local.minute
        for period in self._settings.periods:
            if period.holds(minute_of_day):
                key = (period.name, period.date_of(local).isoformat())
                if key not in self.periods:
                    self.periods[key] = _Sums(sums.start_s, self._bands, with_histogram=True)
                self.periods[key].add(sums)
        self.detector.add(data)

    def _close_interval(self) -> None:
        if self._interval is not None:
            self.intervals.append(self._interval.totals())
        self._interval = None
