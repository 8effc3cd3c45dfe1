"""A process that writes takes into a store in a loop, for tests/test_store_crash.py.

    python store_writer.py DATABASE WORKER COUNT [GO_FILE]

Opens (creating and migrating if needed) the store at DATABASE (a SQLite path or a postgresql://
URL), adds one project and one test, then COUNT takes of distinct 0.1 s tones, printing
``committed <take id>`` after each commit. With GO_FILE it prints ``ready`` and waits for that
file to exist before opening the store, so two writers can be started at the same moment.
"""

from __future__ import annotations

import io
import sys
import time
from pathlib import Path

import make_data
import soundfile

from fieldtl.store import TestSetup
from fieldtl.store.location import open_store


def tone_wav(worker: int, number: int) -> bytes:
    samples = make_data.sine(100.0 + number, amplitude=0.1 + 0.1 * worker, duration_s=0.1)
    buffer = io.BytesIO()
    soundfile.write(buffer, samples, make_data.SAMPLE_RATE_HZ, format="WAV", subtype="PCM_16")
    return buffer.getvalue()


def main(database: str, worker: int, count: int, go_file: str | None = None) -> None:
    if go_file is not None:
        print("ready", flush=True)
        while not Path(go_file).exists():
            time.sleep(0.005)
    with open_store(database) as store:
        project = store.create_project(f"Writer {worker}")
        test = store.create_test(project.id, TestSetup(title=f"Writer {worker}", test_type="airborne",
                                                       receiving_volume_m3=30.0))
        for number in range(count):
            take = store.add_take(test.id, data=tone_wav(worker, number), original_name=f"w{worker}_{number}.wav",
                                  role="source", speaker=1 + number % 3)
            print(f"committed {take.id}", flush=True)


if __name__ == "__main__":
    main(sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), *sys.argv[4:5])
