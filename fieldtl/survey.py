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
    speaker = 1                       # loudspeaker or tapping-machine position; for
                                      # "background_corner" the corner number instead
    method = "impulse"                # decay only: "impulse" | "interrupted" | "sweep"
    channel = 1                       # optional, 1-based

Role ``background_corner`` (small receiving rooms): the background noise at one low-frequency
corner with the source off. Its ``speaker`` is the corner number k, with no loudspeaker: corner k
is the k-th ``receiving_corner`` recording of every loudspeaker (or tapping) position, in file
order, so each corner level is corrected by the background measured in that corner (ISO 16283-1/-2
low-frequency procedure, as transcribed).

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

from fieldtl import validate
from fieldtl.bands import BandSpectrum, nominal_bands_hz
from fieldtl.construction import Construction, load_construction
from fieldtl.errors import InputError
from fieldtl.tomlfile import read_text_file, read_toml_file
from fieldtl.uncertainty import parse_requirement
from fieldtl.validate import (AREA_M2, CALIBRATOR_DB, CHANNEL, LAB_RATING_DB, LEVEL_DB, MAX_CELL_CHARS,
                              MAX_FILE_BYTES, POSITION, REVERBERATION_S, SWEEP_HZ, SWEEP_S, VOLUME_M3,
                              check_keys, echo, file_label)

TestType = Literal["airborne", "impact"]
Role = Literal["source", "receiving", "background", "decay", "source_corner", "receiving_corner", "impact",
               "background_corner"]
ROLES: tuple[str, ...] = ("source", "receiving", "background", "decay", "source_corner", "receiving_corner", "impact",
                          "background_corner")
DECAY_METHODS: tuple[str, ...] = ("impulse", "interrupted", "sweep")
REQUIRED_ROLES: dict[str, tuple[str, ...]] = {
    "airborne": ("source", "receiving", "background", "decay"),
    "impact": ("impact", "background", "decay"),
}
ROLES_BY_TYPE: dict[str, tuple[str, ...]] = {
    "airborne": ("source", "receiving", "background", "decay", "source_corner", "receiving_corner",
                 "background_corner"),
    "impact": ("impact", "background", "decay", "receiving_corner", "background_corner"),
}

_TEST_KEYS = {"title", "type", "separating_area_m2", "receiving_volume_m3", "source_volume_m3",
              "requirement", "band_levels", "construction", "uncertainty_situation",
              "element_lab_rw_db", "construction_file"}
_CALIBRATION_KEYS = {"file", "reference_db", "file_after", "channel"}
_RECORDING_KEYS = {"file", "role", "speaker", "method", "channel", "sweep_start_hz", "sweep_stop_hz",
                   "sweep_length_s"}


@dataclass(frozen=True, slots=True)
class Geometry:
    """Room and element dimensions; ``separating_area_m2`` None means no common element.

    Values outside the physical ranges of :mod:`fieldtl.validate` raise InputError, whoever
    builds the value (survey file, app form, store); the standards' narrower scope is a finding.
    """

    receiving_volume_m3: float
    separating_area_m2: float | None = None
    source_volume_m3: float | None = None

    def __post_init__(self) -> None:
        validate.number(self.receiving_volume_m3, "receiving_volume_m3", low=VOLUME_M3[0], high=VOLUME_M3[1],
                        unit=" m3")
        if self.source_volume_m3 is not None:
            validate.number(self.source_volume_m3, "source_volume_m3", low=VOLUME_M3[0], high=VOLUME_M3[1],
                            unit=" m3")
        if self.separating_area_m2 is not None:
            validate.number(self.separating_area_m2, "separating_area_m2", low=AREA_M2[0], high=AREA_M2[1],
                            unit=" m2")


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
    return survey_from_dict(read_toml_file(file, what="survey file"), base_dir=file.parent,
                            source_name=file_label(file))


