"""fieldtl.ui.boot: the server process hands over to Streamlit's own command line with the arguments
fieldtl app gave it, and imports what the pages need next once the server's runtime exists."""

import subprocess
import sys

import pytest

from fieldtl.ui import boot
from fieldtl.ui.cached import MEASURING_MODULES, RESULTS_MODULES


def test_boot_starts_the_import_thread_then_runs_streamlits_command_line(monkeypatch):
    started, handed = [], []

    class Recorder:
        def __init__(self, *, target, name, daemon):
            self.call = (target, daemon)

        def start(self):
            started.append(self.call)

    from streamlit.web import cli
    monkeypatch.setattr(boot.threading, "Thread", Recorder)
    monkeypatch.setattr(cli, "main", lambda prog_name: handed.append((prog_name, list(sys.argv))) or 0)
    monkeypatch.setattr(sys, "argv", ["/x/boot.py", "run", "app.py", "--server.port", "8599"])
    with pytest.raises(SystemExit) as exit_info:
        boot.main()
    assert exit_info.value.code == 0
    assert started == [(boot.import_when_serving, True)]
    assert handed == [("streamlit", ["streamlit", "run", "app.py", "--server.port", "8599"])]


def test_the_import_waits_for_the_runtime(monkeypatch):
    from streamlit.runtime import Runtime
    imported = []
    monkeypatch.setattr(boot.warmup, "import_ahead", imported.append)
    monkeypatch.setattr(Runtime, "exists", classmethod(lambda cls: False))
    boot.import_when_serving(timeout_s=0.05)
    assert imported == []                           # no runtime: nothing imported (the pages import later)
    monkeypatch.setattr(Runtime, "exists", classmethod(lambda cls: True))
    boot.import_when_serving(timeout_s=0.05)
    assert imported == [RESULTS_MODULES + MEASURING_MODULES]


def test_boot_is_streamlits_command_line():
    shown = subprocess.run([sys.executable, "-m", "fieldtl.ui.boot", "run", "--help"], capture_output=True,
                           text=True, timeout=120)
    assert shown.returncode == 0 and "Usage: streamlit run" in shown.stdout
