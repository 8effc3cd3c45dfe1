"""The store on both backends: SQLite (embedded) and PostgreSQL (team server), through one interface.

Every test of tests/test_store.py that works through its ``store`` fixture runs here again on a
fresh PostgreSQL schema; the tests below run on both backends, and the team server's accounts,
roles, audit and crash tests on PostgreSQL. The server is a real one: scripts/test starts it
(scripts/postgres) and passes FIELDTL_TEST_PG_URL; without it these tests skip locally and FAIL
under CI=true. Outside references: hashlib.sha256 (FIPS 180-4) for the stored audio, and
PostgreSQL's own catalogue (information_schema) for the schema.
"""

import hashlib
import inspect
import os
import signal
import threading
import uuid
from concurrent.futures import ThreadPoolExecutor
from urllib.parse import quote

import pytest
import test_store as contract
from conftest import reference_missing
from test_store import AIRBORNE, wav_bytes
from test_store_crash import read_line, start_writer
from team_seed import PASSWORD, seed_team

from fieldtl.errors import InputError, StoreError
from fieldtl.store import MIGRATIONS, Store
from fieldtl.store.errors import PermissionDenied, StaleEditError
from fieldtl.store.location import open_store
from fieldtl.store.pg_schema import TEAM_BODIES



def _server_url():
    url = os.environ.get("FIELDTL_TEST_PG_URL")
    if not url:
        reference_missing("no PostgreSQL server for the tests: FIELDTL_TEST_PG_URL is not set "
                          "(scripts/test starts one with scripts/postgres when PostgreSQL is installed)")
    try:
        import argon2  # noqa: F401
        import psycopg
        import psycopg_pool  # noqa: F401
    except ImportError as error:
        reference_missing(f"psycopg, psycopg_pool or argon2-cffi cannot be imported ({error}); "
                          "scripts/test installs them with the [test] extra")
    return url, psycopg


@pytest.fixture
def pg_url():
    """A postgresql:// URL whose search_path is a fresh schema, dropped after the test."""
    url, psycopg = _server_url()
    schema = f"t_{uuid.uuid4().hex[:16]}"
    with psycopg.connect(url, autocommit=True) as admin:
        admin.execute(f'CREATE SCHEMA "{schema}"')
    yield f"{url}{'&' if '?' in url else '?'}options={quote(f'-csearch_path={schema}')}"
    with psycopg.connect(url, autocommit=True) as admin:
        admin.execute(f'DROP SCHEMA "{schema}" CASCADE')


@pytest.fixture
def store(request, tmp_path):
    """The Store the contract tests use; 'postgresql' here (test_store.py runs them on SQLite)."""
    url = request.getfixturevalue("pg_url")
    with open_store(url) as opened:       # its audio in the database, cached in this test's data folder
        yield opened


@pytest.fixture(params=["sqlite", "postgresql"])
def location(request, tmp_path):
    """A store location (database file or URL) on each backend, for tests that open several handles."""
    if request.param == "sqlite":
        return tmp_path / "fieldtl.sqlite3"
    return request.getfixturevalue("pg_url")


def _open(location, tmp_path):
    """The store at ``location``: a SQLite store with its audio folder, or the server (audio in its database)."""
    if location == tmp_path / "fieldtl.sqlite3":
        return open_store(location, audio_dir=tmp_path / "audio")
    return open_store(location)


test_id = contract.test_id
for _name, _test in vars(contract).items():
    if _name.startswith("test_") and callable(_test) and "store" in inspect.signature(_test).parameters:
        globals()[_name] = _test


# --- both backends ---------------------------------------------------------------------------------

def test_the_backend_follows_the_location(location, tmp_path):
    with _open(location, tmp_path) as store:
        assert type(store).__name__ == ("Store" if location == tmp_path / "fieldtl.sqlite3" else "ServerStore")
        project = store.create_project("Invented project")
        assert store.get_project(project.id) == project


def test_a_stale_settings_edit_is_refused_and_overwrites_nothing(location, tmp_path):
    with _open(location, tmp_path) as first, \
            _open(location, tmp_path) as second:
        opened = first.create_test(first.create_project("Invented project").id, AIRBORNE)
        mine = second.get_test(opened.id)
        theirs = first.update_test(opened.id, AIRBORNE.__class__(**{**_fields(AIRBORNE), "settings": {"a": 1}}),
                                   expected_updated_at=opened.updated_at)      # the current version: accepted
        with pytest.raises(StaleEditError, match=r"^test 'Bedroom 4 to bedroom 7': changed by someone else .*"
                                                 r"reload the test and make your change again$"):
            second.update_test(mine.id, AIRBORNE, expected_updated_at=mine.updated_at)
        assert second.get_test(opened.id) == theirs
        assert isinstance(StaleEditError("x"), StoreError)


