"""One path for a test, shared by ``fieldtl assess``, the app and the benchmarks: takes → each take
measured once → assessment.

A survey (read from a survey file, or a stored test through :meth:`Store.survey_for_test`) is measured
take by take with :mod:`fieldtl.measure`; with a :class:`MeasurementCache` every take's band levels or
decay, and its findings, are kept in a store's ``take_measurements`` table under a key made of the
audio's SHA-256, the settings its analysis depends on and the analysis version (see
:mod:`fieldtl.measure_cache`). Later runs, other pages, the report and a restarted app read them
back instead of measuring again; a new take costs only its own analysis.

:func:`measure_test_takes` is what the Takes page shows of every take (left-out ones too), with
the calibration chosen by the store's rule (at most one included calibrator take of each kind).
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from fieldtl.assess import Assessment, AssessOptions, assess
from fieldtl.errors import FieldTLError, StoreError
from fieldtl.findings import Finding
from fieldtl.measure import MeasuredSurvey, Progress, measure_survey
from fieldtl.measure_cache import MeasurementCache
from fieldtl.qa import TakeSummary
from fieldtl.survey import Survey

if TYPE_CHECKING:
    from fieldtl.audio.calibration import Calibration
    from fieldtl.store import Store, TakeRecord

TakesDone = Callable[[int, int], None]      # (takes measured so far, takes to measure)

__all__ = ["BackgroundMeasurer", "MeasurementCache", "TakeOutcome", "TestTakes", "assess_survey", "assess_test",
           "measure_test_takes", "store_cache", "user_cache"]


def assess_survey(survey: Survey, *, cache: MeasurementCache | None = None, options: AssessOptions = AssessOptions(),
                  progress: Progress | None = None, workers: int | None = None) -> Assessment:
    """Measure the survey's takes (through ``cache`` if given; by ``workers`` threads, default by the cores
    and the load, see :func:`fieldtl.measure.default_workers`) and assess the test."""
    measured = measure_with(survey, cache=cache, progress=progress, workers=workers)
    return assess(survey, measured.takes, calibrated=measured.calibrated, findings=measured.findings, options=options)


def measure_with(survey: Survey, *, cache: MeasurementCache | None, progress: Progress | None = None,
                 workers: int | None = None) -> MeasuredSurvey:
    if cache is None:
        return measure_survey(survey, progress=progress, workers=workers)
    return measure_survey(survey, progress=progress, take_measurer=cache.take, calibrator=cache.calibration,
                          workers=workers)


def store_cache(store: Store, takes: tuple[TakeRecord, ...] = ()) -> MeasurementCache:
    """The store's measurement cache, knowing the content hash of ``takes`` (others are hashed when read)."""
    return MeasurementCache(store.measurements, hashes={store.take_path(t): t.sha256 for t in takes})


@contextmanager
def user_cache(*, fresh: bool = False) -> Iterator[MeasurementCache | None]:
    """The measurement cache of the user's own store (the app's), for ``fieldtl assess``.

    None when ``fresh``, when FIELDTL_NO_CACHE is set or when the store cannot be opened (read-only
    folder, made by a newer fieldtl): the takes are then measured afresh, with the same results.
    """
    if fresh or os.environ.get("FIELDTL_NO_CACHE"):
        yield None
        return
    from fieldtl.store import Store, default_database_path

    try:
        store = Store.open(default_database_path())
    except (StoreError, OSError):
        yield None
        return
    try:
        yield store_cache(store)
    finally:
        store.close()


def assess_test(store: Store, test_id: int, *, options: AssessOptions = AssessOptions(),
                progress: Progress | None = None) -> Assessment:
    """The assessment of a stored test: its included takes, the store's calibration rule, its setup.

    Findings and take labels name the stored audio files (content names); the app shows them with
    the names people know (:func:`fieldtl.naming.renamed_assessment`).
    """
    survey = store.survey_for_test(test_id)
    cache = store_cache(store, store.list_takes(test_id))
    return assess_survey(survey, cache=cache, options=options, progress=progress)


@dataclass(frozen=True, slots=True)
class TakeOutcome:
    """What one take measured, or the one-line reason it could not be measured."""

    summary: TakeSummary | None
    findings: tuple[Finding, ...] = ()
    problem: str | None = None


@dataclass(frozen=True, slots=True)
class TestTakes:
    """Every non-calibration take of a test measured, by take id, and the calibration used for them."""

    __test__ = False

    calibration: Calibration | None
    calibration_problem: str | None          # two included calibrator takes of a kind, a bad tone ...
    outcomes: Mapping[int, TakeOutcome] = field(default_factory=dict, hash=False)

    @property
    def offset_db(self) -> float:
        return 0.0 if self.calibration is None else self.calibration.offset_db


