"""Reading the project's text files (survey, construction, band levels) with one-line errors naming the file.

Spreadsheets and editors save text in several encodings; :func:`decode_text` accepts UTF-8
(with or without a byte-order mark), UTF-16 with a byte-order mark (little or big endian),
UTF-16 without one when the NUL pattern of mostly-ASCII text shows its byte order, and
Windows-1252. Anything else is refused in one line.
"""

from __future__ import annotations

import codecs
import tomllib
from pathlib import Path
from typing import Any

from fieldtl.errors import InputError
from fieldtl.validate import MAX_FILE_BYTES, clean, file_label


def decode_text(data: bytes, *, source_name: str) -> str:
    """The text of a file's bytes (encodings in the module docstring), without any byte-order mark."""
    if data.startswith(codecs.BOM_UTF8):
        return _decode(data[len(codecs.BOM_UTF8):], "utf-8", source_name)
    for bom, encoding in ((codecs.BOM_UTF16_LE, "utf-16-le"), (codecs.BOM_UTF16_BE, "utf-16-be")):
        if data.startswith(bom):
            return _decode(data[len(bom):], encoding, source_name)
    if b"\x00" in data:
        encoding = _utf16_without_bom(data)
        if encoding is None:
            raise InputError(f"{source_name}: not a text file (holds NUL bytes)")
        return _decode(data, encoding, source_name)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        pass
    try:
        return data.decode("cp1252")     # a spreadsheet's "CSV" on Windows
    except UnicodeDecodeError:
        raise InputError(f"{source_name}: not a text file in UTF-8, UTF-16 or Windows-1252") from None


def read_text_file(path: str | Path, *, what: str, max_bytes: int = MAX_FILE_BYTES) -> str:
    """A text file's content; InputError "<name>: <what> not found / too large / not a text file"."""
    file = Path(path)
    name = file_label(file)
    if "\x00" in str(file):
        raise InputError(f"{name}: {what} name holds a NUL character")
    try:
        found = file.is_file()
    except OSError:                      # e.g. a name too long for the file system
        found = False
    if not found:
        raise InputError(f"{name}: {what} not found ({clean(str(file))})")
    try:
        with file.open("rb") as stream:
            data = stream.read(max_bytes + 1)
    except OSError as exc:
        raise InputError(f"{name}: cannot read the {what} ({exc.strerror or type(exc).__name__})") from None
    if len(data) > max_bytes:
        raise InputError(f"{name}: {what} is larger than {max_bytes:,} bytes")
    return decode_text(data, source_name=name)


def read_toml_file(path: str | Path, *, what: str) -> dict[str, Any]:
    """The parsed file; InputError "<name>: <what> not found / not a text file / not valid TOML"."""
    text = read_text_file(path, what=what)
    return parse_toml(text, source_name=file_label(path))


def parse_toml(text: str, *, source_name: str) -> dict[str, Any]:
    """Parsed TOML text; InputError for invalid or absurdly nested text (tomllib recurses per level)."""
    try:
        return tomllib.loads(text.removeprefix("\ufeff"))
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{source_name}: not valid TOML ({clean(str(exc))})") from None
    except RecursionError:
        raise InputError(f"{source_name}: not valid TOML (arrays or tables nested too deeply)") from None


def _decode(data: bytes, encoding: str, source_name: str) -> str:
    try:
        return data.decode(encoding)
    except UnicodeDecodeError:
        raise InputError(f"{source_name}: not valid {encoding.upper()} text") from None


def _utf16_without_bom(data: bytes) -> str | None:
    """UTF-16 LE/BE when NULs sit on one side of nearly every byte pair (mostly-ASCII text), else None."""
    if len(data) % 2:
        return None
    pairs = len(data) // 2
    odd_nul, even_nul = data[1::2].count(0), data[0::2].count(0)
    if odd_nul >= 0.9 * pairs and even_nul == 0:
        return "utf-16-le"
    if even_nul >= 0.9 * pairs and odd_nul == 0:
        return "utf-16-be"
    return None
