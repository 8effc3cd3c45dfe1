"""The allocator setting measure_take applies (fieldtl.measure.keep_freed_memory), checked against
the kernel's own count of page faults (getrusage ru_minflt, POSIX), not against time."""

from __future__ import annotations

import json
import platform
import subprocess
import sys
import textwrap

import pytest

# One 6 s take at 48 kHz measured in a fresh process as measure_take does it (blocks of 2^16 frames
# through stationary_levels), again after the setting. A take's temporaries span about 2000 pages
# of 4 KiB; with glibc's defaults they are returned after each take and faulted in again.
SCRIPT = textwrap.dedent("""
    import json, resource
    import numpy as np
    from fieldtl.analysis.levels import stationary_levels
    from fieldtl.measure import FIELD_RANGE_HZ, keep_freed_memory

    samples = np.random.default_rng(1).normal(0.0, 0.1, 288_000)

    def take():
        blocks = [samples[i:i + 65_536].copy() for i in range(0, samples.size, 65_536)]
        stationary_levels(blocks, sample_rate_hz=48_000.0, band_range_hz=FIELD_RANGE_HZ)

    def faults_of_one_take():
        take()                      # the first take of a setting may still grow the heap
        before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
        take()
        return resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before

    default = faults_of_one_take()
    taken = keep_freed_memory()
    print(json.dumps({"default": default, "taken": taken, "kept": faults_of_one_take()}))
""")


@pytest.mark.skipif(not sys.platform.startswith("linux") or platform.libc_ver()[0] != "glibc",
                    reason="the setting is glibc's mallopt; other C libraries keep their own behaviour")
def test_a_second_take_reuses_the_memory_of_the_first():
    run = subprocess.run([sys.executable, "-c", SCRIPT], capture_output=True, text=True, check=True, timeout=120)
    faults = json.loads(run.stdout.strip().splitlines()[-1])
    assert faults["taken"] is True
    # a take that faults in at most a twentieth of its working pages reuses what the last one freed
    assert faults["kept"] < 100, faults


def test_the_setting_is_skipped_where_there_is_no_glibc(monkeypatch):
    from fieldtl import measure

    measure.keep_freed_memory.cache_clear()
    monkeypatch.setattr(measure.sys, "platform", "darwin")
    try:
        assert measure.keep_freed_memory() is False
    finally:
        measure.keep_freed_memory.cache_clear()
