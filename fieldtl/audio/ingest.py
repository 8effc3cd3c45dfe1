"""Reading recordings: WAV and FLAC through soundfile, block by block, with one gatekeeper.

Every sample the analysis sees passes through :func:`iter_blocks`, which rejects non-finite
values and truncated files with an :class:`~fieldtl.errors.InputError` naming the file, in
blocks of at most MAX_BLOCK_BYTES whatever the channel count. Takes read whole (decays,
calibration tones) are limited to MAX_WHOLE_READ_S before reading (:func:`check_whole_read`).
:class:`SampleStats` watches the same blocks to report peak, clipping, float samples beyond full
scale, denormals, DC offset and digital silence without reading the file a second time.
"""

from __future__ import annotations

import hashlib
import math
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import soundfile

from fieldtl.errors import InputError
from fieldtl.findings import Finding

SUPPORTED_FORMATS = ("WAV", "WAVEX", "FLAC")
SUPPORTED_SUBTYPES = ("PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE")
MIN_SAMPLE_RATE_HZ = 44_100
MAX_SAMPLE_RATE_HZ = 96_000
DEFAULT_BLOCK_FRAMES = 65_536
MAX_BLOCK_BYTES = 32 * 1024 * 1024  # one block of every channel as float64, whatever the channel count
# Decays and calibration tones are read whole into memory; longer recordings are refused
# (our limit: a decay series or a calibrator check takes well under two minutes on site).
MAX_WHOLE_READ_S = 120.0

# Clipping: a run of at least this many consecutive samples at or above NEAR_FULL_SCALE
# (common practice: single full-scale samples can be legitimate peaks, runs are not).
CLIP_RUN_SAMPLES = 3
NEAR_FULL_SCALE = 0.999
DC_OFFSET_LIMIT = 0.01        # |mean| above 1 % of full scale (-40 dBFS) is flagged (common practice)
DROPOUT_MIN_S = 0.010         # exact-zero runs of 10 ms or more inside a take suggest dropouts (common practice)
FULL_SCALE = 1.0              # float files may hold larger values; fixed-point formats cannot
# Smallest normal 32-bit float, 2**-126 (IEEE 754 binary32): a non-zero sample below it is a
# denormal in a 32-bit float file (and in any file it is 750 dB below full scale: not a signal).
DENORMAL_BELOW = float(np.finfo(np.float32).tiny)


@dataclass(frozen=True, slots=True)
class Recording:
    """A validated, opened-by-name audio file and the channel chosen for analysis."""

    path: str
    sample_rate_hz: int
    frames: int
    channels: int
    channel: int
    format: str
    subtype: str

    @property
    def name(self) -> str:
        return Path(self.path).name

    @property
    def duration_s(self) -> float:
        return self.frames / self.sample_rate_hz


