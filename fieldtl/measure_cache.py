"""Each take measured once: its band levels or decay, and its findings, kept by content and settings.

A measurement depends only on the audio and the settings of its analysis, so it is kept under a key
that digests exactly those: the audio's SHA-256, the recording's name (findings name it), the
channel, what kind of analysis (levels, decay, calibrator tone), the level offset from the
calibration (levels), the decay method and sweep (decays), the calibrator level (tones), the band
range, and :func:`analysis_version`. Changing any of them for a take gives that take a new key and
leaves every other take's measurement in place. A take's role (within the level roles) and
position are not part of the key: they label the measurement, they do not change it.

Values are kept as JSON: finite floats as JSON numbers (Python writes the shortest text that reads
back as the same float), non-finite ones tagged ``{"float": "nan"}``, band spectra tagged
``{"spectrum": {...}}``. Reading is strict: a row that does not decode into exactly the fields the
current code has (say, after TakeSummary gained a field) is measured again, never half-used.
"""

from __future__ import annotations

import dataclasses
import functools
import hashlib
import json
import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, Protocol

import numpy as np

from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, BandSpectrum
from fieldtl.errors import StoreError
from fieldtl.findings import Finding
from fieldtl.measure import ANALYSIS_VERSION, FIELD_RANGE_HZ, Progress, calibrate_file, measure_take
from fieldtl.qa import TakeSummary
from fieldtl.survey import TakeSpec

if TYPE_CHECKING:
    from fieldtl.audio.calibration import Calibration

# Sources whose change can change a measurement: a digest of them joins ANALYSIS_VERSION, so a
# release that changes the analysis without bumping the number still measures again.
_PACKAGE = Path(__file__).resolve().parent
_ANALYSIS_SOURCES = ("analysis", "audio", "measure.py", "bands.py", "units.py", "findings.py")


class MeasurementRows(Protocol):
    """Where measurements are kept (fieldtl.store.measurements.MeasurementRows, or a test double)."""

    def get(self, key: str) -> str | None: ...

    def put(self, key: str, *, sha256: str, analysis_version: str, settings_json: str,
            measurement_json: str) -> None: ...


@functools.lru_cache(maxsize=1)
def analysis_version() -> str:
    """ANALYSIS_VERSION with a digest of the analysis sources and the numeric libraries' versions."""
    from importlib import metadata

    digest = hashlib.sha256()
    files = []
    for name in _ANALYSIS_SOURCES:
        path = _PACKAGE / name
        files += sorted(path.rglob("*.py")) if path.is_dir() else [path]
    for path in files:
        digest.update(path.relative_to(_PACKAGE).as_posix().encode() + b"\0" + path.read_bytes() + b"\0")
    for library in ("numpy", "scipy", "soundfile"):
        try:
            digest.update(f"{library}={metadata.version(library)}\0".encode())
        except metadata.PackageNotFoundError:
            digest.update(f"{library}=?\0".encode())
    return f"{ANALYSIS_VERSION}-{digest.hexdigest()[:16]}"


def settings_key(settings: Mapping[str, Any]) -> str:
    """SHA-256 of the settings as canonical JSON (sorted keys, no spaces)."""
    return hashlib.sha256(_canonical(settings).encode()).hexdigest()


def take_settings(spec: TakeSpec, *, sha256: str, level_offset_db: float, version: str) -> dict[str, Any]:
    """Everything the measurement of this take depends on."""
    settings: dict[str, Any] = {"analysis_version": version, "sha256": sha256, "name": spec.file.name,
                                "channel": spec.channel}
    if spec.role == "decay":
        settings |= {"kind": "decay", "method": spec.method, "sweep_start_hz": spec.sweep_start_hz,
                     "sweep_stop_hz": spec.sweep_stop_hz, "sweep_length_s": spec.sweep_length_s,
                     "bands_hz": list(THIRD_OCTAVES_50_5000_HZ), "octave_hz": 63.0}
    else:
        settings |= {"kind": "levels", "level_offset_db": float(level_offset_db), "band_range_hz": list(FIELD_RANGE_HZ)}
    return settings


