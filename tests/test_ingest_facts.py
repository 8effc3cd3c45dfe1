"""SampleStats' facts, block by block, against the same facts computed here over the whole signal in
the plain way (|x| taken once, runs found with itertools.groupby): they must agree exactly."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from fieldtl.audio.ingest import CLIP_RUN_SAMPLES, DENORMAL_BELOW, NEAR_FULL_SCALE, SampleStats

RATE_HZ = 48_000


def plain_facts(samples: np.ndarray) -> dict[str, float]:
    magnitude = np.abs(samples)
    runs = [(key, len(list(group))) for key, group in itertools.groupby(magnitude >= NEAR_FULL_SCALE)]
    clip_runs = [length for key, length in runs if key and length >= CLIP_RUN_SAMPLES]
    zero_runs = [length for key, length in itertools.groupby(samples == 0.0) for length in [len(list(length))] if key]
    return dict(peak=float(magnitude.max()), clipped_samples=sum(clip_runs), clip_runs=len(clip_runs),
                over_full_scale_samples=int(np.sum(magnitude > 1.0)),
                denormal_samples=int(np.sum((magnitude > 0.0) & (magnitude < 2.0**-126))),   # IEEE 754 binary32
                zero_fraction=float(np.mean(samples == 0.0)),
                longest_zero_run_s=max(zero_runs, default=0) / RATE_HZ)


def signal_with_every_fact(seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    samples = np.round(rng.normal(0.0, 0.05, 50_000) * 32768) / 32768      # 16-bit noise: isolated zeros
    samples[1_000:1_600] = 0.0                                             # a dropout
    samples[2_000:2_010] = -0.0
    samples[rng.integers(0, samples.size, 7)] = DENORMAL_BELOW / 3         # denormals of both signs
    samples[rng.integers(0, samples.size, 5)] = -DENORMAL_BELOW / 7
    samples[5_000] = DENORMAL_BELOW                                        # the smallest normal: not one
    samples[5_001] = -DENORMAL_BELOW
    samples[9_998:10_003] = 1.0                                            # a clip run across a block edge
    samples[20_000:20_002] = -1.0                                          # too short to count
    samples[30_000:30_004] = -1.25                                         # beyond full scale (float file)
    samples[40_000] = 1.0000001
    return samples


@pytest.mark.parametrize("block_frames", [1, 3, 1_000, 10_000, 65_536])
@pytest.mark.parametrize("seed", [1, 2])
def test_block_facts_equal_the_plain_facts_of_the_whole_signal(block_frames, seed):
    samples = signal_with_every_fact(seed)
    stats = SampleStats(sample_rate_hz=RATE_HZ, source_name="x.wav")
    for start in range(0, samples.size, block_frames):
        stats.update(samples[start:start + block_frames])
    facts = stats.facts()
    expected = plain_facts(samples)
    assert expected["denormal_samples"] > 0 and expected["clip_runs"] == 2 and expected["over_full_scale_samples"] == 5
    for name, value in expected.items():
        assert getattr(facts, name) == value, name
    assert facts.peak_dbfs == 20 * math.log10(expected["peak"])
    assert facts.dc_offset == pytest.approx(float(np.mean(samples)), abs=1e-15)


def test_a_signal_of_negative_values_reads_its_peak_from_the_minimum():
    stats = SampleStats(sample_rate_hz=RATE_HZ, source_name="x.wav")
    stats.update(np.array([-0.5, -0.25, -0.75]))
    assert stats.facts().peak == 0.75
