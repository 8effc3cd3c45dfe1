"""Recipes of the invented nights the noise-record tests analyse (nothing here is a real recording).

A night is a 1 kHz tone whose amplitude steps between a background level and event levels, so
its A-weighted levels are known analytically: A(1 kHz) = 0 dB by the definition of the A
weighting (IEC 61672-1:2013 Annex E normalisation), and the mean square of a sine of amplitude a
over whole periods is a²/2. Blocks are generated on demand (never the whole night at once).
"""

from __future__ import annotations

import math
import struct
from dataclasses import dataclass
from datetime import datetime, time
from pathlib import Path

import numpy as np
import soundfile

from fieldtl.noise.record import Source

TONE_HZ = 1000.0


@dataclass(frozen=True)
class Burst:
    start_s: float
    duration_s: float
    level_dbfs: float          # mean-square level of the tone during the burst, dB re full scale


def amplitude(level_dbfs: float) -> float:
    """Peak amplitude of a sine whose mean square is ``level_dbfs`` (a²/2 = 10^(L/10))."""
    return math.sqrt(2.0) * 10 ** (level_dbfs / 20)


def night_blocks(*, sample_rate_hz: int, duration_s: float, background_dbfs: float, bursts: tuple[Burst, ...],
                 block_s: float = 10.0):
    """A function returning a fresh iterator of the night's blocks (what Source.blocks wants)."""
    frames = round(duration_s * sample_rate_hz)

    def blocks():
        step = round(block_s * sample_rate_hz)
        for first in range(0, frames, step):
            index = np.arange(first, min(first + step, frames))
            t_s = index / sample_rate_hz
            a = np.full(index.size, amplitude(background_dbfs))
            for burst in bursts:
                inside = (t_s >= burst.start_s) & (t_s < burst.start_s + burst.duration_s)
                a[inside] = amplitude(burst.level_dbfs)
            yield a * np.sin(2 * np.pi * TONE_HZ * t_s)
    return blocks


def night_source(name: str = "night.wav", *, sample_rate_hz: int = 8000, duration_s: float, background_dbfs: float,
                 bursts: tuple[Burst, ...] = (), local_start: datetime | None = None) -> Source:
    return Source(name, sample_rate_hz, round(duration_s * sample_rate_hz),
                  night_blocks(sample_rate_hz=sample_rate_hz, duration_s=duration_s,
                               background_dbfs=background_dbfs, bursts=bursts), local_start)


def write_wav(path: Path, samples: np.ndarray, *, sample_rate_hz: int, local_start: datetime | None = None) -> Path:
    """16-bit mono WAV; with ``local_start`` a 'bext' chunk (EBU Tech 3285 layout, version 0) is
    placed before the audio, declaring that origination date, time and time reference."""
    soundfile.write(path, samples, sample_rate_hz, subtype="PCM_16")
    if local_start is None:
        return path
    data = path.read_bytes()
    body = bytearray(602)
    body[320:330] = local_start.strftime("%Y-%m-%d").encode()
    body[330:338] = local_start.strftime("%H:%M:%S").encode()
    midnight = datetime.combine(local_start.date(), time())
    body[338:346] = struct.pack("<Q", round((local_start - midnight).total_seconds() * sample_rate_hz))
    chunk = b"bext" + struct.pack("<I", len(body)) + bytes(body)
    riff = data[:12] + chunk + data[12:]
    path.write_bytes(riff[:4] + struct.pack("<I", len(riff) - 8) + riff[8:])
    return path


__all__ = ["Burst", "amplitude", "night_blocks", "night_source", "write_wav"]
