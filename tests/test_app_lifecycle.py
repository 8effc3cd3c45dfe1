"""`fieldtl app`: the access code it hands the server, and stopping it leaves no process behind."""

import os
import re
import signal
import sys
import time
from pathlib import Path

from live_server import free_port, group_alive, start_server, stop_server, wait_until_healthy
import pytest

from fieldtl import cli, warmup
from fieldtl.ui import access

REPO = Path(__file__).resolve().parents[1]


@pytest.fixture
def launched(monkeypatch, tmp_path):
    """Run `fieldtl app` in this process up to the point where it would become the server."""
    monkeypatch.chdir(tmp_path)                        # the launcher changes directory before it execs
    monkeypatch.delenv(access.ENV_VAR, raising=False)
    seen = {}

    def fake_execve(path, argv, env):
        seen.update(path=path, argv=argv, env=env)
        raise SystemExit(0)

    monkeypatch.setattr(os, "execve", fake_execve)
    # No real warm-up child here: forking the test process would copy pytest (tests/test_warmup.py forks
    # from a launcher process, and the last tests below from `fieldtl app` itself).
    monkeypatch.setattr(warmup, "start", lambda database: seen.setdefault("warm-up", database) and "4242:9:10")

    def launch(*argv):
        with pytest.raises(SystemExit):
            cli.main(["app", "--data-dir", str(tmp_path / "store"), *argv])
        return seen
    return launch


def test_served_beyond_this_machine_a_grouped_code_is_made_and_handed_over(launched, capsys):
    seen = launched("--host", "0.0.0.0")
    code = seen["env"][access.ENV_VAR]
    assert re.fullmatch(r"[2-9a-hjkmnp-z]{4}(-[2-9a-hjkmnp-z]{4}){2}", code)
    assert f"Access code for every browser: {code}" in capsys.readouterr().out
    assert seen["argv"][:4] == [sys.executable, "-m", "fieldtl.ui.boot", "run"]   # Streamlit's command line


def test_on_this_machine_alone_no_code_is_asked_unless_one_is_chosen(launched, monkeypatch):
    assert access.ENV_VAR not in launched()["env"]
    monkeypatch.setenv(access.ENV_VAR, "K7M2 Q9TX 4HVW")
    assert launched()["env"][access.ENV_VAR] == "K7M2 Q9TX 4HVW"
    assert launched("--access-code", "q9tx-k7m2-4hvw")["env"][access.ENV_VAR] == "q9tx-k7m2-4hvw"


@pytest.mark.parametrize("where", ["option", "environment"])
def test_a_weak_chosen_code_is_refused_in_one_line(monkeypatch, tmp_path, capsys, where):
    monkeypatch.delenv(access.ENV_VAR, raising=False)
    argv = ["app", "--data-dir", str(tmp_path / "store")]
    if where == "option":
        argv += ["--access-code", "4f2a9c"]
    else:
        monkeypatch.setenv(access.ENV_VAR, "4f2a9c")
    assert cli.main(argv) == 2
    error = capsys.readouterr().err
    source = "--access-code" if where == "option" else access.ENV_VAR
    assert error.startswith(f"fieldtl: {source}: too easy to guess") and error.count("\n") == 1
    assert "4f2a9c" not in error and not (tmp_path / "store").exists()


def test_the_server_is_handed_the_warm_up_of_its_sqlite_store(launched, monkeypatch, tmp_path):
    seen = launched()
    assert seen["warm-up"] == tmp_path / "store" / "fieldtl.sqlite3"
    assert seen["env"][warmup.ENV_VAR] == "4242:9:10"


def test_no_warm_up_for_a_team_server_or_when_turned_off(launched, monkeypatch):
    monkeypatch.setenv("FIELDTL_NO_WARMUP", "1")
    assert "warm-up" not in launched() and warmup.ENV_VAR not in launched()["env"]
    monkeypatch.delenv("FIELDTL_NO_WARMUP")
    seen = launched("--store", "postgresql://tester@db.example/fieldtl")
    assert "warm-up" not in seen and warmup.ENV_VAR not in seen["env"]


