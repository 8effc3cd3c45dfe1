"""Working offline, in the app (AppTest): the Team server page of the app on a device's own store
signs in to a real PostgreSQL team server (FIELDTL_TEST_PG_URL, started by scripts/test), checks a
project out, previews a push, shows each conflict with both values, and pushes with "keep mine" or
"keep the server's". Checks: the rows each side holds afterwards, read through the core, and
hashlib.sha256 (FIPS 180-4) of every audio file on this device against the server's."""

import hashlib
from dataclasses import replace
from pathlib import Path

import pytest
import streamlit as st
from streamlit.testing.v1 import AppTest
from test_store import AIRBORNE, wav_bytes
from test_store_backends import pg_url  # noqa: F401 - the fresh-schema fixture
from team_seed import PASSWORD, seed_team

from fieldtl.errors import StoreError
from fieldtl.store import Store, offline
from fieldtl.store.location import open_store
from fieldtl.ui import access, teamlink

APP = str(Path(__file__).resolve().parents[1] / "fieldtl" / "ui" / "app.py")
TITLE_B = "Invented room C to room D"
FORM = ["Team server address", "Account", "Password"]        # the server's recordings are in its database


@pytest.fixture
def site(pg_url, tmp_path, monkeypatch):  # noqa: F811
    """ann owns a project (test A with two takes, test B); tom tests, rita reviews, olga has no role.
    The app runs on this device's own store (no team server configured, no access code)."""
    data = tmp_path / "data"
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(data))
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    monkeypatch.delenv("FIELDTL_STORE_URL", raising=False)
    monkeypatch.delenv("FIELDTL_ACCESS_CODE", raising=False)
    monkeypatch.setattr(access, "LIMITER", access.GuessLimiter())
    # The office's handle on the team server, with its own cache (not this device's data folder).
    with open_store(pg_url, cache_dir=tmp_path / "office-cache") as server:
        ann, project = seed_team(server, "Invented project Harrowgate", outsiders=("olga",))
        a = ann.create_test(project.id, AIRBORNE)
        b = ann.create_test(project.id, replace(AIRBORNE, title=TITLE_B))
        for hz in (300.0, 310.0):
            ann.add_take(a.id, data=wav_bytes(frequency_hz=hz), original_name=f"s{hz:.0f}.wav", role="source")
        st.cache_resource.clear()
        st.cache_data.clear()
        yield {"url": pg_url, "ann": ann, "project": project, "a": a, "b": b, "laptop": data / "fieldtl.sqlite3",
               "data": data}
        st.cache_resource.clear()
        st.cache_data.clear()
        teamlink.close_all()


def _button(at, label):
    found = [b for b in at.button if b.label == label]
    assert found, (label, [b.label for b in at.button])
    return found[0]


def _team_page():
    at = AppTest.from_file(APP, default_timeout=180)
    at.run()
    at.switch_page("views/team.py").run()
    assert not at.exception, [e.value for e in at.exception]
    assert at.title[0].value == "Team server"
    return at


def _signed_in(site, name, password=PASSWORD, *, url=None):
    at = _team_page()
    labels = [t.label for t in at.text_input]
    assert labels == FORM
    typed = (url or site["url"], name, password)
    for field, value in zip(at.text_input, typed, strict=True):
        field.input(value)
    _button(at, "Sign in").click().run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _checked_out(site, name="tom"):
    at = _signed_in(site, name)
    assert at.selectbox[0].label == "Project on the team server"
    _button(at, "Check out to this device").click().run()
    assert not at.exception, [e.value for e in at.exception]
    assert at.success and "is now on this device" in at.success[0].value, _shown(at)
    return at


def _local_test(laptop, title):
    project = laptop.list_projects()[0]
    return next(t for t in laptop.list_tests(project.id) if t.setup.title == title)


def _shown(at):
    return " ".join([*(m.value for m in at.markdown), *(e.value for e in at.error), *(s.value for s in at.success)])


