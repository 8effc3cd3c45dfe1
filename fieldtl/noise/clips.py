"""Short audio clips of events: kept only when the user switches them on for a period.

A recording made in a home captures the neighbours and the occupant. By default a record keeps
levels and spectra only; :func:`write_event_clips` cuts each event (plus a little before and
after, at most ``clip_max_s`` in all) from the original files into a folder the caller owns and
deletes with the period. Whoever switches this on must check the local law on recording and
have the occupant's consent (fieldtl.cautions.RECORDING_CAUTION).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import timedelta
from pathlib import Path

import soundfile

from fieldtl.errors import InputError
from fieldtl.noise.record import NoiseRecord

MARGIN_S = 1.0      # sound kept before and after an event


@dataclass(frozen=True, slots=True)
class EventClip:
    event_number: int       # 1-based, in the order of record.events
    file_name: str          # clip name inside the folder
    duration_s: float


def write_event_clips(record: NoiseRecord, folder: str | Path, *, channel: int = 0) -> tuple[EventClip, ...]:
    """Write one WAV clip per event into ``folder`` (created if missing); events whose audio is no
    longer at hand (a file moved or deleted since the analysis) get no clip."""
    if not record.settings.keep_clips:
        raise InputError("event clips are off for this period; switch them on first (see the caution)")
    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    clips = []
    for number, event in enumerate(record.events, start=1):
        for placed in record.files:
            offset_s = (event.start - placed.start).total_seconds()
            if placed.path is None or not 0 <= offset_s < placed.analysed_s:
                continue
            length_s = min(event.duration_s + 2 * MARGIN_S, record.settings.clip_max_s)
            first = max(0, round((offset_s - MARGIN_S) * placed.sample_rate_hz))
            frames = round(length_s * placed.sample_rate_hz)
            try:
                samples, rate_hz = soundfile.read(placed.path, start=first, frames=frames, always_2d=True)
            except (RuntimeError, OSError):
                break
            name = f"event-{number:03d}-{(placed.start + timedelta(seconds=first / rate_hz)):%Y%m%d-%H%M%S}.wav"
            soundfile.write(out / name, samples[:, min(channel, samples.shape[1] - 1)], rate_hz, subtype="PCM_24")
            clips.append(EventClip(number, name, samples.shape[0] / rate_hz))
            break
    return tuple(clips)


def delete_clips(folder: str | Path) -> int:
    """Remove every clip this module wrote in ``folder`` (and the folder if it is then empty)."""
    out = Path(folder)
    if not out.is_dir():
        return 0
    removed = 0
    for clip in out.glob("event-[0-9][0-9][0-9]-*.wav"):
        clip.unlink()
        removed += 1
    if not any(out.iterdir()):
        out.rmdir()
    return removed
