"""Reading the project's TOML files (survey, construction) with one-line errors naming the file."""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

from fieldtl.errors import InputError


def read_toml_file(path: str | Path, *, what: str) -> dict[str, Any]:
    """The parsed file; InputError "<name>: <what> not found / not a text file / not valid TOML"."""
    file = Path(path)
    if not file.is_file():
        raise InputError(f"{file.name}: {what} not found ({file})")
    try:
        return tomllib.loads(file.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise InputError(f"{file.name}: not a text file") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{file.name}: not valid TOML ({exc})") from None
