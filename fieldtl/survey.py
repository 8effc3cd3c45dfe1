"""The survey file (TOML) and pasted sound-level-meter band levels (CSV) → one Survey value.

Survey file, paths relative to the file::

    [test]
    title = "Bedroom 4 to bedroom 7, level 2"
    type = "airborne"                 # "airborne" | "impact"
    separating_area_m2 = 10.8
    receiving_volume_m3 = 31.5
    source_volume_m3 = 35.0           # optional
    requirement = "DnT,w + Ctr >= 45" # optional
    construction = "..."              # optional description of the separating element
    element_lab_rw_db = 55            # optional: the element's laboratory Rw, for a plausibility check
    construction_file = "wall.toml"   # optional: declared build-up (fieldtl.construction format)
    band_levels = "slm.csv"           # optional: band levels instead of recordings

    [calibration]                     # optional; without it levels are dB re full scale
    file = "cal.wav"
    reference_db = 94.0
    file_after = "cal_end.wav"        # optional: the check at the end of the series

    [[recording]]
    file = "src_s1_p1.wav"
    role = "source"                   # see ROLES
    speaker = 1                       # loudspeaker or tapping-machine position
    method = "impulse"                # decay only: "impulse" | "interrupted" | "sweep"
    channel = 1                       # optional, 1-based

Every problem raises InputError with one line naming the file and what is wrong.
"""

from __future__ import annotations

import csv
import io
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

from fieldtl.bands import BandSpectrum, nominal_bands_hz
from fieldtl.construction import Construction, load_construction
from fieldtl.errors import InputError
from fieldtl.tomlfile import read_toml_file
from fieldtl.uncertainty import parse_requirement

TestType = Literal["airborne", "impact"]
Role = Literal["source", "receiving", "background", "decay", "source_corner", "receiving_corner", "impact"]
ROLES: tuple[str, ...] = ("source", "receiving", "background", "decay", "source_corner", "receiving_corner", "impact")
DECAY_METHODS: tuple[str, ...] = ("impulse", "interrupted", "sweep")
REQUIRED_ROLES: dict[str, tuple[str, ...]] = {
    "airborne": ("source", "receiving", "background", "decay"),
    "impact": ("impact", "background", "decay"),
}
ROLES_BY_TYPE: dict[str, tuple[str, ...]] = {
    "airborne": ("source", "receiving", "background", "decay", "source_corner", "receiving_corner"),
    "impact": ("impact", "background", "decay", "receiving_corner"),
}

_TEST_KEYS = {"title", "type", "separating_area_m2", "receiving_volume_m3", "source_volume_m3",
              "requirement", "band_levels", "construction", "uncertainty_situation",
              "element_lab_rw_db", "construction_file"}
_CALIBRATION_KEYS = {"file", "reference_db", "file_after", "channel"}
_RECORDING_KEYS = {"file", "role", "speaker", "method", "channel", "sweep_start_hz", "sweep_stop_hz",
                   "sweep_length_s"}


@dataclass(frozen=True, slots=True)
class Geometry:
    """Room and element dimensions; ``separating_area_m2`` None means no common element."""

    receiving_volume_m3: float
    separating_area_m2: float | None = None
    source_volume_m3: float | None = None


@dataclass(frozen=True, slots=True)
class CalibrationSpec:
    file: Path
    reference_db: float
    file_after: Path | None
    channel: int


@dataclass(frozen=True, slots=True)
class TakeSpec:
    """One recording and what it is: role, loudspeaker/tapping position, decay method."""

    file: Path
    role: Role
    speaker: int
    channel: int = 0
    method: str | None = None
    sweep_start_hz: float | None = None
    sweep_stop_hz: float | None = None
    sweep_length_s: float | None = None


@dataclass(frozen=True, slots=True)
class BandColumn:
    """One column of pasted band levels: a position level (dB) or a decay (s)."""

    role: Role
    speaker: int
    label: str
    spectrum: BandSpectrum