class MeasurementCache:
    """:func:`fieldtl.measure.measure_take` and :func:`~fieldtl.measure.calibrate_file` through kept rows.

    ``hashes`` gives the SHA-256 of files already known (the store keeps one per take); other files
    are hashed when first met (once per process while their size and time stamp stay the same).
    """

    def __init__(self, rows: MeasurementRows, *, hashes: Mapping[Path, str] | None = None,
                 version: str | None = None) -> None:
        self._rows = rows
        self._hashes = dict(hashes or {})
        self.version = version or analysis_version()

    def take(self, spec: TakeSpec, *, level_offset_db: float,
             progress: Progress | None = None) -> tuple[TakeSummary, tuple[Finding, ...]]:
        """The take's measurement (kept, or measured now and kept), labelled with its role and position."""
        sha256 = self.content_hash(spec.file)
        if sha256 is None:          # unreadable: measuring says why, in one line naming the file
            return measure_take(spec, level_offset_db=level_offset_db, progress=progress)
        settings = take_settings(spec, sha256=sha256, level_offset_db=level_offset_db, version=self.version)
        key = settings_key(settings) if _storable(settings) else None
        kept = self._rows.get(key) if key else None
        found = decode_take(kept) if kept is not None else None
        if found is None:
            found = measure_take(spec, level_offset_db=level_offset_db, progress=progress)
            if key:
                self._keep(key, sha256, settings, encode_take(*found))
        elif progress is not None:
            progress(spec.file.name, 1.0)
        summary, findings = found
        return dataclasses.replace(summary, role=spec.role, speaker=spec.speaker), findings

    def calibration(self, file: Path, channel: int, reference_db: float) -> Calibration:
        """The calibration from a calibrator recording (kept, or measured now and kept)."""
        from fieldtl.audio.calibration import Calibration

        sha256 = self.content_hash(file)
        if sha256 is None:
            return calibrate_file(file, channel, reference_db)
        settings = {"analysis_version": self.version, "sha256": sha256, "name": file.name, "channel": channel,
                    "kind": "calibration", "reference_db": float(reference_db)}
        key = settings_key(settings) if _storable(settings) else None
        kept = self._rows.get(key) if key else None
        if kept is not None:
            fields = _decode_fields(kept, Calibration)
            if fields is not None:
                return Calibration(**fields)
        calibration = calibrate_file(file, channel, reference_db)
        if key:
            self._keep(key, sha256, settings, _encode_fields(calibration))
        return calibration

    def _keep(self, key: str, sha256: str, settings: Mapping[str, Any], measurement_json: str) -> None:
        """Keep a measurement; a store that cannot be written (disk full, read-only) only costs speed."""
        try:
            self._rows.put(key, sha256=sha256, analysis_version=self.version, settings_json=_canonical(settings),
                           measurement_json=measurement_json)
        except StoreError:
            pass

    def content_hash(self, file: Path) -> str | None:
        """SHA-256 of the file's bytes, or None if it cannot be read."""
        if file not in self._hashes:
            try:
                self._hashes[file] = _file_sha256(file)
            except OSError:
                return None
        return self._hashes[file]


def encode_take(summary: TakeSummary, findings: Sequence[Finding]) -> str:
    """One take's measurement as JSON (every field of TakeSummary and of each Finding)."""
    return _canonical({"summary": _plain_fields(summary), "findings": [_plain_fields(f) for f in findings]})


def decode_take(text: str) -> tuple[TakeSummary, tuple[Finding, ...]] | None:
    """The measurement kept by :func:`encode_take`, or None if ``text`` is not exactly such a document."""
    try:
        document = json.loads(text)
        if not isinstance(document, dict) or set(document) != {"summary", "findings"}:
            return None
        summary = _build(TakeSummary, document["summary"])
        findings = tuple(_build(Finding, f) for f in document["findings"])
    except (ValueError, TypeError, KeyError, RecursionError):
        return None
    return summary, findings


# --- JSON with explicit floats ----------------------------------------------------------------------

def _canonical(value: Any) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)


