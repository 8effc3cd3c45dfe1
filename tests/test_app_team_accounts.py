"""Accounts and roles through the app on a team server (AppTest against the real PostgreSQL that
scripts/test starts, FIELDTL_TEST_PG_URL): a reviewer cannot add takes, an account without a role
cannot open the project, an owner gives roles and a tester cannot, an administrator adds accounts,
and a password is changed only with the old one. Checks read the server back through the core
(ServerStore.login, role_on, list_takes), never through the page under test."""

from pathlib import Path

import pytest
import streamlit as st
from streamlit.testing.v1 import AppTest
from test_store import AIRBORNE, wav_bytes
from test_store_backends import pg_url  # noqa: F401 - the fresh-schema fixture
from team_seed import PASSWORD, seed_team

from fieldtl.store.errors import PermissionDenied
from fieldtl.store.location import open_store
from fieldtl.ui import access

APP = str(Path(__file__).resolve().parents[1] / "fieldtl" / "ui" / "app.py")
SECRET = "Invented project Wrenholt"


@pytest.fixture
def team(pg_url, tmp_path, monkeypatch):  # noqa: F811
    """ann owns a project with one test; tom tests, rita reviews, olga has no role, ada administers."""
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "data"))
    monkeypatch.setenv("FIELDTL_STORE_URL", pg_url)
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    monkeypatch.setattr(access, "LIMITER", access.GuessLimiter())
    with open_store(pg_url) as server:
        ann, project = seed_team(server, SECRET, outsiders=("olga",))
        server.create_account("ada", PASSWORD, admin=True)
        test = ann.create_test(project.id, AIRBORNE)
        st.cache_resource.clear()
        st.cache_data.clear()
        yield {"server": server, "ann": ann, "project": project, "test": test}
        st.cache_resource.clear()
        st.cache_data.clear()


def _ok(at):
    assert not at.exception, [e.value for e in at.exception]
    return at


def _signed_in(name, password=PASSWORD):
    at = AppTest.from_file(APP, default_timeout=180)
    _ok(at.run())
    assert [t.label for t in at.text_input] == ["Account", "Password"]
    at.text_input[0].input(name)
    at.text_input[1].input(password)
    at.button[0].click().run()
    return _ok(at)


def _page(at, view):
    _ok(at.switch_page(f"views/{view}").run())
    return at


def _button(at, label):
    found = [b for b in at.button if b.label == label]
    assert found, (label, [b.label for b in at.button])
    return found[0]


def _shown(at):
    return " ".join([*(o for s in at.selectbox for o in s.options), *(b.label for b in at.button),
                     *(m.value for m in at.markdown), *(e.value for e in at.error), *(i.value for i in at.info),
                     *(s.value for s in at.success), *(t.value for t in at.title)])


def test_a_reviewer_cannot_add_takes_through_the_app(team):
    at = _signed_in("rita")
    at.session_state["fieldtl.project_id"], at.session_state["fieldtl.test_id"] = team["project"].id, team["test"].id
    _page(at, "takes.py")
    assert at.title[0].value == "Takes"
    # The reviewer's page offers nothing that adds or changes a take: no uploader, no recorder tab,
    # no pasted levels, no change area; it says why.
    assert at.get("file_uploader") == [] and len(at.tabs) == 0
    assert "Use these band levels" not in _shown(at) and "Take to change" not in _shown(at)
    assert "You review this project" in _shown(at)
    tom = _signed_in("tom")                      # the same page for a tester: the upload is offered and stored
    tom.session_state["fieldtl.project_id"], tom.session_state["fieldtl.test_id"] = team["project"].id, team["test"].id
    _page(tom, "takes.py")
    assert "You review this project" not in _shown(tom)
    tom.get("file_uploader")[0].upload("s1.wav", wav_bytes(), "audio/wav")
    _ok(tom.run())
    assert [t.original_name for t in team["ann"].list_takes(team["test"].id)] == ["s1.wav"]
    _ok(at.run())                               # the reviewer reads the tester's take, still without a change area
    assert "s1.wav (source room" in _shown(at).replace("\\", "") and "Take to change" not in _shown(at)
    _page(at, "setup.py")                       # the set-up is read, not saved, by a reviewer
    assert "You review this project" in _shown(at)
    assert [b.disabled for b in at.get("button") if b.label == "Save test"] == [True]
    _page(tom, "setup.py")
    assert [b.disabled for b in tom.get("button") if b.label == "Save test"] == [False]


