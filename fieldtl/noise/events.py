"""Events: where LAF rises above the running background by a margin, or above a fixed level.

The background of a minute is LAF90 of the minutes around it (``background_window_min`` either
side, from the 0.1 dB histograms of LAF sampled every 10 ms). A minute is judged once the minutes
after it are in, so only a few minutes of 10 ms steps and one-second spectra are held, whatever
the length of the record. An event starts at the first 10 ms step whose F maximum is above the
threshold and ends at the first step below it, unless LAF comes back above within
``merge_gap_s`` (a dip that short does not split an event). LAE is 10 lg of the A-weighted
energy from start to end (re 1 s, IEC 61672-1's sound exposure level); the event's band levels
are those of the one-second segments that hold it, weighted by how much of each it covers.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass, field

import numpy as np

HIST_LOW_DB = -200.0      # histogram of LAF in dB re full scale, 0.1 dB bins (levels below go to the first bin)
HIST_STEP_DB = 0.1
HIST_BINS = 2400          # -200 to +40 dB re full scale


def histogram(mean_squares: np.ndarray) -> np.ndarray:
    """Counts of 10 lg(mean square) in the 0.1 dB bins."""
    with np.errstate(divide="ignore"):
        levels = 10.0 * np.log10(mean_squares)
    index = np.clip(np.floor((levels - HIST_LOW_DB) / HIST_STEP_DB), 0, HIST_BINS - 1).astype(np.int64)
    return np.bincount(index, minlength=HIST_BINS)


def exceeded_db(counts: np.ndarray, percent: float) -> float:
    """L_N: the level exceeded ``percent`` % of the time (bin centre), nan without counts."""
    total = int(counts.sum())
    if total == 0:
        return float("nan")
    index = int(np.searchsorted(np.cumsum(counts), (1.0 - percent / 100.0) * total, side="left"))
    return HIST_LOW_DB + (min(index, HIST_BINS - 1) + 0.5) * HIST_STEP_DB


@dataclass(slots=True)
class MinuteData:
    """What one clock minute held (mutable while it fills; see fieldtl.noise.collect)."""

    index: int
    histogram: np.ndarray
    step_time_s: list[np.ndarray] = field(default_factory=list)
    step_lafmax: list[np.ndarray] = field(default_factory=list)
    step_energy: list[np.ndarray] = field(default_factory=list)
    segment_time_s: list[np.ndarray] = field(default_factory=list)
    segment_duration_s: list[np.ndarray] = field(default_factory=list)
    segment_energy: list[np.ndarray] = field(default_factory=list)


@dataclass(frozen=True, slots=True)
class FoundEvent:
    """An event in full-scale units (the record turns it into calibrated levels and local times)."""

    start_s: float
    end_s: float
    lafmax_ms: float
    energy: float                   # A-weighted mean square x seconds
    background_db: float            # dB re full scale
    threshold_db: float
    band_energy: np.ndarray | None  # mean square x seconds over band_duration_s
    band_duration_s: float


class EventDetector:
    """Judges closed minutes in order, a background window behind the newest one."""

    def __init__(self, *, margin_db: float | None, level_dbfs: float | None, window_min: int, merge_gap_s: float,
                 step_s: float) -> None:
        self._margin_db = margin_db
        self._level_dbfs = level_dbfs
        self._window = window_min
        self._merge_gap_s = merge_gap_s
        self._step_s = step_s
        self._minutes: deque[MinuteData] = deque()
        self._next = 0                           # position in _minutes of the next minute to judge
        self._open: dict[str, float] | None = None
        self._last_end_s: float | None = None      # end of the last step judged
        self.events: list[FoundEvent] = []

    def add(self, minute: MinuteData) -> None:
        """A closed minute, later than every minute added before."""
        self._minutes.append(minute)
        while self._next < len(self._minutes) and self._minutes[self._next].index + self._window <= minute.index:
            self._judge(self._next)
            self._next += 1
        waiting = self._minutes[self._next].index if self._next < len(self._minutes) else minute.index + 1
        while self._minutes and self._minutes[0].index < waiting - self._window:
            self._minutes.popleft()
            self._next -= 1

    def finish(self) -> None:
        while self._next < len(self._minutes):
            self._judge(self._next)
            self._next += 1
        self._close()

    def _judge(self, position: int) -> None:
        minute = self._minutes[position]
        if not minute.step_time_s:
            return
        counts = sum(m.histogram for m in self._minutes if abs(m.index - minute.index) <= self._window)
        background_db = exceeded_db(counts, 90.0)
        limits = [background_db + self._margin_db] if self._margin_db is not None else []
        if self._level_dbfs is not None:
            limits.append(self._level_dbfs)
        threshold_db = min(limits)
        times = np.concatenate(minute.step_time_s)
        maxima = np.concatenate(minute.step_lafmax)
        energies = np.concatenate(minute.step_energy)
        # pieces of continuous steps (a gap between files splits a minute)
        breaks = np.flatnonzero(np.diff(times) > 1.5 * self._step_s) + 1
        for first, stop in zip([0, *breaks], [*breaks, times.size]):
            if self._last_end_s is not None and times[first] > self._last_end_s + 0.5 * self._step_s:
                self._close()
            self._piece(times[first:stop], maxima[first:stop], energies[first:stop], background_db, threshold_db)
            self._last_end_s = float(times[stop - 1]) + self._step_s

    def _piece(self, times: np.ndarray, maxima: np.ndarray, energies: np.ndarray, background_db: float,
               threshold_db: float) -> None:
        above = maxima > 10.0 ** (threshold_db / 10.0)
        edges = np.flatnonzero(np.diff(np.concatenate([[0], above.astype(np.int8), [0]])))
        cumulative = np.concatenate([[0.0], np.cumsum(energies)])
        done = 0                                          # steps before this index are accounted for
        for run_start, run_stop in zip(edges[0::2], edges[1::2]):
            start_s = float(times[run_start])
            if self._open is not None:
                self._open["dip"] += cumulative[run_start] - cumulative[done]
                if start_s - self._open["end_s"] > self._merge_gap_s:
                    self._close()
            if self._open is None:
                self._open = {"start_s": start_s, "max": 0.0, "energy": 0.0, "dip": 0.0,
                              "background_db": background_db, "threshold_db": threshold_db}
            event = self._open
            event["energy"] += event["dip"] + cumulative[run_stop] - cumulative[run_start]
            event["dip"] = 0.0
            event["max"] = max(event["max"], float(maxima[run_start:run_stop].max()))
            event["end_s"] = float(times[run_stop - 1]) + self._step_s
            done = run_stop
        if self._open is not None:
            self._open["dip"] += cumulative[-1] - cumulative[done]
            if float(times[-1]) + self._step_s - self._open["end_s"] > self._merge_gap_s:
                self._close()

    def _close(self) -> None:
        event = self._open
        self._open = None
        if event is None:
            return
        band_energy, band_duration_s = self._band_energy(event["start_s"], event["end_s"])
        self.events.append(FoundEvent(start_s=event["start_s"], end_s=event["end_s"], lafmax_ms=event["max"],
                                      energy=event["energy"], background_db=event["background_db"],
                                      threshold_db=event["threshold_db"], band_energy=band_energy,
                                      band_duration_s=band_duration_s))

    def _band_energy(self, start_s: float, end_s: float) -> tuple[np.ndarray | None, float]:
        total, covered_s = None, 0.0
        for minute in self._minutes:
            for times, durations, energy in zip(minute.segment_time_s, minute.segment_duration_s,
                                                minute.segment_energy):
                overlap = np.clip(np.minimum(times + durations, end_s) - np.maximum(times, start_s), 0.0, None)
                fraction = np.divide(overlap, durations, out=np.zeros_like(overlap), where=durations > 0)
                if not fraction.any():
                    continue
                part = fraction @ energy
                total = part if total is None else total + part
                covered_s += float(overlap.sum())
        return total, covered_s
