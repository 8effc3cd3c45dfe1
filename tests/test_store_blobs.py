"""The team server's audio in PostgreSQL: stored with the take rows, checked by the database, read by
clients in slices into their own cache, moved by archives and pushes, and removed when unused.

Runs against the real PostgreSQL server scripts/test starts (FIELDTL_TEST_PG_URL), no mock.
Outside references: hashlib.sha256 (FIPS 180-4) of what was written and what is read back, and
PostgreSQL's own error class for a violated CHECK constraint (SQLSTATE 23514).
"""

import hashlib

import pytest
from test_store import AIRBORNE, wav_bytes
from test_store_backends import pg_url  # noqa: F401 - the fresh-schema fixture
from test_store_offline import _blobs, _local_test, site  # noqa: F401 - the shared fixture
from team_seed import PASSWORD

import fieldtl.store.pg_blobs as pg_blobs
from fieldtl.errors import StoreError
from fieldtl.store import Store, export_project, import_project, rows
from fieldtl.store.errors import PermissionDenied
from fieldtl.store.location import open_store
from fieldtl.store.offline import check_out, push



def _sha256(data):
    return hashlib.sha256(data).hexdigest()


def test_each_server_has_its_own_cache_folder_in_the_data_folder(tmp_path):
    mine = pg_blobs.cache_dir_for("postgresql://ann@db.example:5432/team", tmp_path)
    assert mine.parent == tmp_path / "team-cache"                      # never the device's own audio/ folder
    assert pg_blobs.cache_dir_for("postgresql://tom:pw@db.example:5432/team", tmp_path) == mine   # another account
    for other in ("postgresql://ann@db.example:5433/team", "postgresql://ann@db.example:5432/teams",
                  "postgresql://ann@db2.example:5432/team"):
        assert pg_blobs.cache_dir_for(other, tmp_path) != mine


@pytest.fixture
def server(pg_url, tmp_path):  # noqa: F811
    with open_store(pg_url, cache_dir=tmp_path / "cache") as opened:
        yield opened


def test_a_server_made_before_audio_blobs_gets_them_when_opened(pg_url, tmp_path):  # noqa: F811
    with open_store(pg_url) as first, first._database.write() as db:
        db.execute("DROP TABLE audio_blobs")
        db.execute("DELETE FROM schema_migrations WHERE name = ?", ("team_0002_audio_blobs",))
    with open_store(pg_url) as again:
        assert again.applied_migrations == ("team_0002_audio_blobs",)
        assert _blobs(again) == set()


def test_the_database_refuses_a_blob_that_is_not_what_its_name_says(server, pg_url):  # noqa: F811
    import psycopg
    data = wav_bytes()
    name = _sha256(data) + ".wav"
    changed = data[:-1] + bytes([data[-1] ^ 1])                         # one bit of the last byte
    for values in ((name, len(changed), changed), (name, len(data) + 1, data), (name[:-4] + ".mp3", len(data), data)):
        with pytest.raises(psycopg.errors.CheckViolation), psycopg.connect(pg_url) as raw:
            raw.execute("INSERT INTO audio_blobs (file_name, size_bytes, data) VALUES (%s, %s, %b)", values)
    with psycopg.connect(pg_url) as raw:    # the right bytes under their name: taken
        raw.execute("INSERT INTO audio_blobs (file_name, size_bytes, data) VALUES (%s, %s, %b)",
                    (name, len(data), data))
    assert _blobs(server) == {name}


@pytest.mark.parametrize("slice_change", [-1, 0, 1])                  # just under, at and over the whole length
def test_a_client_reads_the_audio_in_slices_into_its_own_cache(server, pg_url, tmp_path, monkeypatch, slice_change):  # noqa: F811
    test_id = server.create_test(server.create_project("p").id, AIRBORNE).id
    data = wav_bytes(seconds=0.5)
    take = server.add_take(test_id, data=data, original_name="s.wav", role="source")
    monkeypatch.setattr(pg_blobs, "SLICE_BYTES", len(data) + slice_change)
    with open_store(pg_url, cache_dir=tmp_path / "reader") as reader:
        path = reader.take_path(take)
        assert path.parent == (tmp_path / "reader").resolve() and path.name == take.file_name
        assert path.read_bytes() == data and _sha256(path.read_bytes()) == take.sha256
        assert [p.name for p in (tmp_path / "reader").iterdir()] == [take.file_name]   # no temporary file left


