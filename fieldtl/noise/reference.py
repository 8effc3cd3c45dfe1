"""Reference lines beside a record: named guideline values and the user's own local limits.

These are comparisons, not a verdict on anyone: each line says what was measured against which
named value, and how often or by how much it was above.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from fieldtl.errors import InputError
from fieldtl.noise.record import NoiseRecord
from fieldtl.validate import NAME_CHARS, echo

WHO_1999 = "WHO Guidelines for Community Noise (1999)"
METRICS = ("night_laeq", "event_lafmax", "interval_laeq")


@dataclass(frozen=True, slots=True)
class ReferenceLine:
    """A named level: ``metric`` says what it is compared with (night LAeq over each night period,
    the LAFmax of single events, or the LAeq of each interval)."""

    name: str
    metric: str
    level_db: float


# Bedroom at night, from memory (check the guideline text): LAeq 30 dB over the night and LAFmax
# 45 dB for single sound events. Client-facing outputs name only the guideline.
WHO_BEDROOM_NIGHT = (ReferenceLine(f"{WHO_1999}: bedroom at night, LAeq", "night_laeq", 30.0),
                     ReferenceLine(f"{WHO_1999}: bedroom at night, single events LAFmax", "event_lafmax", 45.0))


@dataclass(frozen=True, slots=True)
class Comparison:
    line: ReferenceLine
    compared: int          # nights, events or intervals looked at
    above: int             # how many of them were above the line
    highest_db: float      # the highest value compared
    text: str


def reference_line(name: str, metric: str, level_db: float) -> ReferenceLine:
    """A user's local limit, checked."""
    name = " ".join(str(name).split())
    if not name or len(name) > NAME_CHARS:
        raise InputError(f"limit name must be 1 to {NAME_CHARS} characters, got {echo(name)}")
    if metric not in METRICS:
        raise InputError(f"limit {echo(name)}: compare with one of {', '.join(METRICS)}, got {echo(metric)}")
    if not (isinstance(level_db, (int, float)) and math.isfinite(level_db) and 0 <= level_db <= 140):
        raise InputError(f"limit {echo(name)}: level must be 0 to 140 dB, got {echo(level_db)}")
    return ReferenceLine(name, metric, float(level_db))


def compare(record: NoiseRecord, lines: tuple[ReferenceLine, ...]) -> tuple[Comparison, ...]:
    """Each line against the record; an uncalibrated record gives no comparison (levels in dB re
    full scale cannot be set against sound pressure levels)."""
    if not record.calibrated:
        return tuple(Comparison(line, 0, 0, math.nan, f"{line.name} {line.level_db:g} dB: not compared, the "
                                "recording is not calibrated") for line in lines)
    out = []
    for line in lines:
        if line.metric == "night_laeq":
            values = [p.levels.laeq_db for p in record.periods if p.night]
            what = "night period"
        elif line.metric == "event_lafmax":
            values = [e.lafmax_db for e in record.events]
            what = "event"
        else:
            values = [i.laeq_db for i in record.intervals]
            what = "interval"
        values = [v for v in values if math.isfinite(v)]
        above = sum(1 for v in values if v > line.level_db)
        highest = max(values) if values else math.nan
        text = (f"{line.name} {line.level_db:g} dB: {above} of {len(values)} {what}{'s' if len(values) != 1 else ''} "
                f"above" + (f" (highest {highest:.1f} dB)" if values else ""))
        out.append(Comparison(line, len(values), above, highest, text))
    return tuple(out)
