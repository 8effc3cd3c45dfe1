"""Helpers for tests that start a real Streamlit server on a free local port.

Servers start in their own process group (a new session), and stopping one signals the whole
group, so no process outlives its test even if the server started children.
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import time
import urllib.request
from collections.abc import Sequence


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


def start_server(command: Sequence[str], **options) -> subprocess.Popen:
    """``command`` in a new process group, its output discarded."""
    return subprocess.Popen(list(command), start_new_session=True, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, **options)


def group_alive(group_id: int) -> bool:
    """True while any process of the group exists (a zombie counts until it is reaped)."""
    try:
        os.killpg(group_id, 0)
    except ProcessLookupError:
        return False
    return True


def stop_server(server: subprocess.Popen, *, timeout_s: float = 20.0) -> None:
    """SIGTERM to the server's whole group; SIGKILL to what is left after ``timeout_s``."""
    group_id = server.pid                      # start_new_session: the group id is the leader's pid
    try:
        os.killpg(group_id, signal.SIGTERM)
        server.wait(timeout=timeout_s)
    except ProcessLookupError:
        pass
    except subprocess.TimeoutExpired:
        pass
    if group_alive(group_id):
        os.killpg(group_id, signal.SIGKILL)
        server.wait(timeout=timeout_s)
