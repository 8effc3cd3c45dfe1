"""Offline take corrections and removals reach the server at push; both-sided changes are conflicts.

Runs against the real PostgreSQL server scripts/test starts (FIELDTL_TEST_PG_URL), no mock. The
checks are the rows each side holds afterwards, hashlib.sha256 (FIPS 180-4) of every stored file,
and the server's audit rows (who removed what).
"""

from dataclasses import replace

import pytest
from test_store import AIRBORNE, wav_bytes
from test_store_backends import pg_url  # noqa: F401 - the fresh-schema fixture
from test_store_offline import _local_test, _server_state, site  # noqa: F401 - the shared fixture

from fieldtl.errors import InputError
from fieldtl.store.offline import (CheckoutRecord, FieldDifference, PushPreview, check_out, checked_out_projects,
                                   preview_push, push)


def _by_name(takes, name):
    return next(t for t in takes if t.original_name == name)


def _checked_out(site):
    local = check_out(site["tom"], site["project"].id, site["laptop"])
    local_a = _local_test(site["laptop"], local, AIRBORNE.title)
    return local, local_a, {t.original_name: t for t in site["laptop"].list_takes(local_a.id)}


def test_checked_out_projects_are_listed_with_their_server(site):
    laptop = site["laptop"]
    assert checked_out_projects(laptop) == ()
    local = check_out(site["tom"], site["project"].id, laptop)
    (record,) = checked_out_projects(laptop)
    assert record == CheckoutRecord(local, site["server"].name, site["project"].id, record.checked_out_at)
    assert "postgresql://" in record.server and "invented-password" not in record.server
    assert record.checked_out_at.endswith("+00:00") and record.checked_out_at[:4].isdigit()
    laptop.delete_project(local)                       # a record whose local project is gone is not offered
    assert checked_out_projects(laptop) == ()


