"""The access gate in the app, driven with Streamlit's AppTest.

Without the code every page shows the gate and nothing else: reached through the entrypoint,
switched to, or run on its own. A non-ASCII code is "not right", never a traceback. Repeated
wrong codes make the next try wait (on an injected clock, never the wall clock). With the code,
every page draws its own title.
"""

from pathlib import Path

import pytest
import streamlit as st
from streamlit.testing.v1 import AppTest

from fieldtl.store import Store, TestSetup
from fieldtl.ui import access

UI = Path(__file__).resolve().parents[1] / "fieldtl" / "ui"
APP = str(UI / "app.py")
CODE = "k7m2-q9tx-4hvw"
SECRET_NAME = "Invented project Quillmere"        # must never reach a browser before the code
VIEWS = {"projects.py": "Projects", "setup.py": "Test set-up", "takes.py": "Takes", "results.py": "Results",
         "construction.py": "Construction check", "report.py": "Report and export",
         "signals.py": "Test signals", "safety.py": "Safety and about", "team.py": "Team server",
         "account.py": "Account and team"}


class FakeClock:
    def __init__(self) -> None:
        self.now_s = 50.0

    def __call__(self) -> float:
        return self.now_s


@pytest.fixture
def store_ids(tmp_path, monkeypatch):
    """A store with one invented project and test; the code set; a fresh limiter on a fake clock."""
    data_dir = tmp_path / "store"
    monkeypatch.setenv("FIELDTL_DATA_DIR", str(data_dir))
    monkeypatch.setenv("FIELDTL_NO_DEMO", "1")
    monkeypatch.setenv("FIELDTL_ACCESS_CODE", CODE)
    clock = FakeClock()
    monkeypatch.setattr(access, "LIMITER", access.GuessLimiter(clock=clock))
    data_dir.mkdir(parents=True)
    with Store.open(data_dir / "fieldtl.sqlite3") as store:
        project = store.create_project(SECRET_NAME, client="Invented client Ottergate")
        test = store.create_test(project.id, TestSetup(title="Invented room pair", test_type="airborne",
                                                       receiving_volume_m3=30.0))
    st.cache_resource.clear()
    st.cache_data.clear()
    yield project.id, test.id, clock
    st.cache_resource.clear()
    st.cache_data.clear()


def _texts(at) -> str:
    """Every label, value, placeholder and option drawn, as one string."""
    parts = []
    for node in [*at.main, *at.sidebar]:
        for attribute in ("label", "value", "placeholder", "options"):
            try:
                value = getattr(node, attribute, None)
            except Exception:                              # an element without that field
                value = None
            parts += [value] if isinstance(value, str) else [str(v) for v in value or ()] if isinstance(
                value, (list, tuple)) else []
    return "\n".join(parts)


def assert_only_the_gate(at):
    assert not at.exception, [e.value for e in at.exception]
    assert [t.value for t in at.title] == ["fieldtl"]
    assert [t.label for t in at.text_input] == ["Access code"]
    assert [b.label for b in at.button] == ["Open"]
    assert not at.download_button and not at.selectbox and not at.file_uploader and not at.page_link
    shown = _texts(at)
    assert SECRET_NAME not in shown and "Ottergate" not in shown and "Invented room pair" not in shown
    # No page list was sent: the only page Streamlit knows is the script being run (AppTest keeps
    # the pages of the last navigation message here).
    assert {info["script_path"] for info in at._registered_pages.values()} <= {at._script_path}


def _enter(at, text):
    at.text_input[0].input(text)
    at.button[0].click().run()
    return at


def _app() -> AppTest:
    at = AppTest.from_file(APP, default_timeout=120)
    return at.run()


def test_the_entrypoint_shows_only_the_gate(store_ids):
    assert_only_the_gate(_app())


@pytest.mark.parametrize("view", sorted(VIEWS))
def test_switching_to_a_page_without_the_code_shows_only_the_gate(store_ids, view):
    at = _app()
    at.session_state["fieldtl.project_id"], at.session_state["fieldtl.test_id"] = store_ids[:2]
    at.switch_page(f"views/{view}").run()
    assert_only_the_gate(at)


@pytest.mark.parametrize("view", sorted(VIEWS))
def test_a_page_run_on_its_own_refuses_without_the_code(store_ids, view):
    at = AppTest.from_file(str(UI / "views" / view), default_timeout=120)
    at.session_state["fieldtl.project_id"], at.session_state["fieldtl.test_id"] = store_ids[:2]
    assert_only_the_gate(at.run())


@pytest.mark.parametrize("typed", ["ключ-κλειδί-鍵", "k7m2-q9tx-4hvẃ", "\u202ek7m2\u202c", "😀" * 64])
def test_a_non_ascii_code_is_plainly_not_right(store_ids, typed):
    at = _enter(_app(), typed)
    assert_only_the_gate(at)
    assert [e.value for e in at.error] == ["That code is not right."]


def test_wrong_codes_make_the_next_try_wait_then_lock_out(store_ids):
    clock = store_ids[2]
    at = _app()
    for _ in range(2):                                    # two typing slips: no wait
        assert [e.value for e in _enter(at, "wrong-code-1234").error] == ["That code is not right."]
    assert "looked at in 5 s" in _enter(at, "wrong-code-1234").error[0].value
    _enter(at, CODE)                                      # the right code, but too soon: not looked at
    assert_only_the_gate(at)
    assert at.error[0].value.startswith("Too many wrong codes from here")
    clock.now_s += 5.0
    for wait_s in (10, 20, 40, 80, 900):                  # the 4th to the 8th wrong code
        _enter(at, "wrong-code-1234")
        clock.now_s += wait_s
    clock.now_s -= 1.0                                    # one second short of the 15-minute lockout
    _enter(at, CODE)
    assert_only_the_gate(at)
    assert "1 s" in at.error[0].value
    clock.now_s += 1.0
    _enter(at, CODE)
    assert [t.value for t in at.title] == ["Projects"]


def test_the_right_code_with_spaces_and_capitals_opens_every_page(store_ids):
    project_id, test_id, _ = store_ids
    at = _enter(_app(), " K7M2 Q9TX 4HVW ")
    assert not at.exception and [t.value for t in at.title] == ["Projects"]
    assert SECRET_NAME in _texts(at)
    at.session_state["fieldtl.project_id"], at.session_state["fieldtl.test_id"] = project_id, test_id
    for view, title in VIEWS.items():
        at.switch_page(f"views/{view}").run()
        assert not at.exception, (view, [e.value for e in at.exception])
        assert at.title[0].value == title, view


def test_a_weak_code_set_on_the_server_opens_nothing(store_ids, monkeypatch):
    monkeypatch.setenv("FIELDTL_ACCESS_CODE", "4f2a9c")
    at = _app()
    assert not at.exception and not at.text_input and [t.value for t in at.title] == ["fieldtl"]
    assert "too easy to guess" in at.error[0].value
