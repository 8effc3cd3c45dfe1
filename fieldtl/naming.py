"""Names people recognise for takes: the original file name and the role and positions.

The store keeps audio under content names (64 hex digits), and the calculator's findings name the
file it read. :func:`take_names` gives each stored file a name a tester knows
("rec_s2_p3.flac (receiving room, loudspeaker 2, microphone 3)"), and :func:`renamed_text`,
:func:`renamed_findings` and :func:`renamed_assessment` put those names wherever a content name
appeared, so no storage name reaches a page, a CSV, a JSON or a PDF.

Microphone positions are counted per role and loudspeaker (or tapping-machine) position in the
order the takes were added; background and calibrator takes carry no loudspeaker position, and a
corner's background carries its corner number instead.
"""

from __future__ import annotations

import dataclasses
import re
from collections.abc import Iterable, Mapping, Sequence
from typing import Protocol

from fieldtl.assess import Assessment
from fieldtl.findings import Finding

# A content name as the store writes it: 64 hexadecimal digits, then the audio suffix.
STORAGE_NAME = re.compile(r"\b[0-9a-f]{64}(?:\.(?:flac|wav))?\b")
UNKNOWN_TAKE = "a stored take"

_ROOM = {"source": "source room", "receiving": "receiving room", "impact": "receiving room",
         "source_corner": "source room corner", "receiving_corner": "receiving room corner",
         "decay": "decay in the receiving room", "background": "background noise in the receiving room",
         "background_corner": "background noise in receiving room corner"}
_CALIBRATOR = {"calibration": "calibrator tone at the start", "calibration_after": "calibrator tone at the end"}
NO_SOURCE_POSITION = ("background", "calibration", "calibration_after")


class TakeLike(Protocol):
    """What naming needs of a stored take (fieldtl.store.TakeRecord has it)."""

    id: int
    role: str
    speaker: int
    original_name: str
    file_name: str


def position_words(role: str, speaker: int, microphone: int, *, test_type: str) -> str:
    """"receiving room, loudspeaker 2, microphone 3"; "background noise in the receiving room, microphone 1"."""
    if role in _CALIBRATOR:
        return _CALIBRATOR[role]
    if role == "background_corner":    # its position is the corner number; no loudspeaker
        return f"{_ROOM[role]} {speaker}" + (f", take {microphone}" if microphone > 1 else "")
    source = "tapping machine" if test_type == "impact" else "loudspeaker"
    point = "corner" if role.endswith("corner") else "microphone"
    parts = [_ROOM.get(role, role.replace("_", " "))]
    if role not in NO_SOURCE_POSITION:
        parts.append(f"{source} {speaker}")
    parts.append(f"{point} {microphone}")
    return ", ".join(parts)


def microphone_numbers(takes: Iterable[TakeLike]) -> dict[int, int]:
    """Take id → its microphone position: 1, 2, ... per role and source position, in the order added."""
    seen: dict[tuple[str, int], int] = {}
    numbers = {}
    for take in sorted(takes, key=lambda t: t.id):
        key = (take.role, 0 if take.role in NO_SOURCE_POSITION else take.speaker)
        seen[key] = seen.get(key, 0) + 1
        numbers[take.id] = seen[key]
    return numbers


def take_titles(takes: Sequence[TakeLike], *, test_type: str) -> dict[int, str]:
    """Take id → "rec_s2_p3.flac (receiving room, loudspeaker 2, microphone 3)"."""
    numbers = microphone_numbers(takes)
    return {t.id: f"{t.original_name} ({position_words(t.role, t.speaker, numbers[t.id], test_type=test_type)})"
            for t in takes}


def take_names(takes: Sequence[TakeLike], *, test_type: str) -> dict[str, str]:
    """Stored file name → the title of the take(s) holding it (joined with "; " if several do)."""
    titles = take_titles(takes, test_type=test_type)
    names: dict[str, list[str]] = {}
    for take in takes:
        names.setdefault(take.file_name, []).append(titles[take.id])
    return {file_name: "; ".join(found) for file_name, found in names.items()}


def renamed_text(text: str, names: Mapping[str, str]) -> str:
    """``text`` with every stored file name replaced by its take's name (an unknown one by a plain word)."""
    def replace(match: re.Match[str]) -> str:
        found = match.group(0)
        return names.get(found) or next((v for k, v in names.items() if k.startswith(found)), UNKNOWN_TAKE)
    return STORAGE_NAME.sub(replace, text)


def renamed_findings(findings: Iterable[Finding], names: Mapping[str, str]) -> tuple[Finding, ...]:
    return tuple(dataclasses.replace(f, message=renamed_text(f.message, names), action=renamed_text(f.action, names))
                 for f in findings)


def renamed_assessment(assessment: Assessment, names: Mapping[str, str]) -> Assessment:
    """The assessment with take names in its findings, take labels and verdict text."""
    takes = tuple(dataclasses.replace(t, label=renamed_text(t.label, names)) for t in assessment.takes)
    verdict = assessment.verdict
    if verdict is not None:
        verdict = dataclasses.replace(verdict, statement=renamed_text(verdict.statement, names))
    return dataclasses.replace(assessment, findings=renamed_findings(assessment.findings, names), takes=takes,
                               verdict=verdict, source_name=renamed_text(assessment.source_name, names))


@dataclasses.dataclass(frozen=True, slots=True)
class FindingGroup:
    """Findings of one kind about one take (``take`` None: about the test as a whole)."""

    take: str | None
    first: Finding
    bands_hz: tuple[float, ...]
    count: int


_SEVERITY_ORDER = {"error": 0, "warning": 1, "info": 2}


def grouped_by_take(findings: Iterable[Finding], take_titles: Iterable[str]) -> tuple[FindingGroup, ...]:
    """Findings folded per take (the title their message starts with) and per kind, most serious
    first, then in the order the takes were named."""
    titles = sorted(set(take_titles), key=len, reverse=True)     # longest first: no title is cut short
    groups: dict[tuple[str | None, str], list[Finding]] = {}
    for finding in findings:
        take = next((t for t in titles if finding.message.startswith(t)), None)
        groups.setdefault((take, finding.code), []).append(finding)
    folded = [FindingGroup(take, members[0], tuple(f.band_hz for f in members if f.band_hz is not None), len(members))
              for (take, _code), members in groups.items()]
    return tuple(sorted(folded, key=lambda g: _SEVERITY_ORDER.get(g.first.severity, 3)))
