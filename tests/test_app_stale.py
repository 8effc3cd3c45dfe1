"""The app refuses a stale settings edit (AppTest, embedded store): a test changed by someone else
after the page drew it is not overwritten; the page says so in one line. Both backends refuse it
in the store itself (tests/test_store_backends.py)."""

import dataclasses
from pathlib import Path

import pytest
import streamlit as st
from streamlit.testing.v1 import AppTest

from fieldtl.store import Store, TestSetup, default_database_path

APP = str(Path(__file__).resolve().parents[1] / "fieldtl" / "ui" / "app.py")
SETUP = TestSetup(title="Invented room A to room B", test_type="airborne", receiving_volume_m3=40.0,
                  separating_area_m2=10.0)


@pytest.fixture
def one_test(tmp_path, monkeypatch):
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(tmp_path / "store"))
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    monkeypatch.delenv("FIELDTL_ACCESS_CODE", raising=False)
    monkeypatch.delenv("FIELDTL_STORE_URL", raising=False)
    st.cache_resource.clear()
    st.cache_data.clear()
    with Store.open(default_database_path()) as store:
        test = store.create_test(store.create_project("Invented project").id, SETUP)
    yield test
    st.cache_resource.clear()
    st.cache_data.clear()


def _setup_page(test):
    at = AppTest.from_file(APP, default_timeout=120)
    at.query_params["project"] = str(test.project_id)
    at.query_params["test"] = str(test.id)
    at.run()
    at.switch_page("views/setup.py").run()
    assert not at.exception, [e.value for e in at.exception]
    assert at.title[0].value == "Test set-up"
    return at


def _save(at, title):
    at.text_input[0].input(title)
    next(b for b in at.button if b.label == "Save test").click().run()
    assert not at.exception, [e.value for e in at.exception]


def test_a_setup_edit_after_someone_elses_change_is_refused(one_test):
    at = _setup_page(one_test)
    with Store.open(default_database_path()) as other:            # another tester, after the page was drawn
        theirs = other.update_test(one_test.id, dataclasses.replace(SETUP, receiving_volume_m3=55.0))
    _save(at, "My new title")
    assert "changed by someone else" in at.error[0].value and "make your change again" in at.error[0].value
    with Store.open(default_database_path()) as store:
        assert store.get_test(one_test.id) == theirs                 # not overwritten


def test_a_setup_edit_of_the_drawn_version_is_saved(one_test):
    at = _setup_page(one_test)
    _save(at, "My new title")
    assert not at.error and "Saved." in at.success[0].value
    with Store.open(default_database_path()) as store:
        saved = store.get_test(one_test.id)
    assert saved.setup.title == "My new title"
    again = _setup_page(saved)                                    # drawn anew after its own save
    _save(again, "My second title")
    assert not again.error
    with Store.open(default_database_path()) as store:
        assert store.get_test(one_test.id).setup.title == "My second title"