def survey_from_dict(data: dict[str, Any], *, base_dir: Path, source_name: str) -> Survey:
    """Validate parsed survey data (from TOML or the app) into a Survey."""
    check_keys(data, {"test", "calibration", "recording"}, "the top level", source_name)
    test = data.get("test")
    if not isinstance(test, dict):
        raise InputError(f"{source_name}: missing [test] table")
    check_keys(test, _TEST_KEYS, "[test]", source_name)
    where = f"{source_name}: [test]"
    test_type = validate.choice(test.get("type"), tuple(REQUIRED_ROLES), f"{where} type")
    geometry = Geometry(
        receiving_volume_m3=_number(test, "receiving_volume_m3", source_name, VOLUME_M3, " m3", required=True),
        separating_area_m2=_number(test, "separating_area_m2", source_name, AREA_M2, " m2"),
        source_volume_m3=_number(test, "source_volume_m3", source_name, VOLUME_M3, " m3"),
    )
    situation = validate.text(test.get("uncertainty_situation", "B"), f"{where} uncertainty_situation").upper()
    if situation not in ("A", "B", "C"):
        raise InputError(f"{where} uncertainty_situation must be A, B or C, got {echo(situation)}")
    requirement = test.get("requirement")
    if requirement is not None:
        validate.text(requirement, f"{where} requirement", max_chars=validate.REQUIREMENT_CHARS)
        try:
            parse_requirement(requirement)
        except InputError as exc:
            raise InputError(f"{where} {exc}") from None
    title = validate.text(test.get("title", "Untitled test"), f"{where} title")
    construction = test.get("construction")
    if construction is not None:
        validate.text(construction, f"{where} construction", max_chars=validate.NOTE_CHARS)
    declared, construction_toml = None, None
    if "construction_file" in test:
        construction_path = _existing(base_dir, test["construction_file"], "[test] construction_file", source_name)
        declared = load_construction(construction_path)
        construction_toml = read_text_file(construction_path, what="construction file")
    calibration = _calibration(data.get("calibration"), base_dir, source_name)
    recordings = data.get("recording", [])
    if not isinstance(recordings, list):
        raise InputError(f"{source_name}: [[recording]] must be an array of tables")
    takes = tuple(_take(entry, i + 1, test_type, base_dir, source_name) for i, entry in enumerate(recordings))
    band_columns: tuple[BandColumn, ...] = ()
    band_levels_csv = None
    if "band_levels" in test:
        csv_file = _existing(base_dir, test["band_levels"], "[test] band_levels", source_name)
        band_levels_csv = read_text_file(csv_file, what="band-level file")
        band_columns = read_band_levels_csv(band_levels_csv, source_name=file_label(csv_file))
    roles = {t.role for t in takes} | {c.role for c in band_columns}
    missing = [r for r in REQUIRED_ROLES[test_type] if r not in roles]
    if missing:
        raise InputError(f"{source_name}: no recording with role {', '.join(repr(m) for m in missing)} "
                         f"(an {test_type} test needs {', '.join(REQUIRED_ROLES[test_type])})")
    return Survey(title=title, test_type=test_type, geometry=geometry,  # type: ignore[arg-type]
                  source_name=source_name, takes=takes, band_columns=band_columns, calibration=calibration,
                  requirement=requirement, construction=construction,
                  uncertainty_situation=situation,
                  element_lab_rw_db=_number(test, "element_lab_rw_db", source_name, LAB_RATING_DB, " dB"),
                  declared_construction=declared, construction_toml=construction_toml,
                  band_levels_csv=band_levels_csv)


_COLUMN = re.compile(r"^(?P<kind>L1|L2|Li|B|T|L1c|L2c|Bc)(?:_s(?P<speaker>[0-9]{1,2}))?(?:_(?!s[0-9])(?P<label>[^\W_]+))?$")
_COLUMN_ROLES: dict[str, str] = {"L1": "source", "L2": "receiving", "Li": "impact", "B": "background",
                                 "T": "decay", "L1c": "source_corner", "L2c": "receiving_corner",
                                 "Bc": "background_corner"}


def read_band_levels_csv(text: str, *, source_name: str) -> tuple[BandColumn, ...]:
    """Parse band levels typed or pasted from a sound level meter.

    One row per band; the first column is the nominal frequency in Hz, each other column one
    position: ``L1`` source-room level, ``L2`` receiving-room level, ``Li`` impact level,
    ``B`` background, ``T`` reverberation time in s, ``L1c``/``L2c`` corner levels, ``Bc`` the
    background at a receiving-room corner; an optional ``_s<k>`` gives the loudspeaker or tapping
    position (for ``Bc`` the corner number: the k-th ``L2c`` column of each position; default 1)
    and any further ``_name``
    labels the position, e.g. ``frequency_hz,L1_s1_a,L1_s1_b,L2_s1_a,B,T_1,T_2``. Empty cells are
    "not measured". Comma, semicolon or tab separated.

    Levels outside -20..160 dB and reverberation times outside 0.1..10 s are refused as typing or
    unit slips (a T typed in milliseconds), naming the row, column and value.
    """
    source_name = validate.clean(source_name)
    if len(text) > MAX_FILE_BYTES:
        raise InputError(f"{source_name}: {len(text):,} characters of band levels; at most {MAX_FILE_BYTES:,}")
    try:
        rows = [r for r in csv.reader(io.StringIO(_normalise_separators(text.removeprefix("\ufeff"))))
                if any(c.strip() for c in r)]
    except csv.Error as exc:
        raise InputError(f"{source_name}: not readable as CSV ({validate.clean(str(exc))})") from None
    if len(rows) < 2:
        raise InputError(f"{source_name}: needs a header row and at least one band row")
    long_cell = next((c for r in rows for c in r if len(c.strip()) > MAX_CELL_CHARS), None)
    if long_cell is not None:
        raise InputError(f"{source_name}: a cell of {len(long_cell.strip()):,} characters; at most "
                         f"{MAX_CELL_CHARS} are allowed ({echo(long_cell.strip())})")
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
        if match is None or match["speaker"] in ("0", "00"):
            raise InputError(f"{source_name}: column {echo(title)} is not one of L1, L2, Li, B, T, L1c, L2c, Bc "
                             "(optionally followed by _s<position 1-99> and _<name>)")
        kind = match["kind"]
        values = tuple(_band_value(row[j].strip() if j < len(row) else "", kind, f"row {row_number}, column "
                                   f"{title!r}", source_name) for row_number, row in enumerate(body, start=2))
        spectrum = BandSpectrum(frequencies_hz, values, "s" if kind == "T" else "dB", kind)
        columns.append(BandColumn(role=_COLUMN_ROLES[kind], speaker=int(match["speaker"] or 1),  # type: ignore[arg-type]
                                  label=title, spectrum=spectrum))
    return tuple(columns)


