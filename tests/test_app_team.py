"""The app on a team server (AppTest): accounts sign in instead of the access code, and each
account sees only the projects it has a role on. Runs against the real PostgreSQL server that
scripts/test starts (FIELDTL_TEST_PG_URL; see tests/test_store_backends.py)."""

from pathlib import Path

import pytest
import streamlit as st
from streamlit.testing.v1 import AppTest
from test_store import AIRBORNE, wav_bytes
from test_store_backends import pg_url  # noqa: F401 - the fresh-schema fixture
from team_seed import PASSWORD

from fieldtl.store.location import open_store

APP = str(Path(__file__).resolve().parents[1] / "fieldtl" / "ui" / "app.py")


@pytest.fixture
def team_app(pg_url, tmp_path, monkeypatch):  # noqa: F811
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "data"))
    monkeypatch.setenv("FIELDTL_STORE_URL", pg_url)
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    monkeypatch.setenv("FIELDTL_ACCESS_CODE", "k7m2-q9tx-4hvw")      # ignored: accounts replace it
    with open_store(pg_url) as server:
        for name in ("ann", "olga"):
            server.create_account(name, PASSWORD)
        ann = server.login("ann", PASSWORD)
        ann.create_test(ann.create_project("Invented project of Ann").id, AIRBORNE)
        st.cache_resource.clear()
        st.cache_data.clear()
        yield
        st.cache_resource.clear()
        st.cache_data.clear()


def _signed_in(name, password):
    at = AppTest.from_file(APP, default_timeout=180)
    at.run()
    assert not at.exception, [e.value for e in at.exception]
    assert [t.label for t in at.text_input] == ["Account", "Password"]      # no access-code field
    at.text_input[0].input(name)
    at.text_input[1].input(password)
    at.button[0].click().run()
    assert not at.exception, [e.value for e in at.exception]
    return at


def _shown(at):
    return " ".join([*(o for s in at.selectbox for o in s.options), *(b.label for b in at.button),
                     *(m.value for m in at.markdown)])


def test_an_account_sees_only_its_projects(team_app):
    ann = _signed_in("ann", PASSWORD)
    assert ann.title[0].value == "Projects"
    assert "Invented project of Ann" in _shown(ann) and "Bedroom 4 to bedroom 7" in _shown(ann)
    olga = _signed_in("olga", PASSWORD)
    assert olga.title[0].value == "Projects"
    assert "Invented project of Ann" not in _shown(olga) and "Bedroom 4" not in _shown(olga)


def test_a_wrong_password_opens_nothing(team_app):
    at = _signed_in("ann", PASSWORD + "x")
    assert "not recognised" in at.error[0].value
    assert [t.label for t in at.text_input] == ["Account", "Password"]
    assert not any(t.value == "Projects" for t in at.title)


def _review_page():
    import os

    from fieldtl.ui import review
    review.draw(int(os.environ["FIELDTL_REVIEW_TEST"]))


def test_the_review_section_signs_off_and_tells_the_changes_in_words(team_app, pg_url, tmp_path, monkeypatch):  # noqa: F811
    with open_store(pg_url) as server:
        ann, olga = server.login("ann", PASSWORD), server.login("olga", PASSWORD)
        test = ann.list_tests(ann.list_projects()[0].id)[0]
        take = ann.add_take(test.id, data=wav_bytes(), original_name="s1.wav", role="source")
        ann.set_take_excluded(take.id, True)
        ann.grant(test.project_id, "olga", "reviewer")
        monkeypatch.setenv("FIELDTL_REVIEW_TEST", str(test.id))
        at = AppTest.from_function(_review_page, default_timeout=60)
        at.session_state["fieldtl_account_store"] = olga
        at.run()
        assert not at.exception, [e.value for e in at.exception]
        assert "Not signed off yet." in [m.value for m in at.markdown]
        at.text_input[0].input("Checked on site")
        at.button[0].click().run()
        assert not at.exception, [e.value for e in at.exception]
        assert any(m.value.startswith("Signed off by olga on ") and m.value.endswith(": Checked on site")
                   for m in at.markdown)
        shown = at.table[0].value
        assert list(shown["Who"]) == ["ann", "ann", "ann", "olga"]
        assert list(shown["What"]) == ["created the test", "added take s1.wav", "changed a take (included/excluded)",
                                       "signed the test off: Checked on site"]
        assert take.sha256 not in shown.to_string() and take.file_name not in shown.to_string()