def _plain(shown):
    """A message as read: Streamlit's markdown drops the escaping backslashes."""
    return shown.replace("\\", "")


def _edit_both_sides(site, laptop):
    """On site: a new take on A, A's requirement changed, a new test with a take; in the office: another take on A and
    a different requirement. B changed on the server only."""
    local_a = _local_test(laptop, AIRBORNE.title)
    laptop.add_take(local_a.id, data=wav_bytes(frequency_hz=400.0), original_name="site.wav", role="receiving")
    laptop.update_test(local_a.id, replace(AIRBORNE, requirement="DnT,w + Ctr >= 47"))
    made = laptop.create_test(laptop.list_projects()[0].id, replace(AIRBORNE, title="Made offline"))
    laptop.add_take(made.id, data=wav_bytes(frequency_hz=500.0), original_name="new.wav", role="source")
    ann = site["ann"]
    ann.add_take(site["a"].id, data=wav_bytes(frequency_hz=600.0), original_name="office.wav", role="background")
    ann.update_test(site["a"].id, replace(AIRBORNE, requirement="DnT,w + Ctr >= 50"))
    ann.update_test(site["b"].id, replace(AIRBORNE, title=TITLE_B, construction="Invented: 100 mm blockwork"))
    return local_a


def _preview_with_conflict(at):
    _button(at, "Check what would be sent").click().run()
    assert not at.exception, [e.value for e in at.exception]
    shown = _shown(at)
    # A's new take waits with A's choice; the new test and its take are counted
    assert "Would be added: 1 test, 1 take.  \nWould be updated: 0 tests (settings), 0 takes (details).  \n" in shown
    assert "1 test changed here and on the team server" in shown
    rows = at.table[0].value
    assert list(rows.columns) == ["What", "On this device", "On the team server"]
    row = rows[rows["What"] == "requirement"]
    assert list(row["On this device"]) == ["DnT,w + Ctr >= 47"] and list(row["On the team server"]) == ["DnT,w + Ctr >= 50"]
    assert _button(at, "Send to the team server").disabled        # nothing can be sent before a choice
    return at


def _server_takes(site):
    return sorted(t.original_name for t in site["ann"].list_takes(site["a"].id))


def test_check_out_brings_the_project_and_its_audio_to_this_device(site):
    at = _checked_out(site).run()
    assert any(c.value.startswith("Already checked out here on ") for c in at.caption)   # a second copy is named so
    listed = [m.value for m in at.markdown if m.value.startswith("**Invented project Harrowgate**")]
    assert len(listed) == 1 and "checked out " in listed[0]
    with Store.open(site["laptop"]) as laptop:
        projects = laptop.list_projects()
        assert [p.name for p in projects] == ["Invented project Harrowgate"]
        assert sorted(t.setup.title for t in laptop.list_tests(projects[0].id)) == sorted([AIRBORNE.title, TITLE_B])
        local_a = _local_test(laptop, AIRBORNE.title)
        here = {t.original_name: hashlib.sha256(laptop.take_path(t).read_bytes()).hexdigest()
                for t in laptop.list_takes(local_a.id)}
    there = {t.original_name: t.sha256 for t in site["ann"].list_takes(site["a"].id)}
    assert here == there and len(here) == 2


