"""What a push would do, test by test: compare this device's project with the server's and the
check-out record's base (each test's settings and each take's fields as they were checked out).

A value changed here only is sent to the server; one changed on the server only stays as the
server has it. Changed on both sides to different values, it is a conflict shown as
:class:`FieldDifference` lines and resolved per test: "mine" sends this device's values, "server"
takes the server's version of the test here too (its settings, its takes' fields and removals;
takes added here are still sent). Takes are linked to their server copies by the record; a take added offline whose
audio the server's test already holds (and no other take is linked to) is the same take.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from typing import Any

from fieldtl.store import rows
from fieldtl.store.schema import CONSTRUCTION_SETTING, REPORT_SETTING, TakeRecord, TestRecord
from fieldtl.validate import clean, echo

TAKE_FIELDS = ("role", "speaker", "method", "channel", "excluded", "sweep_start_hz", "sweep_stop_hz",
               "sweep_length_s")
_LABELS = {"title": "title", "test_type": "test type", "receiving_volume_m3": "volume of the receiving room (m³)",
           "separating_area_m2": "area of the separating element (m²)",
           "source_volume_m3": "volume of the source room (m³)", "construction": "construction",
           "requirement": "requirement", "element_lab_rw_db": "laboratory Rw of the element (dB)",
           "uncertainty_situation": "uncertainty situation", "calibrator_db": "calibrator level (dB)",
           "band_levels_csv": "pasted band levels", "role": "role", "speaker": "position",
           "method": "decay method", "channel": "channel (first = 0)", "excluded": "left out",
           "sweep_start_hz": "sweep start (Hz)", "sweep_stop_hz": "sweep stop (Hz)",
           "sweep_length_s": "sweep length (s)"}
_SETTING_LABELS = {CONSTRUCTION_SETTING: "declared construction", REPORT_SETTING: "report details"}
REMOVED = "removed"


@dataclass(frozen=True, slots=True)
class FieldDifference:
    """One value that differs between this device and the server, as a person reads it."""

    name: str          # "volume of the receiving room (m³)", "ir_s2_p3.flac: role", "ir_s2_p3.flac"
    here: str          # the value on this device ("removed" for a take removed here)
    server: str        # the value on the server


@dataclass(frozen=True, slots=True)
class SettingsConflict:
    """A test changed here and on the server in different ways: nothing is pushed until it is resolved."""

    local_test_id: int
    title: str
    differences: tuple[FieldDifference, ...]

    @property
    def fields(self) -> tuple[str, ...]:
        return tuple(d.name for d in self.differences)

    def message(self) -> str:
        names = ", ".join(self.fields)
        return (f"test {echo(self.title)}: {clean(names, 200)} changed here and on the server; "
                "choose which to keep")


@dataclass(slots=True)
class TestWork:
    """What a push does for one local test (planned in, and applied in, the server transaction)."""

    __test__ = False

    test: TestRecord                           # this device's test
    server_test: TestRecord | None             # its server copy; None: the test is added
    settings: str = "keep"                     # keep | mine (written to the server) | server (taken here)
    server_updates: list[tuple[TakeRecord, int]] = field(default_factory=list)   # local fields → server take
    server_adds: list[TakeRecord] = field(default_factory=list)
    server_removals: list[int] = field(default_factory=list)                     # server take ids
    local_updates: list[tuple[int, TakeRecord]] = field(default_factory=list)    # local take ← server fields
    local_removals: list[int] = field(default_factory=list)                      # local take ids
    local_restores: list[TakeRecord] = field(default_factory=list)               # server takes copied here
    links: dict[str, dict[str, Any]] = field(default_factory=dict)  # record: local take id → server id, base
    server_test_id: int | None = None          # the server copy's id (an added test's once inserted)

    def __post_init__(self) -> None:
        if self.server_test is not None:
            self.server_test_id = self.server_test.id


def settings_of(test: TestRecord) -> dict[str, Any]:
    """A test's settings as JSON values: the setup's fields and the pasted band levels."""
    values = asdict(test.setup) | {"settings": dict(test.setup.settings), "band_levels_csv": test.band_levels_csv}
    return json.loads(json.dumps(values))


def take_fields_of(take: TakeRecord) -> dict[str, Any]:
    """The take's correctable fields as JSON values."""
    return json.loads(json.dumps({k: getattr(take, k) for k in TAKE_FIELDS}))


def plan(db: Any, mine: Any, record: Mapping[str, Any], resolve: Mapping[int, str]
         ) -> tuple[list[SettingsConflict], list[TestWork]]:
    """Each local test's work, and the tests in conflict (left out of the work) without a choice."""
    conflicts, work = [], []
    local_takes: dict[int, list[TakeRecord]] = {}
    for take in mine.takes:
        local_takes.setdefault(take.test_id, []).append(take)
    for test in mine.tests:
        entry = record["tests"].get(str(test.id))
        row = None if entry is None else db.execute("SELECT * FROM tests WHERE id = ? AND project_id = ?",
                                                    (entry["server_test_id"], record["server_project_id"])).fetchone()
        takes = local_takes.get(test.id, [])
        if row is None:              # made offline, or deleted on the server meanwhile: added, never lost
            work.append(TestWork(test, None, "mine", server_adds=list(takes),
                                 links={str(t.id): {"server_take_id": None, "base": take_fields_of(t)} for t in takes}))
            continue
        one = TestWork(test, rows.row_to_test(row))
        server_takes = [rows.row_to_take(r) for r in db.execute("SELECT * FROM takes WHERE test_id = ? ORDER BY id",
                                                                 (one.server_test.id,))]
        choice = resolve.get(test.id)
        differences = _plan_settings(one, entry["base"], choice) + _plan_takes(one, takes, server_takes,
                                                                               entry.get("takes", {}), choice)
        if differences and choice is None:
            conflicts.append(SettingsConflict(test.id, test.setup.title, tuple(differences)))
        else:
            work.append(one)
    return conflicts, work