def open_recording(path: str | Path, *, channel: int = 0, min_sample_rate_hz: int = MIN_SAMPLE_RATE_HZ) -> Recording:
    """Check that ``path`` is a usable WAV/FLAC file and describe it; reads the header only.

    ``min_sample_rate_hz`` lowers the floor for callers whose analysis holds at lower rates
    (noise records from phones: A weighting needs 8 kHz).

    Raises InputError (one line, naming the file) for a missing, empty or non-audio file, an
    unsupported format or sample rate, a file with no samples, or a channel that does not exist.
    """
    file = Path(path)
    name = file.name
    if not file.exists():
        raise InputError(f"{name}: file not found ({file})")
    if file.is_dir():
        raise InputError(f"{name}: is a folder, not an audio file")
    if file.stat().st_size == 0:
        raise InputError(f"{name}: file is empty")
    try:
        info = soundfile.info(str(file))
    except (RuntimeError, soundfile.LibsndfileError, OSError) as exc:
        raise InputError(f"{name}: not a readable WAV or FLAC file ({_short(exc)})") from None
    if info.format not in SUPPORTED_FORMATS:
        raise InputError(f"{name}: format {info.format} is not supported; use WAV or FLAC")
    if info.subtype not in SUPPORTED_SUBTYPES:
        raise InputError(f"{name}: sample format {info.subtype} is not supported; use 16/24/32-bit "
                         "integer or 32/64-bit float")
    if not min_sample_rate_hz <= info.samplerate <= MAX_SAMPLE_RATE_HZ:
        raise InputError(f"{name}: sample rate {info.samplerate} Hz is outside "
                         f"{min_sample_rate_hz}-{MAX_SAMPLE_RATE_HZ} Hz")
    if info.frames <= 0:
        raise InputError(f"{name}: contains no audio samples")
    missing_bytes = _wav_missing_bytes(file) if info.format in ("WAV", "WAVEX") else 0
    if missing_bytes > 0:
        raise InputError(f"{name}: truncated file: the header declares {missing_bytes} more bytes of audio "
                         "than the file holds")
    if not 0 <= channel < info.channels:
        raise InputError(f"{name}: channel {channel + 1} requested but the file has {info.channels} "
                         f"channel{'s' if info.channels > 1 else ''}")
    return Recording(path=str(file), sample_rate_hz=int(info.samplerate), frames=int(info.frames),
                     channels=int(info.channels), channel=channel, format=info.format,
                     subtype=info.subtype)


