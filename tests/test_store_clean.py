"""`fieldtl store clean` and Store.clean_files on SQLite and on a team server: orphans and stale leftovers go,
referenced audio stays, and a device's clean never touches the team server's audio. Outside reference:
hashlib.sha256 (FIPS 180-4) of what is read back."""

import hashlib
import io
import os
import time

import make_data
import soundfile
from test_store_backends import pg_url  # noqa: F401 - the fresh-schema fixture

from fieldtl.cli import main
from fieldtl.store import Store, TestSetup
from fieldtl.store.files import STALE_INCOMING_S
from fieldtl.store.location import open_store


def wav_bytes(frequency_hz):
    buffer = io.BytesIO()
    soundfile.write(buffer, make_data.sine(frequency_hz, amplitude=0.3, duration_s=0.1), 48_000, format="WAV",
                    subtype="PCM_16")
    return buffer.getvalue()


def _age(path, seconds):
    then = time.time() - seconds
    os.utime(path, (then, then))
    return path


def test_store_clean_removes_orphans_and_stale_leftovers_only(tmp_path, capsys):
    with Store.open(tmp_path / "fieldtl.sqlite3") as store:
        test_id = store.create_test(store.create_project("p").id,
                                    TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0)).id
        kept = store.add_take(test_id, data=wav_bytes(300.0), original_name="kept.wav", role="source")
        shared = wav_bytes(400.0)
        first = store.add_take(test_id, data=shared, original_name="a.wav", role="source", speaker=2)
        store.add_take(test_id, data=shared, original_name="b.wav", role="source", speaker=3)
        orphan = store.add_take(test_id, data=wav_bytes(500.0), original_name="gone.wav", role="background")
        store.delete_take(first.id)                # its file is still referenced by b.wav
        store.delete_take(orphan.id)
        audio = store.audio_dir
    # Just inside and just outside the one-hour age that marks an unfinished upload or export as dead.
    for name, age in ((".incoming-young", STALE_INCOMING_S - 10), (".incoming-stale", STALE_INCOMING_S + 10)):
        _age(_write(audio / name), age)
    _age(_write(tmp_path / "export.zip.part"), STALE_INCOMING_S + 10)
    _age(_write(tmp_path / "fresh.zip.part"), 0)
    _age(_write(audio / "my notes.txt"), 10 * STALE_INCOMING_S)       # not ours: never removed
    assert main(["store", "clean", "--data-dir", str(tmp_path)]) == 0
    printed = capsys.readouterr().out.splitlines()
    assert sorted(printed[:-1]) == sorted([f"removed audio/{orphan.file_name}", "removed audio/.incoming-stale",
                                          f"removed {tmp_path.name}/export.zip.part"])
    assert printed[-1] == f"3 files removed from the store in {tmp_path}"
    left = sorted(p.name for p in audio.iterdir())
    assert left == sorted([kept.file_name, first.file_name, ".incoming-young", "my notes.txt"])
    assert (tmp_path / "fresh.zip.part").exists() and not (tmp_path / "export.zip.part").exists()
    with Store.open(tmp_path / "fieldtl.sqlite3") as store:          # every take still has its audio
        for take in store.list_takes(test_id):
            assert store.take_path(take).is_file()
    assert main(["store", "clean", "--data-dir", str(tmp_path)]) == 0
    assert capsys.readouterr().out.splitlines()[-1] == f"0 files removed from the store in {tmp_path}"


def _write(path):
    path.write_bytes(b"partial")
    return path


def test_store_clean_without_a_store_is_one_line_exit_2(tmp_path, capsys):
    assert main(["store", "clean", "--data-dir", str(tmp_path / "nothing\nhere")]) == 2
    error = capsys.readouterr().err
    assert error.count("\n") == 1 and "no fieldtl store in this folder (fieldtl.sqlite3 not found)" in error
    assert not (tmp_path / "nothing\nhere").exists()


