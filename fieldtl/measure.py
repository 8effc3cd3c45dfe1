"""Measuring every take of a survey: recordings (or pasted columns) → TakeSummary values.

Each recording is read once, block by block: the same blocks feed the signal-facts watcher
(clipping, silence, DC) and the band-level analysis. Decays are analysed whole (they are short).

The analysis modules (and with them scipy.signal, about a second to import) are imported where a
recording is analysed, so a run whose takes are all measured already (fieldtl.testrun) never
loads them.
"""

from __future__ import annotations

import functools
import os
import queue
import sys
import threading
from collections.abc import Callable, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from concurrent.futures import TimeoutError as FutureTimeout
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, Fraction
from fieldtl.errors import InputError
from fieldtl.findings import Finding
from fieldtl.qa import TakeSummary
from fieldtl.survey import BandColumn, Survey, TakeSpec

if TYPE_CHECKING:
    from fieldtl.analysis.decay import DecayAnalysis
    from fieldtl.analysis.levels import StationaryLevels
    from fieldtl.audio.calibration import Calibration
    from fieldtl.audio.signals import SweepSpec

# Bump when a change to the analysis changes what any take measures (band levels, decays, their
# findings): every stored measurement of another version is then measured again (fieldtl.testrun).
ANALYSIS_VERSION = 5     # 2: level takes' band Leq by the spectral route (within 0.1 dB of 1's); 3: decay bands
                         # filtered at lowered rates (demo: T20 within 0.15 %, dynamic ranges within 0.1 dB of 2's)
                         # 4: level takes' 1 s A levels filtered only over the inner seconds (within 1e-8 dB of 3's)
                         # 5: decay findings' clauses without internal notes, Finding.unconfirmed (numbers unchanged)
FIELD_RANGE_HZ = (50.0, 5000.0)                 # ISO 16283-1/-2 bands with the optional extensions
Progress = Callable[[str, float], None]         # (take name, fraction of that take done)
TakeMeasurer = Callable[..., tuple[TakeSummary, tuple[Finding, ...]]]   # measure_take's signature
MAX_WORKERS = 4          # threads measuring takes at once (each holds one take's audio or blocks)
PROGRESS_EVERY_S = 0.1   # how often the calling thread passes on the takes' progress while it waits
# glibc allocator settings while takes are measured (mallopt parameters M_MMAP_THRESHOLD = -3 and
# M_TOP_PAD = -2, glibc malloc.h): arrays up to 32 MB (one block of any recording, MAX_BLOCK_BYTES) come
# from the heap, and up to 16 MB of freed heap stay with the process instead of going back to the system
# after every take. With glibc's defaults each 6 s take's temporaries (blocks, FFT batches, filter
# outputs: about 8 MB) were handed back and faulted in again page by page: 45 000 page faults and a
# third of the level takes' time per demo survey (benchmarks/assess.py).
KEEP_HEAP_ARRAYS_BYTES = 32 * 1024 * 1024
KEEP_FREED_HEAP_BYTES = 16 * 1024 * 1024


@dataclass(frozen=True, slots=True)
class MeasuredSurvey:
    """Every take measured, with the calibration used and what the recordings showed."""

    takes: tuple[TakeSummary, ...]
    calibration: Calibration | None
    calibration_after: Calibration | None
    findings: tuple[Finding, ...]
    from_meter: bool = False            # pasted band levels: a sound level meter's, calibrated by definition

    @property
    def calibrated(self) -> bool:
        return self.from_meter or self.calibration is not None


