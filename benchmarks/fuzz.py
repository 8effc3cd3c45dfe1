"""A bigger fuzz run of the `fieldtl` command than CI's tests/test_fuzz.py (same case generator).

    .venv/bin/python benchmarks/fuzz.py [CASES] [SEED]      # default 3000 cases, seed 1

Prints one line per distinct problem and ends with
"cases <n> exit0 <n> exit2 <n> tracebacks <n> internal_errors <n> bad_messages <n> long_echoes <n>
distinct_causes <n>" (a cause: exception type and innermost fieldtl line, or the message).
"""

from __future__ import annotations

import collections
import os
import sys
import tempfile
import warnings
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests" / "fuzz"))

from cases import cases, run_case  # noqa: E402


def main(count: int, seed: int) -> None:
    warnings.simplefilter("ignore")
    codes: collections.Counter[object] = collections.Counter()
    problems: collections.Counter[str] = collections.Counter()
    causes: dict[tuple[str, str], tuple[str, ...]] = {}
    with tempfile.TemporaryDirectory() as folder:
        os.environ["FIELDTL_DATA_DIR"] = str(Path(folder) / "store")     # never the user's own store
        for kind, argv in cases(seed, count, Path(folder)):
            outcome = run_case(kind, argv)
            codes[outcome.code] += 1
            if outcome.problem:
                problems[outcome.problem] += 1
                causes.setdefault((outcome.problem, outcome.cause or ""), outcome.argv)
    for (problem, cause), argv in sorted(causes.items()):
        print(f"{problem}: {cause}  e.g. {' '.join(a[:40] for a in argv)[:200]!r}")
    print(f"cases {count} exit0 {codes[0]} exit2 {codes[2]} tracebacks {problems['traceback']} "
          f"internal_errors {problems['internal error']} bad_messages {problems['not one short line']} "
          f"long_echoes {problems['echoes more than 80 characters of input']} "
          f"distinct_causes {len(causes)}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 3000, int(sys.argv[2]) if len(sys.argv) > 2 else 1)
