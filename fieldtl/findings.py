"""Measurement-quality findings: stable codes, never exceptions."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

Severity = Literal["info", "warning", "error"]


@dataclass(frozen=True, slots=True)
class Finding:
    """One quality observation about a measurement.

    ``code`` is stable (tests, JSON and translations key on it); ``message`` says what was seen,
    ``action`` what to redo on site; ``clause`` names the rule behind it, with "(from memory)" or
    "(common practice)" where it is not read from a standard.
    """

    code: str
    severity: Severity
    message: str
    action: str = ""
    band_hz: float | None = None
    clause: str = ""

    def as_json(self) -> dict[str, object]:
        """The dictionary written under "warnings" in every JSON output."""
        return {"code": self.code, "severity": self.severity, "band_hz": self.band_hz,
                "message": self.message, "action": self.action}
