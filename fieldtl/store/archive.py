"""A whole project as one zip archive: ``manifest.json`` plus ``audio/<sha256>.<wav|flac>``.

Import checks everything before the store changes: member names (no absolute paths, no "..",
no links, nothing but the manifest and content-named audio), declared and streamed sizes
(zip bombs), the manifest's shape and values, each file's SHA-256 against its name and the
manifest, and each file's audio as :meth:`Store.add_take` would. Only then is the project
added, as a new project in one transaction. Any problem raises InputError with one line naming
the archive; nothing stored changes.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import stat
import zipfile
import zlib
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from datetime import datetime
from pathlib import Path
from typing import IO, Any

from fieldtl import __version__
from fieldtl.errors import InputError, StoreError
from fieldtl.store.files import WHOLE_READ_ROLES, check_audio_file
from fieldtl.store.schema import (Project, ProjectSnapshot, TakeRecord, TestRecord, TestSetup, check_recording_name,
                                  check_take_fields, check_text)
from fieldtl.store.sqlite import Store
from fieldtl.store.survey_view import check_snapshot
from fieldtl.validate import check_keys, echo

ARCHIVE_FORMAT = "fieldtl-project-archive"
ARCHIVE_VERSION = 1
MANIFEST_NAME = "manifest.json"
MAX_MANIFEST_BYTES = 16 * 1024 * 1024
MAX_ARCHIVE_BYTES = 8 * 1024 ** 3          # all members together, uncompressed
MAX_MEMBERS = 20_000
_AUDIO_MEMBER = re.compile(r"^audio/(?P<sha256>[0-9a-f]{64})\.(?:wav|flac)$")
_CHUNK_BYTES = 1 << 20

_PROJECT_KEYS = ("name", "client", "address", "engineer", "created_at", "updated_at")
_SETUP_KEYS = ("title", "test_type", "receiving_volume_m3", "separating_area_m2", "source_volume_m3",
               "construction", "requirement", "element_lab_rw_db", "uncertainty_situation", "calibrator_db",
               "settings")
_TEST_KEYS = ("id", *_SETUP_KEYS, "band_levels_csv", "created_at", "updated_at", "takes")
_TAKE_KEYS = ("file", "original_name", "role", "speaker", "method", "channel", "sweep_start_hz", "sweep_stop_hz",
              "sweep_length_s", "sha256", "sample_rate_hz", "frames", "duration_s", "source", "recorder_settings",
              "excluded", "created_at")


def export_project(store: Store, project_id: int, destination: str | Path | IO[bytes]) -> None:
    """Write the project, its tests and takes and their audio as one zip archive.

    A path is written through a temporary file and renamed, so it never holds half an archive.
    Raises StoreError if a take's audio file is missing or no longer matches its SHA-256.
    """
    snapshot = store.snapshot(project_id)
    if isinstance(destination, (str, Path)):
        target = Path(destination)
        partial = target.with_name(target.name + ".part")
        try:
            with open(partial, "wb") as handle:
                _write_archive(store, snapshot, handle)
            os.replace(partial, target)
        finally:
            partial.unlink(missing_ok=True)
    else:
        _write_archive(store, snapshot, destination)


def import_project(store: Store, source: str | Path | IO[bytes], *, source_name: str | None = None,
                   max_member_bytes: int | None = None, max_total_bytes: int = MAX_ARCHIVE_BYTES) -> Project:
    """Check the archive completely, then add its project to the store as a NEW project.

    ``max_member_bytes`` defaults to the store's limit per take. Never overwrites or merges into
    an existing project; audio already in the store (same content) is shared, not copied twice.
    """
    name = _printable(source_name or (Path(source).name if isinstance(source, (str, Path)) else "archive"))
    limit = store.max_take_bytes if max_member_bytes is None else max_member_bytes
    staged: dict[str, Path] = {}
    try:
        with _open_zip(source, name) as archive:
            members = _check_members(archive, name, max_member_bytes=limit, max_total_bytes=max_total_bytes)
            manifest = _read_json(archive, members[MANIFEST_NAME], name)
            snapshot, files = _parse_manifest(manifest, name)
            try:
                check_snapshot(snapshot, {m.removeprefix("audio/"): m for m in files})
            except InputError as exc:
                raise InputError(f"{name}: {exc}") from None
            audio_members = {m for m in members if m != MANIFEST_NAME}
            if audio_members != set(files):
                extra = sorted(audio_members - set(files)) or sorted(set(files) - audio_members)
                which = "not in the manifest" if audio_members - set(files) else "named in the manifest is missing"
                raise InputError(f"{name}: member {extra[0]!r} {which}")
            for member, takes in files.items():
                staged[member] = store.incoming_path()
                _extract_checked(archive, members[member], staged[member], name, limit=limit)
                _check_staged_audio(staged[member], takes, name, member)
        return store.add_project_copy(snapshot, {m.removeprefix("audio/"): p for m, p in staged.items()})
    finally:
        for path in staged.values():
            path.unlink(missing_ok=True)


# --- writing ---------------------------------------------------------------------------------------

def _write_archive(store: Store, snapshot: ProjectSnapshot, handle: IO[bytes]) -> None:
    project = snapshot.project
    manifest = {
        "format": ARCHIVE_FORMAT, "format_version": ARCHIVE_VERSION, "fieldtl_version": __version__,
        "project": {k: getattr(project, k) for k in _PROJECT_KEYS},
        "tests": [_test_entry(test, [t for t in snapshot.takes if t.test_id == test.id]) for test in snapshot.tests],
    }
    with zipfile.ZipFile(handle, "w", allowZip64=True) as archive:
        archive.writestr(MANIFEST_NAME, json.dumps(manifest, ensure_ascii=False, indent=1, allow_nan=False),
                         compress_type=zipfile.ZIP_DEFLATED)
        for take in sorted({t.file_name: t for t in snapshot.takes}.values(), key=lambda t: t.file_name):
            _copy_verified(store.take_path(take), take.sha256, archive, f"audio/{take.file_name}", store.name)


def _test_entry(test: TestRecord, takes: list[TakeRecord]) -> dict[str, Any]:
    entry: dict[str, Any] = {"id": test.id}
    entry |= {k: getattr(test.setup, k) for k in _SETUP_KEYS} | {"settings": dict(test.setup.settings)}
    entry |= {"band_levels_csv": test.band_levels_csv, "created_at": test.created_at, "updated_at": test.updated_at}
    entry["takes"] = [{k: getattr(t, k) for k in _TAKE_KEYS if k != "file"} | {"file": f"audio/{t.file_name}"}
                      for t in takes]
    return entry


def _copy_verified(path: Path, sha256: str, archive: zipfile.ZipFile, member: str, store_name: str) -> None:
    digest = hashlib.sha256()
    try:
        with open(path, "rb") as source, archive.open(zipfile.ZipInfo(member, date_time=(1980, 1, 1, 0, 0, 0)),
                                                      "w", force_zip64=True) as target:
            for chunk in iter(lambda: source.read(_CHUNK_BYTES), b""):
                digest.update(chunk)
                target.write(chunk)
    except FileNotFoundError:
        raise StoreError(f"{store_name}: audio file {path.name} is missing; the project cannot be exported") from None
    if digest.hexdigest() != sha256:
        raise StoreError(f"{store_name}: audio file {path.name} no longer matches its SHA-256; not exported")


# --- reading ---------------------------------------------------------------------------------------

@contextmanager
def _open_zip(source: str | Path | IO[bytes], name: str) -> Iterator[zipfile.ZipFile]:
    try:
        with zipfile.ZipFile(source) as archive:
            yield archive
    except FileNotFoundError:
        raise InputError(f"{name}: archive not found") from None
    except (zipfile.BadZipFile, zlib.error, EOFError, NotImplementedError, RuntimeError) as exc:
        raise InputError(f"{name}: damaged or unsupported zip archive ({exc})") from None


def _check_members(archive: zipfile.ZipFile, name: str, *, max_member_bytes: int,
                   max_total_bytes: int) -> dict[str, zipfile.ZipInfo]:
    """Member names and declared sizes, before a single byte is extracted."""
    infos = archive.infolist()
    if len(infos) > MAX_MEMBERS:
        raise InputError(f"{name}: {len(infos)} members, more than the {MAX_MEMBERS} allowed")
    members: dict[str, zipfile.ZipInfo] = {}
    total = 0
    for info in infos:
        member = info.filename
        parts = member.replace("\\", "/").split("/")
        if member.startswith(("/", "\\")) or re.match(r"^[A-Za-z]:", member):
            raise InputError(f"{name}: member {member!r} has an absolute path")
        if ".." in parts:
            raise InputError(f"{name}: member {member!r} points outside the archive (..)")
        if stat.S_ISLNK(info.external_attr >> 16):
            raise InputError(f"{name}: member {member!r} is a symbolic link")
        if member != MANIFEST_NAME and not _AUDIO_MEMBER.match(member):
            raise InputError(f"{name}: unexpected member {member!r} (only {MANIFEST_NAME} and "
                             "audio/<sha256>.wav|.flac belong in a project archive)")
        if member in members:
            raise InputError(f"{name}: member {member!r} appears twice")
        if info.flag_bits & 0x1:
            raise InputError(f"{name}: member {member!r} is encrypted")
        if info.compress_type not in (zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED):
            raise InputError(f"{name}: member {member!r} uses an unsupported compression method")
        limit = MAX_MANIFEST_BYTES if member == MANIFEST_NAME else max_member_bytes
        if info.file_size > limit:
            raise InputError(f"{name}: member {member!r} declares {info.file_size} bytes, more than the "
                             f"{limit} allowed")
        total += info.file_size
        if total > max_total_bytes:
            raise InputError(f"{name}: members declare more than the {max_total_bytes} bytes allowed in all")
        members[member] = info
    if MANIFEST_NAME not in members:
        raise InputError(f"{name}: no {MANIFEST_NAME}; not a fieldtl project archive")
    return members


def _stream(archive: zipfile.ZipFile, info: zipfile.ZipInfo, name: str, *, limit: int) -> Iterator[bytes]:
    """The member's bytes in chunks, stopping at the first byte past its declared size or ``limit``."""
    cap = min(info.file_size, limit)
    count = 0
    try:
        with archive.open(info) as member:
            for chunk in iter(lambda: member.read(_CHUNK_BYTES), b""):
                count += len(chunk)
                if count > cap:
                    raise InputError(f"{name}: member {info.filename!r} is larger than it declares")
                yield chunk
    except (zipfile.BadZipFile, zlib.error, EOFError, NotImplementedError, RuntimeError) as exc:
        raise InputError(f"{name}: member {info.filename!r} is damaged ({exc})") from None
    if count != info.file_size:
        raise InputError(f"{name}: member {info.filename!r} holds {count} bytes, not the {info.file_size} it declares")