def test_a_fetch_that_does_not_match_its_sha256_keeps_nothing(server, tmp_path):
    test_id = server.create_test(server.create_project("p").id, AIRBORNE).id
    take = server.add_take(test_id, data=wav_bytes(), original_name="s.wav", role="source")
    (tmp_path / "fetch").mkdir()
    with server._database.read() as db:
        with pytest.raises(StoreError, match="does not match its SHA-256; nothing was kept$"):
            pg_blobs.fetch(db, take.file_name, "0" * 64, tmp_path / "fetch" / take.file_name)
        assert pg_blobs.fetch(db, "f" * 64 + ".wav", "f" * 64, tmp_path / "fetch" / "absent.wav") is False
    assert list((tmp_path / "fetch").iterdir()) == []


def test_a_take_whose_row_fails_leaves_no_audio_on_the_server(server, monkeypatch):
    test_id = server.create_test(server.create_project("p").id, AIRBORNE).id

    def refuse(*args):
        raise RuntimeError("invented failure after the audio was sent")

    monkeypatch.setattr(rows, "insert_take", refuse)
    with pytest.raises(RuntimeError, match="invented failure"):
        server.add_take(test_id, data=wav_bytes(), original_name="s.wav", role="source")
    assert _blobs(server) == set() and server.list_takes(test_id) == ()


def test_an_account_without_a_role_cannot_fetch_a_takes_audio(server, pg_url, tmp_path):  # noqa: F811
    server.create_account("ann", PASSWORD)
    server.create_account("olga", PASSWORD)
    ann = server.login("ann", PASSWORD)
    test_id = ann.create_test(ann.create_project("p").id, AIRBORNE).id
    take = ann.add_take(test_id, data=wav_bytes(), original_name="s.wav", role="source")
    with open_store(pg_url, cache_dir=tmp_path / "olga") as fresh:
        olga = fresh.login("olga", PASSWORD)
        with pytest.raises(PermissionDenied, match="^account 'olga' has no role on project"):
            olga.take_path(take)                                        # a record she did not get from the store
        assert list((tmp_path / "olga").iterdir()) == []


def test_projects_move_between_the_server_and_a_device_by_archive(server, pg_url, tmp_path):  # noqa: F811
    project = server.create_project("Invented archive project")
    test_id = server.create_test(project.id, AIRBORNE).id
    shared = wav_bytes(frequency_hz=440.0)
    for name in ("a.wav", "b.wav"):
        server.add_take(test_id, data=shared, original_name=name, role="source", speaker=1 + (name == "b.wav"))
    export_project(server, project.id, tmp_path / "project.zip")
    with Store.open(tmp_path / "device" / "fieldtl.sqlite3") as device:
        copy = import_project(device, tmp_path / "project.zip")
        takes = device.snapshot(copy.id).takes
        assert [_sha256(device.take_path(t).read_bytes()) for t in takes] == [_sha256(shared)] * 2
    with open_store(pg_url, cache_dir=tmp_path / "other") as other:
        again = import_project(other, tmp_path / "project.zip")         # into the server: one blob for both
        assert _blobs(other) == {_sha256(shared) + ".wav"}
        assert [t.sha256 for t in other.snapshot(again.id).takes] == [_sha256(shared)] * 2


def test_audio_removed_by_a_clean_while_a_push_uploads_is_sent_again(site, monkeypatch):
    tom, ann, laptop, server = site["tom"], site["ann"], site["laptop"], site["server"]
    local = check_out(tom, site["project"].id, laptop)
    data = wav_bytes(frequency_hz=900.0)
    dropped = ann.add_take(site["a"].id, data=data, original_name="dropped.wav", role="receiving")
    ann.delete_take(dropped.id)                                         # its audio unused on the server now
    local_a = _local_test(laptop, local, AIRBORNE.title)
    laptop.add_take(local_a.id, data=data, original_name="site.wav", role="receiving")
    real_stage = pg_blobs.stage

    def stage_then_clean(db, files):
        real_stage(db, files)                       # sees the unused audio as present, so does not send it
        assert [p.name for p in server.clean_files()] == [dropped.file_name]   # before the push's write lock

    monkeypatch.setattr(pg_blobs, "stage", stage_then_clean)
    assert push(laptop, tom, local).takes_added == 1
    site_take = next(t for t in ann.list_takes(site["a"].id) if t.original_name == "site.wav")
    assert site_take.file_name in _blobs(ann)
    with open_store(site["url"], cache_dir=site["tmp"] / "reader") as reader:
        assert reader.take_path(site_take).read_bytes() == data