@dataclass(frozen=True, slots=True)
class Survey:
    title: str
    test_type: TestType
    geometry: Geometry
    source_name: str
    takes: tuple[TakeSpec, ...] = ()
    band_columns: tuple[BandColumn, ...] = ()
    calibration: CalibrationSpec | None = None
    requirement: str | None = None
    construction: str | None = None
    uncertainty_situation: str = "B"
    element_lab_rw_db: float | None = None
    declared_construction: Construction | None = None
    construction_toml: str | None = None        # the construction file's text, kept for the store
    band_levels_csv: str | None = None          # the pasted CSV text, kept for the store


def load_survey(path: str | Path) -> Survey:
    """Read and validate a survey file; recordings and CSV are checked to exist, not read."""
    file = Path(path)
    return survey_from_dict(read_toml_file(file, what="survey file"), base_dir=file.parent, source_name=file.name)


def survey_from_dict(data: dict[str, Any], *, base_dir: Path, source_name: str) -> Survey:
    """Validate parsed survey data (from TOML or the app) into a Survey."""
    _only_keys(data, {"test", "calibration", "recording"}, "the top level", source_name)
    test = data.get("test")
    if not isinstance(test, dict):
        raise InputError(f"{source_name}: missing [test] table")
    _only_keys(test, _TEST_KEYS, "[test]", source_name)
    test_type = test.get("type")
    if test_type not in REQUIRED_ROLES:
        raise InputError(f"{source_name}: [test] type must be \"airborne\" or \"impact\", got {test_type!r}")
    geometry = Geometry(
        receiving_volume_m3=_positive(test, "receiving_volume_m3", source_name, required=True),
        separating_area_m2=_positive(test, "separating_area_m2", source_name, required=False),
        source_volume_m3=_positive(test, "source_volume_m3", source_name, required=False),
    )
    situation = str(test.get("uncertainty_situation", "B")).upper()
    if situation not in ("A", "B", "C"):
        raise InputError(f"{source_name}: [test] uncertainty_situation must be A, B or C, got {situation!r}")
    requirement = test.get("requirement")
    if requirement is not None:
        try:
            parse_requirement(requirement)
        except InputError as exc:
            raise InputError(f"{source_name}: [test] {exc}") from None
    declared, construction_toml = None, None
    if "construction_file" in test:
        construction_path = _existing(base_dir, test["construction_file"], "[test] construction_file", source_name)
        declared = load_construction(construction_path)
        construction_toml = construction_path.read_text(encoding="utf-8")
    calibration = _calibration(data.get("calibration"), base_dir, source_name)
    recordings = data.get("recording", [])
    if not isinstance(recordings, list):
        raise InputError(f"{source_name}: [[recording]] must be an array of tables")
    takes = tuple(_take(entry, i + 1, test_type, base_dir, source_name) for i, entry in enumerate(recordings))
    band_columns: tuple[BandColumn, ...] = ()
    band_levels_csv = None
    if "band_levels" in test:
        csv_file = _existing(base_dir, test["band_levels"], "[test] band_levels", source_name)
        band_levels_csv = csv_file.read_text(encoding="utf-8")
        band_columns = read_band_levels_csv(band_levels_csv, source_name=csv_file.name)
    roles = {t.role for t in takes} | {c.role for c in band_columns}
    missing = [r for r in REQUIRED_ROLES[test_type] if r not in roles]
    if missing:
        raise InputError(f"{source_name}: no recording with role {', '.join(repr(m) for m in missing)} "
                         f"(an {test_type} test needs {', '.join(REQUIRED_ROLES[test_type])})")
    return Survey(title=str(test.get("title", "Untitled test")), test_type=test_type, geometry=geometry,
                  source_name=source_name, takes=takes, band_columns=band_columns, calibration=calibration,
                  requirement=requirement, construction=test.get("construction"),
                  uncertainty_situation=situation,
                  element_lab_rw_db=_positive(test, "element_lab_rw_db", source_name, required=False),
                  declared_construction=declared, construction_toml=construction_toml,
                  band_levels_csv=band_levels_csv)


