"""How the `fieldtl` commands write what they found: findings, JSON and text files, a progress bar."""

from __future__ import annotations

import math
import os
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from fieldtl.errors import InputError

PROGRESS_MIN_S = 20.0   # show a progress bar for recordings at least this long, in a terminal


def frequencies(nominal_hz: Sequence[float]) -> list[float | int]:
    from fieldtl.report.export import json_number
    return [json_number(f) for f in nominal_hz]


def rounded(value: float, digits: int) -> float | None:
    return round(value, digits) if math.isfinite(value) else None


def print_findings(findings: Sequence[Any]) -> None:
    for finding in findings:
        band = "" if finding.band_hz is None else f" [{finding.band_hz:g} Hz]"
        print(f"{finding.severity.upper()} {finding.code}{band}: {finding.message}")


def write_json(path: Path, document: dict[str, Any]) -> None:
    from fieldtl.report.export import json_text
    write_text(path, json_text(document))


def write_text(path: Path, text: str) -> None:
    try:
        path.write_text(text, encoding="utf-8")
    except BrokenPipeError:              # output piped into `head` and closed: not an error of ours
        sys.stdout = open(os.devnull, "w")  # noqa: SIM115 - silence the flush at interpreter exit
    except OSError as exc:
        raise InputError(f"{path.name}: cannot write ({exc.strerror or exc})") from None


class ProgressBar:
    """A one-line progress bar on stderr for long jobs in a terminal; a no-op otherwise."""

    def __init__(self, name: str, duration_s: float) -> None:
        self._name = name
        self._active = sys.stderr.isatty() and duration_s >= PROGRESS_MIN_S

    def __enter__(self) -> Callable[..., None] | None:
        return self._update if self._active else None

    def _update(self, *progress: Any) -> None:
        """Called as (fraction) for one recording or (take name, fraction) for a survey."""
        name, done = (self._name, progress[0]) if len(progress) == 1 else progress
        filled = int(30 * done)
        sys.stderr.write(f"\r{name[:30]:<30} [{'#' * filled}{'.' * (30 - filled)}] {done:4.0%}")
        sys.stderr.flush()

    def __exit__(self, *exc: object) -> None:
        if self._active:
            sys.stderr.write("\n")
