"""The store's audio folder: durable writes, content names, whole-file checks, leftovers.

(A device's SQLite store keeps its audio here; a team server keeps its audio in PostgreSQL and
each client its own cache folder of it, fieldtl.store.pg_blobs.)

A take's audio is written to an ``.incoming-<random>`` name, flushed to disk, checked, then
renamed to ``<sha256>.<wav|flac>`` under the store's write lock. A killed process can leave an
unreferenced content file, an ``.incoming-*`` file or an archive's ``*.part`` file;
:func:`leftover_files` names them and never names a file a take refers to.
"""

from __future__ import annotations

import os
import time
import uuid
from collections.abc import Iterable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fieldtl.audio.ingest import check_whole_read, file_sha256, iter_blocks, open_recording
from fieldtl.errors import InputError

INCOMING_PREFIX = ".incoming-"
PARTIAL_SUFFIX = ".part"               # an archive being written (fieldtl.store.archive)
STALE_INCOMING_S = 3600.0              # an unfinished upload older than this belongs to a dead process
WHOLE_READ_ROLES = ("decay", "calibration", "calibration_after")   # takes the calculator reads whole


@dataclass(frozen=True, slots=True)
class CheckedAudio:
    """What reading a whole audio file showed, and the content name it is stored under."""

    sha256: str
    file_name: str
    sample_rate_hz: int
    frames: int
    channels: int
    duration_s: float


def check_audio_file(path: Path, *, channel: int, shown_name: str, read_whole: bool = False) -> CheckedAudio:
    """Open the file as the calculator will and read every sample once; errors name ``shown_name``.

    ``read_whole``: the calculator reads this take into memory at once (decays, calibration
    tones), so its length must be within :data:`fieldtl.audio.ingest.MAX_WHOLE_READ_S`.
    Does not judge the signal (levels, clipping, silence): those are findings of the calculator.
    """
    try:
        recording = open_recording(path, channel=channel)
        if read_whole:
            check_whole_read(recording)
        for _ in iter_blocks(recording):
            pass
    except InputError as exc:
        raise InputError(str(exc).replace(str(path), shown_name).replace(path.name, shown_name)) from None
    sha256 = file_sha256(path)
    suffix = ".flac" if recording.format == "FLAC" else ".wav"
    return CheckedAudio(sha256=sha256, file_name=sha256 + suffix, sample_rate_hz=recording.sample_rate_hz,
                        frames=recording.frames, channels=recording.channels, duration_s=recording.duration_s)


def incoming_name() -> str:
    """A fresh name for a file being received into the audio folder."""
    return f"{INCOMING_PREFIX}{uuid.uuid4().hex}"


def write_durably(path: Path, data: bytes) -> None:
    with open(path, "xb") as handle:
        handle.write(data)
        handle.flush()
        os.fsync(handle.fileno())


def place_file(folder: Path, incoming: Path, file_name: str) -> bool:
    """Move a checked file to its content name (call under the write lock); False if it was there."""
    target = folder / file_name
    if target.is_file() and target.stat().st_size == incoming.stat().st_size:
        incoming.unlink()
        return False
    os.replace(incoming, target)
    fsync_folder(folder)
    return True


@contextmanager
def placed_files(folder: Path, files: Mapping[str, Path]) -> Iterator[None]:
    """Move checked files (content name → received file) into ``folder`` for the rows the block
    writes (call under the write lock); if the block fails, the files placed for it are removed
    (still under the lock: nobody else can refer to them yet)."""
    created: list[Path] = []
    try:
        for name, path in files.items():
            if place_file(folder, path, name):
                created.append(folder / name)
        yield
    except BaseException:
        for path in created:
            path.unlink(missing_ok=True)
        raise


def fsync_folder(folder: Path) -> None:
    """Make a rename inside ``folder`` durable (POSIX); a no-op where folders cannot be opened."""
    try:
        descriptor = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(descriptor)
    except OSError:
        pass
    finally:
        os.close(descriptor)


def leftover_files(audio_folder: Path, used: set[str], *, other_folders: Iterable[Path] = (),
                   stale_s: float) -> tuple[Path, ...]:
    """Files to clean: content-named audio in ``audio_folder`` that no take refers to, and
    ``.incoming-*`` / ``*.part`` leftovers there or in ``other_folders`` not touched for
    ``stale_s`` (younger ones may belong to a live upload or export).

    Only plain files directly inside the folders; names in ``used`` are never returned, and
    neither is any other file (a user's own file in the folder stays).
    """
    found: list[Path] = []
    now = time.time()
    for folder in (audio_folder, *other_folders):
        try:
            entries = sorted(folder.iterdir())
        except (FileNotFoundError, NotADirectoryError):
            continue
        for path in entries:
            if path.name in used or path.is_symlink() or not path.is_file():
                continue
            unfinished = path.name.startswith(INCOMING_PREFIX) or path.name.endswith(PARTIAL_SUFFIX)
            if unfinished and now - path.stat().st_mtime < stale_s:
                continue
            if unfinished or (folder == audio_folder and _is_content_name(path.name)):
                found.append(path)
    return tuple(dict.fromkeys(found))


def remove_unused(db: Any, audio_folder: Path, *, other_folders: Iterable[Path] = (),
                  stale_s: float) -> tuple[Path, ...]:
    """Remove what :func:`leftover_files` finds, given the takes table of ``db`` (an open write
    transaction: nobody can be placing a file meanwhile); returns what was removed."""
    used = {r[0] for r in db.execute("SELECT DISTINCT file_name FROM takes")}
    removed = []
    for path in leftover_files(audio_folder, used, other_folders=other_folders, stale_s=stale_s):
        try:
            path.unlink()
        except FileNotFoundError:
            continue
        removed.append(path)
    return tuple(removed)


def _is_content_name(name: str) -> bool:
    stem, dot, suffix = name.partition(".")
    return dot == "." and suffix in ("wav", "flac") and len(stem) == 64 and all(c in "0123456789abcdef" for c in stem)