_COLUMN = re.compile(r"^(?P<kind>L1|L2|Li|B|T|L1c|L2c)(?:_s(?P<speaker>\d+))?(?:_(?P<label>[A-Za-z0-9]+))?$")
_COLUMN_ROLES: dict[str, str] = {"L1": "source", "L2": "receiving", "Li": "impact", "B": "background",
                                 "T": "decay", "L1c": "source_corner", "L2c": "receiving_corner"}


def read_band_levels_csv(text: str, *, source_name: str) -> tuple[BandColumn, ...]:
    """Parse band levels typed or pasted from a sound level meter.

    One row per band; the first column is the nominal frequency in Hz, each other column one
    position: ``L1`` source-room level, ``L2`` receiving-room level, ``Li`` impact level,
    ``B`` background, ``T`` reverberation time in s, ``L1c``/``L2c`` corner levels; an optional
    ``_s<k>`` gives the loudspeaker or tapping position (default 1) and any further ``_name``
    labels the position, e.g. ``frequency_hz,L1_s1_a,L1_s1_b,L2_s1_a,B,T_1,T_2``. Empty cells are
    "not measured". Comma, semicolon or tab separated.
    """
    rows = [r for r in csv.reader(io.StringIO(_normalise_separators(text))) if any(c.strip() for c in r)]
    if len(rows) < 2:
        raise InputError(f"{source_name}: needs a header row and at least one band row")
    header = [c.strip() for c in rows[0]]
    body = rows[1:]
    try:
        frequencies_hz = tuple(float(r[0]) for r in body)
    except (ValueError, IndexError):
        raise InputError(f"{source_name}: the first column must hold band frequencies in Hz") from None
    all_bands = nominal_bands_hz(20, 20000)
    unknown = [f for f in frequencies_hz if f not in all_bands]
    if unknown:
        raise InputError(f"{source_name}: {unknown[0]:g} Hz is not a nominal one-third-octave frequency")
    if list(frequencies_hz) != sorted(set(frequencies_hz)):
        raise InputError(f"{source_name}: band rows must be in ascending frequency order, each once")
    columns = []
    for j, title in enumerate(header[1:], start=1):
        match = _COLUMN.match(title)
        if match is None:
            raise InputError(f"{source_name}: column {title!r} is not one of L1, L2, Li, B, T, L1c, L2c "
                             "(optionally followed by _s<position> and _<name>)")
        values = []
        for row_number, row in enumerate(body, start=2):
            cell = row[j].strip() if j < len(row) else ""
            if not cell:
                values.append(None)
                continue
            try:
                value = float(cell)
            except ValueError:
                raise InputError(f"{source_name}: row {row_number}, column {title!r}: {cell!r} is not a number") from None
            if not math.isfinite(value) or (match["kind"] == "T" and value <= 0):
                raise InputError(f"{source_name}: row {row_number}, column {title!r}: {cell!r} is out of range")
            values.append(value)
        kind = match["kind"]
        spectrum = BandSpectrum(frequencies_hz, tuple(values), "s" if kind == "T" else "dB", kind)
        columns.append(BandColumn(role=_COLUMN_ROLES[kind], speaker=int(match["speaker"] or 1),  # type: ignore[arg-type]
                                  label=title, spectrum=spectrum))
    return tuple(columns)


def _normalise_separators(text: str) -> str:
    """Accept comma, semicolon (decimal commas) or tab separated text as plain CSV."""
    if "\t" in text:
        return text.replace(",", ".").replace("\t", ",")
    if ";" in text:
        return text.replace(",", ".").replace(";", ",")
    return text