def test_corrections_made_here_are_pushed_when_the_server_copy_is_unchanged(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, takes = _checked_out(site)
    laptop.update_take(takes["s300.wav"].id, role="receiving", speaker=2)
    laptop.set_take_excluded(takes["s310.wav"].id, True)
    before = _server_state(ann, site["project"].id)
    preview = preview_push(laptop, tom, local)
    assert (preview.conflicts, preview.takes_to_update, preview.takes_to_add, preview.takes_to_remove,
            preview.tests_to_add, preview.tests_to_update) == ((), 2, 0, 0, 0, 0)
    assert _server_state(ann, site["project"].id) == before                      # a preview reads only
    done = push(laptop, tom, local)
    assert (done.pushed, done.takes_updated, done.takes_added, done.takes_removed) == (True, 2, 0, 0)
    server_takes = ann.list_takes(site["a"].id)
    assert (_by_name(server_takes, "s300.wav").role, _by_name(server_takes, "s300.wav").speaker) == ("receiving", 2)
    assert _by_name(server_takes, "s310.wav").excluded
    assert preview_push(laptop, tom, local).takes_to_update == 0                 # nothing left to send
    changes = [(e.user_name, e.action, e.detail) for e in ann.audit_for_test(site["a"].id) if e.action == "update"]
    assert ("tom", "update", {"role": "receiving", "speaker": 2}) in changes


def test_a_take_corrected_on_both_sides_is_a_conflict_resolved_by_the_test_choice(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, takes = _checked_out(site)
    server_take = _by_name(ann.list_takes(site["a"].id), "s300.wav")
    laptop.update_take(takes["s300.wav"].id, role="source", speaker=3)
    ann.update_take(server_take.id, role="source", speaker=4)
    refused = push(laptop, tom, local)
    assert not refused.pushed
    (conflict,) = refused.conflicts
    assert conflict.local_test_id == local_a.id
    assert conflict.differences == (FieldDifference("s300.wav: position", "3", "4"),)
    assert "s300.wav: position changed here and on the server" in conflict.message()
    assert ann.get_take(server_take.id).speaker == 4                             # nothing sent
    assert push(laptop, tom, local, resolve={local_a.id: "server"}).pushed
    assert laptop.get_take(takes["s300.wav"].id).speaker == 4                    # the server's kept, here too
    assert ann.get_take(server_take.id).speaker == 4
    laptop.update_take(takes["s300.wav"].id, role="source", speaker=5)           # a later correction here
    assert push(laptop, tom, local).takes_updated == 1
    assert ann.get_take(server_take.id).speaker == 5


def test_mine_writes_this_devices_correction_over_the_servers(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, takes = _checked_out(site)
    server_take = _by_name(ann.list_takes(site["a"].id), "s310.wav")
    laptop.set_take_excluded(takes["s310.wav"].id, True)
    ann.update_take(server_take.id, role="background", speaker=1)
    (conflict,) = preview_push(laptop, tom, local).conflicts
    assert conflict.differences == (FieldDifference("s310.wav: role", "source", "background"),
                                    FieldDifference("s310.wav: left out", "yes", "no"))
    done = push(laptop, tom, local, resolve={local_a.id: "mine"})
    assert done.pushed and done.takes_updated == 1
    assert (ann.get_take(server_take.id).role, ann.get_take(server_take.id).excluded) == ("source", True)


def test_a_take_removed_here_is_removed_on_the_server_and_the_audit_says_who(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, takes = _checked_out(site)
    server_take = _by_name(ann.list_takes(site["a"].id), "s300.wav")
    laptop.delete_take(takes["s300.wav"].id)
    assert preview_push(laptop, tom, local).takes_to_remove == 1
    done = push(laptop, tom, local)
    assert (done.pushed, done.takes_removed) == (True, 1)
    assert [t.original_name for t in ann.list_takes(site["a"].id)] == ["s310.wav"]
    removed = [e for e in ann.audit_for_test(site["a"].id) if e.action == "delete"]
    assert [(e.user_name, e.table_name, e.row_id) for e in removed] == [("tom", "takes", server_take.id)]
    assert preview_push(laptop, tom, local).takes_to_remove == 0
    assert push(laptop, tom, local).takes_added == 0                     # not sent back by a later push


def test_a_take_removed_here_but_changed_on_the_server_is_a_conflict(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, takes = _checked_out(site)
    server_take = _by_name(ann.list_takes(site["a"].id), "s300.wav")
    laptop.delete_take(takes["s300.wav"].id)
    ann.set_take_excluded(server_take.id, True)
    (conflict,) = push(laptop, tom, local).conflicts
    assert conflict.differences == (FieldDifference("s300.wav", "removed", "changed: left out yes"),)
    assert ann.get_take(server_take.id).excluded                                 # still there
    assert push(laptop, tom, local, resolve={local_a.id: "server"}).pushed      # keep the server's take
    here = _by_name(laptop.list_takes(local_a.id), "s300.wav")                  # back on this device
    assert here.excluded and here.sha256 == server_take.sha256
    assert laptop.take_path(here).read_bytes() == ann.take_path(server_take).read_bytes()
    assert push(laptop, tom, local).conflicts == () and ann.get_take(server_take.id).excluded


def test_mine_removes_a_take_the_server_had_changed(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, takes = _checked_out(site)
    server_take = _by_name(ann.list_takes(site["a"].id), "s300.wav")
    laptop.delete_take(takes["s300.wav"].id)
    ann.update_take(server_take.id, role="receiving", speaker=1)
    done = push(laptop, tom, local, resolve={local_a.id: "mine"})
    assert (done.pushed, done.takes_removed) == (True, 1)
    assert [t.original_name for t in ann.list_takes(site["a"].id)] == ["s310.wav"]


def test_a_take_changed_here_but_removed_on_the_server_is_a_conflict(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, takes = _checked_out(site)
    ann.delete_take(_by_name(ann.list_takes(site["a"].id), "s310.wav").id)
    laptop.update_take(takes["s310.wav"].id, role="source", speaker=2)
    (conflict,) = push(laptop, tom, local).conflicts
    assert conflict.differences == (FieldDifference("s310.wav", "changed: position 2", "removed"),)
    done = push(laptop, tom, local, resolve={local_a.id: "mine"})                # keep it: sent again
    assert (done.pushed, done.takes_added) == (True, 1)
    again = _by_name(ann.list_takes(site["a"].id), "s310.wav")
    assert again.speaker == 2 and again.sha256 == takes["s310.wav"].sha256


def test_server_keeps_its_removal_of_a_take_changed_here_when_chosen(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, takes = _checked_out(site)
    ann.delete_take(_by_name(ann.list_takes(site["a"].id), "s310.wav").id)
    laptop.update_take(takes["s310.wav"].id, role="source", speaker=2)
    done = push(laptop, tom, local, resolve={local_a.id: "server"})
    assert (done.pushed, done.takes_added, done.takes_removed) == (True, 0, 0)
    assert [t.original_name for t in laptop.list_takes(local_a.id)] == ["s300.wav"]     # removed here too
    assert [t.original_name for t in ann.list_takes(site["a"].id)] == ["s300.wav"]


def test_the_same_recording_added_on_both_sides_is_one_take(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, _ = _checked_out(site)
    same, other = wav_bytes(frequency_hz=1100.0), wav_bytes(frequency_hz=1200.0)
    laptop.add_take(local_a.id, data=same, original_name="both.wav", role="receiving", speaker=1)
    laptop.add_take(local_a.id, data=other, original_name="differs.wav", role="receiving", speaker=1)
    ann.add_take(site["a"].id, data=same, original_name="both.wav", role="receiving", speaker=1)
    ann.add_take(site["a"].id, data=other, original_name="differs.wav", role="receiving", speaker=2)
    (conflict,) = push(laptop, tom, local).conflicts                   # same audio, different position
    assert conflict.differences == (FieldDifference("differs.wav: position", "1", "2"),)
    done = push(laptop, tom, local, resolve={local_a.id: "mine"})
    assert (done.takes_added, done.takes_updated) == (0, 1)
    names = sorted((t.original_name, t.speaker) for t in ann.list_takes(site["a"].id))
    assert names == [("both.wav", 1), ("differs.wav", 1), ("s300.wav", 1), ("s310.wav", 1)]


def test_a_take_unchanged_here_stays_removed_when_the_server_removed_it(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, _, _ = _checked_out(site)
    ann.delete_take(_by_name(ann.list_takes(site["a"].id), "s310.wav").id)
    done = push(laptop, tom, local)
    assert (done.pushed, done.takes_added, done.takes_removed) == (True, 0, 0)
    assert [t.original_name for t in ann.list_takes(site["a"].id)] == ["s300.wav"]


def test_a_push_that_fails_half_way_sends_none_of_it(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    bg = ann.add_take(site["b"].id, data=wav_bytes(frequency_hz=900.0), original_name="bg.wav", role="background")
    local, local_a, _ = _checked_out(site)
    local_b = _local_test(laptop, local, "Invented room C to room D")
    laptop.add_take(local_a.id, data=wav_bytes(frequency_hz=950.0), original_name="new.wav", role="receiving")
    local_bg = _by_name(laptop.list_takes(local_b.id), "bg.wav")
    laptop.update_take(local_bg.id, role="source", speaker=1)          # fine for an airborne test ...
    ann.update_test(site["b"].id, replace(site["b"].setup, test_type="impact"))   # ... which B no longer is
    before = _server_state(ann, site["project"].id)
    with pytest.raises(InputError, match=r"^take 'bg.wav': .*source"):
        push(laptop, tom, local)
    assert _server_state(ann, site["project"].id) == before             # not even test A's new take
    assert ann.get_take(bg.id).role == "background"
    assert [t.original_name for t in laptop.list_takes(local_a.id)][-1] == "new.wav"   # nothing lost here


def test_a_push_sends_only_audio_the_server_lacks(site, monkeypatch):
    import fieldtl.store.pg_blobs as pg_blobs
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, _ = _checked_out(site)
    laptop.add_take(local_a.id, data=wav_bytes(frequency_hz=1300.0), original_name="new.wav", role="receiving")
    sent = []
    real_send = pg_blobs._send
    monkeypatch.setattr(pg_blobs, "_send",
                        lambda db, table, name, *a: sent.append(name) or real_send(db, table, name, *a))
    assert push(laptop, tom, local).takes_added == 1
    new = _by_name(ann.list_takes(site["a"].id), "new.wav")
    assert sent == [new.file_name]                                      # not the two checked-out recordings
    assert _server_state(ann, site["project"].id)                       # every stored file matches its SHA-256


def test_a_test_type_changed_here_must_suit_the_takes_added_on_the_server(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    ann.add_take(site["b"].id, data=wav_bytes(frequency_hz=1400.0), original_name="bg.wav", role="background")
    local, _, _ = _checked_out(site)
    local_b = _local_test(laptop, local, "Invented room C to room D")
    laptop.update_test(local_b.id, replace(site["b"].setup, test_type="impact"))        # bg.wav suits impact too
    ann.add_take(site["b"].id, data=wav_bytes(frequency_hz=1500.0), original_name="src.wav", role="source")
    before = _server_state(ann, site["project"].id)
    with pytest.raises(InputError, match=r"^test 'Invented room C to room D': take 'src.wav': .*source"):
        push(laptop, tom, local)                                          # a source take in an impact test
    assert _server_state(ann, site["project"].id) == before


def test_takes_added_here_must_suit_the_servers_test_type(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, _, _ = _checked_out(site)
    local_b = _local_test(laptop, local, "Invented room C to room D")
    laptop.add_take(local_b.id, data=wav_bytes(frequency_hz=1600.0), original_name="src.wav", role="source")
    ann.update_test(site["b"].id, replace(site["b"].setup, test_type="impact"))      # B had no takes yet
    before = _server_state(ann, site["project"].id)
    with pytest.raises(InputError, match=r"^take 'src.wav': .*source"):
        push(laptop, tom, local)
    assert _server_state(ann, site["project"].id) == before


def test_choosing_the_server_takes_its_whole_version_of_the_test_here(site):
    tom, ann, laptop = site["tom"], site["ann"], site["laptop"]
    local, local_a, takes = _checked_out(site)
    laptop.update_test(local_a.id, replace(AIRBORNE, settings={"here": 1}))           # the conflict
    ann.update_test(site["a"].id, replace(AIRBORNE, settings={"there": 1}))
    ann.update_take(_by_name(ann.list_takes(site["a"].id), "s310.wav").id, role="receiving", speaker=3)
    ann.delete_take(_by_name(ann.list_takes(site["a"].id), "s300.wav").id)   # both unchanged here
    laptop.add_take(local_a.id, data=wav_bytes(frequency_hz=1700.0), original_name="site.wav", role="receiving")
    (conflict,) = push(laptop, tom, local).conflicts
    assert conflict.fields == ("app setting here", "app setting there")       # only what both sides changed
    done = push(laptop, tom, local, resolve={local_a.id: "server"})
    assert (done.takes_added, done.takes_updated, done.takes_removed, done.tests_updated) == (1, 0, 0, 0)
    here = {t.original_name: (t.role, t.speaker) for t in laptop.list_takes(local_a.id)}
    assert here == {"s310.wav": ("receiving", 3), "site.wav": ("receiving", 1)}
    assert laptop.get_test(local_a.id).setup.settings == {"there": 1}
    there = {t.original_name: (t.role, t.speaker) for t in ann.list_takes(site["a"].id)}
    assert there == here and ann.get_test(site["a"].id).setup.settings == {"there": 1}
    assert preview_push(laptop, tom, local) == PushPreview((), 0, 0, 0, 0, 0)
