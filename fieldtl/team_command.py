"""`fieldtl team`: set up and look after a team server (a PostgreSQL store).

    fieldtl team init --store postgresql://fieldtl@localhost/fieldtl --owner ann
    fieldtl team account tom --store ...            # a new account (asks its password)
    fieldtl team grant 3 tom tester --store ...      # tom becomes a tester on project 3
    fieldtl team revoke 3 tom --store ...            # tom no longer has a role on project 3
    fieldtl team members 3 --store ...               # who has which role on project 3
    fieldtl team password --account tom              # tom changes his own password
    fieldtl team checkout 3 --account tom            # project 3 into this device's own store
    fieldtl team push 7 --account tom [--mine 12] [--server 13]   # local project 7 back to the server

``--store`` defaults to FIELDTL_STORE_URL. New passwords are asked twice on the terminal, or read
from FIELDTL_NEW_PASSWORD (for scripts); they are stored as Argon2 hashes only. Signing in for a
check-out or push asks the password once, or reads FIELDTL_PASSWORD. A push with settings
changed on both sides sends nothing, lists the tests, and exits with status 1: run it again
with ``--mine TEST`` or ``--server TEST`` (local test ids) for each.
"""

from __future__ import annotations

import argparse
import getpass
import os
import sys
from pathlib import Path
from typing import Any

from fieldtl.errors import InputError

# The parser is built for every fieldtl command: nothing of the store is imported until a team
# action runs. These two equal fieldtl.store.pg_schema.PROJECT_ROLES and
# fieldtl.store.location.STORE_URL_VARIABLE (tests/test_team_cli.py checks).
PROJECT_ROLES = ("owner", "tester", "reviewer")
STORE_URL_VARIABLE = "FIELDTL_STORE_URL"
PASSWORD_VARIABLE = "FIELDTL_NEW_PASSWORD"
LOGIN_VARIABLE = "FIELDTL_PASSWORD"
EXIT_CONFLICTS = 1


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
    revoke = actions.add_parser("revoke", help="take an account's role on a project away")
    revoke.add_argument("project_id", type=int)
    revoke.add_argument("name")
    members = actions.add_parser("members", help="list a project's accounts and their roles")
    members.add_argument("project_id", type=int)
    password = actions.add_parser("password", help="change your own password (asks the current one first)")
    checkout = actions.add_parser("checkout", help="copy a server project into this device's store to work offline")
    checkout.add_argument("project_id", type=int, help="the project's id on the server")
    push = actions.add_parser("push", help="send a checked-out project back to the server (all or nothing)")
    push.add_argument("project_id", type=int, help="the project's id in this device's store")
    push.add_argument("--mine", type=int, action="append", default=[], metavar="TEST",
                      help="settings conflict on this local test: keep this device's settings")
    push.add_argument("--server", type=int, action="append", default=[], metavar="TEST",
                      help="settings conflict on this local test: keep the server's settings")
    password.add_argument("--account", required=True, help="your account on the server")
    for parser in (checkout, push):
        parser.add_argument("--account", required=True, help="your account on the server")
        parser.add_argument("--data-dir", type=Path, help="folder of this device's store (default: your user data folder)")
    for parser in (init, account, grant, revoke, members, password, checkout, push):
        parser.add_argument("--store", help=f"postgresql:// URL of the server (default: {STORE_URL_VARIABLE})")
    return team


def run_team(args: argparse.Namespace) -> int:
    url = args.store or os.environ.get(STORE_URL_VARIABLE, "")
    if not url:
        raise InputError(f"team: give --store postgresql://... or set {STORE_URL_VARIABLE}")
    from fieldtl.store.location import check_store_url

    check_store_url(url, "--store")
    from fieldtl.store.pg_blobs import cache_dir_for
    from fieldtl.store.postgres import ServerStore

    # the server keeps its audio in its database; what a check-out reads of it is cached in this
    # device's data folder (--data-dir), apart from the device's own audio folder
    data_dir = getattr(args, "data_dir", None)
    cache_dir = None if data_dir is None else cache_dir_for(url, data_dir.expanduser())
    with ServerStore.open(url, cache_dir=cache_dir) as server:
        if args.team_action == "init":
            applied = server.applied_migrations
            print(f"schema: migrations applied: {', '.join(applied)}" if applied else "schema: up to date")
            made = server.create_account(args.owner, _new_password(args.owner), admin=True)
            print(f"account {made.name} created (administrator)")
        elif args.team_action == "account":
            made = server.create_account(args.name, _new_password(args.name), admin=args.admin)
            print(f"account {made.name} created" + (" (administrator)" if made.is_admin else ""))
        elif args.team_action == "grant":
            server.grant(args.project_id, args.name, args.role)
            print(f"{args.name} is now {args.role} on project {args.project_id}")
        elif args.team_action == "revoke":
            server.revoke(args.project_id, args.name)
            print(f"{args.name} has no role on project {args.project_id} now")
        elif args.team_action == "members":
            for member in server.members(args.project_id):
                print(f"{member.name}: {member.role}" + (" (administrator)" if member.is_admin else ""))
        elif args.team_action == "password":
            current = _password(args.account)
            server.login(args.account, current).change_password(current, _new_password(args.account))
            print(f"password of {args.account} changed")
        else:
            return _offline(args, server.login(args.account, _password(args.account)))
    return 0


def _offline(args: argparse.Namespace, account: Any) -> int:
    from fieldtl.store import Store, default_data_dir
    from fieldtl.store.connection import DATABASE_NAME
    from fieldtl.store.offline import check_out, push

    with Store.open((args.data_dir or default_data_dir()).expanduser() / DATABASE_NAME) as local:
        if args.team_action == "checkout":
            local_id = check_out(account, args.project_id, local)
            print(f"project {args.project_id} checked out as project {local_id} of this device's store")
            return 0
        both = set(args.mine) & set(args.server)
        if both:
            raise InputError(f"team push: test {min(both)} given to both --mine and --server")
        result = push(local, account, args.project_id,
                      resolve={t: "mine" for t in args.mine} | {t: "server" for t in args.server})
    if not result.pushed:
        for conflict in result.conflicts:
            print(f"test {conflict.local_test_id}: {conflict.message()}")
            for difference in conflict.differences:
                print(f"  {difference.name}: here {difference.here}; on the server {difference.server}")
        print("nothing was pushed: give --mine TEST or --server TEST for each test above")
        return EXIT_CONFLICTS
    print(f"pushed: {result.takes_added} takes and {result.tests_added} tests added, "
          f"{result.tests_updated} tests' settings and {result.takes_updated} takes' details updated, "
          f"{result.takes_removed} takes removed")
    return 0


def _given(name: str, variable: str) -> str | None:
    """The password set in ``variable`` (for scripts), or None when a terminal can ask for it."""
    given = os.environ.get(variable)
    if given is None and not sys.stdin.isatty():
        raise InputError(f"team: no terminal to ask {name}'s password; set {variable}")
    return given


def _password(name: str, *, ask: Any = getpass.getpass) -> str:
    given = _given(name, LOGIN_VARIABLE)
    return given if given is not None else ask(f"Password for {name}: ")


def _new_password(name: str, *, ask: Any = getpass.getpass) -> str:
    given = _given(name, PASSWORD_VARIABLE)
    if given is not None:
        return given
    first = ask(f"Password for {name}: ")
    if ask("Same password again: ") != first:
        raise InputError("team: the two passwords differ; nothing was created")
    return first
