"""A stored test as the calculator sees it: its Survey, its pasted levels, its declared build-up.

Everything here reads texts the store keeps (band-level CSV, construction TOML) with the same
parsers as the survey folder; :func:`check_test_texts` runs them when a test is stored or
imported, so a stored test always parses when a page or the calculator reads it.
"""

from __future__ import annotations

import math
import tomllib
from collections.abc import Callable, Mapping
from pathlib import Path

from fieldtl.construction import Construction, construction_from_dict
from fieldtl.errors import InputError
from fieldtl.store.rows import SWEEP_KEYS, take_fields
from fieldtl.store.schema import (CONSTRUCTION_SETTING, MAX_PASTED_CHARS, ProjectSnapshot, TakeRecord, TestRecord,
                                  TestSetup, check_project_texts, check_recording_name, check_take_fields, check_text)
from fieldtl.survey import (REQUIRED_ROLES, ROLES_BY_TYPE, BandColumn, CalibrationSpec, Geometry, Survey, TakeSpec,
                            read_band_levels_csv)
from fieldtl.validate import echo

__all__ = ["CONSTRUCTION_SETTING", "band_columns", "calibration_spec", "check_snapshot", "check_test_texts",
           "declared_construction", "missing_roles", "survey_from_records", "take_spec"]


def declared_construction(setup: TestSetup, where: str) -> Construction | None:
    """The declared build-up kept in the test's settings, parsed as a construction file."""
    text = setup.settings.get(CONSTRUCTION_SETTING)
    if not text:
        return None
    check_text(text, f"{where} declared construction", max_chars=MAX_PASTED_CHARS)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{where}: declared construction is not valid TOML ({exc})") from None
    except RecursionError:
        raise InputError(f"{where}: declared construction is nested too deeply") from None
    return construction_from_dict(data, source_name=f"{where} construction")


def band_columns(setup: TestSetup, csv_text: str | None, where: str) -> tuple[BandColumn, ...]:
    """The pasted band levels (none if ``csv_text`` is None); every column must suit the test type."""
    if csv_text is None:
        return ()
    source_name = f"{where} band levels"
    check_text(csv_text, source_name, max_chars=MAX_PASTED_CHARS)
    columns = read_band_levels_csv(csv_text, source_name=source_name)
    wrong = [c.label for c in columns if c.role not in ROLES_BY_TYPE[setup.test_type]]
    if wrong:
        raise InputError(f"{source_name}: column {wrong[0]!r} does not belong in {setup.test_type} tests")
    return columns


def check_test_texts(setup: TestSetup, csv_text: str | None, where: str) -> None:
    """The test's pasted band levels and declared build-up parse (InputError, one line, if not)."""
    band_columns(setup, csv_text, where)
    declared_construction(setup, where)


def check_snapshot(snapshot: ProjectSnapshot, files: Mapping[str, object]) -> None:
    """A whole project checked as typed input is: texts, every test's pasted levels and declared
    build-up, every take's fields, header values and audio file name in ``files``."""
    project = snapshot.project
    check_project_texts(name=project.name, client=project.client, address=project.address, engineer=project.engineer)
    setups: dict[int, TestSetup] = {}
    for test in snapshot.tests:
        where = f"test {echo(test.setup.title)}"
        if test.band_levels_csv is not None:
            check_text(test.band_levels_csv, f"{where} band levels", max_chars=MAX_PASTED_CHARS)
        check_test_texts(test.setup, test.band_levels_csv, where)
        setups[test.id] = test.setup
    for take in snapshot.takes:
        check_recording_name(take.original_name)
        where = f"take {echo(take.original_name)}"
        if take.test_id not in setups:
            raise InputError(f"{where}: belongs to no test of the project")
        check_take_fields(setups[take.test_id].test_type, **take_fields(take), where=where)
        if take.file_name not in files:
            raise InputError(f"{where}: no audio file {echo(take.file_name)}")
        for key in ("sample_rate_hz", "frames"):
            value = getattr(take, key)
            if isinstance(value, bool) or not isinstance(value, int) or value <= 0:
                raise InputError(f"{where}: {key} must be a positive whole number, got {echo(value)}")
        duration_s = take.duration_s
        if (isinstance(duration_s, bool) or not isinstance(duration_s, (int, float))
                or not math.isclose(duration_s, take.frames / take.sample_rate_hz, rel_tol=1e-9)):
            raise InputError(f"{where}: duration_s {echo(duration_s)} disagrees with frames / sample_rate_hz")


