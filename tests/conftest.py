import sys
from pathlib import Path

# tests/data/make_data.py holds the recipes of every generated test file.
sys.path.insert(0, str(Path(__file__).parent / "data"))


import importlib
import os
import shutil
import subprocess
from types import ModuleType

import pytest


def in_ci() -> bool:
    """True when the suite runs in CI (.ci/run sets CI=true)."""
    return os.environ.get("CI") == "true"


def reference_missing(message: str) -> None:
    """A reference library or tool is missing: skip locally, fail in CI (CI=true).

    The one place where the tests decide this, for pyfar, pyrato, acoustic-toolbox, Playwright,
    chromium and node: in CI a missing oracle must not turn a check into a silent skip.
    """
    if in_ci():
        pytest.fail(f"{message} (CI=true: reference libraries and tools are required)", pytrace=False)
    pytest.skip(message, allow_module_level=True)


def import_reference(module_name: str) -> ModuleType:
    """Import a test-only reference library (oracle); see :func:`reference_missing`."""
    try:
        return importlib.import_module(module_name)
    except ImportError as error:
        reference_missing(f"reference library {module_name} cannot be imported ({error}); "
                          "scripts/test installs it with the [test] extra")
        raise  # unreachable: reference_missing always raises


def node_executable() -> str:
    """Path of a working node (its --version must run); see :func:`reference_missing`."""
    path = shutil.which("node") or shutil.which("nodejs")
    if path is not None:
        try:
            done = subprocess.run([path, "--version"], capture_output=True, text=True, timeout=30)
            if done.returncode == 0 and done.stdout.startswith("v"):
                return path
        except (OSError, subprocess.TimeoutExpired):
            pass
    reference_missing("node is not installed or does not run (scripts/test installs Debian's nodejs)")
    raise AssertionError("unreachable")


@pytest.fixture(scope="session")
def chromium_path() -> str:
    """Debian's chromium for the browser tests; in CI (CI=true) its absence fails instead of skipping."""
    path = shutil.which("chromium") or shutil.which("chromium-browser")
    if path is None:
        reference_missing("chromium is not installed (scripts/test installs Debian's chromium package)")
    import_reference("playwright.sync_api")
    return path


@pytest.fixture(autouse=True)
def own_data_dir(monkeypatch, tmp_path_factory):
    """Each test its own fieldtl data folder: `fieldtl assess` keeps take measurements in the user's
    store, and no test may read what another measured, nor write to the real user's folder."""
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path_factory.mktemp("fieldtl-data")))


@pytest.fixture
def data_dir(tmp_path, monkeypatch):
    """A fresh store folder for an AppTest run, with Streamlit's caches cleared before and after
    (the app keeps its store handle in st.cache_resource), and no access code set."""
    import streamlit as st

    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "store"))
    monkeypatch.delenv("FIELDTL_ACCESS_CODE", raising=False)
    st.cache_resource.clear()
    st.cache_data.clear()
    yield tmp_path / "store"
    st.cache_resource.clear()
    st.cache_data.clear()
