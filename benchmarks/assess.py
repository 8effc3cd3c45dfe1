"""Time of a whole assessment of the demo survey against the time it takes to read its audio.

Runs the demo survey (sample_audio/survey.toml) through the core path ``fieldtl assess`` takes:
load the survey, measure every take (calibration included), assess, and write the text and
JSON results (in memory). Everything is imported first; each run is in this process, so filter
designs made by the first run are reused, as they are for the later takes of one CLI run.
For comparison, every audio file the survey names is read whole with soundfile, in one thread. The
assessment runs twice per round: on one thread, and on the threads ``fieldtl assess`` uses (one per
core while the load average when this starts stays below the number of cores, fewer above it, at
most 4: fieldtl.measure.default_workers; numpy, scipy and soundfile release the GIL). All are timed
REPEATS times, taking turns; the medians are compared. The load average is printed before and
after: on a shared machine the figures move with it.

Prints the first run apart (it designs the filters), the time one run spends on level takes, decays
and calibration tones, the one-thread ratio, then the same assessment with every take
already measured (read from a store's kept measurements, as a second ``fieldtl assess`` or the app
after a restart does; target at most 0.3 s), and ends with the line
``assess <s>s decode <s>s ratio <r>x`` for the threads ``fieldtl assess`` uses. Target (issue 10):
ratio at most 5.

Run from anywhere: ``python benchmarks/assess.py [survey.toml]``.
"""

from __future__ import annotations

import os
import statistics
import sys
import time
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import soundfile  # noqa: E402

from fieldtl.assess import AssessOptions  # noqa: E402
from fieldtl.measure import calibrate_file, default_workers, measure_take  # noqa: E402
from fieldtl.measure_cache import forget_file_hashes  # noqa: E402
from fieldtl.report.export import assessment_to_json, assessment_to_text  # noqa: E402
from fieldtl.store import Store  # noqa: E402
from fieldtl.survey import Survey, load_survey  # noqa: E402
from fieldtl.testrun import MeasurementCache, assess_survey, store_cache  # noqa: E402

REPEATS = 5
DEMO = ROOT / "sample_audio" / "survey.toml"


def run_assess(path: Path, cache: MeasurementCache | None = None, *, workers: int | None = None) -> dict[str, Any]:
    """What ``fieldtl assess <path>`` computes with its default options, as its JSON document
    (every take measured afresh without ``cache``; with it, kept measurements are read back), on
    ``workers`` threads (default: as fieldtl assess)."""
    survey = load_survey(path)
    assessment = assess_survey(survey, cache=cache, workers=workers,
                               options=AssessOptions(decision_rule="guarded", source_combination="energy"))
    assessment_to_text(assessment)
    return assessment_to_json(assessment)


def audio_files(survey: Survey) -> list[Path]:
    files = [take.file for take in survey.takes]
    if survey.calibration is not None:
        files.append(survey.calibration.file)
        if survey.calibration.file_after is not None:
            files.append(survey.calibration.file_after)
    return files


def time_by_kind(survey: Survey) -> dict[str, float]:
    """Seconds spent measuring the level takes, the decays and the calibration tones, once each
    (where an assessment's time goes; the rest is the assessment itself and its reports)."""
    spent = {"level takes": 0.0, "decays": 0.0, "calibration": 0.0}
    for spec in survey.takes:
        start = time.perf_counter()
        measure_take(spec, level_offset_db=0.0)
        spent["decays" if spec.role == "decay" else "level takes"] += time.perf_counter() - start
    calibration = survey.calibration
    for file in () if calibration is None else (calibration.file, calibration.file_after):
        if file is not None:
            start = time.perf_counter()
            calibrate_file(file, calibration.channel, calibration.reference_db)
            spent["calibration"] += time.perf_counter() - start
    return spent


def decode_all(files: list[Path]) -> int:
    return sum(soundfile.read(file, dtype="float64")[0].size for file in files)


def main() -> None:
    path = Path(sys.argv[1]) if len(sys.argv) > 1 else DEMO
    files = audio_files(load_survey(path))
    load_before = _load()
    workers = default_workers()          # what fieldtl assess would use now
    start = time.perf_counter()
    first_json = run_assess(path)
    first_s = time.perf_counter() - start
    one_thread_s, assess_s, decode_s = [], [], []
    for _ in range(REPEATS):
        start = time.perf_counter()
        assert run_assess(path, workers=1) == first_json   # the same result every time, on any threads
        one_thread_s.append(time.perf_counter() - start)
        start = time.perf_counter()
        assert run_assess(path, workers=workers) == first_json
        assess_s.append(time.perf_counter() - start)
        start = time.perf_counter()
        decode_all(files)
        decode_s.append(time.perf_counter() - start)
    with Store.open(":memory:") as store:
        assert run_assess(path, store_cache(store)) == first_json      # measures every take and keeps it
        cached_s = []
        for _ in range(REPEATS):
            forget_file_hashes()         # as in a new process: every file hashed to find its measurement
            start = time.perf_counter()
            assert run_assess(path, store_cache(store)) == first_json
            cached_s.append(time.perf_counter() - start)
    assess_median, decode_median = statistics.median(assess_s), statistics.median(decode_s)
    one_thread_median = statistics.median(one_thread_s)
    print(f"{path.name}: {len(files)} audio files, {sum(soundfile.info(f).duration for f in files):.0f} s of audio; "
          f"median of {REPEATS}; load average (1 min) {load_before:.2f} before, {_load():.2f} after, "
          f"{os.cpu_count()} cores")
    print(f"first run in this process (designs the filters) {first_s:.3f} s")
    print(f"assess runs on {workers} thread(s): " + " ".join(f"{t:.3f}" for t in assess_s) + " s")
    print("of one run on one thread: " + ", ".join(f"{kind} {s:.3f} s"
                                                  for kind, s in time_by_kind(load_survey(path)).items()))
    print(f"on one thread: assess {one_thread_median:.3f}s decode {decode_median:.3f}s "
          f"ratio {one_thread_median / decode_median:.1f}x")
    cached_median = statistics.median(cached_s)
    print(f"with every take already measured: assess {cached_median:.3f}s (target <= 0.3 s) "
          f"decode {decode_median:.3f}s ratio {cached_median / decode_median:.1f}x")
    print(f"on {workers} thread(s), as fieldtl assess (decoding on one):")
    print(f"assess {assess_median:.3f}s decode {decode_median:.3f}s ratio {assess_median / decode_median:.1f}x")


def _load() -> float:
    return os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")


if __name__ == "__main__":
    main()