def test_an_account_without_a_role_cannot_open_the_project(team):
    at = AppTest.from_file(APP, default_timeout=180)
    at.query_params["project"], at.query_params["test"] = str(team["project"].id), str(team["test"].id)
    _ok(at.run())
    at.text_input[0].input("olga")
    at.text_input[1].input(PASSWORD)
    _ok(at.button[0].click().run())
    assert at.title[0].value == "Projects"
    assert "fieldtl.project_id" not in at.session_state          # the address opened nothing
    assert SECRET not in _shown(at) and AIRBORNE.title not in _shown(at)
    at.session_state["fieldtl.project_id"], at.session_state["fieldtl.test_id"] = team["project"].id, team["test"].id
    for view in ("takes.py", "results.py", "setup.py"):
        _page(at, view)
        assert SECRET not in _shown(at) and AIRBORNE.title not in _shown(at), view
        assert "Open a project and a test first." in _shown(at) or "Choose or create a project first." in _shown(at)
    ann = AppTest.from_file(APP, default_timeout=180)        # the same address opens it for its owner
    ann.query_params["project"], ann.query_params["test"] = str(team["project"].id), str(team["test"].id)
    _ok(ann.run())
    ann.text_input[0].input("ann")
    ann.text_input[1].input(PASSWORD)
    _ok(ann.button[0].click().run())
    assert ann.session_state["fieldtl.project_id"] == team["project"].id and SECRET in _shown(ann)


def _members(at):
    return dict(zip(at.table[0].value["Account"], at.table[0].value["Role"], strict=True))


def test_an_owner_gives_and_takes_back_a_role_and_it_applies(team):
    at = _page(_signed_in("ann"), "account.py")
    assert at.title[0].value == "Account and team"
    assert _members(at) == {"ann": "owner", "rita": "reviewer", "tom": "tester"}
    at.selectbox(key="fieldtl-grant-name").set_value("olga")
    at.selectbox(key="fieldtl-grant-role").set_value("reviewer")
    _ok(_button(at, "Give this role").click().run())
    assert "olga is now reviewer on this project." in _shown(at).replace("\\", "")
    assert _members(at)["olga"] == "reviewer"
    olga = team["server"].login("olga", PASSWORD)
    assert olga.role_on(team["project"].id) == "reviewer" and [p.name for p in olga.list_projects()] == [SECRET]
    at.selectbox(key="fieldtl-revoke-name").set_value("olga")
    _ok(_button(at, "Take the role away").click().run())
    assert "olga" not in _members(at) and olga.role_on(team["project"].id) is None
    at.selectbox(key="fieldtl-revoke-name").set_value("ann")          # the last owner stays
    _ok(_button(at, "Take the role away").click().run())
    assert "only owner" in at.error[0].value and _members(at)["ann"] == "owner"


def test_a_tester_sees_the_members_but_cannot_give_roles(team):
    at = _page(_signed_in("tom"), "account.py")
    assert _members(at) == {"ann": "owner", "rita": "reviewer", "tom": "tester"}
    assert "Only the project's owners give and take back roles." in [c.value for c in at.caption]
    assert not [b for b in at.button if b.label in ("Give this role", "Take the role away")]
    with pytest.raises(PermissionDenied):        # and the core refuses the same account
        team["server"].login("tom", PASSWORD).grant(team["project"].id, "olga", "owner")
    assert team["server"].login("olga", PASSWORD).role_on(team["project"].id) is None


