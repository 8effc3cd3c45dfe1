"""One checker for what is typed, pasted or read from a file: keys, numbers in a range, texts.

Every check raises :class:`~fieldtl.errors.InputError` with one short line; any input echoed in
it is cut to :data:`ECHO_CHARS` characters and stripped of control characters, so no message
ever spans two lines or repeats a megabyte of garbage.

The ranges below are physical limits: a value outside them cannot be a measurement of a
building (a typing or unit slip, e.g. T in milliseconds) and is refused. Values inside them but
outside a standard's scope are not refused here; they become findings (see fieldtl.qa).
"""

from __future__ import annotations

import math
import reprlib
import unicodedata
from collections.abc import Collection, Mapping
from pathlib import PurePath
from typing import Any

from fieldtl.errors import InputError

ECHO_CHARS = 80                  # characters of any input repeated in a message
NAME_CHARS = 120                 # titles, names, labels, file names inside a file
NOTE_CHARS = 2000                # descriptions and notes
REQUIREMENT_CHARS = 80           # "DnT,w + Ctr >= 45" and its kin

# Physical ranges (common practice: wide enough for any real building element, narrow enough
# to catch a unit slip). Inclusive at both ends unless said otherwise.
VOLUME_M3 = (1.0, 100_000.0)             # a cupboard to a concert hall
AREA_M2 = (0.1, 10_000.0)                # a hatch to a hall floor
LEVEL_DB = (-20.0, 160.0)                # band sound pressure levels of a field test
REVERBERATION_S = (0.1, 10.0)            # T of rooms; 500 here is milliseconds typed as seconds
CALIBRATOR_DB = (60.0, 150.0)            # acoustic calibrators (IEC 60942 classes, from memory)
LAB_RATING_DB = (1.0, 100.0)             # a laboratory Rw of any real element
POSITION = (1, 99)                       # loudspeaker or tapping-machine position number
CHANNEL = (1, 1024)                      # 1-based channel of a recording
SAMPLE_RATE_HZ = (8_000, 384_000)        # what recorders and sound cards offer
SWEEP_HZ = (1.0, 192_000.0)              # sweep start and stop (also below half the sample rate)
SWEEP_S = (0.1, 600.0)                   # a played sweep
LAYER_MM = (0.1, 1000.0)                 # one layer of a wall or floor
CAVITY_MM = (1.0, 2000.0)                # cavity between two leaves
STUD_SPACING_MM = (100.0, 2000.0)        # stud or joist centres
DENSITY_KG_M3 = (1.0, 25_000.0)          # the densest metals are below 23 000 kg/m3
YOUNGS_MODULUS_GPA = (0.001, 1200.0)     # soft boards to diamond
LOSS_FACTOR = (1e-4, 1.0)                # internal loss factor; 1 itself is excluded
POISSON_RATIO = (0.0, 0.5)               # isotropic solids; 0.5 itself is excluded
# Findings (fieldtl.qa) about input inside the physical range but outside a standard's scope:
# severity "error", and the verdict is withheld while one is present (fieldtl.assess).
VERDICT_BLOCKING_CODES = frozenset({"volume_out_of_scope"})
MAX_FILE_BYTES = 1_000_000               # a survey, construction or band-level file
MAX_CELL_CHARS = 64                      # one cell of a band-level file

_SHORT = reprlib.Repr()
_SHORT.maxstring = _SHORT.maxother = _SHORT.maxlong = ECHO_CHARS
_SHORT.maxlist = _SHORT.maxtuple = _SHORT.maxdict = _SHORT.maxset = 4
_SHORT.maxlevel = 2


def clean(text: str, limit: int = ECHO_CHARS) -> str:
    """``text`` without control or line-separator characters, cut to ``limit`` characters (… marks a cut)."""
    kept = "".join(c if unicodedata.category(c)[0] != "C" and c not in "\u2028\u2029" else " "
                   for c in text[: limit + 1])
    return kept if len(kept) <= limit else kept[: limit - 1] + "…"


def echo(value: Any) -> str:
    """A value as a message may show it: quoted text or a short repr, one line, at most 80 characters."""
    if isinstance(value, str):
        return f"'{clean(value, ECHO_CHARS - 2)}'"
    try:
        shown = _SHORT.repr(value)
    except Exception:  # noqa: BLE001 - a value whose repr fails is shown by its type only
        shown = f"<{type(value).__name__}>"
    return clean(shown)


