"""Peak memory of analyse_levels on a 1-hour and a 1-minute 48 kHz mono file, read block by block.

Both files are 24-bit WAV written to a temporary folder (the hour is one minute of pink noise
written sixty times) and deleted afterwards. Each analysis runs in its own child process, which
reads the file with fieldtl.audio.ingest.iter_blocks and reports its own peak resident set size
(VmHWM from /proc/self/status; ru_maxrss would carry over the parent's peak through fork and
exec); a third child analyses one second held in memory, as the baseline of imports and filter
design. Target: the hour under 300 MB, about the same as the minute. The hour is analysed twice:
with band Leq filtered in the time domain (the default route) and by the spectral route that
stationary takes use (``band_route="spectral"``). Linux only.

Run from anywhere: ``python benchmarks/memory.py``.
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

RATE_HZ = 48_000
MINUTE_S = 60


def child(path: str, band_route: str) -> None:
    """Analyse one file (or, for "-", one second of noise in memory) and print what it cost."""
    import numpy as np

    from fieldtl.analysis.levels import analyse_levels
    from fieldtl.audio.ingest import iter_blocks, open_recording

    start = time.perf_counter()
    if path == "-":
        result = analyse_levels([0.1 * np.random.default_rng(0).standard_normal(RATE_HZ)], sample_rate_hz=RATE_HZ)
    else:
        recording = open_recording(path)
        result = analyse_levels(iter_blocks(recording), sample_rate_hz=recording.sample_rate_hz,
                                total_frames=recording.frames, source_name=recording.name, band_route=band_route)
    print(json.dumps({"peak_mb": peak_rss_mb(),
                      "seconds": time.perf_counter() - start, "duration_s": result.duration_s,
                      "history_rows": int(result.history.laeq_db.size), "laeq_db": result.laeq_db}))


def peak_rss_mb() -> float:
    """Peak resident set size of this process image, from the kernel's VmHWM line."""
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    raise RuntimeError("no VmHWM in /proc/self/status (this benchmark needs Linux)")


def run_child(path: str, band_route: str = "filtered") -> dict:
    done = subprocess.run([sys.executable, __file__, "--child", path, band_route], capture_output=True, text=True,
                          check=True)
    return json.loads(done.stdout)


def write_files(folder: Path) -> tuple[Path, Path]:
    import soundfile

    from fieldtl.audio.signals import pink_noise

    minute = pink_noise(MINUTE_S, sample_rate_hz=RATE_HZ, seed=3)
    short, long = folder / "minute.wav", folder / "hour.wav"
    soundfile.write(short, minute, RATE_HZ, subtype="PCM_24")
    with soundfile.SoundFile(long, "w", samplerate=RATE_HZ, channels=1, subtype="PCM_24") as handle:
        for _ in range(60):
            handle.write(minute)
    return short, long


def main() -> None:
    with tempfile.TemporaryDirectory(prefix="fieldtl-memory-") as folder:
        short, long = write_files(Path(folder))
        sizes_mb = {p.name: p.stat().st_size / 1e6 for p in (short, long)}
        baseline = run_child("-")
        minute = run_child(str(short))
        hour = run_child(str(long))
        hour_spectral = run_child(str(long), "spectral")
    print(f"analyse_levels on 24-bit 48 kHz mono WAV read in blocks (files {sizes_mb['minute.wav']:.0f} MB "
          f"and {sizes_mb['hour.wav']:.0f} MB, deleted)")
    print(f"{'':10} {'duration':>9} {'peak RSS':>10} {'time':>8} {'history rows':>13}")
    for name, row in (("baseline", baseline), ("1 minute", minute), ("1 hour", hour), ("1 h spec.", hour_spectral)):
        print(f"{name:10} {row['duration_s']:8.0f}s {row['peak_mb']:8.1f}MB {row['seconds']:7.1f}s "
              f"{row['history_rows']:13d}")
    print(f"peak 1 h / 1 min {hour['peak_mb'] / minute['peak_mb']:.2f}x; 1 h above the baseline "
          f"{hour['peak_mb'] - baseline['peak_mb']:.1f} MB; target: 1 h under 300 MB")
    print(f"peak_mb_hour {hour['peak_mb']:.1f} peak_mb_minute {minute['peak_mb']:.1f}")


if __name__ == "__main__":
    if len(sys.argv) == 4 and sys.argv[1] == "--child":
        child(sys.argv[2], sys.argv[3])
    else:
        main()