def missing_roles(test: TestRecord, takes: tuple[TakeRecord, ...]) -> tuple[str, ...]:
    """Roles the test type requires that neither an included take nor a band-level column provides."""
    present = {t.role for t in takes if not t.excluded}
    present |= {c.role for c in band_columns(test.setup, test.band_levels_csv, f"test {echo(test.setup.title)}")}
    return tuple(r for r in REQUIRED_ROLES[test.setup.test_type] if r not in present)


def survey_from_records(test: TestRecord, takes: tuple[TakeRecord, ...],
                        path_of: Callable[[TakeRecord], Path]) -> Survey:
    """The Survey of a stored test and its included takes; ``path_of`` gives a take's audio path."""
    setup, where = test.setup, f"test {echo(test.setup.title)}"
    takes = tuple(t for t in takes if not t.excluded)
    missing = missing_roles(test, takes)
    if missing:
        raise InputError(f"{where}: no included take with role {', '.join(missing)} "
                         f"(an {setup.test_type} test needs {', '.join(REQUIRED_ROLES[setup.test_type])})")
    specs = tuple(take_spec(t, path_of(t)) for t in takes if t.role not in ("calibration", "calibration_after"))
    return Survey(title=setup.title, test_type=setup.test_type,  # type: ignore[arg-type]
                  geometry=Geometry(receiving_volume_m3=setup.receiving_volume_m3,
                                    separating_area_m2=setup.separating_area_m2,
                                    source_volume_m3=setup.source_volume_m3),
                  source_name=setup.title, takes=specs,
                  band_columns=band_columns(setup, test.band_levels_csv, where),
                  calibration=calibration_spec(test, takes, path_of), requirement=setup.requirement,
                  construction=setup.construction or None, uncertainty_situation=setup.uncertainty_situation,
                  element_lab_rw_db=setup.element_lab_rw_db,
                  declared_construction=declared_construction(setup, where))


def take_spec(take: TakeRecord, path: Path) -> TakeSpec:
    """What the calculator needs to measure a stored (non-calibration) take whose audio is at ``path``."""
    return TakeSpec(file=path, role=take.role, speaker=take.speaker, channel=take.channel,  # type: ignore[arg-type]
                    method=take.method, **{k: getattr(take, k) for k in SWEEP_KEYS})


def calibration_spec(test: TestRecord, takes: tuple[TakeRecord, ...],
                     path_of: Callable[[TakeRecord], Path]) -> CalibrationSpec | None:
    """The test's calibrator takes among its included ``takes``: at most one of each kind, on one
    channel, the end check only with a start one (InputError naming the test otherwise)."""
    setup, where = test.setup, f"test {echo(test.setup.title)}"
    takes = tuple(t for t in takes if not t.excluded)
    before = [t for t in takes if t.role == "calibration"]
    after = [t for t in takes if t.role == "calibration_after"]
    for role, found in (("calibration", before), ("calibration_after", after)):
        if len(found) > 1:
            raise InputError(f"{where}: {len(found)} included takes with role {role}; exclude all but one")
    if not before:
        if after:
            raise InputError(f"{where}: a calibration_after take needs a calibration take at the start")
        return None
    if after and after[0].channel != before[0].channel:
        raise InputError(f"{where}: the calibration takes use different channels "
                         f"({before[0].channel + 1} and {after[0].channel + 1})")
    return CalibrationSpec(file=path_of(before[0]), reference_db=setup.calibrator_db,
                           file_after=path_of(after[0]) if after else None,
                           channel=before[0].channel)