def _band_value(cell: str, kind: str, where: str, source_name: str) -> float | None:
    """One cell: None if empty, else a number inside the physical range of its kind."""
    if not cell:
        return None
    try:
        value = float(cell)
    except ValueError:
        raise InputError(f"{source_name}: {where}: {echo(cell)} is not a number") from None
    if kind == "T":
        low, high, unit = *REVERBERATION_S, " s (a reverberation time in seconds, not milliseconds)"
    else:
        low, high, unit = *LEVEL_DB, " dB"
    if not (math.isfinite(value) and low <= value <= high):
        raise InputError(f"{source_name}: {where}: {echo(cell)} is outside {low:g} to {high:g}{unit}")
    return value


def _normalise_separators(text: str) -> str:
    """Accept comma, semicolon (decimal commas) or tab separated text as plain CSV."""
    if "\t" in text:
        return text.replace(",", ".").replace("\t", ",")
    if ";" in text:
        return text.replace(",", ".").replace(";", ",")
    return text


def _number(table: dict[str, Any], key: str, source_name: str, bounds: tuple[float, float], unit: str, *,
            required: bool = False) -> float | None:
    """A [test] number inside its physical range; None when absent and optional."""
    check = validate.required_number if required else validate.optional_number
    return check(table, key, f"{source_name}: [test]", low=bounds[0], high=bounds[1], unit=unit)


def _existing(base_dir: Path, relative: Any, where: str, source_name: str) -> Path:
    if not isinstance(relative, str) or not relative:
        raise InputError(f"{source_name}: {where} must be a file name, got {echo(relative)}")
    validate.text(relative, f"{source_name}: {where}", max_chars=validate.NAME_CHARS * 2)
    path = base_dir / relative
    try:
        found = path.is_file()
    except OSError:
        found = False
    if not found:
        raise InputError(f"{source_name}: {where} file {echo(relative)} not found")
    return path


def _channel(table: dict[str, Any], where: str, source_name: str) -> int:
    channel = validate.number(table.get("channel", 1), f"{source_name}: {where} channel", low=CHANNEL[0],
                              high=CHANNEL[1], integer=True)
    return int(channel) - 1


def _calibration(table: Any, base_dir: Path, source_name: str) -> CalibrationSpec | None:
    if table is None:
        return None
    if not isinstance(table, dict):
        raise InputError(f"{source_name}: [calibration] must be a table")
    check_keys(table, _CALIBRATION_KEYS, "[calibration]", source_name)
    reference_db = validate.number(table.get("reference_db", 94.0), f"{source_name}: [calibration] reference_db",
                                   low=CALIBRATOR_DB[0], high=CALIBRATOR_DB[1], unit=" dB")
    after = table.get("file_after")
    return CalibrationSpec(
        file=_existing(base_dir, table.get("file"), "[calibration] file", source_name),
        reference_db=reference_db,
        file_after=None if after is None else _existing(base_dir, after, "[calibration] file_after", source_name),
        channel=_channel(table, "[calibration]", source_name),
    )


def _take(entry: Any, number: int, test_type: str, base_dir: Path, source_name: str) -> TakeSpec:
    where = f"recording {number}"
    if not isinstance(entry, dict):
        raise InputError(f"{source_name}: {where} must be a table")
    check_keys(entry, _RECORDING_KEYS, where, source_name)
    role = entry.get("role")
    if not isinstance(role, str) or role not in ROLES_BY_TYPE[test_type]:
        raise InputError(f"{source_name}: {where} role {echo(role)} is not one of "
                         f"{', '.join(ROLES_BY_TYPE[test_type])} for an {test_type} test")
    speaker = int(validate.number(entry.get("speaker", 1), f"{source_name}: {where} speaker", low=POSITION[0],
                                  high=POSITION[1], integer=True))
    method = entry.get("method")
    if role == "decay":
        validate.choice(method, DECAY_METHODS, f"{source_name}: {where} method")
    elif method is not None:
        raise InputError(f"{source_name}: {where} method applies to decay recordings only")
    sweep = {key: validate.optional_number(entry, key, f"{source_name}: {where}", low=low, high=high, unit=unit)
             for key, (low, high), unit in (("sweep_start_hz", SWEEP_HZ, " Hz"), ("sweep_stop_hz", SWEEP_HZ, " Hz"),
                                            ("sweep_length_s", SWEEP_S, " s"))}
    return TakeSpec(file=_existing(base_dir, entry.get("file"), f"{where}", source_name), role=role,  # type: ignore[arg-type]
                    speaker=speaker, channel=_channel(entry, where, source_name), method=method, **sweep)
