"""SQLite rows ↔ the store's values (fieldtl.store.schema), and the few statements they share.

The statements are also PostgreSQL's (fieldtl.store.postgres binds the same ``?`` parameters):
new ids come back through ``RETURNING id``, which both speak (SQLite from 3.35)."""

from __future__ import annotations

import json
import sqlite3
from collections.abc import Mapping
from typing import Any

from fieldtl.store.schema import Project, TakeRecord, TestRecord, TestSetup

SWEEP_KEYS = ("sweep_start_hz", "sweep_stop_hz", "sweep_length_s")
TEST_COLUMNS = ("title", "test_type", "separating_area_m2", "receiving_volume_m3", "source_volume_m3",
                "construction", "requirement", "element_lab_rw_db", "uncertainty_situation", "calibrator_db",
                "settings")
TAKE_COLUMNS = ("test_id", "role", "speaker", "method", "channel", "sweep_start_hz", "sweep_stop_hz",
                "sweep_length_s", "file_name", "original_name", "sha256", "sample_rate_hz", "frames",
                "duration_s", "source", "recorder_settings", "excluded", "created_at")


def row_to_project(row: sqlite3.Row | tuple[Any, ...]) -> Project:
    return Project(*row)


def row_to_test(row: tuple[Any, ...]) -> TestRecord:
    (test_id, project_id, title, test_type, area, receiving, source, construction, requirement, lab_rw,
     situation, calibrator_db, band_levels_csv, settings, created_at, updated_at) = row
    setup = TestSetup(title=title, test_type=test_type, receiving_volume_m3=receiving, separating_area_m2=area,
                      source_volume_m3=source, construction=construction, requirement=requirement,
                      element_lab_rw_db=lab_rw, uncertainty_situation=situation, calibrator_db=calibrator_db,
                      settings=json.loads(settings))
    return TestRecord(test_id, project_id, setup, band_levels_csv, created_at, updated_at)


def row_to_take(row: tuple[Any, ...]) -> TakeRecord:
    values = dict(zip(("id", *TAKE_COLUMNS), row, strict=True))
    settings = values["recorder_settings"]
    return TakeRecord(**values | {"recorder_settings": None if settings is None else json.loads(settings),
                                  "excluded": bool(values["excluded"])})


def setup_values(setup: TestSetup) -> tuple[Any, ...]:
    """The setup's values in TEST_COLUMNS order, settings as JSON text."""
    values = [getattr(setup, c) for c in TEST_COLUMNS]
    values[-1] = json.dumps(dict(setup.settings), ensure_ascii=False, allow_nan=False)
    return tuple(values)


def insert_project(db: sqlite3.Connection, project: Project) -> int:
    cursor = db.execute("INSERT INTO projects (name, client, address, engineer, created_at, updated_at) "
                        "VALUES (?, ?, ?, ?, ?, ?) RETURNING id", (project.name, project.client, project.address,
                                                      project.engineer, project.created_at, project.updated_at))
    return int(cursor.fetchone()[0])


def insert_test(db: sqlite3.Connection, project_id: int, test: TestRecord) -> int:
    cursor = db.execute(f"INSERT INTO tests (project_id, {', '.join(TEST_COLUMNS)}, band_levels_csv, created_at, "
                        f"updated_at) VALUES ({', '.join('?' * (len(TEST_COLUMNS) + 4))}) RETURNING id",
                        (project_id, *setup_values(test.setup), test.band_levels_csv, test.created_at,
                         test.updated_at))
    return int(cursor.fetchone()[0])


def insert_take(db: sqlite3.Connection, row: Mapping[str, Any]) -> int:
    values = dict(row)
    settings = values["recorder_settings"]
    values["recorder_settings"] = None if settings is None else json.dumps(dict(settings), ensure_ascii=False,
                                                                           allow_nan=False)
    values["excluded"] = int(bool(values["excluded"]))
    cursor = db.execute(f"INSERT INTO takes ({', '.join(TAKE_COLUMNS)}) "
                        f"VALUES ({', '.join('?' * len(TAKE_COLUMNS))}) RETURNING id", tuple(values[c] for c in TAKE_COLUMNS))
    return int(cursor.fetchone()[0])


def take_fields(take: TakeRecord) -> dict[str, Any]:
    """The take's own fields as :func:`fieldtl.store.schema.check_take_fields` takes them."""
    return dict(role=take.role, speaker=take.speaker, method=take.method, channel=take.channel,
                source=take.source, recorder_settings=take.recorder_settings,
                sweep={k: getattr(take, k) for k in SWEEP_KEYS})


def touch_project(db: sqlite3.Connection, project_id: int, now: str) -> None:
    db.execute("UPDATE projects SET updated_at = ? WHERE id = ?", (now, project_id))
