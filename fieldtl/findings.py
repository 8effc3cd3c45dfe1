"""Measurement-quality findings: stable codes, never exceptions; and the mark of an unconfirmed value.

Texts a client reads (findings, rules applied, notes) carry no internal notes: where a value is the
tool's default rather than confirmed from the standard's text, the core says so as data, with
:func:`unconfirmed` for a text or ``Finding.unconfirmed`` for a finding; the provenance for developers
("from memory", the facts sheet's section) stays in the code comment beside the line.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

Severity = Literal["info", "warning", "error"]

UNCONFIRMED_MARK = "†"   # the outputs explain it once (fieldtl.report.client.EXPLANATION)


def unconfirmed(text: str) -> str:
    """``text`` marked with :data:`UNCONFIRMED_MARK`: the value it states is the tool's default,
    not confirmed from the standard's text."""
    return f"{text} {UNCONFIRMED_MARK}"


@dataclass(frozen=True, slots=True)
class Finding:
    """One quality observation about a measurement.

    ``code`` is stable (tests, JSON and translations key on it); ``message`` says what was seen,
    ``action`` what to redo on site; ``clause`` names the rule behind it ("common practice" where it
    is not a standard's rule); ``unconfirmed`` is True where that rule's value is the tool's default,
    not confirmed from the standard's text. No internal notes in any of these texts.
    """

    code: str
    severity: Severity
    message: str
    action: str = ""
    band_hz: float | None = None
    clause: str = ""
    unconfirmed: bool = False

    def as_json(self) -> dict[str, object]:
        """The dictionary written under "warnings" in every JSON output."""
        return {"code": self.code, "severity": self.severity, "band_hz": self.band_hz,
                "message": self.message, "action": self.action,
                # the rule behind it, and whether that rule's value is the tool's default (not confirmed
                # from the standard's text)
                "clause": self.clause, "tool_default": self.unconfirmed}