def file_label(path: str | PurePath) -> str:
    """A file's name as messages show it: no directory, no control characters, at most 80 characters."""
    return clean(PurePath(path).name or str(path))


def type_name(value: Any) -> str:
    """How a message names the kind of a value: TOML's and JSON's words, not Python's."""
    if isinstance(value, bool):
        return "true/false"
    if isinstance(value, (int, float)):
        return "a number"
    if isinstance(value, str):
        return "text"
    if isinstance(value, Mapping):
        return "a table"
    if isinstance(value, (list, tuple)):
        return "a list"
    return type(value).__name__


def check_keys(table: Mapping[str, Any], allowed: Collection[str], where: str, source_name: str, *,
               required: Collection[str] = ()) -> None:
    """No key outside ``allowed`` and every key of ``required`` present."""
    unknown = sorted(set(table) - set(allowed), key=str)
    if unknown:
        raise InputError(f"{source_name}: unknown key {echo(unknown[0])} in {where} "
                         f"(allowed: {', '.join(sorted(allowed))})")
    missing = [k for k in required if k not in table]
    if missing:
        raise InputError(f"{source_name}: {where}: missing key {missing[0]!r}")


def number(value: Any, what: str, *, low: float, high: float, unit: str = "", integer: bool = False,
           low_open: bool = False, high_open: bool = False) -> float:
    """``value`` as a float if it is a number (never true/false) inside low..high, else InputError.

    ``what`` starts the message ("survey.toml: [test] receiving_volume_m3"); ``unit`` follows the
    bounds in it. ``integer`` asks for a whole number; ``low_open``/``high_open`` exclude a bound.
    """
    kind = "whole number" if integer else "number"
    span = f"{'above' if low_open else 'from'} {low:g} {'to below' if high_open else 'to'} {high:g}{unit}"
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"{what} must be a {kind} {span}, got {type_name(value)} {echo(value)}")
    if (integer and not isinstance(value, int)) or (isinstance(value, float) and not math.isfinite(value)):
        raise InputError(f"{what} must be a {kind} {span}, got {echo(value)}")
    too_low = value <= low if low_open else value < low
    too_high = value >= high if high_open else value > high
    if too_low or too_high:
        raise InputError(f"{what} must be a {kind} {span}, got {echo(value)}")
    return float(value)


def optional_number(table: Mapping[str, Any], key: str, what: str, *, low: float, high: float, unit: str = "",
                    integer: bool = False, low_open: bool = False, high_open: bool = False) -> float | None:
    """``table[key]`` checked by :func:`number`, or None when the key is absent."""
    if key not in table:
        return None
    return number(table[key], f"{what} {key}", low=low, high=high, unit=unit, integer=integer,
                  low_open=low_open, high_open=high_open)


def required_number(table: Mapping[str, Any], key: str, what: str, *, low: float, high: float, unit: str = "",
                    integer: bool = False, low_open: bool = False, high_open: bool = False) -> float:
    """``table[key]`` checked by :func:`number`; InputError if the key is absent."""
    if key not in table:
        raise InputError(f"{what} {key} is required")
    return number(table[key], f"{what} {key}", low=low, high=high, unit=unit, integer=integer,
                  low_open=low_open, high_open=high_open)


def text(value: Any, what: str, *, max_chars: int = NAME_CHARS, empty: bool = True) -> str:
    """``value`` if it is text of at most ``max_chars`` characters (and not empty unless allowed)."""
    if not isinstance(value, str):
        raise InputError(f"{what} must be text, got {type_name(value)} {echo(value)}")
    if len(value) > max_chars:
        raise InputError(f"{what} is {len(value)} characters long; at most {max_chars} are allowed")
    if not empty and not value.strip():
        raise InputError(f"{what} must not be empty")
    if "\x00" in value:
        raise InputError(f"{what} holds a NUL character")
    return value


def choice(value: Any, allowed: Collection[str], what: str) -> str:
    """``value`` if it is one of the ``allowed`` texts (a list or a table never is)."""
    if not isinstance(value, str) or value not in allowed:
        raise InputError(f"{what} must be one of {', '.join(allowed)}, got {echo(value)}")
    return value
