"""Seeded malformed inputs for the `fieldtl` command, and a runner that classifies each outcome.

Used by tests/test_fuzz.py (a few hundred cases, fixed seed) and benchmarks/fuzz.py (thousands).
Each case writes its files into a folder and returns the argv for ``fieldtl.cli.main``. A case may
happen to be valid (a mutation that changed nothing that matters): exit 0 is then fine. What is
never fine: an exception escaping ``main``, exit 70 (internal error), or exit 2 with anything but
exactly one line ``fieldtl: ...`` on stderr.
"""

from __future__ import annotations

import contextlib
import io
import random
import re
import struct
import traceback
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import soundfile

from fieldtl.cli import main

_LONG_ECHO = re.compile(r"(.)\1{80,}|(clap){21,}|(a[\n ]b){27,}")   # the long inputs of the cases below
BANDS_HZ = (100, 125, 160, 200, 250, 315, 400, 500, 630, 800, 1000, 1250, 1600, 2000, 2500, 3150)


def good_csv() -> str:
    header = "frequency_hz,L1_s1_a,L1_s1_b,L2_s1_a,L2_s1_b,B,T_1,T_2"
    rows = [f"{f},92.0,91.5,40.0,41.0,20.0,0.5,0.55" for f in BANDS_HZ]
    return "\n".join([header, *rows]) + "\n"


def good_survey(csv_name: str = "slm.csv") -> str:
    return ('[test]\ntitle = "Invented pasted levels"\ntype = "airborne"\nseparating_area_m2 = 12.0\n'
            'receiving_volume_m3 = 36.0\nsource_volume_m3 = 40.0\nrequirement = "DnT,w + Ctr >= 45"\n'
            f'band_levels = "{csv_name}"\n')


GOOD_CONSTRUCTION = ('name = "invented wall"\n[[leaf]]\nlayers = ["gypsum_board:12.5", "gypsum_board:12.5"]\n'
                     '[[leaf]]\nlayers = ["gypsum_board:12.5"]\n[cavity]\ndepth_mm = 75\nfill = "full"\n'
                     'studs = "timber"\nstud_spacing_mm = 600\n')

# TOML values of every type, including the awkward ones.
TOML_VALUES = ("0", "-0", "1e400", "-1e400", "inf", "-inf", "nan", "1e308", "1e-320", "9223372036854775807",
               "-9223372036854775808", "true", "false", "[]", "[1, 2]", "{}", "{a = 1}", '""', '" "',
               '"x"', '"' + "A" * 5000 + '"', '"line\\nbreak"', '"\\u0000"', '"\\u202e"', "1979-05-27",
               "07:32:00", "[[1]]", "0.5", "500", "36.0", "-3", "1_000", "0x10", '"36"', '"airborne"',
               '"DnT,w + Ctr >= 45"', '"DnT,w >= 1e400"', '"R\'w + C >= 45"', '"slm.csv"', '"../../etc/passwd"')
CSV_CELLS = ("", "0.5", "500", "0.09", "10.01", "-21", "160.1", "1e400", "nan", "inf", "-inf", "x", "1,5",
             "1" * 200000, "9" * 5000, "\x00", '"', '"a""b"', "\u00e9", " 92 ", "92.0.1", "0x10", "1_0")
CSV_FREQUENCIES = ("100", "99", "1e400", "nan", "", "20000", "25000", "-100", "100.0", "1000", "abc")
CSV_HEADERS = ("L1", "L2", "T", "B", "Li", "X", "L1_s0", "L1_s99", "L1_s100", "L1_s" + "9" * 5000, "T_é",
               "", "L1_s1_a b", "L2c", "frequency_hz")


def _choice(rng: random.Random, options):
    return options[rng.randrange(len(options))]


def _mutate_toml(rng: random.Random, text: str) -> str:
    lines = text.splitlines()
    kind = rng.randrange(8)
    if kind <= 2:                                    # a value replaced by one of another type
        candidates = [i for i, line in enumerate(lines) if " = " in line]
        i = _choice(rng, candidates)
        key = lines[i].split(" = ")[0]
        lines[i] = f"{key} = {_choice(rng, TOML_VALUES)}"
    elif kind == 3:                                  # a key dropped
        candidates = [i for i, line in enumerate(lines) if " = " in line]
        del lines[_choice(rng, candidates)]
    elif kind == 4:                                  # an unknown or duplicated key
        lines.insert(rng.randrange(len(lines) + 1), f"{_choice(rng, ('colour', 'title', 'x' * 300))} = 1")
    elif kind == 5:                                  # deep nesting
        depth = _choice(rng, (50, 500, 5000, 100000))
        lines.append("deep = " + "[" * depth + "]" * depth)
    elif kind == 6:                                  # truncated
        return text[: rng.randrange(len(text))]
    else:                                            # a table header broken or repeated
        lines.insert(rng.randrange(len(lines) + 1), _choice(rng, ("[test]", "[[leaf]]", "[cavity", "[[recording]]",
                                                                  "[calibration]", "[a.b.c]")))
    return "\n".join(lines) + "\n"


