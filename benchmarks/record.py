"""Speed and peak memory of a noise record: 8 hours of an invented 48 kHz night, read from a WAV.

The night is invented: one minute of quiet noise (about -60 dB re full scale) written 480 times
as a 16-bit WAV in a temporary folder, with a louder burst of noise (2-6 s, +15 to +30 dB) in
every fifth minute, block by block (never held whole in memory); the file is deleted afterwards.
Each analysis runs in its own child process, which reports its wall time and its own peak
resident set size (VmHWM from /proc/self/status). A 1-minute file of the same night is analysed
first, side by side: memory flat in the length means the two peaks are about the same.
Target: at least 600x real time for the 8 hours (under 48 s) and a peak under 300 MB.
Linux only. Run from anywhere: ``python benchmarks/record.py [hours]``.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

RATE_HZ = 48_000
MINUTE_S = 60


def write_night(path: Path, minutes: int) -> int:
    """Write the invented night; returns the number of events written."""
    import numpy as np
    import soundfile

    rng = np.random.default_rng(12)
    quiet = (10 ** (-60 / 20) * rng.standard_normal(MINUTE_S * RATE_HZ)).astype(np.float32)
    events = 0
    with soundfile.SoundFile(path, "w", samplerate=RATE_HZ, channels=1, subtype="PCM_16") as out:
        for minute in range(minutes):
            block = quiet
            if minute % 5 == 2:
                block = quiet.copy()
                start = int(rng.uniform(5, 40) * RATE_HZ)
                length = int(rng.uniform(2, 6) * RATE_HZ)
                gain = 10 ** (rng.uniform(15, 30) / 20)
                block[start:start + length] *= gain
                events += 1
            out.write(block)
    return events


def child(path: str) -> None:
    from datetime import datetime, timezone

    from fieldtl.noise import RecordSettings, analyse_record

    begin = time.perf_counter()
    record = analyse_record([path], RecordSettings(zone_name="Europe/London", interval_min=15),
                            start=datetime(2026, 11, 28, 22, 0, tzinfo=timezone.utc))
    seconds = time.perf_counter() - begin
    peak_kb = next(int(line.split()[1]) for line in Path("/proc/self/status").read_text().splitlines()
                   if line.startswith("VmHWM:"))
    duration_s = sum(f.duration_s for f in record.files)
    print(json.dumps({"seconds": seconds, "duration_s": duration_s, "peak_mb": peak_kb / 1024,
                      "events": len(record.events), "intervals": len(record.intervals)}))


def run_child(path: Path) -> dict[str, float]:
    output = subprocess.run([sys.executable, __file__, "--child", str(path)], check=True, capture_output=True,
                            text=True, cwd=ROOT).stdout
    return json.loads(output.strip().splitlines()[-1])


def main() -> None:
    hours = float(sys.argv[1]) if len(sys.argv) > 1 else 8.0
    print(f"load average before: {' '.join(f'{v:.2f}' for v in os.getloadavg())} on {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory(prefix="fieldtl-record-") as folder:
        short, night = Path(folder) / "minute.wav", Path(folder) / "night.wav"
        write_night(short, 1)
        begin = time.perf_counter()
        written = write_night(night, round(hours * 60))
        print(f"wrote {hours:g} h of invented night ({night.stat().st_size / 1e9:.2f} GB, {written} events) "
              f"in {time.perf_counter() - begin:.1f} s")
        minute = run_child(short)
        print(f"1 minute: {minute['seconds']:.2f} s, peak {minute['peak_mb']:.0f} MB")
        result = run_child(night)
    realtime = result["duration_s"] / result["seconds"]
    print(f"{hours:g} h: {result['seconds']:.1f} s, peak {result['peak_mb']:.0f} MB, {result['events']} events found "
          f"of {written}, {result['intervals']} intervals; peak ratio {hours:g} h / 1 min "
          f"{result['peak_mb'] / minute['peak_mb']:.2f}")
    print(f"load average after: {' '.join(f'{v:.2f}' for v in os.getloadavg())}")
    print(f"record {result['seconds']:.1f}s realtime {realtime:.0f}x peak_mb {result['peak_mb']:.0f}")


if __name__ == "__main__":
    if len(sys.argv) > 2 and sys.argv[1] == "--child":
        child(sys.argv[2])
    else:
        main()
