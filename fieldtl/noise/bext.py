"""The start time a broadcast-wave file declares: its 'bext' chunk (EBU Tech 3285), read safely.

Only the RIFF chunk headers before the audio data and the first 346 bytes of the 'bext' chunk are
read; every offset is checked against the file size, and the walk stops after MAX_CHUNKS chunks.
A file without a usable 'bext' chunk (FLAC, plain WAV, blank or malformed fields) gives None:
the caller asks the user for the start time. Never raises for the file's content; an unreadable
file raises OSError as any open would.

Layout of the fields used (EBU Tech 3285, from memory: check against the specification):
Description 256 bytes, Originator 32, OriginatorReference 32, OriginationDate 10 ("yyyy-mm-dd",
any of - _ : space . as separators), OriginationTime 8 ("hh-mm-ss"), TimeReference 8 bytes
(little-endian unsigned: samples since midnight of the origination date).
"""

from __future__ import annotations

import re
import struct
from dataclasses import dataclass
from datetime import date, datetime, time, timedelta
from pathlib import Path

MAX_CHUNKS = 1000
_BEXT_FIELDS_BYTES = 346          # up to and including TimeReference
_DATE_OFFSET = 320
_TIME_OFFSET = 330
_REFERENCE_OFFSET = 338
_DATE = re.compile(r"^(\d{4})[-_:. /](\d{2})[-_:. /](\d{2})$")
_TIME = re.compile(r"^(\d{2})[-_:. ](\d{2})[-_:. ](\d{2})$")
# TimeReference is used for the sub-second start when it agrees with OriginationTime within this
# (our choice: some recorders write the time the file was closed, or a time code of another clock).
REFERENCE_AGREEMENT_S = 2.0


@dataclass(frozen=True, slots=True)
class Origination:
    """The local (zone-less) wall-clock start a broadcast-wave file declares."""

    local_start: datetime          # naive: the recorder's wall clock, zone given by the user
    from_time_reference: bool      # sub-second start from TimeReference


def read_origination(path: str | Path, *, sample_rate_hz: float) -> Origination | None:
    """The origination date and time of a WAV/RF64/BW64 file's 'bext' chunk, or None."""
    file = Path(path)
    size = file.stat().st_size
    with open(file, "rb") as handle:
        head = handle.read(12)
        if len(head) < 12 or head[:4] not in (b"RIFF", b"RF64", b"BW64") or head[8:12] != b"WAVE":
            return None
        position = 12
        for _ in range(MAX_CHUNKS):
            if position + 8 > size:
                return None
            handle.seek(position)
            header = handle.read(8)
            if len(header) < 8:
                return None
            chunk_id, chunk_size = header[:4], struct.unpack("<I", header[4:8])[0]
            if chunk_id == b"bext":
                if chunk_size < _BEXT_FIELDS_BYTES or position + 8 + _BEXT_FIELDS_BYTES > size:
                    return None
                return _parse(handle.read(_BEXT_FIELDS_BYTES), sample_rate_hz)
            if chunk_id == b"data":          # the fields we need come before the audio in practice
                return None
            position += 8 + chunk_size + (chunk_size & 1)
    return None


def _parse(fields: bytes, sample_rate_hz: float) -> Origination | None:
    date_text = fields[_DATE_OFFSET:_DATE_OFFSET + 10].decode("ascii", "replace").strip("\x00 ")
    time_text = fields[_TIME_OFFSET:_TIME_OFFSET + 8].decode("ascii", "replace").strip("\x00 ")
    date_match, time_match = _DATE.match(date_text), _TIME.match(time_text)
    if date_match is None or time_match is None:
        return None
    try:
        day = date(*(int(part) for part in date_match.groups()))
        clock = time(*(int(part) for part in time_match.groups()))
    except ValueError:                   # month 13, 25 o'clock ...
        return None
    start = datetime.combine(day, clock)
    reference = struct.unpack("<Q", fields[_REFERENCE_OFFSET:_REFERENCE_OFFSET + 8])[0]
    if reference and sample_rate_hz > 0:
        reference_s = reference / sample_rate_hz
        clock_s = clock.hour * 3600 + clock.minute * 60 + clock.second
        if reference_s < 86_400 and abs(reference_s - clock_s) <= REFERENCE_AGREEMENT_S:
            return Origination(datetime.combine(day, time()) + timedelta(seconds=reference_s), True)
    return Origination(start, False)