def _encode(rng: random.Random, text: str) -> bytes:
    encoding = _choice(rng, ("utf-8", "utf-8-sig", "utf-16", "utf-16-le", "utf-16-be", "cp1252", "latin-1",
                             "utf-32", "garbage"))
    if encoding == "garbage":
        return bytes(rng.randrange(256) for _ in range(rng.randrange(1, 400)))
    return text.encode(encoding, errors="replace")


def _mutate_csv(rng: random.Random, text: str) -> str:
    rows = [r.split(",") for r in text.splitlines()]
    for _ in range(rng.randrange(1, 4)):
        kind = rng.randrange(7)
        r = rng.randrange(len(rows))
        c = rng.randrange(len(rows[r]))
        if kind <= 2 and r > 0 and c > 0:
            rows[r][c] = _choice(rng, CSV_CELLS)
        elif kind == 3 and r > 0:
            rows[r][0] = _choice(rng, CSV_FREQUENCIES)
        elif kind == 4:
            rows[0][max(c, 1)] = _choice(rng, CSV_HEADERS)
        elif kind == 5:
            del rows[r][c:]
        else:
            separator = _choice(rng, (";", "\t", ","))
            return "\n".join(separator.join(row) for row in rows) + _choice(rng, ("\n", "\r\n", ""))
    return "\n".join(",".join(row) for row in rows) + "\n"


def case_csv(rng: random.Random, folder: Path) -> list[str]:
    text = _mutate_csv(rng, good_csv())
    data = _encode(rng, text) if rng.random() < 0.5 else text.encode()
    (folder / "slm.csv").write_bytes(data)
    (folder / "survey.toml").write_text(good_survey())
    return ["assess", str(folder / "survey.toml")]


def case_survey(rng: random.Random, folder: Path) -> list[str]:
    (folder / "slm.csv").write_text(good_csv())
    text = _mutate_toml(rng, good_survey())
    data = _encode(rng, text) if rng.random() < 0.3 else text.encode()
    (folder / "survey.toml").write_bytes(data)
    return ["assess", str(folder / "survey.toml")]


def case_construction(rng: random.Random, folder: Path) -> list[str]:
    text = _mutate_toml(rng, GOOD_CONSTRUCTION)
    if rng.random() < 0.3:
        text = text.replace("12.5", _choice(rng, ("0", "1e308", "-1", "nan", "1e400", "0.05", "x", "")))
    data = _encode(rng, text) if rng.random() < 0.3 else text.encode()
    (folder / "wall.toml").write_bytes(data)
    return ["predict", str(folder / "wall.toml")]


def case_layers(rng: random.Random, folder: Path) -> list[str]:
    argv = ["predict"]
    for _ in range(rng.randrange(1, 4)):
        material = _choice(rng, ("concrete_dense", "gypsum_board", "nope", "", "steel", "a:b"))
        thickness = _choice(rng, ("100", "0", "1e308", "-5", "nan", "inf", "0.1", "1000", "1000.1", "x", "",
                                  "1" * 500))
        argv += ["--layer", f"{material}:{thickness}" if rng.random() < 0.9 else material]
    return argv


_AUDIO: dict[str, bytes] = {}


def _audio_bytes(kind: str) -> bytes:
    if kind not in _AUDIO:
        buffer = io.BytesIO()
        rng = np.random.default_rng(0)
        fmt, subtype = {"wav16": ("WAV", "PCM_16"), "wavf": ("WAV", "FLOAT"), "flac": ("FLAC", "PCM_16")}[kind]
        soundfile.write(buffer, 0.1 * rng.standard_normal(8000), 8000, format=fmt, subtype=subtype)
        _AUDIO[kind] = buffer.getvalue()
    return _AUDIO[kind]


def case_audio(rng: random.Random, folder: Path) -> list[str]:
    suffix, data = _choice(rng, ((".wav", "wav16"), (".wav", "wavf"), (".flac", "flac")))
    raw = bytearray(_audio_bytes(data))
    kind = rng.randrange(5)
    if kind == 0:
        raw = raw[: rng.randrange(len(raw))]
    elif kind == 1:
        for _ in range(rng.randrange(1, 8)):
            raw[rng.randrange(min(64, len(raw)))] = rng.randrange(256)
    elif kind == 2 and suffix == ".wav":        # header fields set to extremes
        offset = _choice(rng, (4, 22, 24, 28, 32, 34, 40))
        raw[offset:offset + 4] = struct.pack("<I", _choice(rng, (0, 1, 0xFFFFFFFF, 0x7FFFFFFF, 7)))
    elif kind == 3:
        raw = bytearray(bytes(rng.randrange(256) for _ in range(rng.randrange(0, 200))))
    else:
        raw = raw[:44] + bytes(rng.randrange(256) for _ in range(rng.randrange(0, 400)))
    path = folder / f"take{suffix}"
    path.write_bytes(bytes(raw))
    command = _choice(rng, (["bands"], ["decay", "--method", "impulse"], ["decay", "--method", "interrupted"]))
    return [command[0], str(path), *command[1:]]