def measure_survey(survey: Survey, *, progress: Progress | None = None,
                   take_measurer: TakeMeasurer | None = None,
                   calibrator: Callable[[Path, int, float], Calibration] | None = None,
                   workers: int | None = None) -> MeasuredSurvey:
    """Measure the survey's recordings, or take its pasted band levels as they are.

    ``take_measurer`` and ``calibrator`` default to :func:`measure_take` and
    :func:`calibrate_file`; the app passes cached versions of the same functions (they must be
    safe to call from several threads, as the store's are). Takes are measured by ``workers``
    threads (default :func:`default_workers`; numpy, scipy and soundfile release the GIL while they
    work); the result, and the error raised for the first take in survey order that cannot be
    measured, are the same as one thread gives. ``progress`` is only called from the calling thread.
    """
    if survey.band_columns:
        return MeasuredSurvey(takes_from_band_columns(survey.band_columns), None, None, (), from_meter=True)
    measure = take_measurer or measure_take
    calibrate = calibrator or calibrate_file
    spec = survey.calibration
    with _Runner(default_workers() if workers is None else workers, progress) as runner:
        after_job = (runner.submit(calibrate, spec.file_after, spec.channel, spec.reference_db)
                     if spec and spec.file_after else None)
        # decays do not depend on the calibration: they start while the calibrator tone is read
        decay_jobs = {i: runner.submit(measure, take, level_offset_db=0.0, progress=runner.progress)
                      for i, take in enumerate(survey.takes) if take.role == "decay"}
        calibration = calibrate(spec.file, spec.channel, spec.reference_db) if spec else None
        offset_db = 0.0 if calibration is None else calibration.offset_db
        jobs = [decay_jobs.get(i) or runner.submit(measure, take, level_offset_db=offset_db, progress=runner.progress)
                for i, take in enumerate(survey.takes)]
        after = runner.result(after_job) if after_job is not None else None
        measured = [runner.result(job) for job in jobs]
    findings: list[Finding] = []
    for cal in (calibration, after):
        if cal is not None:
            findings += cal.findings
    if calibration is not None and after is not None:
        from fieldtl.audio.calibration import calibration_drift
        findings += calibration_drift(calibration, after)[1]
    for _, take_findings in measured:
        findings += take_findings
    return MeasuredSurvey(tuple(take for take, _ in measured), calibration, after, tuple(findings))


def default_workers() -> int:
    """Threads that measure a survey's takes: one per processor core this process may use while the
    1-minute load average stays below the number of cores, one fewer for each whole unit of load
    above that, at least one, at most MAX_WORKERS. Measured on 2 cores (benchmarks/assess.py): two
    threads took 27 % less time at load 1.2, the same at 2.1, and 5-20 % more at 3.5-5."""
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    busy = int(os.getloadavg()[0]) if hasattr(os, "getloadavg") else 0
    return max(1, min(cores - busy + 1, cores, MAX_WORKERS))


class _Runner:
    """Runs jobs on a pool of threads (or in the calling thread when there is one worker), passing
    their progress reports to the calling thread. Mutable by design; use it as a context manager:
    leaving it by an error or an interrupt stops the jobs still running at their next progress
    report (a level take reports after every block) and drops those not started."""

    def __init__(self, workers: int, progress: Progress | None) -> None:
        self._pool = ThreadPoolExecutor(workers, thread_name_prefix="fieldtl-take") if workers > 1 else None
        self._report = progress
        self._reports: queue.SimpleQueue[tuple[str, float]] = queue.SimpleQueue()
        self._stopping = threading.Event()
        self.progress: Progress | None = progress if self._pool is None else self._from_worker

    def __enter__(self) -> _Runner:
        return self

    def __exit__(self, error: type[BaseException] | None, *_: object) -> None:
        if self._pool is not None:
            if error is not None:
                self._stopping.set()
            self._pool.shutdown(wait=True, cancel_futures=True)

    def _from_worker(self, name: str, done: float) -> None:
        if self._stopping.is_set():
            raise _Stopped(name)
        if self._report is not None:
            self._reports.put((name, done))

    def submit(self, job: Callable[..., Any], *args: Any, **kwargs: Any) -> Future[Any]:
        if self._pool is not None:
            return self._pool.submit(job, *args, **kwargs)
        future: Future[Any] = Future()
        try:
            future.set_result(job(*args, **kwargs))
        except Exception as exc:  # noqa: BLE001 - raised again by result(), in survey order
            future.set_exception(exc)
        return future

    def result(self, job: Future[Any]) -> Any:
        """The job's result (or its error, raised here), reporting progress while waiting."""
        while True:
            try:
                value = job.result(timeout=PROGRESS_EVERY_S if self._report is not None else None)
            except FutureTimeout:
                self._pass_reports()
                continue
            self._pass_reports()
            return value

    def _pass_reports(self) -> None:
        while self._report is not None:
            try:
                name, done = self._reports.get_nowait()
            except queue.Empty:
                return
            self._report(name, done)


