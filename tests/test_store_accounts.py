"""The team server's account API, role-checked in the core: own password, accounts, members, revoking.

Runs against the real PostgreSQL server scripts/test starts (FIELDTL_TEST_PG_URL), no mock. Checks
are what the server then accepts or refuses (sign-ins, reads) and argon2-cffi's own verification
of the stored hash (RFC 9106 Argon2id).
"""

import pytest
from test_store import AIRBORNE
from test_store_backends import PASSWORD, pg_url, team  # noqa: F401 - the fixtures

from fieldtl.errors import InputError
from fieldtl.store.errors import PermissionDenied
from fieldtl.store.postgres import Account, Member

NEW = "another-invented-pw"


def test_an_account_changes_its_own_password_giving_the_current_one(team):
    import argon2
    tom, server = team["tom"], team["server"]
    with pytest.raises(PermissionDenied, match="^account name or password not recognised$"):
        tom.change_password(PASSWORD + "x", NEW)
    with pytest.raises(InputError, match="at least 10 characters"):
        tom.change_password(PASSWORD, "9" * 9)                            # just below the floor
    server.login("tom", PASSWORD)                                         # neither refusal changed it
    tom.change_password(PASSWORD, "x" * 10)                               # exactly at the floor
    tom.change_password("x" * 10, NEW)
    with pytest.raises(PermissionDenied):
        server.login("tom", PASSWORD)
    assert server.login("tom", NEW).account.name == "tom"
    with server._database.read() as db:
        stored = db.execute("SELECT password_hash FROM users WHERE name = ?", ("tom",)).fetchone()[0]
    assert argon2.PasswordHasher().verify(stored, NEW) and NEW not in stored
    with pytest.raises(InputError, match="server's own handle has no password"):
        server.change_password(PASSWORD, NEW)


def test_an_administrator_adds_accounts_and_lists_them(team):
    server = team["server"]
    server.create_account("boss", PASSWORD, admin=True)
    boss = server.login("boss", PASSWORD)
    made = boss.create_account("nina", PASSWORD)
    assert made == Account(made.id, "nina", False)
    assert [a.name for a in boss.accounts()] == ["ann", "boss", "nina", "olga", "rita", "tom"]
    assert [a.is_admin for a in boss.accounts() if a.name in ("boss", "nina")] == [True, False]
    assert [a.name for a in team["ann"].accounts()] == [a.name for a in boss.accounts()]   # an owner chooses whom
    for name in ("tom", "rita", "olga"):
        with pytest.raises(PermissionDenied, match=f"^account '{name}' may not list accounts"):
            team[name].accounts()
        with pytest.raises(PermissionDenied, match="server administrators only"):
            team[name].create_account("eve", PASSWORD)


def test_members_of_a_project_with_their_roles(team):
    project = team["project"]
    expected = (Member("ann", "owner", False), Member("rita", "reviewer", False), Member("tom", "tester", False))
    for name in ("ann", "tom", "rita"):
        assert team[name].members(project.id) == expected
    with pytest.raises(PermissionDenied, match="^account 'olga' has no role on project"):
        team["olga"].members(project.id)


def test_an_owner_revokes_a_role_and_a_tester_cannot_grant_or_revoke(team):
    ann, tom, rita, project, test = team["ann"], team["tom"], team["rita"], team["project"], team["test"]
    with pytest.raises(PermissionDenied, match="the tester role on project .* may not grant$"):
        tom.grant(project.id, "olga", "tester")
    with pytest.raises(PermissionDenied, match="the tester role on project .* may not revoke$"):
        tom.revoke(project.id, "rita")
    with pytest.raises(PermissionDenied, match="the reviewer role on project .* may not revoke$"):
        rita.revoke(project.id, "tom")
    ann.revoke(project.id, "rita")
    assert [m.name for m in ann.members(project.id)] == ["ann", "tom"]
    with pytest.raises(PermissionDenied, match="^account 'rita' has no role on project"):
        rita.get_test(test.id)                                           # no longer reads it
    assert rita.list_projects() == ()
    with pytest.raises(InputError, match="^account 'rita' has no role on project"):
        ann.revoke(project.id, "rita")
    with pytest.raises(InputError, match="^no account named 'nobody'$"):
        ann.revoke(project.id, "nobody")


def test_a_project_keeps_an_owner(team):
    ann, project = team["ann"], team["project"]
    with pytest.raises(InputError, match="^account 'ann' is the only owner of project \\d+; make another"):
        ann.revoke(project.id, "ann")
    with pytest.raises(InputError, match="only owner"):
        ann.grant(project.id, "ann", "tester")
    ann.grant(project.id, "tom", "owner")                                # a second owner ...
    ann.revoke(project.id, "ann")                                        # ... lets the first go
    assert [(m.name, m.role) for m in team["tom"].members(project.id)] == [("tom", "owner"), ("rita", "reviewer")]
    team["tom"].create_test(project.id, AIRBORNE)