def _read_json(archive: zipfile.ZipFile, info: zipfile.ZipInfo, name: str) -> Any:
    """The manifest as strict JSON: UTF-8, no NaN or Infinity, not nested beyond Python's limit."""
    text = b"".join(_stream(archive, info, name, limit=MAX_MANIFEST_BYTES))
    try:
        return json.loads(text.decode("utf-8"), parse_constant=_refuse_constant)
    except (UnicodeDecodeError, json.JSONDecodeError, ValueError) as exc:
        raise InputError(f"{name}: {MANIFEST_NAME} is not valid JSON ({exc})") from None
    except RecursionError:
        raise InputError(f"{name}: {MANIFEST_NAME} is nested too deeply") from None


def _refuse_constant(constant: str) -> Any:
    raise ValueError(f"{constant} is not a JSON number")


def _extract_checked(archive: zipfile.ZipFile, info: zipfile.ZipInfo, path: Path, name: str, *, limit: int) -> None:
    """Stream one audio member to ``path``; its SHA-256 must be the one in its name."""
    digest = hashlib.sha256()
    with open(path, "xb") as handle:
        for chunk in _stream(archive, info, name, limit=limit):
            digest.update(chunk)
            handle.write(chunk)
        handle.flush()
        os.fsync(handle.fileno())
    expected = _AUDIO_MEMBER.match(info.filename)["sha256"]  # type: ignore[index]
    if digest.hexdigest() != expected:
        raise InputError(f"{name}: member {info.filename!r} does not match its SHA-256 checksum")


