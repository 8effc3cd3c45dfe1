"""What the `fieldtl` command checks before it starts any work, and how it reports a problem.

Options with a range, input files that must exist, output paths that must be writable (and a
chart suffix matplotlib can write), all refused in one line `fieldtl: <name>: <problem>`; argparse's
own errors are one line too. Messages echo at most 80 characters of any input (fieldtl.validate).
"""

from __future__ import annotations

import argparse
import os
import re
import sys
from collections.abc import Sequence
from pathlib import Path

from fieldtl.errors import InputError
from fieldtl.validate import CHANNEL, clean, echo, file_label, number

EXIT_BAD_INPUT = 2
MESSAGE_CHARS = 400     # longest message printed (inputs inside it are cut to 80 characters each)
# Chart formats matplotlib writes without extra programs (pgf needs LaTeX; gif and avif need
# optional image plugins), checked against matplotlib's own list before the analysis starts.
PLOT_SUFFIXES = ("png", "pdf", "svg", "svgz", "jpg", "jpeg", "tif", "tiff", "webp", "eps", "ps")
LEVEL_DBFS = (-120.0, 0.0)  # RMS level of a generated test signal


def say(message: str) -> None:
    """One line on stderr, whatever the message holds (control characters and newlines removed)."""
    print(f"fieldtl: {clean(message, MESSAGE_CHARS)}", file=sys.stderr)


class OneLineParser(argparse.ArgumentParser):
    """argparse with one-line errors: no usage block, inputs cut to 80 characters."""

    def error(self, message: str) -> None:  # type: ignore[override]
        short = re.sub(r"'([^']{80})[^']*'", lambda m: f"'{m[1][:79]}…'", message)
        say(f"{self.prog.removeprefix('fieldtl').strip() or 'fieldtl'}: {short} (see --help)")
        raise SystemExit(EXIT_BAD_INPUT)


def channel_index(channel: int, file: Path) -> int:
    if not CHANNEL[0] <= channel <= CHANNEL[1]:
        raise InputError(f"{file_label(file)}: --channel counts from 1 to {CHANNEL[1]}, got {echo(channel)}")
    return channel - 1


def option_number(value: float, option: str, bounds: tuple[float, float], unit: str, *,
                  integer: bool = False) -> float:
    return number(value, option, low=bounds[0], high=bounds[1], unit=unit, integer=integer)


def check_paths(args: argparse.Namespace) -> None:
    """Every path option is a usable name (no NUL character: the OS refuses those with a ValueError),
    and every input file exists, before any work starts."""
    for value in vars(args).values():
        for path in value if isinstance(value, list) else [value]:
            if isinstance(path, Path) and "\x00" in str(path):
                raise InputError(f"{file_label(str(path).replace(chr(0), ' '))}: a file name cannot hold a NUL character")
    for key, what in INPUT_FILES.items():
        path = getattr(args, key, None)
        if isinstance(path, Path) and not is_file(path):
            raise InputError(f"{file_label(path)}: {what} not found")


INPUT_FILES = {"file": "file", "survey": "survey file", "construction": "construction file",
                "calibration": "calibration recording"}


def is_file(path: Path) -> bool:
    try:
        return path.is_file()
    except OSError:                      # e.g. a name longer than the file system allows
        return False


def check_output(path: Path | None, option: str, *, suffixes: Sequence[str] = ()) -> None:
    """Before any work: the output's folder exists and is writable, the name is not a folder, the suffix fits."""
    if path is None:
        return
    name = file_label(path)
    if suffixes and path.suffix.lower().lstrip(".") not in suffixes:
        raise InputError(f"{name}: {option} must end in one of .{', .'.join(suffixes)}")
    folder = path.parent
    if not folder.is_dir():
        raise InputError(f"{name}: cannot write {option}: the folder {clean(str(folder))!r} does not exist")
    if path.is_dir():
        raise InputError(f"{name}: cannot write {option}: that is a folder")
    if not os.access(folder, os.W_OK):
        raise InputError(f"{name}: cannot write {option}: the folder is not writable")


def plot_suffixes() -> tuple[str, ...]:
    from matplotlib.backend_bases import FigureCanvasBase
    supported = FigureCanvasBase.get_supported_filetypes()
    return tuple(s for s in PLOT_SUFFIXES if s in supported)


def input_name(args: argparse.Namespace) -> str:
    """The main input of the command, for the internal-error line."""
    for key in ("file", "survey", "construction", "out"):
        value = getattr(args, key, None)
        if isinstance(value, Path):
            return file_label(value)
    return getattr(args, "command", None) or "fieldtl"