def _change_password(at, current, new, again=None):
    fields = {t.label: t for t in at.text_input}
    fields["Current password"].input(current)
    fields["New password"].input(new)
    fields["New password again"].input(new if again is None else again)
    return _ok(_button(at, "Change password").click().run())


def test_a_password_changes_only_with_the_current_one(team):
    # the core's floor is 10 characters (common practice): 9 is refused, exactly 10 is taken
    server, new = team["server"], "inv-pass10"
    assert len(new) == 10
    at = _change_password(_page(_signed_in("tom"), "account.py"), PASSWORD + "x", new)
    assert at.error[0].value == "The current password is not right. The password is unchanged."
    assert server.login("tom", PASSWORD).account.name == "tom"
    with pytest.raises(PermissionDenied):
        server.login("tom", new)
    at = _change_password(at, PASSWORD, new, again=new + "x")
    assert at.error[0].value == "The two new passwords differ. The password is unchanged."
    with pytest.raises(PermissionDenied):
        server.login("tom", new)
    at = _change_password(at, PASSWORD, "inv-pass9")           # 9 characters
    assert at.error[0].value.replace("\\", "") == "password: at least 10 characters, please. The password is unchanged."
    assert server.login("tom", PASSWORD).account.name == "tom"
    at = _change_password(at, PASSWORD, new)
    assert at.success[0].value == "Password changed. Use the new one next time you sign in."
    assert server.login("tom", new).account.name == "tom"
    with pytest.raises(PermissionDenied):
        server.login("tom", PASSWORD)
    assert _signed_in("tom", new).title[0].value == "Projects"


def test_an_administrator_adds_an_account_and_others_see_no_such_form(team):
    at = _page(_signed_in("ada"), "account.py")
    at.text_input(key="fieldtl-new-name").input("nils")
    at.text_input(key="fieldtl-new-password").input("invented-password-2")
    _ok(_button(at, "Add the account").click().run())
    assert "Account nils added." in _shown(at).replace("\\", "")
    assert team["server"].login("nils", "invented-password-2").account.name == "nils"
    ann = _page(_signed_in("ann"), "account.py")
    assert not [b for b in ann.button if b.label == "Add the account"]


def test_the_account_page_refuses_on_a_devices_own_store(team, monkeypatch):
    monkeypatch.delenv("FIELDTL_STORE_URL")
    monkeypatch.delenv("FIELDTL_ACCESS_CODE", raising=False)
    st.cache_resource.clear()
    at = AppTest.from_file(APP, default_timeout=180)
    _page(_ok(at.run()), "account.py")
    assert at.title[0].value == "Account and team"
    assert at.info[0].value.startswith("Accounts belong to a team server.")
    assert not at.text_input and not at.button


def test_the_team_server_page_refuses_on_a_team_server(team):
    at = _page(_signed_in("tom"), "team.py")
    assert at.title[0].value == "Team server"
    assert at.info[0].value.startswith("This app already works on the team server")
    assert not at.text_input and not [b for b in at.button if b.label.startswith("Check")]


def test_signing_out_shows_the_sign_in_form_again(team):
    at = _page(_signed_in("tom"), "account.py")
    _ok(_button(at, "Sign out").click().run())
    assert [t.label for t in at.text_input] == ["Account", "Password"]
    assert SECRET not in _shown(at) and "tom" not in _shown(at)


@pytest.mark.parametrize("view", ["account.py", "team.py"])
def test_without_signing_in_a_team_page_shows_only_the_sign_in_form(team, view):
    switched = AppTest.from_file(APP, default_timeout=180)
    _ok(switched.run())
    on_its_own = AppTest.from_file(str(Path(APP).parent / "views" / view), default_timeout=180)
    for at in (_ok(switched.switch_page(f"views/{view}").run()), _ok(on_its_own.run())):
        assert [t.value for t in at.title] == ["fieldtl"]
        assert [t.label for t in at.text_input] == ["Account", "Password"]
        assert [b.label for b in at.button] == ["Sign in"]
        assert SECRET not in _shown(at) and not at.table and not at.selectbox