def measure_test_takes(store: Store, test_id: int, *, on_take: TakesDone | None = None) -> TestTakes:
    """Each take of the test (left-out ones too) measured with the test's calibration.

    The calibration is the one the assessment uses (:func:`fieldtl.store.survey_view.calibration_spec`):
    when the store refuses it (two included calibrator takes of one kind, different channels) or the
    tone is unusable, the takes are measured uncalibrated and ``calibration_problem`` says why.
    The end-of-session calibrator take is measured too, so the assessment finds it ready.
    """
    from fieldtl.store.survey_view import calibration_spec, take_spec

    test = store.get_test(test_id)
    takes = store.list_takes(test_id)
    cache = store_cache(store, takes)
    level_takes = [t for t in takes if t.role not in ("calibration", "calibration_after")]
    total = len(level_takes)
    if on_take is not None:
        on_take(0, total)
    calibration, problem = None, None
    try:
        spec = calibration_spec(test, takes, store.take_path)
        if spec is not None:
            calibration = cache.calibration(spec.file, spec.channel, spec.reference_db)
            if spec.file_after is not None:
                cache.calibration(spec.file_after, spec.channel, spec.reference_db)
    except FieldTLError as exc:
        problem = str(exc)
    offset_db = 0.0 if calibration is None else calibration.offset_db
    outcomes: dict[int, TakeOutcome] = {}
    for done, take in enumerate(level_takes, start=1):
        try:
            summary, findings = cache.take(take_spec(take, store.take_path(take)), level_offset_db=offset_db)
        except FieldTLError as exc:
            outcomes[take.id] = TakeOutcome(None, (), str(exc))
        else:
            outcomes[take.id] = TakeOutcome(summary, findings)
        if on_take is not None:
            on_take(done, total)
    return TestTakes(calibration, problem, outcomes)


class BackgroundMeasurer:
    """Measures stored tests' takes in one background thread, so pages appear while it works.

    :meth:`request` queues tests (the app queues every test when it starts); :meth:`prioritise`
    moves the test a page needs to the front; :meth:`pending` is ``(takes done, takes to measure)``
    while the test is queued or being measured, and None once its takes are in the store. What the
    thread measures lands in the store's measurements, where :func:`measure_test_takes` and
    :func:`assess_test` read it; a take that cannot be measured is left for the page to report.
    """

    def __init__(self, store: Store, *, every_test: bool = False) -> None:
        """Start the thread; with ``every_test`` it first queues every stored test (read in the thread,
        so a project whose rows cannot be read delays nothing and only its own pages say so)."""
        import threading

        self._store = store
        self._queue: list[int] = []
        self._status: dict[int, tuple[int, int]] = {}
        self._stopped = False
        self._listing = every_test              # idle only once every stored test is queued
        self._wake = threading.Condition()
        self._thread = threading.Thread(target=self._run, args=(every_test,), name="fieldtl-measure", daemon=True)
        self._thread.start()

    def request(self, *test_ids: int) -> None:
        with self._wake:
            for test_id in test_ids:
                if test_id not in self._status and not self._stopped:
                    self._queue.append(test_id)
                    self._status[test_id] = (0, 0)
            self._wake.notify()

    def prioritise(self, test_id: int) -> None:
        with self._wake:
            if test_id in self._queue:
                self._queue.remove(test_id)
                self._queue.insert(0, test_id)

    def pending(self, test_id: int) -> tuple[int, int] | None:
        with self._wake:
            if not self._thread.is_alive():       # never leave a page waiting on a thread that is gone
                return None
            return self._status.get(test_id)

    def stop(self) -> None:
        """End the thread after the test it is measuring (the queue is dropped)."""
        with self._wake:
            self._stopped = True
            self._queue.clear()
            self._status.clear()
            self._wake.notify()

    def idle(self) -> bool:
        """Nothing queued or being measured."""
        with self._wake:
            return not self._status and not self._listing

    def _queue_every_test(self) -> None:
        for project in self._store.list_projects():
            try:
                self.request(*(t.id for t in self._store.list_tests(project.id)))
            except Exception:  # noqa: BLE001, S112 - that project's pages report it; the others go on
                continue

    def _run(self, every_test: bool) -> None:
        if every_test:
            try:
                self._queue_every_test()
            except Exception:  # noqa: BLE001 - a store that cannot be listed: pages measure on demand
                pass
            with self._wake:
                self._listing = False
        while True:
            with self._wake:
                while not self._queue and not self._stopped:
                    self._wake.wait()
                if self._stopped:
                    return
                test_id = self._queue.pop(0)

            def done(count: int, total: int, test_id: int = test_id) -> None:
                with self._wake:
                    self._status[test_id] = (count, total)

            try:
                measure_test_takes(self._store, test_id, on_take=done)
            except Exception:  # noqa: BLE001 - the page measures again and reports the problem in one line
                pass
            finally:
                with self._wake:
                    self._status.pop(test_id, None)
                    if self._stopped:
                        return