def test_a_stale_band_levels_edit_is_refused_and_overwrites_nothing(location, tmp_path):
    levels = "frequency_hz,L1,L2\n100,90,50\n"
    with _open(location, tmp_path) as first, \
            _open(location, tmp_path) as second:
        opened = first.create_test(first.create_project("Invented project").id, AIRBORNE)
        mine = second.get_test(opened.id)
        theirs = first.set_band_levels(opened.id, levels, expected_updated_at=opened.updated_at)   # current: accepted
        assert theirs.band_levels_csv == levels and theirs.updated_at != opened.updated_at
        with pytest.raises(StaleEditError, match=r"^test 'Bedroom 4 to bedroom 7': changed by someone else at "
                                                 r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d UTC after you opened it; "
                                                 r"reload the test and make your change again$"):
            second.set_band_levels(mine.id, None, expected_updated_at=mine.updated_at)
        assert second.get_test(opened.id) == theirs                       # the other edit kept
        changed = first.update_test(opened.id, AIRBORNE, expected_updated_at=theirs.updated_at)
        with pytest.raises(StaleEditError):                              # a settings edit makes it stale too
            second.set_band_levels(mine.id, levels, expected_updated_at=theirs.updated_at)
        assert second.set_band_levels(mine.id, None, expected_updated_at=changed.updated_at).band_levels_csv is None


def test_two_writers_adding_takes_at_once_lose_nothing(location, tmp_path):
    count = 15
    with _open(location, tmp_path) as setup:
        test_id = setup.create_test(setup.create_project("Invented project").id, AIRBORNE).id

    def writer(worker):
        with _open(location, tmp_path) as own:
            return [own.add_take(test_id, data=wav_bytes(seconds=0.05, frequency_hz=200.0 + 10 * n + worker),
                                 original_name=f"w{worker}_{n}.wav", role="source").id for n in range(count)]

    with ThreadPoolExecutor(max_workers=2) as pool:
        added = [i for ids in pool.map(writer, (1, 2)) for i in ids]
    with _open(location, tmp_path) as store:
        takes = store.list_takes(test_id)
        assert sorted(t.id for t in takes) == sorted(added) and len(set(added)) == 2 * count
        for take in takes:
            assert hashlib.sha256(store.take_path(take).read_bytes()).hexdigest() == take.sha256


def test_a_reader_sees_one_consistent_state_while_a_writer_adds_takes(location, tmp_path):
    # Each add_take commits the take and the project's updated_at (the take's created_at) together,
    # so in any one committed state no take is newer than its project's updated_at.
    with _open(location, tmp_path) as setup:
        project = setup.create_project("Invented project")
        test_id = setup.create_test(project.id, AIRBORNE).id
    done = threading.Event()

    def write():
        with _open(location, tmp_path) as own:
            for n in range(25):
                own.add_take(test_id, data=wav_bytes(seconds=0.02, frequency_hz=300.0 + 7 * n),
                             original_name=f"w{n}.wav", role="source")
        done.set()

    seen = []
    with _open(location, tmp_path) as reader:
        writer = threading.Thread(target=write)
        writer.start()
        while not done.is_set():
            snapshot = reader.snapshot(project.id)
            assert all(t.created_at <= snapshot.project.updated_at for t in snapshot.takes)
            seen.append(len(snapshot.takes))
        writer.join()
    assert len(set(seen)) > 1                      # the reader did read while takes were being added


# --- PostgreSQL: schema -----------------------------------------------------------------------------

def test_server_schema_has_the_named_migrations_once_and_sqlite_columns(pg_url, tmp_path):
    names = tuple(m.__name__ for m in MIGRATIONS) + tuple(TEAM_BODIES)
    with open_store(pg_url) as first:
        assert first.applied_migrations == names
    with open_store(pg_url) as again:
        assert again.applied_migrations == ()
        assert again.schema_state() == (len(names), names)
        with again._database.read() as db:
            server = {table: [r[0] for r in db.execute(
                "SELECT column_name FROM information_schema.columns WHERE table_schema = current_schema() "
                "AND table_name = ? ORDER BY ordinal_position", (table,))] for table in ("projects", "tests", "takes")}
    with Store.open(":memory:") as embedded, embedded._database.read() as db:
        for table, columns in server.items():
            assert [r[1] for r in db.execute(f"PRAGMA table_info({table})")] == columns


def test_values_survive_the_server_exactly(store):
    # double precision, not PostgreSQL's 4-byte real: 0.1 must come back as the same float
    setup = AIRBORNE.__class__(**{**_fields(AIRBORNE), "receiving_volume_m3": 31.1, "element_lab_rw_db": 52.3,
                                  "settings": {"note": "ä ✓", "n": [1, 2.5]}})
    created = store.create_test(store.create_project("Invented ' project; --").id, setup)
    assert store.get_test(created.id) == created
    assert store.get_test(created.id).setup.receiving_volume_m3 == 31.1


# --- PostgreSQL: accounts, roles, audit -------------------------------------------------------------