def _storable(settings: Mapping[str, Any]) -> bool:
    return all(not isinstance(v, float) or math.isfinite(v) for v in settings.values())


def _plain(value: Any) -> Any:
    if isinstance(value, BandSpectrum):
        return {"spectrum": {"nominal_hz": [_plain(f) for f in value.nominal_hz],
                             "values": [_plain(v) for v in value.values], "unit": value.unit,
                             "quantity": value.quantity, "fraction": int(value.fraction)}}
    if isinstance(value, Finding):
        return _plain_fields(value)
    if isinstance(value, (bool, str)) or value is None:
        return value
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        number = float(value)
        if math.isfinite(number):
            return number
        return {"float": "nan" if math.isnan(number) else ("inf" if number > 0 else "-inf")}
    if isinstance(value, (tuple, list)):
        return {"tuple": [_plain(v) for v in value]}
    raise TypeError(f"cannot keep a {type(value).__name__} as JSON")


def _plain_fields(value: Any) -> dict[str, Any]:
    return {f.name: _plain(getattr(value, f.name)) for f in dataclasses.fields(value)}


def _encode_fields(value: Any) -> str:
    return _canonical(_plain_fields(value))


def _decode_fields(text: str, cls: type) -> dict[str, Any] | None:
    try:
        built = _build(cls, json.loads(text))
    except (ValueError, TypeError, KeyError, RecursionError):
        return None
    return {f.name: getattr(built, f.name) for f in dataclasses.fields(built)}


def _build(cls: type, data: Any) -> Any:
    """An instance of the dataclass ``cls`` from exactly its fields (TypeError/ValueError otherwise)."""
    names = {f.name for f in dataclasses.fields(cls)}
    if not isinstance(data, dict) or set(data) != names:
        raise ValueError(f"fields of {cls.__name__} differ")
    return cls(**{name: _value(data[name]) for name in names})


def _value(data: Any) -> Any:
    if isinstance(data, dict):
        if set(data) == {"float"} and data["float"] in ("nan", "inf", "-inf"):
            return float(data["float"])
        if set(data) == {"tuple"} and isinstance(data["tuple"], list):
            return tuple(_value(v) for v in data["tuple"])
        if set(data) == {"spectrum"} and isinstance(data["spectrum"], dict):
            return _spectrum(data["spectrum"])
        if {"code", "severity", "message"} <= set(data):
            return _build(Finding, data)
        raise ValueError("unknown object")
    if isinstance(data, list):
        raise ValueError("bare list")
    if isinstance(data, int) and not isinstance(data, bool):
        return data
    if data is None or isinstance(data, (bool, float, str)):
        return data
    raise TypeError(type(data).__name__)


def _spectrum(data: dict[str, Any]) -> BandSpectrum:
    if set(data) != {"nominal_hz", "values", "unit", "quantity", "fraction"}:
        raise ValueError("spectrum fields differ")
    nominal = tuple(_number(_value(f)) for f in data["nominal_hz"])
    values = tuple(None if v is None else _number(_value(v)) for v in data["values"])
    if not isinstance(data["unit"], str) or not isinstance(data["quantity"], str) or data["fraction"] not in (1, 3):
        raise ValueError("spectrum labels")
    return BandSpectrum(nominal, values, data["unit"], data["quantity"], data["fraction"])


def _number(value: Any) -> float:
    """A number as it was kept: JSON keeps 100 and 100.0 apart, so ints and floats come back as they went."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise TypeError("not a number")
    return value


_FILE_HASHES: dict[tuple[str, int, int], str] = {}


def forget_file_hashes() -> None:
    """Hash every file again when next met (benchmarks: time a run as a new process would)."""
    _FILE_HASHES.clear()


def _file_sha256(file: Path) -> str:
    """SHA-256 of the file's bytes, remembered while its size and modification time stay the same."""
    from fieldtl.audio.ingest import file_sha256

    status = os.stat(file)
    stamp = (str(Path(file).resolve()), status.st_size, status.st_mtime_ns)
    if stamp not in _FILE_HASHES:
        _FILE_HASHES[stamp] = file_sha256(file)
    return _FILE_HASHES[stamp]