def _plan_settings(one: TestWork, base: Mapping[str, Any], choice: str | None) -> list[FieldDifference]:
    assert one.server_test is not None
    here, there = settings_of(one.test), settings_of(one.server_test)
    if here == base or here == there:
        return []
    if there == base:
        one.settings = "mine"
        return []
    one.settings = choice or "keep"
    return settings_differences(here, there)


def _plan_takes(one: TestWork, takes: list[TakeRecord], server_takes: list[TakeRecord],
                entries: Mapping[str, Mapping[str, Any]], choice: str | None) -> list[FieldDifference]:
    by_id = {t.id: t for t in server_takes}
    unlinked = [t for t in server_takes if t.id not in {e["server_take_id"] for e in entries.values()}]
    differences: list[FieldDifference] = []
    local_ids = {t.id for t in takes}
    for take in takes:
        entry = entries.get(str(take.id))
        here = take_fields_of(take)
        if entry is None:                           # added offline (or linked by an older record)
            same = next((t for t in unlinked if t.sha256 == take.sha256), None)
            if same is None:
                one.server_adds.append(take)
                one.links[str(take.id)] = {"server_take_id": None, "base": here}
                continue
            unlinked.remove(same)
            differences += _both_changed(one, take, same, None, choice)
            continue
        server = by_id.get(entry["server_take_id"])
        if server is None:                          # removed on the server
            if here == entry["base"] and choice == "server":
                one.local_removals.append(take.id)        # the server's version of the test, here too
            elif here == entry["base"]:
                one.links[str(take.id)] = dict(entry)     # the server's removal stands; nothing to send
            else:
                differences.append(FieldDifference(take.original_name, _changed_words(here, entry["base"]), REMOVED))
                if choice == "mine":
                    one.server_adds.append(take)
                    one.links[str(take.id)] = {"server_take_id": None, "base": here}
                elif choice == "server":
                    one.local_removals.append(take.id)
                else:
                    one.links[str(take.id)] = dict(entry)
            continue
        differences += _both_changed(one, take, server, entry["base"], choice)
    for local_id, entry in entries.items():
        if int(local_id) in local_ids:
            continue
        server = by_id.get(entry["server_take_id"])          # removed here
        if server is None:
            continue                                          # and on the server: nothing left to do
        there = take_fields_of(server)
        if there == entry["base"]:
            one.server_removals.append(server.id)
            continue
        differences.append(FieldDifference(server.original_name, REMOVED, _changed_words(there, entry["base"])))
        if choice == "mine":
            one.server_removals.append(server.id)
        elif choice == "server":
            one.local_restores.append(server)
        else:
            one.links[local_id] = dict(entry)
    return differences


def _both_changed(one: TestWork, take: TakeRecord, server: TakeRecord, base: Mapping[str, Any] | None,
                  choice: str | None) -> list[FieldDifference]:
    """A take linked to its server copy: three-way comparison of their fields (no base: both are new)."""
    here, there = take_fields_of(take), take_fields_of(server)
    link = {"server_take_id": server.id, "base": here}
    if here == there or (base is not None and here == base):
        if here != there and choice == "server":  # the server's version of the test, here too
            one.local_updates.append((take.id, server))
        one.links[str(take.id)] = link | {"base": there if here == there or choice == "server" else dict(base or here)}
        return []
    if base is not None and there == base:
        one.server_updates.append((take, server.id))
        one.links[str(take.id)] = link
        return []
    if choice == "mine":
        one.server_updates.append((take, server.id))
        one.links[str(take.id)] = link
    elif choice == "server":
        one.local_updates.append((take.id, server))
        one.links[str(take.id)] = link | {"base": there}
    else:
        one.links[str(take.id)] = link | {"base": dict(base) if base is not None else there}
    return [FieldDifference(f"{take.original_name}: {_LABELS[k]}", shown(here[k]), shown(there[k]))
            for k in TAKE_FIELDS if here[k] != there[k]]


def settings_differences(here: Mapping[str, Any], there: Mapping[str, Any]) -> list[FieldDifference]:
    found = []
    for key in here:
        if key == "settings":
            mine, theirs = here[key], there[key]
            for name in sorted(set(mine) | set(theirs)):
                if mine.get(name) != theirs.get(name):
                    label = _SETTING_LABELS.get(name, f"app setting {clean(name, 40)}")
                    found.append(FieldDifference(label, shown(mine.get(name)), shown(theirs.get(name))))
        elif here[key] != there[key]:
            found.append(FieldDifference(_LABELS.get(key, key), shown(here[key]), shown(there[key])))
    return found


def _changed_words(now: Mapping[str, Any], base: Mapping[str, Any]) -> str:
    """"changed: role receiving, position 2" (what a side changed since the check-out)."""
    changed = [f"{_LABELS[k]} {shown(now[k])}" for k in TAKE_FIELDS if now.get(k) != base.get(k)]
    return clean("changed: " + ", ".join(changed))


def shown(value: Any) -> str:
    """A stored value as a person reads it: one line, at most 80 characters."""
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:g}"
    if isinstance(value, str):
        lines = value.strip().splitlines() or [""]
        return clean(lines[0] if len(lines) == 1 else f"{lines[0]} … ({len(lines)} lines)")
    if isinstance(value, (dict, list)):
        return clean(json.dumps(value, ensure_ascii=False, separators=(", ", ": ")))
    return clean(str(value))