def iter_blocks(recording: Recording, *, block_frames: int = DEFAULT_BLOCK_FRAMES) -> Iterator[np.ndarray]:
    """Yield the chosen channel as float64 blocks scaled to +-1 full scale.

    Memory stays at one block whatever the file length. Raises InputError if a block holds
    NaN or infinity, or if the file ends before the frame count its header declares.
    Does not resample, remove DC or detect clipping (see SampleStats).
    """
    frames_read = 0
    block_frames = max(1, min(block_frames, MAX_BLOCK_BYTES // (8 * recording.channels)))
    may_be_non_finite = recording.subtype in ("FLOAT", "DOUBLE")   # integer samples are always finite
    try:
        with soundfile.SoundFile(recording.path) as handle:
            # read() hands out a new array per block (SoundFile.blocks copies each block once more)
            while (block := handle.read(block_frames, dtype="float64", always_2d=True)).shape[0]:
                samples = np.ascontiguousarray(block[:, recording.channel])
                if may_be_non_finite and not np.all(np.isfinite(samples)):
                    bad_s = (frames_read + int(np.argmin(np.isfinite(samples)))) / recording.sample_rate_hz
                    raise InputError(f"{recording.name}: contains NaN or infinite samples (first at "
                                     f"{bad_s:.3f} s)")
                frames_read += samples.size
                yield samples
    except (RuntimeError, soundfile.LibsndfileError, OSError) as exc:
        raise InputError(f"{recording.name}: damaged or truncated file: reading stopped after "
                         f"{frames_read} frames ({_short(exc)})") from None
    if frames_read < recording.frames:
        raise InputError(f"{recording.name}: truncated file: header declares {recording.frames} frames, "
                         f"only {frames_read} could be read")


def check_whole_read(recording: Recording) -> None:
    """Refuse a recording too long to be read whole (decays, calibration tones), before reading it."""
    if recording.duration_s > MAX_WHOLE_READ_S:
        raise InputError(f"{recording.name}: {recording.duration_s:.1f} s is longer than the "
                         f"{MAX_WHOLE_READ_S:.0f} s allowed for a decay or calibration recording")


def read_samples(recording: Recording, *, stats: SampleStats | None = None) -> np.ndarray:
    """The whole chosen channel as one float64 array, for short takes (decays, calibrations).

    Checks the length (:func:`check_whole_read`) before allocating; ``stats`` watches the blocks.
    """
    check_whole_read(recording)
    samples = np.empty(recording.frames)
    position = 0
    blocks = iter_blocks(recording)
    for block in blocks if stats is None else stats.watch(blocks):
        kept = block[: max(recording.frames - position, 0)]
        samples[position:position + kept.size] = kept
        position += kept.size
    return samples


def file_sha256(path: str | Path) -> str:
    """Hex SHA-256 of the file's bytes (provenance; the store keeps it beside each take)."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


@dataclass(frozen=True, slots=True)
class SignalFacts:
    """What a recording showed, for QA: all amplitudes relative to full scale (1.0)."""

    duration_s: float
    peak: float
    peak_dbfs: float
    clipped_samples: int
    clip_runs: int
    over_full_scale_samples: int    # |x| > 1: float files only
    denormal_samples: int           # 0 < |x| < 2**-126
    dc_offset: float
    zero_fraction: float
    longest_zero_run_s: float
    findings: tuple[Finding, ...]


class _RunCounter:
    """Counts runs of True in a boolean stream split across blocks (vectorised per block)."""

    def __init__(self, *, min_length: int) -> None:
        self.min_length = max(min_length, 1)
        self.runs = 0           # closed runs of at least min_length
        self.samples = 0        # samples in those runs
        self.longest = 0        # longest run seen, of any length
        self._open = 0          # length of the run still open at the end of the last block

    def update(self, mask: np.ndarray | None) -> None:
        """Add the next block's mask; None stands for a block with no True at all."""
        if mask is None or not mask.any():
            self.finish()
            return
        changes = np.flatnonzero(mask[1:] != mask[:-1]) + 1      # where a run starts or stops
        edges = np.concatenate(([0] if mask[0] else [], changes, [mask.size] if mask[-1] else [])).astype(np.int64)
        starts, stops = edges[0::2], edges[1::2]
        lengths = stops - starts
        if starts[0] == 0:
            lengths[0] += self._open
        else:
            self.finish()
        self._open = 0
        if stops[-1] == mask.size:
            self._open, lengths = int(lengths[-1]), lengths[:-1]
        if lengths.size:
            self.longest = max(self.longest, int(lengths.max()))
            long_runs = lengths[lengths >= self.min_length]
            self.runs += long_runs.size
            self.samples += int(long_runs.sum())

    def finish(self) -> None:
        """Close the run left open by the last block."""
        self.longest = max(self.longest, self._open)
        if self._open >= self.min_length:
            self.runs += 1
            self.samples += self._open
        self._open = 0


class SampleStats:
    """Accumulates peak, clipping runs, DC and silence over blocks as they stream past."""

    def __init__(self, *, sample_rate_hz: int, source_name: str) -> None:
        self._sample_rate_hz = sample_rate_hz
        self._source_name = source_name
        self._frames = 0
        self._peak = 0.0
        self._sum = 0.0
        self._zeros = 0
        self._over = 0
        self._denormal = 0
        self._clip_runs = _RunCounter(min_length=CLIP_RUN_SAMPLES)
        self._zero_runs = _RunCounter(min_length=1)

    def watch(self, blocks: Iterable[np.ndarray]) -> Iterator[np.ndarray]:
        """Pass blocks through unchanged while accumulating the statistics."""
        for block in blocks:
            self.update(block)
            yield block

    def update(self, block: np.ndarray) -> None:
        """Add one block of samples scaled to +-1 (finite: iter_blocks has checked them)."""
        self._frames += block.size
        if not block.size:
            return
        # peak = max |x| from the extremes, without a copy of |x|: most blocks need no magnitude at all
        peak = max(float(block.max()), -float(block.min()))
        self._peak = max(self._peak, peak)
        self._sum += float(block.sum())
        magnitude = np.abs(block) if peak >= NEAR_FULL_SCALE else None
        if magnitude is not None and peak > FULL_SCALE:
            self._over += int(np.count_nonzero(magnitude > FULL_SCALE))
        zero = block == 0.0
        zeros = int(np.count_nonzero(zero))
        self._zeros += zeros
        # 0 < |x| < tiny: every sample strictly between -tiny and tiny but the exact zeros
        small = block < DENORMAL_BELOW
        small &= block > -DENORMAL_BELOW
        self._denormal += int(np.count_nonzero(small)) - zeros
        self._clip_runs.update(magnitude >= NEAR_FULL_SCALE if magnitude is not None else None)
        self._zero_runs.update(zero if zeros else None)

    def facts(self) -> SignalFacts:
        """Close open runs and return the facts with their findings."""
        self._clip_runs.finish()
        self._zero_runs.finish()
        frames = max(self._frames, 1)
        dc = self._sum / frames
        facts = dict(
            duration_s=self._frames / self._sample_rate_hz,
            peak=self._peak,
            peak_dbfs=20 * math.log10(self._peak) if self._peak > 0 else -math.inf,
            clipped_samples=self._clip_runs.samples,
            clip_runs=self._clip_runs.runs,
            over_full_scale_samples=self._over,
            denormal_samples=self._denormal,
            dc_offset=dc,
            zero_fraction=self._zeros / frames,
            longest_zero_run_s=self._zero_runs.longest / self._sample_rate_hz,
        )
        return SignalFacts(**facts, findings=self._findings(**facts))

    def _findings(self, *, peak: float, clip_runs: int, clipped_samples: int, dc_offset: float,
                  zero_fraction: float, longest_zero_run_s: float, over_full_scale_samples: int,
                  denormal_samples: int, **_: float) -> tuple[Finding, ...]:
        name = self._source_name
        found: list[Finding] = []
        if peak == 0.0:
            found.append(Finding("digital_silence", "error", f"{name}: every sample is exactly zero",
                                 "Check the microphone cable, input selection and gain, then record again."))
        elif longest_zero_run_s >= DROPOUT_MIN_S:
            found.append(Finding("dropout", "warning",
                                 f"{name}: {longest_zero_run_s * 1000:.0f} ms of exact digital silence "
                                 f"({zero_fraction:.1%} of samples are zero)",
                                 "Record the take again; check the recorder's buffer and connection.",
                                 clause="common practice"))
        if clip_runs:
            found.append(Finding("clipping", "error",
                                 f"{name}: {clip_runs} clipped run(s), {clipped_samples} samples at full scale",
                                 "Lower the input gain (or the source level) and record again.",
                                 clause="common practice"))
        if over_full_scale_samples:
            found.append(Finding("beyond_full_scale", "warning",
                                 f"{name}: {over_full_scale_samples} samples beyond full scale "
                                 f"(peak {20 * math.log10(peak):+.1f} dBFS)",
                                 "A float file kept them, but the recorder's converter or any fixed-point copy "
                                 "clips there; lower the input gain and record again.",
                                 clause="common practice"))
        if denormal_samples:
            found.append(Finding("denormal_samples", "warning",
                                 f"{name}: {denormal_samples} samples are tiny non-zero values (denormals, "
                                 "below 1.2e-38 of full scale), which no microphone produces",
                                 "Check the software that wrote the file; record again or export without it.",
                                 clause="common practice"))
        if abs(dc_offset) > DC_OFFSET_LIMIT:
            found.append(Finding("dc_offset", "warning",
                                 f"{name}: DC offset {dc_offset:+.3f} of full scale",
                                 "Check the recorder input; band levels above 50 Hz are not affected.",
                                 clause="common practice"))
        return tuple(found)


def _wav_missing_bytes(file: Path) -> int:
    """Bytes the RIFF 'data' chunk declares beyond the end of the file (0 if complete or unknown).

    libsndfile silently reads a truncated WAV as a shorter one, so the header is checked here.
    """
    with open(file, "rb") as handle:
        head = handle.read(12)
        if len(head) < 12 or head[:4] != b"RIFF" or head[8:12] != b"WAVE":
            return 0
        position = 12
        while True:
            handle.seek(position)
            chunk = handle.read(8)
            if len(chunk) < 8:
                return 0
            size = int.from_bytes(chunk[4:8], "little")
            if chunk[:4] == b"data":
                available = file.stat().st_size - (position + 8)
                return max(size - available, 0) if size != 0xFFFFFFFF else 0
            position += 8 + size + (size & 1)


def _short(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__