def _only_keys(table: dict[str, Any], allowed: set[str], where: str, source_name: str) -> None:
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise InputError(f"{source_name}: unknown key {unknown[0]!r} in {where} "
                         f"(allowed: {', '.join(sorted(allowed))})")


def _positive(table: dict[str, Any], key: str, source_name: str, *, required: bool) -> float | None:
    if key not in table:
        if required:
            raise InputError(f"{source_name}: [test] {key} is required")
        return None
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0:
        raise InputError(f"{source_name}: [test] {key} must be a positive number, got {value!r}")
    return float(value)


def _existing(base_dir: Path, relative: Any, where: str, source_name: str) -> Path:
    if not isinstance(relative, str) or not relative:
        raise InputError(f"{source_name}: {where} must be a file name")
    path = (base_dir / relative)
    if not path.is_file():
        raise InputError(f"{source_name}: {where} file {relative!r} not found")
    return path


def _channel(table: dict[str, Any], where: str, source_name: str) -> int:
    channel = table.get("channel", 1)
    if isinstance(channel, bool) or not isinstance(channel, int) or channel < 1:
        raise InputError(f"{source_name}: {where} channel must be 1 or more, got {channel!r}")
    return channel - 1


def _calibration(table: Any, base_dir: Path, source_name: str) -> CalibrationSpec | None:
    if table is None:
        return None
    if not isinstance(table, dict):
        raise InputError(f"{source_name}: [calibration] must be a table")
    _only_keys(table, _CALIBRATION_KEYS, "[calibration]", source_name)
    reference_db = table.get("reference_db", 94.0)
    if isinstance(reference_db, bool) or not isinstance(reference_db, (int, float)) or not 60 <= reference_db <= 150:
        raise InputError(f"{source_name}: [calibration] reference_db must be 60-150 dB, got {reference_db!r}")
    after = table.get("file_after")
    return CalibrationSpec(
        file=_existing(base_dir, table.get("file"), "[calibration] file", source_name),
        reference_db=float(reference_db),
        file_after=None if after is None else _existing(base_dir, after, "[calibration] file_after", source_name),
        channel=_channel(table, "[calibration]", source_name),
    )


def _take(entry: Any, number: int, test_type: str, base_dir: Path, source_name: str) -> TakeSpec:
    where = f"recording {number}"
    if not isinstance(entry, dict):
        raise InputError(f"{source_name}: {where} must be a table")
    _only_keys(entry, _RECORDING_KEYS, where, source_name)
    role = entry.get("role")
    if role not in ROLES_BY_TYPE[test_type]:
        raise InputError(f"{source_name}: {where} role {role!r} is not one of "
                         f"{', '.join(ROLES_BY_TYPE[test_type])} for an {test_type} test")
    speaker = entry.get("speaker", 1)
    if isinstance(speaker, bool) or not isinstance(speaker, int) or speaker < 1:
        raise InputError(f"{source_name}: {where} speaker must be a position number 1 or more, got {speaker!r}")
    method = entry.get("method")
    if role == "decay":
        if method not in DECAY_METHODS:
            raise InputError(f"{source_name}: {where} method must be one of {', '.join(DECAY_METHODS)}, got {method!r}")
    elif method is not None:
        raise InputError(f"{source_name}: {where} method applies to decay recordings only")
    sweep = {k: entry.get(k) for k in ("sweep_start_hz", "sweep_stop_hz", "sweep_length_s")}
    for key, value in sweep.items():
        if value is not None and (isinstance(value, bool) or not isinstance(value, (int, float)) or value <= 0):
            raise InputError(f"{source_name}: {where} {key} must be a positive number, got {value!r}")
    return TakeSpec(file=_existing(base_dir, entry.get("file"), f"{where}", source_name), role=role,
                    speaker=speaker, channel=_channel(entry, where, source_name), method=method,
                    **{k: None if v is None else float(v) for k, v in sweep.items()})
