"""The layering is itself tested: the computation core never imports Streamlit."""

import ast
import subprocess
import sys
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "fieldtl"


def test_core_imports_without_streamlit():
    code = ("import sys, importlib, pkgutil, fieldtl\n"
            "for m in pkgutil.walk_packages(fieldtl.__path__, 'fieldtl.'):\n"
            "    if not m.name.startswith('fieldtl.ui'):\n"
            "        importlib.import_module(m.name)\n"
            "assert 'streamlit' not in sys.modules, 'a core module imported streamlit'\n")
    subprocess.run([sys.executable, "-c", code], check=True)


def test_only_the_ui_package_names_streamlit():
    offenders = []
    for path in PACKAGE.rglob("*.py"):
        if "ui" in path.relative_to(PACKAGE).parts[:1]:
            continue
        for node in ast.walk(ast.parse(path.read_text())):
            names = ([a.name for a in node.names] if isinstance(node, ast.Import)
                     else [node.module or ""] if isinstance(node, ast.ImportFrom) else [])
            offenders += [f"{path.name}: {n}" for n in names if n.split(".")[0] == "streamlit"]
    assert offenders == []
