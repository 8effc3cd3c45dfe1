"""Starting the `fieldtl` command stays cheap: importing it and building its parser load none of the
heavy libraries a command may need later (issue 10: scipy.signal alone takes more than half a
second to import, matplotlib, the PostgreSQL driver and Streamlit more).

Each check runs in a fresh interpreter and reads ``sys.modules``, so it fails as soon as any module
on the way adds an eager import of one of them. Not timed: what is loaded is checked, not how long
it took.
"""

import json
import subprocess
import sys

import pytest

HEAVY = ("scipy.signal", "scipy.stats", "matplotlib", "psycopg", "streamlit", "fieldtl.store")


def loaded_after(code: str) -> set[str]:
    """The HEAVY modules present in ``sys.modules`` after running ``code`` in a new interpreter."""
    probe = (f"{code}\nimport json, sys\n"
             f"print(json.dumps(sorted(m for m in {list(HEAVY)!r} if m in sys.modules)))")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    return set(json.loads(done.stdout.strip().splitlines()[-1]))


def test_importing_the_cli_and_building_its_parser_loads_nothing_heavy():
    assert loaded_after("import fieldtl.cli as cli\ncli._parser()") == set()


@pytest.mark.parametrize("argv", [["--help"], ["assess", "--help"], ["team", "--help"], ["record", "--help"]])
def test_help_loads_nothing_heavy(argv):
    code = f"import contextlib, io, fieldtl.cli as cli\nwith contextlib.redirect_stdout(io.StringIO()):\n    cli.main({argv!r})"
    assert loaded_after(code) == set()


def test_the_probe_sees_an_eager_import():
    # the check can fail: a module that imports scipy.signal at the top is seen
    assert loaded_after("import fieldtl.analysis.filterbank") >= {"scipy.signal"}