class _Stopped(Exception):
    """A take's measurement left unfinished: another take failed or the run was interrupted."""


@functools.cache
def keep_freed_memory() -> bool:
    """Set the allocator as KEEP_HEAP_ARRAYS_BYTES and KEEP_FREED_HEAP_BYTES say, once per process
    (the first take measured does it). True when glibc took both settings; False elsewhere (other
    systems and C libraries keep their own allocator's behaviour; only the speed differs)."""
    if not sys.platform.startswith("linux"):
        return False
    import ctypes

    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):
        return False
    mallopt.argtypes, mallopt.restype = [ctypes.c_int, ctypes.c_int], ctypes.c_int
    taken = [mallopt(-3, KEEP_HEAP_ARRAYS_BYTES), mallopt(-2, KEEP_FREED_HEAP_BYTES)]   # 1 where taken
    return all(taken)


def measure_take(spec: TakeSpec, *, level_offset_db: float,
                 progress: Progress | None = None) -> tuple[TakeSummary, tuple[Finding, ...]]:
    """Band levels (level roles) or reverberation times (decays) of one recording."""
    from fieldtl.analysis.levels import stationary_levels
    from fieldtl.audio.ingest import SampleStats, iter_blocks, open_recording, read_samples

    keep_freed_memory()
    recording = open_recording(spec.file, channel=spec.channel)
    name = recording.name
    stats = SampleStats(sample_rate_hz=recording.sample_rate_hz, source_name=name)
    if spec.role == "decay":
        samples = read_samples(recording, stats=stats)
        analysis, octave = _thirds_and_octave_63(samples, sample_rate_hz=recording.sample_rate_hz, spec=spec,
                                                 source_name=name)
        facts = stats.facts()
        # The 63 Hz octave's T20 is what small rooms use at 50-80 Hz (ISO 16283-1/-2 clause 10.4); its
        # findings are dropped here: the assessment reports a missing octave T only where it is needed.
        octave_t20_s = octave.spectrum("T20").values[0]
        take = TakeSummary(label=name, role=spec.role, speaker=spec.speaker, duration_s=facts.duration_s,
                           reverberation_time_s=analysis.spectrum("T20"),
                           octave_63_reverberation_time_s=None if octave_t20_s is None else float(octave_t20_s))
        return take, facts.findings + analysis.all_findings()
    # Level takes are stationary (ISO 16283: steady source, receiving, background and impact levels):
    # band Leq by the spectral route, the A-weighted 1 s levels for the stationarity checks.
    levels = stationary_levels(stats.watch(iter_blocks(recording)), sample_rate_hz=recording.sample_rate_hz,
                               level_offset_db=level_offset_db, band_range_hz=FIELD_RANGE_HZ,
                               total_frames=recording.frames, source_name=name, inner_history=True,
                               progress=None if progress is None else (lambda done: progress(name, done)))
    facts = stats.facts()
    history_std_db, event_db = _history_statistics(levels)
    take = TakeSummary(label=name, role=spec.role, speaker=spec.speaker, duration_s=facts.duration_s,
                       level_db=levels.band_leq, level_history_std_db=history_std_db,
                       background_event_db=event_db)
    return take, facts.findings


def analyse_decay(samples: np.ndarray, *, sample_rate_hz: float, spec: TakeSpec, source_name: str,
                  nominal_hz: Sequence[float] | None = THIRD_OCTAVES_50_5000_HZ,
                  fraction: Fraction = 3) -> DecayAnalysis:
    """T20/T30/EDT per band (default one-third octaves 50-5000 Hz) by the take's method."""
    from fieldtl.analysis.decay import reverberation_from_impulse_response, reverberation_from_sweep
    from fieldtl.analysis.interrupted import reverberation_from_interrupted_noise

    options = dict(sample_rate_hz=sample_rate_hz, nominal_hz=nominal_hz, fraction=fraction, source_name=source_name)
    if spec.method == "impulse":
        return reverberation_from_impulse_response(samples, **options)
    if spec.method == "interrupted":
        return reverberation_from_interrupted_noise(samples, **options)
    return reverberation_from_sweep(samples, sweep_from_spec(spec, sample_rate_hz=sample_rate_hz,
                                                             source_name=source_name), **options)


