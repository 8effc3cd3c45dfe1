import sys
from pathlib import Path

# tests/data/make_data.py holds the recipes of every generated test file.
sys.path.insert(0, str(Path(__file__).parent / "data"))


import os
import shutil

import pytest


@pytest.fixture(scope="session")
def chromium_path() -> str:
    """Debian's chromium for the browser tests; in CI (CI=true) its absence fails instead of skipping."""
    path = shutil.which("chromium") or shutil.which("chromium-browser")
    if path is None:
        message = "chromium is not installed (scripts/test installs Debian's chromium package)"
        if os.environ.get("CI"):
            pytest.fail(message)
        pytest.skip(message)
    return path