def group_members(group_id: int) -> dict[int, str]:
    """Process id → state letter of every process in the group (from /proc)."""
    members = {}
    for entry in Path("/proc").iterdir():
        try:
            fields = (entry / "stat").read_text().rpartition(")")[2].split()
        except (OSError, ValueError):
            continue
        if entry.name.isdigit() and int(fields[2]) == group_id:
            members[int(entry.name)] = fields[0]
    return members


def _assert_group_ends(leader_pid: int, *, within_s: float = 5.0) -> None:
    """Every process of the server's group gone within ``within_s``."""
    deadline = time.monotonic() + within_s
    while group_alive(leader_pid) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert not group_alive(leader_pid)


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/stat").is_file(), reason="reads processes from /proc (Linux)")
@pytest.mark.parametrize("stop_signal", [signal.SIGTERM, signal.SIGINT, signal.SIGKILL])
def test_the_warm_up_child_ends_with_the_server(tmp_path, stop_signal):
    """The demo's first measuring still going on in the warm-up child when the server is stopped."""
    env = {k: v for k, v in os.environ.items() if k not in (access.ENV_VAR, "FIELDTL_NO_DEMO", "FIELDTL_NO_WARMUP")}
    server = start_server([sys.executable, "-m", "fieldtl.cli", "app", "--port", str(free_port()), "--data-dir",
                           str(tmp_path / "store")], cwd=REPO, env=env)
    try:
        deadline = time.monotonic() + 30.0
        while time.monotonic() < deadline:
            children = {pid: state for pid, state in group_members(server.pid).items() if pid != server.pid}
            if children and b"fieldtl.ui.boot" in Path(f"/proc/{server.pid}/cmdline").read_bytes():
                break
            time.sleep(0.02)
        assert list(children.values()) in (["R"], ["S"], ["D"])   # the child, still at work, and only it
        (child,) = children
        os.kill(server.pid, stop_signal)                  # to the server only, not the group
        server.wait(timeout=15)
        # It does not finish its work (a second or more here): it ends as soon as the server has gone
        # (its pipe from the server closes; at the latest its next report finds no reader).
        deadline = time.monotonic() + 1.0
        while group_members(server.pid).get(child, "Z") != "Z" and time.monotonic() < deadline:
            time.sleep(0.02)
        assert group_members(server.pid).get(child, "Z") == "Z"
        _assert_group_ends(server.pid)
    finally:
        if group_alive(server.pid):
            stop_server(server)


@pytest.mark.slow
@pytest.mark.parametrize("stop_signal", [signal.SIGTERM, signal.SIGINT])
def test_a_signal_to_fieldtl_app_leaves_no_process_in_its_group(tmp_path, stop_signal):
    port = free_port()
    env = {k: v for k, v in os.environ.items() if k != access.ENV_VAR}
    env["FIELDTL_NO_DEMO"] = "1"
    server = start_server([sys.executable, "-m", "fieldtl.cli", "app", "--port", str(port), "--data-dir",
                           str(tmp_path / "store")], cwd=REPO, env=env)
    try:
        wait_until_healthy(f"http://127.0.0.1:{port}")
        # fieldtl became the server: the same process now runs Streamlit through fieldtl.ui.boot
        # (nothing else to orphan).
        if Path("/proc").is_dir():
            assert b"fieldtl.ui.boot" in Path(f"/proc/{server.pid}/cmdline").read_bytes()
        os.kill(server.pid, stop_signal)                  # to fieldtl's process only, not the group
        server.wait(timeout=15)                           # reaps it; fails the test if it does not stop
        _assert_group_ends(server.pid)
    finally:
        if group_alive(server.pid):
            stop_server(server)