def test_store_clean_on_a_team_server(pg_url, tmp_path, capsys, monkeypatch):  # noqa: F811
    # the real PostgreSQL server scripts/test starts (FIELDTL_TEST_PG_URL), on a fresh schema
    url = pg_url
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "server"))
    with open_store(url) as server:
        test_id = server.create_test(server.create_project("p").id,
                                     TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0)).id
        kept = server.add_take(test_id, data=wav_bytes(300.0), original_name="kept.wav", role="source")
        orphan = server.add_take(test_id, data=wav_bytes(500.0), original_name="gone.wav", role="background")
        server.delete_take(orphan.id)
        server.measurements.put("e" * 64, sha256=kept.sha256, analysis_version="an older version",
                                settings_json="{}", measurement_json="{}")
        cache = server.cache_dir
    assert cache.parent == tmp_path / "server" / "team-cache"          # this client's copies, not audio/
    assert sorted(p.name for p in cache.iterdir()) == sorted([kept.file_name, orphan.file_name])
    for name, age in ((".incoming-young", STALE_INCOMING_S - 10), (".incoming-stale", STALE_INCOMING_S + 10)):
        _age(_write(cache / name), age)
    _age(_write(cache / "my notes.txt"), 10 * STALE_INCOMING_S)       # not ours: never removed
    monkeypatch.setenv("FIELDTL_STORE_URL", url)                      # the server, as no --data-dir is given
    assert main(["store", "clean"]) == 0
    printed = capsys.readouterr().out.splitlines()
    assert printed[:-2] == [f"removed audio_blobs/{orphan.file_name}"]
    assert printed[-2] == "1 kept measurement of an earlier analysis version removed"
    assert printed[-1].startswith("1 file removed from the store in postgresql://")
    # the orphan's cached copy and the stale unfinished fetch went too; the young one may be a live fetch
    assert sorted(p.name for p in cache.iterdir()) == sorted([kept.file_name, ".incoming-young", "my notes.txt"])
    with open_store(url, cache_dir=tmp_path / "elsewhere") as server:   # read back from the database
        assert [_sha256(server.take_path(t)) for t in server.list_takes(test_id)] == [kept.sha256]
        with server._database.read() as db:
            assert [r[0] for r in db.execute("SELECT file_name FROM audio_blobs")] == [kept.file_name]
        assert server.measurements.keys() == frozenset()
    monkeypatch.delenv("FIELDTL_STORE_URL")
    assert main(["store", "clean", "--store", url, "--data-dir", str(tmp_path / "server")]) == 0
    assert capsys.readouterr().out.splitlines()[-1].startswith("0 files removed from the store in postgresql://")
    assert main(["store", "clean", "--store", "mysql://x"]) == 2
    assert "--store: expected a postgresql://" in capsys.readouterr().err


def test_a_device_clean_leaves_the_team_servers_audio_alone(pg_url, tmp_path, monkeypatch):  # noqa: F811
    # The team server and this device's own store used from one data folder: the device's clean-up
    # (the app runs it at every start) removes audio its own takes do not name from its audio folder,
    # which once was where the server's audio lived too.
    data = tmp_path / "data"
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(data))
    with open_store(pg_url) as server:
        test_id = server.create_test(server.create_project("p").id,
                                     TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0)).id
        take = server.add_take(test_id, data=wav_bytes(600.0), original_name="team.wav", role="source")
        cached = server.take_path(take)
    with Store.open(data / "fieldtl.sqlite3") as device:
        own = device.create_test(device.create_project("own").id,
                                 TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0)).id
        device.add_take(own, data=wav_bytes(700.0), original_name="own.wav", role="source")
        assert device.audio_dir == data / "audio" and device.audio_dir not in cached.parents
        assert device.clean_files(stale_s=0.0) == ()
    assert main(["store", "clean", "--data-dir", str(data)]) == 0
    assert _sha256(cached) == take.sha256                               # the team's copy on this device stays
    with open_store(pg_url, cache_dir=tmp_path / "elsewhere") as server:
        assert _sha256(server.take_path(take)) == take.sha256           # and so does the server's audio


def _sha256(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()              # hashlib, FIPS 180-4
