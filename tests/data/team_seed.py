"""The invented team most team-server tests start from: ann owns a project, tom tests on it, rita
reviews it, and any further names have an account but no role."""

from __future__ import annotations

from typing import Any

PASSWORD = "invented-password-1"


def seed_team(server: Any, project_name: str, *, outsiders: tuple[str, ...] = ()) -> tuple[Any, Any]:
    """Accounts ann, tom, rita (+ ``outsiders``) on ``server``; returns (ann's handle, her new project)."""
    for name in ("ann", "tom", "rita", *outsiders):
        server.create_account(name, PASSWORD)
    ann = server.login("ann", PASSWORD)
    project = ann.create_project(project_name)
    ann.grant(project.id, "tom", "tester")
    ann.grant(project.id, "rita", "reviewer")
    return ann, project
