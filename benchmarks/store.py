"""The store under a team's load: concurrent writers adding takes while readers load a test's results.

    python benchmarks/store.py                            # SQLite in a temporary folder
    python benchmarks/store.py --store postgresql://...   # a team server (use a throw-away database)

The store is first filled to ``--fill`` takes (50 per test, rows sharing one invented audio file,
added as one project copy), then ``--writers`` processes each add ``--takes`` takes of
``--seconds`` s of an invented tone (distinct audio, checked and hashed as every upload is) to
their own test, while ``--readers`` processes repeatedly load what the Results page reads for a
random filled test (the test, its takes, the calculator's survey) and time each load. Afterwards
every take a writer reported is looked for. The audio and the SQLite store live in a temporary
folder removed at the end. On PostgreSQL the audio is in the database: the writers' takes are
real distinct blobs sent with their rows, while the filled rows share one blob as they share one
file on SQLite (the fill measures rows and the Results load, not gigabytes of copied audio); the
benchmark's projects and their unused audio are removed afterwards, the clients' cache with the
temporary folder.
Target on a 2-core machine: no take lost, p95 load under 500 ms with 10 000 takes in the store.
Last line: ``store <backend> takes_per_s <n> p95_read_ms <m> lost <k>``.
"""

from __future__ import annotations

import argparse
import io
import multiprocessing
import os
import random
import statistics
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import soundfile

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from fieldtl.store import ProjectSnapshot, TakeRecord, TestSetup  # noqa: E402
from fieldtl.store.location import open_store  # noqa: E402

RATE_HZ = 44_100
TAKES_PER_TEST = 50             # a large field test: several positions, decays, background, calibration
ROLES = ("source", "receiving", "background", "decay")      # what an airborne test's results need
WAIT_S = 900.0
SETUP = TestSetup(title="Invented benchmark room", test_type="airborne", receiving_volume_m3=40.0,
                  separating_area_m2=10.0)


def tone(seconds: float, hz: float) -> bytes:
    t = np.arange(int(seconds * RATE_HZ)) / RATE_HZ
    buffer = io.BytesIO()
    soundfile.write(buffer, 0.3 * np.sin(2 * np.pi * hz * t), RATE_HZ, format="WAV", subtype="PCM_16")
    return buffer.getvalue()