def _thirds_and_octave_63(samples: np.ndarray, *, sample_rate_hz: float, spec: TakeSpec,
                          source_name: str) -> tuple[DecayAnalysis, DecayAnalysis]:
    """The take's decay in one-third octaves 50-5000 Hz and in the 63 Hz octave; an impulse response
    (recorded, or deconvolved from a sweep) is prepared once for both."""
    from fieldtl.analysis.decay import decay_band_sets
    from fieldtl.audio.signals import impulse_response_from_sweep

    if spec.method == "interrupted":
        return (analyse_decay(samples, sample_rate_hz=sample_rate_hz, spec=spec, source_name=source_name),
                analyse_decay(samples, sample_rate_hz=sample_rate_hz, spec=spec, source_name=source_name,
                              nominal_hz=(63.0,), fraction=1))
    response = samples if spec.method == "impulse" else impulse_response_from_sweep(
        samples, sweep_from_spec(spec, sample_rate_hz=sample_rate_hz, source_name=source_name),
        sample_rate_hz=sample_rate_hz, source_name=source_name)
    thirds, octave = decay_band_sets(response, sample_rate_hz=sample_rate_hz, source_name=source_name,
                                     band_sets=((THIRD_OCTAVES_50_5000_HZ, 3), ((63.0,), 1)),
                                     method="impulse_response" if spec.method == "impulse" else "sweep")
    return thirds, octave


def sweep_from_spec(spec: TakeSpec, *, sample_rate_hz: float, source_name: str) -> SweepSpec:
    """The sweep that was played, from the survey's sweep_* keys (all three are needed)."""
    from fieldtl.audio.signals import SweepSpec

    if spec.sweep_length_s is None or spec.sweep_start_hz is None or spec.sweep_stop_hz is None:
        raise InputError(f"{source_name}: a sweep decay needs sweep_start_hz, sweep_stop_hz and sweep_length_s "
                         "(the sweep that was played)")
    return SweepSpec(duration_s=spec.sweep_length_s, sample_rate_hz=sample_rate_hz, low_hz=spec.sweep_start_hz,
                     high_hz=spec.sweep_stop_hz)


def takes_from_band_columns(columns: Sequence[BandColumn]) -> tuple[TakeSummary, ...]:
    """Pasted sound-level-meter columns as takes (no audio facts, no time history)."""
    return tuple(TakeSummary(label=c.label, role=c.role, speaker=c.speaker,
                             level_db=None if c.role == "decay" else c.spectrum,
                             reverberation_time_s=c.spectrum if c.role == "decay" else None)
                 for c in columns)


def calibrate_file(file: Path, channel: int, reference_db: float) -> Calibration:
    """Calibration from a calibrator recording (the whole file is one tone take)."""
    from fieldtl.audio.calibration import calibration_from_tone
    from fieldtl.audio.ingest import open_recording, read_samples

    keep_freed_memory()
    recording = open_recording(file, channel=channel)
    return calibration_from_tone(read_samples(recording), sample_rate_hz=recording.sample_rate_hz,
                                 source_name=recording.name, reference_db=reference_db)


def _history_statistics(levels: StationaryLevels) -> tuple[float | None, float | None]:
    """Scatter of whole 1 s A-weighted levels, and the loudest one above the median (the inner
    history: without the first second, settling filters, and the last, often partial)."""
    laeq_db = levels.laeq_history_db
    laeq_db = laeq_db[np.isfinite(laeq_db)]
    if laeq_db.size < 3:
        return None, None
    return float(np.std(laeq_db, ddof=1)), float(np.max(laeq_db) - np.median(laeq_db))
