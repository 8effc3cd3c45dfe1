"""Recipes for the small audio files the tests use; nothing is downloaded.

Run ``python tests/data/make_data.py OUTDIR`` to write them by hand; the tests call the same
functions into pytest's temporary folders.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import soundfile

SAMPLE_RATE_HZ = 48_000


def sine(frequency_hz: float, *, amplitude: float, duration_s: float,
         sample_rate_hz: int = SAMPLE_RATE_HZ) -> np.ndarray:
    """A sine of peak ``amplitude`` (full scale 1.0); its RMS level is 20 lg(amplitude/sqrt 2) dBFS."""
    time_s = np.arange(int(round(duration_s * sample_rate_hz))) / sample_rate_hz
    return amplitude * np.sin(2 * np.pi * frequency_hz * time_s)


def write(path: Path, samples: np.ndarray, *, sample_rate_hz: int = SAMPLE_RATE_HZ,
          subtype: str = "PCM_24") -> Path:
    soundfile.write(str(path), samples, sample_rate_hz, subtype=subtype)
    return path


def calibrator_tone(path: Path, *, rms_dbfs: float = -26.0, duration_s: float = 5.0,
                    frequency_hz: float = 1000.0, sample_rate_hz: int = SAMPLE_RATE_HZ) -> Path:
    """A 1 kHz calibrator-like tone with a 0.3 s fade-in (the settling start) and faint noise."""
    amplitude = np.sqrt(2) * 10 ** (rms_dbfs / 20)
    tone = sine(frequency_hz, amplitude=amplitude, duration_s=duration_s, sample_rate_hz=sample_rate_hz)
    fade = int(0.3 * sample_rate_hz)
    tone[:fade] *= np.linspace(0.0, 1.0, fade)
    tone += 1e-5 * np.random.default_rng(1).standard_normal(tone.size)
    return write(path, tone, sample_rate_hz=sample_rate_hz)


def truncated_copy(source: Path, path: Path) -> Path:
    """The first half of ``source``'s bytes: a header that promises more audio than there is."""
    data = source.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    return path


def main(out_dir: str) -> None:
    folder = Path(out_dir)
    folder.mkdir(parents=True, exist_ok=True)
    write(folder / "sine_1k_half_scale.wav", sine(1000, amplitude=0.5, duration_s=0.5))
    calibrator_tone(folder / "calibrator_94db.wav")
    truncated_copy(folder / "sine_1k_half_scale.wav", folder / "truncated.wav")
    (folder / "not_audio.wav").write_text("this is text, not audio\n")
    (folder / "empty.wav").write_bytes(b"")


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else "tests/data/out")