def _check_staged_audio(path: Path, takes: list[TakeRecord], name: str, member: str) -> None:
    first = takes[0]
    try:
        audio = check_audio_file(path, channel=first.channel, shown_name=member,
                                 read_whole=any(t.role in WHOLE_READ_ROLES for t in takes))
    except InputError as exc:
        raise InputError(f"{name}: {exc}") from None
    for take in takes:
        if (take.sample_rate_hz, take.frames) != (audio.sample_rate_hz, audio.frames):
            raise InputError(f"{name}: take {take.original_name!r}: the manifest's sample rate or length "
                             f"disagrees with {member}")
        if take.channel >= audio.channels:
            raise InputError(f"{name}: take {take.original_name!r}: channel {take.channel + 1} requested but "
                             f"{member} has {audio.channels}")


# --- the manifest ----------------------------------------------------------------------------------

def _parse_manifest(manifest: Any, name: str) -> tuple[ProjectSnapshot, dict[str, list[TakeRecord]]]:
    """The manifest as a snapshot (ids only link takes to tests) and the takes of each audio member."""
    top = _object(manifest, ("format", "format_version", "fieldtl_version", "project", "tests"), name, "manifest")
    if top["format"] != ARCHIVE_FORMAT:
        raise InputError(f"{name}: not a fieldtl project archive (format {top['format']!r})")
    if top["format_version"] != ARCHIVE_VERSION:
        raise InputError(f"{name}: archive format version {top['format_version']!r}; this fieldtl reads "
                         f"version {ARCHIVE_VERSION}")
    fields = _object(top["project"], _PROJECT_KEYS, name, "project")
    for key in ("created_at", "updated_at"):
        _timestamp(fields[key], name, f"project {key}")
    project = Project(id=0, **fields)
    if not isinstance(top["tests"], list):
        raise InputError(f"{name}: manifest tests must be a list")
    tests: list[TestRecord] = []
    takes: list[TakeRecord] = []
    files: dict[str, list[TakeRecord]] = {}
    for number, raw in enumerate(top["tests"], start=1):
        test = _object(raw, _TEST_KEYS, name, f"test {number}")
        if isinstance(test["id"], bool) or not isinstance(test["id"], int) or test["id"] in {t.id for t in tests}:
            raise InputError(f"{name}: test {number} id must be a whole number used once")
        try:
            setup = TestSetup(**{k: test[k] for k in _SETUP_KEYS})
        except (InputError, TypeError) as exc:
            raise InputError(f"{name}: test {number}: {exc}") from None
        for key in ("created_at", "updated_at"):
            _timestamp(test[key], name, f"test {number} {key}")
        tests.append(TestRecord(test["id"], 0, setup, test["band_levels_csv"], test["created_at"], test["updated_at"]))
        if not isinstance(test["takes"], list):
            raise InputError(f"{name}: test {number} takes must be a list")
        for raw_take in test["takes"]:
            take, member = _parse_take(raw_take, test["id"], setup.test_type, name, f"test {number}")
            takes.append(take)
            files.setdefault(member, []).append(take)
    return ProjectSnapshot(project, tuple(tests), tuple(takes)), files


