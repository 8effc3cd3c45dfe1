"""Helpers for tests that start a real Streamlit server on a free local port."""

from __future__ import annotations

import socket
import time
import urllib.request


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def wait_until_healthy(url: str, *, timeout_s: float = 60.0) -> None:
    """Poll Streamlit's health endpoint until it answers (or the time is up; the test then fails on its own)."""
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        try:
            urllib.request.urlopen(f"{url}/_stcore/health", timeout=1)
            return
        except OSError:
            time.sleep(0.25)