_NUMBERS = ("-1", "0", "1e-9", "0.5", "1e400", "-1e400", "nan", "inf", "1e9", "700", "abc", "", "1" * 300)


def case_options(rng: random.Random, folder: Path) -> list[str]:
    kind = rng.randrange(5)
    if kind <= 1:
        argv = ["signal", _choice(rng, ("pink", "white", "sweep", "brown")),
                str(folder / _choice(rng, ("s.wav", "s.mp3", "missing/s.wav", "", "s\nx.wav")))]
        for option, values in (("--seconds", _NUMBERS), ("--sample-rate-hz", ("0", "-48000", "7999", "384001",
                                                                               "10**9", "48000", "abc", "1e9")),
                               ("--seed", ("-1", "0", "2", "99999999999999999999999", "x")),
                               ("--level-dbfs", ("-18", "0", "nan", "-1e400", "20")),
                               ("--low-hz", _NUMBERS), ("--high-hz", _NUMBERS), ("--fade-s", _NUMBERS)):
            if rng.random() < 0.35:
                argv += [option, _choice(rng, values)]
        if "--seconds" not in argv:
            argv += ["--seconds", _choice(rng, ("0.2", "1e9", "-3"))]
        return argv
    if kind == 2:
        (folder / "slm.csv").write_text(good_csv())
        (folder / "survey.toml").write_text(good_survey())
        option = _choice(rng, ("--plot", "--json", "--csv"))
        name = _choice(rng, ("r.xyz", "r", "r.pgf", "r.PNG.exe", "missing/r.png", "r.png/", "\x00.png", "r\n.png",
                             "x" * 300 + ".json", "", "."))
        return ["assess", str(folder / "survey.toml"), option, str(folder / name) if name else name]
    if kind == 3:
        return _choice(rng, (["decay"], ["bands"], ["assess"], ["nope"], [], ["--bogus"], ["bands", "x.wav", "--channel",
                             _choice(rng, ("0", "-1", "x", "99999999999999999999", "1025"))],
                             ["decay", "x.wav", "--method", "clap" * 50], ["predict"], ["demo", "--out", "\x00"],
                             ["bands", str(folder / ("a\nb" * 60 + ".wav"))]))
    wav = folder / "ir.wav"
    soundfile.write(str(wav), np.zeros(8000), 8000)
    return ["decay", str(wav), "--method", "sweep", "--sweep-start-hz", _choice(rng, _NUMBERS),
            "--sweep-stop-hz", _choice(rng, ("4000", "1e9", "nan")), "--sweep-length-s", _choice(rng, _NUMBERS)]


KINDS: dict[str, Callable[[random.Random, Path], list[str]]] = {
    "csv": case_csv, "survey": case_survey, "construction": case_construction, "layers": case_layers,
    "audio": case_audio, "options": case_options,
}


@dataclass(frozen=True)
class Outcome:
    kind: str
    argv: tuple[str, ...]
    code: int | None
    stderr: str
    problem: str | None        # None: fine; else what went wrong
    cause: str | None          # for a traceback: exception type and the innermost frame of fieldtl


def run_case(kind: str, argv: list[str]) -> Outcome:
    out, err = io.StringIO(), io.StringIO()
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = main(argv)
    except BaseException as exc:  # noqa: BLE001 - the whole point: anything escaping main is a finding
        frames = [f for f in traceback.extract_tb(exc.__traceback__) if "fieldtl" in f.filename]
        where = f"{Path(frames[-1].filename).name}:{frames[-1].lineno}" if frames else "?"
        return Outcome(kind, tuple(argv), None, err.getvalue(), "traceback", f"{type(exc).__name__} at {where}")
    stderr = err.getvalue()
    problem = None
    if code == 70:
        problem = "internal error"
    elif code not in (0, 2):
        problem = f"exit {code}"
    elif code == 2 and (stderr.count("\n") != 1 or not stderr.startswith("fieldtl: ") or len(stderr) > 500):
        problem = "not one short line"
    elif _LONG_ECHO.search(stderr):
        problem = "echoes more than 80 characters of input"
    cause = stderr.strip()[:120] if problem else None
    return Outcome(kind, tuple(argv), code, stderr, problem, cause)


def cases(seed: int, count: int, folder: Path) -> Iterator[tuple[str, list[str]]]:
    """``count`` cases spread over the kinds, each in its own sub-folder of ``folder``."""
    rng = random.Random(seed)
    names = sorted(KINDS)
    for i in range(count):
        kind = names[i % len(names)]
        case_folder = folder / f"{i:05d}"
        case_folder.mkdir(parents=True, exist_ok=True)
        yield kind, KINDS[kind](rng, case_folder)