def _parse_take(raw: Any, test_id: int, test_type: str, name: str, where: str) -> tuple[TakeRecord, str]:
    entry = _object(raw, _TAKE_KEYS, name, f"{where} take")
    try:
        check_recording_name(entry["original_name"], f"{where} take name")
    except InputError as exc:
        raise InputError(f"{name}: {exc}") from None
    where = f"{where} take {echo(entry['original_name'])}"
    _timestamp(entry["created_at"], name, f"{where} created_at")
    for key in ("sample_rate_hz", "frames"):
        if isinstance(entry[key], bool) or not isinstance(entry[key], int) or entry[key] <= 0:
            raise InputError(f"{name}: {where}: {key} must be a positive whole number")
    if isinstance(entry["duration_s"], bool) or not isinstance(entry["duration_s"], (int, float)):
        raise InputError(f"{name}: {where}: duration_s must be a number")
    if not isinstance(entry["excluded"], bool):
        raise InputError(f"{name}: {where}: excluded must be true or false")
    if not isinstance(entry["sha256"], str) or not isinstance(entry["file"], str):
        raise InputError(f"{name}: {where}: sha256 and file must be text")
    match = _AUDIO_MEMBER.match(entry["file"])
    if match is None or match["sha256"] != entry["sha256"]:
        raise InputError(f"{name}: {where}: file {entry['file']!r} is not audio/<its sha256>.wav|.flac")
    sweep = {k: entry[k] for k in ("sweep_start_hz", "sweep_stop_hz", "sweep_length_s")}
    try:
        check_take_fields(test_type, role=entry["role"], speaker=entry["speaker"], method=entry["method"],
                          channel=entry["channel"], source=entry["source"],
                          recorder_settings=entry["recorder_settings"], sweep=sweep, where=where)
    except InputError as exc:
        raise InputError(f"{name}: {exc}") from None
    values = {k: entry[k] for k in _TAKE_KEYS if k != "file"}
    return TakeRecord(id=0, test_id=test_id, file_name=entry["file"].removeprefix("audio/"), **values), entry["file"]


def _object(value: Any, keys: tuple[str, ...], name: str, where: str) -> Mapping[str, Any]:
    if not isinstance(value, dict):
        raise InputError(f"{name}: {where} must be a JSON object")
    check_keys(value, keys, where, name, required=keys)
    return value


def _timestamp(value: Any, name: str, what: str) -> None:
    try:
        check_text(value, what, max_chars=64)
        datetime.fromisoformat(value)
    except InputError as exc:
        raise InputError(f"{name}: {exc}") from None
    except ValueError:
        raise InputError(f"{name}: {what}: {echo(value)} is not an ISO 8601 timestamp") from None


def _printable(text: str) -> str:
    """An archive's name for one-line messages: no control characters, at most 80 characters."""
    cleaned = "".join(c if c.isprintable() else "?" for c in text)
    return cleaned if len(cleaned) <= 80 else cleaned[:79] + "…"