@pytest.fixture
def team(pg_url, tmp_path):
    """The server handle, an owner (ann), a tester (tom), a reviewer (rita), an outsider (olga), one test."""
    with open_store(pg_url) as server:
        ann, project = seed_team(server, "Invented project", outsiders=("olga",))
        test = ann.create_test(project.id, AIRBORNE)
        yield {name: server.login(name, PASSWORD) for name in ("ann", "tom", "rita", "olga")} | {
            "server": server, "project": project, "test": test}


def test_a_reviewer_reads_and_signs_off_but_cannot_add_takes(team):
    rita, test = team["rita"], team["test"]
    with pytest.raises(PermissionDenied, match=r"^account 'rita' has the reviewer role on project \d+ and "
                                               r"may not add take$"):
        rita.add_take(test.id, data=wav_bytes(), original_name="r.wav", role="source")
    with pytest.raises(PermissionDenied):
        rita.update_test(test.id, AIRBORNE)
    assert rita.list_takes(test.id) == () and rita.get_test(test.id) == test
    assert [p.id for p in rita.list_projects()] == [team["project"].id]
    rita.sign_off(test.id, "checked")
    with pytest.raises(PermissionDenied, match="the tester role .* may not sign off$"):
        team["tom"].sign_off(test.id)
    assert [(s.user_name, s.note) for s in team["ann"].sign_offs(test.id)] == [("rita", "checked")]


def test_an_account_without_a_role_cannot_read_the_project(team):
    olga, test, project = team["olga"], team["test"], team["project"]
    assert olga.list_projects() == ()
    for call in (lambda: olga.get_project(project.id), lambda: olga.list_tests(project.id),
                 lambda: olga.get_test(test.id), lambda: olga.list_takes(test.id), lambda: olga.snapshot(project.id),
                 lambda: olga.audit_for_test(test.id)):
        with pytest.raises(PermissionDenied, match=r"^account 'olga' has no role on project"):
            call()
    with pytest.raises(PermissionDenied, match="the tester role"):
        team["tom"].grant(project.id, "olga", "owner")          # only owners grant
    team["ann"].grant(project.id, "olga", "reviewer")
    assert olga.get_test(test.id) == test


def test_every_change_records_who_and_when(team):
    tom, test = team["tom"], team["test"]
    take = tom.add_take(test.id, data=wav_bytes(), original_name="t.wav", role="source")
    team["ann"].set_take_excluded(take.id, True)
    team["rita"].sign_off(test.id)
    audit = team["rita"].audit_for_test(test.id)
    assert [(a.user_name, a.action, a.table_name) for a in audit] == [
        ("ann", "insert", "tests"), ("tom", "insert", "takes"), ("ann", "update", "takes"),
        ("rita", "insert", "sign_offs")]
    assert audit[2].detail == {"excluded": 1}
    assert [a.changed_at for a in audit] == sorted(a.changed_at for a in audit)
    assert audit[0].changed_at.endswith("Z") and audit[0].changed_at[:4].isdigit()


def test_passwords_are_checked_and_hashed(team, pg_url):
    server = team["server"]
    with pytest.raises(PermissionDenied, match="^account name or password not recognised$"):
        server.login("ann", PASSWORD + "x")
    with pytest.raises(PermissionDenied, match="^account name or password not recognised$"):
        server.login("nobody", PASSWORD)
    with pytest.raises(InputError, match="at least 10 characters"):
        server.create_account("short", "9" * 9)                         # just below the floor
    server.create_account("edge", "x" * 10)                             # exactly at it
    with pytest.raises(PermissionDenied, match="server administrators only"):
        team["ann"].create_account("eve", PASSWORD)
    with server._database.read() as db:
        stored = db.execute("SELECT password_hash FROM users WHERE name = ?", ("ann",)).fetchone()[0]
    assert stored.startswith("$argon2id$") and PASSWORD not in stored


# --- PostgreSQL: a writer killed mid-way ------------------------------------------------------------

@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs POSIX signals")
def test_a_writer_killed_mid_way_leaves_the_server_consistent(pg_url, tmp_path, monkeypatch):
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "writer"))  # the writer's cache of the server's audio
    writer = start_writer(pg_url, 1, 10_000)
    committed = [int(read_line(writer).split()[1]) for _ in range(5)]
    os.kill(writer.pid, signal.SIGKILL)
    assert writer.wait(timeout=30) == -signal.SIGKILL
    with open_store(pg_url, cache_dir=tmp_path / "reader") as store:    # audio read from the database
        takes = [t for p in store.list_projects() for t in store.snapshot(p.id).takes]
        assert set(committed) <= {t.id for t in takes}
        for take in takes:
            assert hashlib.sha256(store.take_path(take).read_bytes()).hexdigest() == take.sha256
        with store._database.read() as db:             # the killed transaction's audio went with it
            blobs = {r[0] for r in db.execute("SELECT file_name FROM audio_blobs")}
        assert blobs == {t.file_name for t in takes}
        extra = store.add_take(takes[0].test_id, data=wav_bytes(), original_name="after.wav", role="receiving")
        assert store.get_take(extra.id) == extra                      # the write lock died with the writer


def _fields(setup):
    return {f: getattr(setup, f) for f in setup.__dataclass_fields__}
