"""Words the Results page shows: one line per group of findings, and which groups to redo on site."""

from __future__ import annotations

from collections.abc import Collection, Sequence

from fieldtl.naming import FindingGroup
from fieldtl.report.export import json_number
from fieldtl.ui import common

SEVERITY_WORDS = {"error": "Error", "warning": "Check", "info": "Note"}


def site_list(groups: Sequence[FindingGroup], not_on_site: Collection[str]) -> list[FindingGroup]:
    """Groups a tester can still act on before leaving: errors and warnings with an action, except
    the construction check's notes (about the element, not the measurement)."""
    return [g for g in groups if g.first.severity in ("error", "warning") and g.first.action
            and g.first.code not in not_on_site]


def _seen(group: FindingGroup) -> str:
    """What was seen, without the take's name, with the other bands of the group (markdown-escaped)."""
    message = group.first.message
    if group.take is not None:
        message = message[len(group.take):].lstrip(" ,:")
    if len(group.bands_hz) > 1:
        message += f" (also at {len(group.bands_hz) - 1} more band{'s' if len(group.bands_hz) > 2 else ''}: " \
                   + ", ".join(f"{json_number(b)}" for b in group.bands_hz[1:]) + " Hz)"
    return common.md(message)


def finding_line(group: FindingGroup, *, with_action: bool = True) -> str:
    """One markdown line: severity in words, the take (bold), what was seen, the bands, what to do."""
    finding = group.first
    where = f"**{common.md(group.take)}**: " if group.take else ""
    line = f"{SEVERITY_WORDS.get(finding.severity, 'Note')}: {where}{_seen(group)}"
    if with_action and finding.action:
        line += f" *What to do:* {common.md(finding.action)}"
    return line


def site_line(group: FindingGroup) -> str:
    """One line of the "before you leave the site" list: what to redo and where, why, and how."""
    what = f"**Redo {common.md(group.take)}**" if group.take else "**Check the test as a whole**"
    how = f" *How:* {common.md(group.first.action)}" if group.first.action else ""
    return f"{what}. *Why:* {_seen(group)}.{how}"
