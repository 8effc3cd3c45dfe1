"""`fieldtl store clean` and Store.clean_files on SQLite and on a team server: orphans and stale leftovers go,
referenced audio stays."""

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
    audio = tmp_path / "server" / "audio"
    with open_store(url, audio_dir=audio) as server:
        test_id = server.create_test(server.create_project("p").id,
                                     TestSetup(title="t", test_type="airborne", receiving_volume_m3=30.0)).id
        kept = server.add_take(test_id, data=wav_bytes(300.0), original_name="kept.wav", role="source")
        orphan = server.add_take(test_id, data=wav_bytes(500.0), original_name="gone.wav", role="background")
        server.delete_take(orphan.id)
        server.measurements.put("e" * 64, sha256=kept.sha256, analysis_version="an older version",
                                settings_json="{}", measurement_json="{}")
    for name, age in ((".incoming-young", STALE_INCOMING_S - 10), (".incoming-stale", STALE_INCOMING_S + 10)):
        _age(_write(audio / name), age)
    _age(_write(audio / "my notes.txt"), 10 * STALE_INCOMING_S)       # not ours: never removed
    monkeypatch.setenv("FIELDTL_STORE_URL", url)                      # the server, as no --data-dir is given
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "server"))
    assert main(["store", "clean"]) == 0
    printed = capsys.readouterr().out.splitlines()
    assert sorted(printed[:-2]) == sorted([f"removed audio/{orphan.file_name}", "removed audio/.incoming-stale"])
    assert printed[-2] == "1 kept measurement of an earlier analysis version removed"
    assert printed[-1].startswith("2 files removed from the store in postgresql://")
    assert sorted(p.name for p in audio.iterdir()) == sorted([kept.file_name, ".incoming-young", "my notes.txt"])
    with open_store(url, audio_dir=audio) as server:
        assert [server.take_path(t).is_file() for t in server.list_takes(test_id)] == [True]
        assert server.measurements.keys() == frozenset()
    monkeypatch.delenv("FIELDTL_STORE_URL")
    assert main(["store", "clean", "--store", url, "--data-dir", str(tmp_path / "server")]) == 0
    assert capsys.readouterr().out.splitlines()[-1].startswith("0 files removed from the store in postgresql://")
    assert main(["store", "clean", "--store", "mysql://x"]) == 2
    assert "--store: expected a postgresql://" in capsys.readouterr().err
