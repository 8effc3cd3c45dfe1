"""`fieldtl team`: set up and look after a team server (a PostgreSQL store).

    fieldtl team init --store postgresql://fieldtl@localhost/fieldtl --owner ann
    fieldtl team account tom --store ...            # a new account (asks its password)
    fieldtl team grant 3 tom tester --store ...      # tom becomes a tester on project 3

``--store`` defaults to FIELDTL_STORE_URL. Passwords are asked twice on the terminal, or read
from FIELDTL_NEW_PASSWORD (for scripts); they are stored as Argon2 hashes only.
"""

from __future__ import annotations

import argparse
import getpass
import os
import sys
from typing import Any

from fieldtl.errors import InputError
from fieldtl.store.location import STORE_URL_VARIABLE, check_store_url
from fieldtl.store.pg_schema import PROJECT_ROLES

PASSWORD_VARIABLE = "FIELDTL_NEW_PASSWORD"


def add_team_options(sub: argparse._SubParsersAction) -> argparse.ArgumentParser:  # noqa: SLF001
    team = sub.add_parser("team", help="set up a team server (PostgreSQL): schema, accounts, project roles")
    actions = team.add_subparsers(dest="team_action", required=True, metavar="ACTION")
    init = actions.add_parser("init", help="create (or update) the schema and the first administrator account")
    init.add_argument("--owner", required=True, help="name of the first account (an administrator)")
    account = actions.add_parser("account", help="add an account")
    account.add_argument("name")
    account.add_argument("--admin", action="store_true", help="may create accounts and see every project")
    grant = actions.add_parser("grant", help="give an account a role on a project")
    grant.add_argument("project_id", type=int)
    grant.add_argument("name")
    grant.add_argument("role", choices=PROJECT_ROLES)
    for parser in (init, account, grant):
        parser.add_argument("--store", help=f"postgresql:// URL of the server (default: {STORE_URL_VARIABLE})")
    return team


def run_team(args: argparse.Namespace) -> int:
    url = args.store or os.environ.get(STORE_URL_VARIABLE, "")
    if not url:
        raise InputError(f"team: give --store postgresql://... or set {STORE_URL_VARIABLE}")
    check_store_url(url, "--store")
    from fieldtl.store.postgres import ServerStore

    with ServerStore.open(url) as server:
        if args.team_action == "init":
            applied = server.applied_migrations
            print(f"schema: migrations applied: {', '.join(applied)}" if applied else "schema: up to date")
            made = server.create_account(args.owner, _new_password(args.owner), admin=True)
            print(f"account {made.name} created (administrator)")
        elif args.team_action == "account":
            made = server.create_account(args.name, _new_password(args.name), admin=args.admin)
            print(f"account {made.name} created" + (" (administrator)" if made.is_admin else ""))
        else:
            server.grant(args.project_id, args.name, args.role)
            print(f"{args.name} is now {args.role} on project {args.project_id}")
    return 0


def _new_password(name: str, *, ask: Any = getpass.getpass) -> str:
    given = os.environ.get(PASSWORD_VARIABLE)
    if given is not None:
        return given
    if not sys.stdin.isatty():
        raise InputError(f"team: no terminal to ask {name}'s password; set {PASSWORD_VARIABLE}")
    first = ask(f"Password for {name}: ")
    if ask("Same password again: ") != first:
        raise InputError("team: the two passwords differ; nothing was created")
    return first
