"""A noise record: one or more long recordings on one timeline → levels per interval and period,
events, per-night counts and findings (frozen values; no I/O beyond reading the audio).

Files are placed on the timeline in order: the first at the start the user gives or, without
one, at its broadcast-wave origination time; each later file at its own origination time when it
declares one, otherwise straight after the file before. A file that cannot be opened or is cut
short is a finding; the others are still analysed. Levels are dB re 20 µPa with a calibration
offset, otherwise dB re full scale (``calibrated`` False).
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np

from fieldtl.audio.ingest import iter_blocks, open_recording
from fieldtl.errors import InputError
from fieldtl.findings import Finding
from fieldtl.noise.bext import read_origination
from fieldtl.noise.collect import Collector, Totals
from fieldtl.noise.meter import FileMeter, record_bands_hz
from fieldtl.noise.settings import PeriodSpec, RecordSettings, localize
from fieldtl.validate import file_label

MIN_SAMPLE_RATE_HZ = 8000     # the A-weighting filter's floor (fieldtl.analysis.weighting): phones record at 8-48 kHz
MIN_FILE_S = 1.0             # a file shorter than this holds no usable level (our floor)
BLOCK_S = 10.0               # seconds read per block
JOIN_TOLERANCE_S = 0.5       # files overlapping by more than this are a finding
CLIP_PEAK = 0.999            # a block whose peak reaches this is counted as clipped (as fieldtl.audio.ingest)


@dataclass(frozen=True, slots=True)
class PlacedFile:
    name: str
    start: datetime
    duration_s: float
    analysed_s: float
    sample_rate_hz: int
    start_from: str              # "given", "file" (broadcast-wave origination), "follows"
    path: str | None = None      # where the audio is (for event clips); never written to an output


@dataclass(frozen=True, slots=True)
class Levels:
    """Levels over one stretch of time (an interval, a minute or a period instance)."""

    start: datetime
    covered_s: float
    laeq_db: float
    lafmax_db: float
    lasmax_db: float
    laf10_db: float
    laf90_db: float
    band_leq_db: tuple[float, ...]      # one-third octaves, nan where nothing was measured


@dataclass(frozen=True, slots=True)
class PeriodLevels:
    name: str
    date: str                           # the date the period instance started (ISO)
    night: bool
    levels: Levels
    events: int


@dataclass(frozen=True, slots=True)
class NoiseEvent:
    start: datetime
    duration_s: float
    lafmax_db: float
    lae_db: float
    background_db: float                # LAF90 of the minutes around it
    threshold_db: float
    band_leq_db: tuple[float, ...]      # over the seconds that hold the event


@dataclass(frozen=True, slots=True)
class NightCount:
    date: str
    events_above: int
    count_level_db: float
    laeq_db: float
    lafmax_db: float


@dataclass(frozen=True, slots=True)
class NoiseRecord:
    settings: RecordSettings
    calibrated: bool
    level_offset_db: float
    bands_hz: tuple[float, ...]
    files: tuple[PlacedFile, ...]
    intervals: tuple[Levels, ...]
    minutes: tuple[Levels, ...]
    periods: tuple[PeriodLevels, ...]
    events: tuple[NoiseEvent, ...]
    nights: tuple[NightCount, ...]
    findings: tuple[Finding, ...]

    @property
    def start(self) -> datetime:
        return self.files[0].start

    @property
    def end(self) -> datetime:
        return max(f.start + timedelta(seconds=f.duration_s) for f in self.files)

    def covers(self, moment: datetime) -> bool:
        return any(f.start <= moment < f.start + timedelta(seconds=f.analysed_s) for f in self.files)


@dataclass(frozen=True, slots=True, eq=False)
class Source:
    """One recording to analyse: its blocks (a fresh iterator per call), and the wall-clock start
    it declares (naive, from a broadcast-wave file), if any."""

    name: str
    sample_rate_hz: int
    frames: int
    blocks: Callable[[], Iterator[np.ndarray]]
    local_start: datetime | None = None
    path: str | None = None

    @property
    def duration_s(self) -> float:
        return self.frames / self.sample_rate_hz


def file_sources(paths: Sequence[str | Path], *, channel: int = 0) -> tuple[list[Source], list[Finding]]:
    """Open each file (header and 'bext' chunk only); a file that cannot be used is a finding."""
    sources: list[Source] = []
    findings: list[Finding] = []
    for path in paths:
        try:
            recording = open_recording(path, channel=channel, min_sample_rate_hz=MIN_SAMPLE_RATE_HZ)
            origination = read_origination(recording.path, sample_rate_hz=recording.sample_rate_hz)
        except (InputError, OSError) as error:
            message = str(error) if isinstance(error, InputError) else f"{file_label(Path(path))}: cannot be read"
            findings.append(Finding("file_unreadable", "error", message,
                                    "Check the file; the other files were analysed without it."))
            continue
        sources.append(Source(recording.name, recording.sample_rate_hz, recording.frames,
                              functools.partial(iter_blocks, recording,
                                                block_frames=int(BLOCK_S * recording.sample_rate_hz)),
                              None if origination is None else origination.local_start, recording.path))
    return sources, findings


def analyse_record(paths: Sequence[str | Path], settings: RecordSettings = RecordSettings(), *,
                   start: datetime | None = None, level_offset_db: float | None = None, channel: int = 0,
                   progress: Callable[[float], None] | None = None) -> NoiseRecord:
    """Analyse the recordings ``paths`` (in time order) as one record; see :func:`analyse_sources`."""
    sources, findings = file_sources(paths, channel=channel)
    if not sources:
        name = file_label(Path(paths[0])) if len(paths) == 1 else "record"
        detail = f" ({findings[0].message})" if len(findings) == 1 else ""
        raise InputError(f"{name}: no usable recording{detail}")
    return analyse_sources(sources, settings, start=start, level_offset_db=level_offset_db, progress=progress,
                           findings=findings)


def analyse_sources(sources: Sequence[Source], settings: RecordSettings = RecordSettings(), *,
                    start: datetime | None = None, level_offset_db: float | None = None,
                    progress: Callable[[float], None] | None = None, findings: Sequence[Finding] = ()) -> NoiseRecord:
    """The record of ``sources`` in time order (module docstring). ``start`` (aware) places the
    first file when given. ``level_offset_db`` is the calibration offset (None: dB re full scale).
    Raises InputError when no source is usable or the first has no start time; every other
    problem is a finding.
    """
    zone = settings.zone
    found = list(findings)
    usable = []
    for source in sources:
        if source.duration_s < MIN_FILE_S:
            found.append(Finding("file_too_short", "error",
                                 f"{source.name}: {source.duration_s:.2f} s is too short for a level "
                                 f"(at least {MIN_FILE_S:g} s)", "Leave it out or record again."))
        else:
            usable.append(source)
    if not usable:
        raise InputError(f"{sources[0].name if len(sources) == 1 else 'record'}: no usable recording"
                         + (f" ({found[-1].message})" if len(sources) == 1 and found else ""))
    total_frames = sum(s.frames for s in usable)
    done_frames = 0
    placed: list[PlacedFile] = []
    collector: Collector | None = None
    # the bands every file can hold: a file at a lower rate limits the top band of the whole record
    bands_hz = record_bands_hz(min(s.sample_rate_hz for s in usable), settings.band_range_hz)
    previous_end: datetime | None = None
    for source in usable:
        name = source.name
        if not placed and start is not None:
            file_start, start_from = start.astimezone(zone), "given"
        elif source.local_start is not None:
            file_start, notes = localize(source.local_start, zone, what=name)
            found.extend(notes)
            start_from = "file"
        elif previous_end is not None:
            file_start, start_from = previous_end, "follows"
        else:
            raise InputError(f"{name}: the file holds no start time (no broadcast-wave origination); "
                             "give the start time")
        if previous_end is not None and file_start < previous_end - timedelta(seconds=JOIN_TOLERANCE_S):
            found.append(Finding("files_overlap", "warning",
                                 f"{name}: starts {(previous_end - file_start).total_seconds():.1f} s before "
                                 "the previous file ends; placed straight after it",
                                 "Check the recorders' clocks and the order of the files."))
            file_start, start_from = previous_end, "follows"
        start_s = file_start.timestamp()
        meter = FileMeter(sample_rate_hz=source.sample_rate_hz, start_s=start_s, bands_hz=bands_hz)
        if collector is None:
            collector = Collector(settings, first_start=file_start, bands=len(bands_hz), step_s=meter.step_s,
                                  level_offset_db=level_offset_db or 0.0)
        collector.skip_to(start_s)
        frames_read, clipped_blocks = 0, 0
        try:
            for block in source.blocks():
                if block.size and max(float(block.max()), -float(block.min())) >= CLIP_PEAK:
                    clipped_blocks += 1
                steps, segments = meter.push(block)
                if steps is not None:
                    collector.add_steps(steps)
                if segments is not None:
                    collector.add_segments(segments)
                frames_read += block.size
                if progress is not None:
                    progress(min(1.0, (done_frames + frames_read) / total_frames))
        except InputError as error:
            found.append(Finding("file_damaged", "error",
                                 f"{error}; analysed up to {frames_read / source.sample_rate_hz:.1f} s",
                                 "The rest of this file is a gap in the record."))
        tail = meter.finish()
        if tail is not None:
            collector.add_segments(tail)
        if clipped_blocks:
            found.append(Finding("clipping", "error", f"{name}: the signal reached full scale in {clipped_blocks} "
                                 "block(s); maxima there are too low",
                                 "Lower the recorder's input gain for the next night.", clause="common practice"))
        done_frames += source.frames
        placed.append(PlacedFile(name, file_start, source.duration_s, frames_read / source.sample_rate_hz,
                                 source.sample_rate_hz, start_from, source.path))
        previous_end = file_start + timedelta(seconds=source.duration_s)
    assert collector is not None
    collector.finish()
    return _record(settings, collector, placed, bands_hz, level_offset_db, found)


def night_counts(periods: tuple[PeriodLevels, ...], events: tuple[NoiseEvent, ...], settings: RecordSettings, *,
                 count_level_db: float) -> tuple[NightCount, ...]:
    """Per night period: how many events had an LAFmax above ``count_level_db``."""
    specs = {p.name: p for p in settings.periods}
    return tuple(NightCount(period.date, sum(1 for e in events if _in_period(e, specs[period.name], period.date)
                                             and e.lafmax_db > count_level_db),
                            count_level_db, period.levels.laeq_db, period.levels.lafmax_db)
                 for period in periods if period.night)


def _in_period(event: NoiseEvent, spec: PeriodSpec, day: str) -> bool:
    return spec.holds(event.start.hour * 60 + event.start.minute) and spec.date_of(event.start).isoformat() == day


def _db(mean_square: float, offset_db: float) -> float:
    return 10.0 * math.log10(mean_square) + offset_db if mean_square > 0 and math.isfinite(mean_square) else math.nan


def _levels(totals: Totals, zone, offset_db: float) -> Levels:
    covered = totals.covered_s
    bands = tuple(_db(e / totals.band_covered_s, offset_db) if totals.band_covered_s > 0 else math.nan
                  for e in totals.band_energy)
    return Levels(start=datetime.fromtimestamp(totals.start_s, tz=zone), covered_s=round(covered, 3),
                  laeq_db=_db(totals.energy / covered, offset_db) if covered > 0 else math.nan,
                  lafmax_db=_db(totals.lafmax_ms, offset_db), lasmax_db=_db(totals.lasmax_ms, offset_db),
                  laf10_db=totals.laf10_db + offset_db, laf90_db=totals.laf90_db + offset_db, band_leq_db=bands)


def _record(settings: RecordSettings, collector: Collector, placed: list[PlacedFile], bands_hz: tuple[float, ...],
            level_offset_db: float | None, findings: list[Finding]) -> NoiseRecord:
    zone = settings.zone
    offset = level_offset_db or 0.0
    events = tuple(
        NoiseEvent(start=datetime.fromtimestamp(found.start_s, tz=zone), duration_s=round(found.end_s - found.start_s, 3),
                   lafmax_db=_db(found.lafmax_ms, offset), lae_db=_db(found.energy, offset),
                   background_db=found.background_db + offset, threshold_db=found.threshold_db + offset,
                   band_leq_db=tuple(_db(e / found.band_duration_s, offset) if found.band_energy is not None
                                     and found.band_duration_s > 0 else math.nan
                                     for e in (found.band_energy if found.band_energy is not None
                                               else [math.nan] * len(bands_hz))))
        for found in collector.detector.events)
    specs = {p.name: p for p in settings.periods}
    periods = []
    for (name, day), sums in sorted(collector.periods.items(), key=lambda item: item[1].start_s):
        spec = specs[name]
        inside = [e for e in events if _in_period(e, spec, day)]
        periods.append(PeriodLevels(name, day, spec.night, _levels(sums.totals(), zone, offset), len(inside)))
    nights = night_counts(tuple(periods), events, settings, count_level_db=settings.count_level_db)
    return NoiseRecord(settings=settings, calibrated=level_offset_db is not None, level_offset_db=offset,
                       bands_hz=bands_hz, files=tuple(placed),
                       intervals=tuple(_levels(t, zone, offset) for t in collector.intervals),
                       minutes=tuple(_levels(t, zone, offset) for t in collector.minutes),
                       periods=tuple(periods), events=events, nights=tuple(nights), findings=tuple(findings))

