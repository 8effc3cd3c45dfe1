"""Speed and agreement of the multirate band engine against one full-rate filter per band.

One run analyses 60 s of 48 kHz pink noise into the 21 one-third octaves 50 Hz-5 kHz:

(a) the engine: fieldtl's multirate bank (BankStream, one decimation by 2 per octave), each
    band's 5/B start-up transient discarded, sum of squares by np.einsum;
(b) the straightforward method: each band a 6th-order Butterworth band-pass as SOS
    (fieldtl.analysis.filterbank.band_sos), scipy.signal.sosfilt at the full rate, the same
    start-up discard, mean square by numpy's mean of the squares.

Prints the median of REPEATS timings of each, the ratio, the largest band difference between
the engine's band levels (through analyse_levels) and (b), and ends with the line
``speedup <ratio>x max_diff_db <difference>``. Also printed, for context: the whole
analyse_levels (bands plus A/C weighting, F/S time weighting and 1 s histories) and (b) with
the engine's sum-of-squares kernel instead of the mean of squares.

Run from anywhere: ``python benchmarks/bands.py``.
"""

from __future__ import annotations

import math
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np  # noqa: E402
from scipy import signal  # noqa: E402

from fieldtl.analysis.filterbank import BankStream, band_sos, design_filter_bank  # noqa: E402
from fieldtl.analysis.levels import CHUNK_FRAMES, analyse_levels  # noqa: E402
from fieldtl.audio.signals import pink_noise  # noqa: E402

RATE_HZ = 48_000.0
DURATION_S = 60.0
REPEATS = 5


def engine_levels_db(samples: np.ndarray, bank) -> np.ndarray:
    stream = BankStream(bank)
    settle = [math.ceil(band.settle_s * RATE_HZ / 2**band.stage) for band in bank.bands]
    energy = np.zeros(len(bank.bands))
    count = np.zeros(len(bank.bands))
    for start in range(0, samples.size, CHUNK_FRAMES):
        for i, (first, output) in enumerate(stream.push(samples[start : start + CHUNK_FRAMES])):
            valid = output[max(0, settle[i] - first):]
            energy[i] += np.einsum("i,i->", valid, valid)
            count[i] += valid.size
    return 10 * np.log10(energy / count)


def straightforward_levels_db(samples: np.ndarray, bank, *, mean_square=lambda x: np.mean(x**2)) -> np.ndarray:
    levels_db = []
    for band in bank.bands:
        filtered = signal.sosfilt(band_sos(band.nominal_hz, sample_rate_hz=RATE_HZ), samples)
        levels_db.append(10 * math.log10(mean_square(filtered[math.ceil(band.settle_s * RATE_HZ):])))
    return np.array(levels_db)


def _mean_square(samples: np.ndarray) -> float:
    return float(np.einsum("i,i->", samples, samples)) / samples.size


def median_times_s(runs: dict) -> tuple[dict, dict]:
    """Median time of each run over REPEATS rounds; the runs take turns within a round, so a
    busy machine slows them alike."""
    times = {name: [] for name in runs}
    results = {}
    for _ in range(REPEATS):
        for name, run in runs.items():
            start = time.perf_counter()
            results[name] = run()
            times[name].append(time.perf_counter() - start)
    return {name: statistics.median(t) for name, t in times.items()}, results


def main() -> None:
    samples = pink_noise(DURATION_S, sample_rate_hz=RATE_HZ, seed=1)
    bank = design_filter_bank(sample_rate_hz=RATE_HZ, low_hz=50.0, high_hz=5000.0)
    times_s, results = median_times_s({
        "engine": lambda: engine_levels_db(samples, bank),
        "plain": lambda: straightforward_levels_db(samples, bank),
        "same kernel": lambda: straightforward_levels_db(samples, bank, mean_square=_mean_square),
        "full": lambda: analyse_levels([samples], sample_rate_hz=RATE_HZ),
    })
    engine_s, plain_s, kernel_s, full_s = (times_s[k] for k in ("engine", "plain", "same kernel", "full"))
    engine_db, plain_db, full = results["engine"], results["plain"], results["full"]
    assert np.allclose(full.band_leq.as_array(), engine_db, atol=1e-9)   # the same band levels
    max_diff_db = float(np.max(np.abs(full.band_leq.as_array() - plain_db)))
    ratio = plain_s / engine_s
    print(f"{DURATION_S:.0f} s of {RATE_HZ / 1000:g} kHz pink noise, {len(bank.bands)} one-third octaves "
          f"50 Hz-5 kHz, median of {REPEATS}")
    print(f"engine (multirate bank)                    {engine_s:7.3f} s")
    print(f"straightforward (sosfilt per band, mean)   {plain_s:7.3f} s")
    print(f"straightforward, engine's sum of squares   {kernel_s:7.3f} s  (ratio {kernel_s / engine_s:.2f}x)")
    print(f"whole analyse_levels (bands, A/C, F/S, history) {full_s:7.3f} s")
    print("band  engine - straightforward (dB): "
          + " ".join(f"{d:+.3f}" for d in full.band_leq.as_array() - plain_db))
    print(f"speedup {ratio:.2f}x max_diff_db {max_diff_db:.3f}")


if __name__ == "__main__":
    main()