def fill(store, count: int, audio: Path) -> tuple[int, tuple[int, ...]]:
    """A project of tests holding ``count`` takes in all (TAKES_PER_TEST each, rows sharing one stored
    file); returns the project id and its test ids."""
    project = store.create_project("Invented benchmark project")
    first = store.create_test(project.id, SETUP)
    seed = store.add_take(first.id, data=audio.read_bytes(), original_name="seed.wav", role="source")
    fields = {f: getattr(seed, f) for f in seed.__dataclass_fields__}
    tests = tuple(replace(first, id=k) for k in range(max(1, count // TAKES_PER_TEST)))
    takes = tuple(TakeRecord(**fields | {"id": n, "test_id": min(n // TAKES_PER_TEST, len(tests) - 1), "speaker": 1 + n % 5,
                                         "original_name": f"fill{n}.wav", "role": ROLES[n % 4],
                                         "method": "interrupted" if n % 4 == 3 else None})
                  for n in range(count))
    incoming = store.incoming_path()
    incoming.write_bytes(audio.read_bytes())
    copy = store.add_project_copy(ProjectSnapshot(project, tests, takes), {seed.file_name: incoming})
    store.delete_project(project.id)
    return copy.id, tuple(t.id for t in store.list_tests(copy.id))


def _open(location: str, audio_dir: str):
    """The store: SQLite with its audio folder, or the team server (audio in its database) with
    this benchmark's cache of it in the temporary folder."""
    if location.startswith("postgresql://"):
        return open_store(location, cache_dir=Path(audio_dir).parent / "team-cache")
    return open_store(location, audio_dir=Path(audio_dir))


def writer(location: str, audio_dir: str, worker: int, takes: int, seconds: float, start, out) -> None:
    with _open(location, audio_dir) as store:
        test = store.create_test(store.create_project(f"Invented writer {worker}").id, SETUP)
        start.wait(timeout=WAIT_S)
        began = time.perf_counter()
        ids = [store.add_take(test.id, data=tone(seconds, 100.0 + worker + 0.01 * n),
                              original_name=f"w{worker}_{n}.wav", role="source").id for n in range(takes)]
        out.put(("writer", test.id, ids, time.perf_counter() - began))


def reader(location: str, audio_dir: str, test_ids: tuple[int, ...], start, stop, out) -> None:
    times = []
    pick = random.Random(os.getpid()).choice
    with _open(location, audio_dir) as store:
        start.wait(timeout=WAIT_S)
        while not stop.is_set():
            test_id = pick(test_ids)
            began = time.perf_counter()
            store.get_test(test_id)
            store.list_takes(test_id)
            store.survey_for_test(test_id)
            times.append(time.perf_counter() - began)
    out.put(("reader", None, times, 0.0))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--store", help="postgresql:// URL (default: a SQLite store in a temporary folder)")
    parser.add_argument("--writers", type=int, default=20)
    parser.add_argument("--takes", type=int, default=50, help="takes per writer")
    parser.add_argument("--seconds", type=float, default=10.0, help="length of each take")
    parser.add_argument("--readers", type=int, default=5)
    parser.add_argument("--fill", type=int, default=9_000, help="takes already in the store")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="fieldtl-bench-store-") as folder:
        location = args.store or str(Path(folder) / "fieldtl.sqlite3")
        audio_dir = str(Path(folder) / "audio")
        backend = "postgresql" if args.store else "sqlite"
        seed = Path(folder) / "seed.wav"
        seed.write_bytes(tone(args.seconds, 997.0))
        with _open(location, audio_dir) as store:
            began = time.perf_counter()
            big_project, big_tests = fill(store, args.fill, seed)
            print(f"filled {args.fill} takes in {time.perf_counter() - began:.1f} s")
        context = multiprocessing.get_context("spawn")
        start, stop, out = context.Barrier(args.writers + args.readers + 1), context.Event(), context.Queue()
        workers = [context.Process(target=writer, args=(location, audio_dir, w, args.takes, args.seconds, start, out))
                   for w in range(args.writers)]
        readers = [context.Process(target=reader, args=(location, audio_dir, big_tests, start, stop, out))
                   for _ in range(args.readers)]
        for process in workers + readers:
            process.start()
        start.wait(timeout=WAIT_S)           # a child that failed to start breaks the barrier
        began = time.perf_counter()
        reports = [out.get(timeout=WAIT_S) for _ in workers]
        wall_s = time.perf_counter() - began
        stop.set()
        reads = [t for _ in readers for t in out.get(timeout=WAIT_S)[2]]
        for process in workers + readers:
            process.join()
        with _open(location, audio_dir) as store:
            stored = {t.id for _, test_id, _, _ in reports for t in store.list_takes(test_id)}
            total = sum(len(store.list_takes(t.id)) for p in store.list_projects() for t in store.list_tests(p.id))
            if args.store:
                for project in store.list_projects():
                    if project.name.startswith("Invented benchmark") or project.name.startswith("Invented writer"):
                        store.delete_project(project.id)
                store.clean_files()          # the writers' audio, now unused, leaves the database
        reported = [i for _, _, ids, _ in reports for i in ids]
        lost = len(set(reported) - stored)
        p95_ms = 1000 * statistics.quantiles(reads, n=20)[-1] if len(reads) >= 2 else float("nan")
        print(f"{len(reported)} takes of {args.seconds:g} s by {args.writers} writers in {wall_s:.1f} s; "
              f"{len(reads)} result loads by {args.readers} readers (median {1000 * statistics.median(reads):.0f} ms); "
              f"{total} takes in the store at the end (big project {big_project})")
        print(f"store {backend} takes_per_s {len(reported) / wall_s:.1f} p95_read_ms {p95_ms:.0f} lost {lost}")


if __name__ == "__main__":
    main()