def test_keep_mine_merges_the_takes_and_sends_this_devices_settings(site):
    at = _checked_out(site)
    with Store.open(site["laptop"]) as laptop:
        local_a = _edit_both_sides(site, laptop)
        before = site["ann"].snapshot(site["project"].id)
        at = _preview_with_conflict(at)
        assert site["ann"].snapshot(site["project"].id) == before          # a preview sends nothing
        at.radio[0].set_value("mine").run()
        _button(at, "Send to the team server").click().run()
        assert not at.exception, [e.value for e in at.exception]
        assert at.success[0].value == ("Sent to the team server: added 1 test and 2 takes; updated 1 test (settings) "
                                       "and 0 takes (details); removed 0 takes.")
        assert laptop.get_test(local_a.id).setup.requirement == "DnT,w + Ctr >= 47"
    assert site["ann"].get_test(site["a"].id).setup.requirement == "DnT,w + Ctr >= 47"
    assert site["ann"].get_test(site["b"].id).setup.construction == "Invented: 100 mm blockwork"   # the office's kept
    assert _server_takes(site) == ["office.wav", "s300.wav", "s310.wav", "site.wav"]               # nothing lost
    made = next(t for t in site["ann"].list_tests(site["project"].id) if t.setup.title == "Made offline")
    assert [t.original_name for t in site["ann"].list_takes(made.id)] == ["new.wav"]


def test_keep_the_servers_takes_its_settings_here_and_still_merges_the_takes(site):
    at = _checked_out(site)
    with Store.open(site["laptop"]) as laptop:
        local_a = _edit_both_sides(site, laptop)
        at = _preview_with_conflict(at)
        at.radio[0].set_value("server").run()
        _button(at, "Send to the team server").click().run()
        assert not at.exception, [e.value for e in at.exception]
        assert at.success[0].value.startswith("Sent to the team server: added 1 test and 2 takes; updated 0 tests")
        assert laptop.get_test(local_a.id).setup.requirement == "DnT,w + Ctr >= 50"
    assert site["ann"].get_test(site["a"].id).setup.requirement == "DnT,w + Ctr >= 50"
    assert _server_takes(site) == ["office.wav", "s300.wav", "s310.wav", "site.wav"]
    _button(at, "Check what would be sent").click().run()                  # and nothing is left to send
    assert "Nothing to send: the team server already has everything of this project." in _shown(at)


def test_a_take_removed_here_but_corrected_on_the_server_is_kept_with_keep_the_servers(site):
    at = _checked_out(site)
    with Store.open(site["laptop"]) as laptop:
        local_a = _local_test(laptop, AIRBORNE.title)
        laptop.delete_take(next(t.id for t in laptop.list_takes(local_a.id) if t.original_name == "s300.wav"))
        server_take = next(t for t in site["ann"].list_takes(site["a"].id) if t.original_name == "s300.wav")
        site["ann"].update_take(server_take.id, role="source", speaker=2)
        _button(at, "Check what would be sent").click().run()
        rows = at.table[0].value
        assert list(rows["What"]) == ["s300.wav"] and list(rows["On this device"]) == ["removed"]
        assert "2" in rows["On the team server"].iloc[0]                      # the server's correction, in words
        at.radio[0].set_value("server").run()
        _button(at, "Send to the team server").click().run()
        assert not at.exception, [e.value for e in at.exception]
        assert at.success[0].value.startswith("Sent to the team server")
        back = [t for t in laptop.list_takes(local_a.id) if t.original_name == "s300.wav"]
        assert [(t.speaker, t.sha256) for t in back] == [(2, server_take.sha256)]     # restored here, nothing lost
    assert _server_takes(site) == ["s300.wav", "s310.wav"]


def test_a_reviewer_cannot_add_takes_through_a_push(site):
    at = _checked_out(site, "rita")
    with Store.open(site["laptop"]) as laptop:
        local_a = _local_test(laptop, AIRBORNE.title)
        laptop.add_take(local_a.id, data=wav_bytes(frequency_hz=700.0), original_name="r.wav", role="receiving")
    before = site["ann"].snapshot(site["project"].id)
    assert any(c.value.startswith("Your role on this project (reviewer: reads and signs off) does not allow sending")
               for c in at.caption)
    _button(at, "Check what would be sent").click().run()
    _button(at, "Send to the team server").click().run()
    assert not at.exception, [e.value for e in at.exception]
    assert at.error[0].value.startswith("Nothing was sent.") and "reviewer role" in at.error[0].value
    assert site["ann"].snapshot(site["project"].id) == before


