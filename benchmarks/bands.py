"""Speed and agreement of the band engine against one full-rate filter per band.

One run analyses 60 s of 48 kHz pink noise into the 21 one-third octaves 50 Hz-5 kHz:

(a) the engine as fieldtl.measure uses it for the Leq of a stationary take: the spectral route
    (fieldtl.analysis.levels.band_leq_spectral, the band part of
    ``analyse_levels(..., band_route="spectral")``): Welch power spectrum weighted by the
    multirate bank's squared response, fed in the same chunks, filters designed beforehand
    (once per process, as for every take after the first);
(b) the straightforward method: each band a 6th-order Butterworth band-pass as SOS
    (fieldtl.analysis.filterbank.band_sos), scipy.signal.sosfilt at the full rate, each band's
    5/B start-up transient discarded, mean square by numpy's mean of the squares.

Prints the median of REPEATS timings of each (taking turns within a round), the ratio, the
largest band difference between (a) and (b), and ends with the line
``speedup <ratio>x max_diff_db <difference>``. Also printed, for context: the time-domain
multirate bank (BankStream, the "filtered" route, still used where band histories are needed),
the whole analyse_levels on both routes (bands plus A/C weighting, F/S time weighting and 1 s
histories), and (a) on its first call in a fresh process (the response weights computed).

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
from fieldtl.analysis.levels import CHUNK_FRAMES, analyse_levels, band_leq_spectral  # noqa: E402
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


def straightforward_levels_db(samples: np.ndarray, bank) -> np.ndarray:
    levels_db = []
    for band in bank.bands:
        filtered = signal.sosfilt(band_sos(band.nominal_hz, sample_rate_hz=RATE_HZ), samples)
        levels_db.append(10 * math.log10(np.mean(filtered[math.ceil(band.settle_s * RATE_HZ):] ** 2)))
    return np.array(levels_db)


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
    start = time.perf_counter()
    first_db = band_leq_spectral([samples], sample_rate_hz=RATE_HZ).as_array()
    first_s = time.perf_counter() - start
    bank = design_filter_bank(sample_rate_hz=RATE_HZ, low_hz=50.0, high_hz=5000.0)
    times_s, results = median_times_s({
        "engine": lambda: band_leq_spectral([samples], sample_rate_hz=RATE_HZ).as_array(),
        "plain": lambda: straightforward_levels_db(samples, bank),
        "bank": lambda: engine_levels_db(samples, bank),
        "full spectral": lambda: analyse_levels([samples], sample_rate_hz=RATE_HZ, band_route="spectral"),
        "full filtered": lambda: analyse_levels([samples], sample_rate_hz=RATE_HZ),
    })
    engine_s, plain_s, bank_s = (times_s[k] for k in ("engine", "plain", "bank"))
    engine_db, plain_db, bank_db = results["engine"], results["plain"], results["bank"]
    assert np.array_equal(first_db, engine_db)
    assert np.allclose(results["full spectral"].band_leq.as_array(), engine_db, atol=1e-9)   # what measure gets
    assert np.allclose(results["full filtered"].band_leq.as_array(), bank_db, atol=1e-9)
    max_diff_db = float(np.max(np.abs(engine_db - plain_db)))
    ratio = plain_s / engine_s
    print(f"{DURATION_S:.0f} s of {RATE_HZ / 1000:g} kHz pink noise, {len(bank.bands)} one-third octaves "
          f"50 Hz-5 kHz, median of {REPEATS}")
    print(f"engine (spectral route, band Leq)              {engine_s:7.3f} s  (first call {first_s:.3f} s)")
    print(f"straightforward (sosfilt per band, mean)       {plain_s:7.3f} s")
    print(f"time-domain multirate bank (filtered route)    {bank_s:7.3f} s  (ratio {plain_s / bank_s:.2f}x, "
          f"max_diff_db {np.max(np.abs(bank_db - plain_db)):.3f})")
    print(f"whole analyse_levels, spectral / filtered      {times_s['full spectral']:7.3f} s / "
          f"{times_s['full filtered']:.3f} s  (bands, A/C, F/S, 1 s history)")
    print("band  engine - straightforward (dB): " + " ".join(f"{d:+.3f}" for d in engine_db - plain_db))
    print(f"speedup {ratio:.2f}x max_diff_db {max_diff_db:.3f}")


if __name__ == "__main__":
    main()