def test_a_push_sent_but_not_brought_here_does_not_say_nothing_was_sent(site, monkeypatch):
    at = _checked_out(site, "tom")
    with Store.open(site["laptop"]) as laptop:
        local_a = _local_test(laptop, AIRBORNE.title)
        laptop.add_take(local_a.id, data=wav_bytes(frequency_hz=720.0), original_name="t.wav", role="receiving")

    def disk_full(*args, **kwargs):          # this device fails after the server has committed
        raise StoreError("fieldtl.sqlite3: cannot write (disk full)")

    monkeypatch.setattr(offline, "_apply_here", disk_full)
    _button(at, "Check what would be sent").click().run()
    _button(at, "Send to the team server").click().run()
    assert not at.exception, [e.value for e in at.exception]
    assert not any("Nothing was sent" in e.value for e in at.error)
    assert at.warning[0].value.startswith("Sent to the team server, but this device's copy was not brought up")
    assert "t.wav" in _server_takes(site)


def test_an_account_without_a_role_is_offered_nothing_to_check_out(site):
    at = _signed_in(site, "olga")
    assert not at.selectbox and "no role on any project" in _shown(at)
    assert "Harrowgate" not in _shown(at)


def test_the_password_is_not_kept_after_signing_in(site):
    at = _signed_in(site, "tom")
    assert teamlink.LINK_KEY in at.session_state
    assert PASSWORD not in repr(at.session_state.to_dict())                       # our keys and keyed widgets
    assert PASSWORD not in repr(at.session_state._state.get_widget_states())      # and every widget's value


def test_a_wrong_password_signs_nothing_in(site):
    at = _signed_in(site, "tom", PASSWORD + "x")
    assert at.error[0].value == "Account name or password not recognised."
    assert [t.label for t in at.text_input] == FORM
    assert teamlink.LINK_KEY not in at.session_state


def test_audio_missing_on_the_server_checks_nothing_out_and_names_no_stored_file(site):
    gone = next(t for t in site["ann"].list_takes(site["a"].id) if t.original_name == "s300.wav")
    with site["ann"]._database.write() as db:                           # behind the store's back
        db.execute("DELETE FROM audio_blobs WHERE file_name = ?", (gone.file_name,))
    at = _signed_in(site, "tom")
    _button(at, "Check out to this device").click().run()
    assert not at.exception and not at.success
    message = _plain(at.error[0].value)
    assert message == "Nothing was checked out: the audio of 's300.wav' is missing from the team server."
    assert not any(t.sha256 in message for t in site["ann"].list_takes(site["a"].id))
    with Store.open(site["laptop"]) as laptop:
        assert laptop.list_projects() == ()


def test_the_apps_clean_up_at_start_leaves_the_team_servers_audio_alone(site):
    _checked_out(site)
    with Store.open(site["laptop"]) as laptop:                          # the audio came straight into this store
        assert len(list(laptop.audio_dir.glob("*.wav"))) == 2
        assert list((site["data"] / "team-cache").glob("*/*")) == []     # with no second copy kept
        laptop.delete_project(laptop.list_projects()[0].id)             # this device no longer names that audio
    st.cache_resource.clear()                                          # a restart: the store is opened and cleaned
    _team_page()
    with Store.open(site["laptop"]) as laptop:
        assert list(laptop.audio_dir.glob("*.wav")) == []               # its own unused copies did go
    with open_store(site["url"], cache_dir=site["data"].parent / "another") as server:
        takes = server.list_takes(site["a"].id)
        read_back = [hashlib.sha256(server.take_path(t).read_bytes()).hexdigest() for t in takes]
        assert read_back == [t.sha256 for t in takes]


def test_an_address_that_is_not_a_team_server_is_one_line(site):
    at = _signed_in(site, "tom", url="/tmp/not-a-server")
    assert [_plain(e.value) for e in at.error] == [("Team server address: expected a "
                                                    "postgresql://user@host/database URL, got '/tmp/not-a-server'")]
