"""fieldtl's Streamlit app: the entrypoint draws the access gate, the navigation, and runs a page.

Start it with ``fieldtl app`` (which sets FIELDTL_DATA_DIR and, when served beyond this machine or
when one is chosen, FIELDTL_ACCESS_CODE). Until a session has entered the code, this script draws
only the gate and stops before ``st.navigation``; each page in ``views/`` checks the gate again.
Pages hold widgets only; everything they compute comes from the core.
"""

from __future__ import annotations

from pathlib import Path

import streamlit as st

from fieldtl.errors import FieldTLError
from fieldtl.ui import cached, gate, login, state, takelist

# Not named "pages": Streamlit would find a folder of that name by itself and serve each file in it.
PAGES = Path(__file__).resolve().parent / "views"

# Phone-first: large touch targets, tables that never overflow, one column below 640 px.
_STYLE = """
<style>
.stButton button, .stDownloadButton button, .stFormSubmitButton button { min-height: 48px; width: 100%; }
div[data-baseweb="select"] > div, .stTextInput input, .stNumberInput input { min-height: 44px; }
.block-container { padding-left: 0.8rem; padding-right: 0.8rem; max-width: 760px; }
[data-testid="stDataFrame"] { max-width: 100%; overflow-x: hidden; }
/* information text at 4.5:1 or more on white (WCAG 2.x): captions and widget help darker than the default grey */
[data-testid="stCaptionContainer"], [data-testid="stCaptionContainer"] p,
[data-testid="stWidgetLabel"] p, [data-testid="stMarkdownContainer"] small { color: #474a54 !important; }
[data-testid="stCaptionContainer"] { opacity: 1 !important; }
</style>
"""


def _in_store(project_id: int, test_id: int | None) -> bool:
    """Whether the project (and, unless None, its test) is in the store."""
    try:
        tests = cached.store().list_tests(project_id)
    except FieldTLError:
        return False
    return test_id is None or any(t.id == test_id for t in tests)


def _menu(sections: dict[str, list[st.Page]], current: st.Page) -> None:
    """The page menu: a button labelled with words, on every page; a new page draws it closed."""
    with st.popover(f"☰ Menu · {current.title}", width="stretch", key=f"fieldtl-menu-{current.url_path}"):
        for section, pages in sections.items():
            st.caption(section)
            for page in pages:
                st.page_link(page, label=page.title, icon=page.icon, width="stretch")


def main() -> None:
    st.set_page_config(page_title="fieldtl", page_icon="🧱", layout="centered")
    st.markdown(_STYLE, unsafe_allow_html=True)   # our own constant CSS; no user text here
    if not gate.passed():
        gate.draw()      # the gate alone: no navigation, so no page and no page list is sent
    state.restore(_in_store)   # only after the gate: the address opens nothing before the code
    sections = {
        "Site work": [
            st.Page(PAGES / "projects.py", title="Projects", icon="📁", default=True),
            st.Page(PAGES / "setup.py", title="Test set-up", icon="📐"),
            st.Page(PAGES / "takes.py", title="Takes", icon="🎙️"),
            st.Page(PAGES / "results.py", title="Results", icon="📊"),
        ],
        "More": [
            st.Page(PAGES / "construction.py", title="Construction check", icon="🧱"),
            st.Page(PAGES / "complaints.py", title="Noise complaints", icon="🌙"),
            st.Page(PAGES / "report.py", title="Report and export", icon="📄"),
            st.Page(PAGES / "signals.py", title="Test signals", icon="🔊"),
            st.Page(PAGES / "safety.py", title="Safety and about", icon="⚠️"),
        ],
    }
    # The team pages: accounts on a team server, check-out and push on a device's own store. Both are
    # known to the navigation (a typed address reaches the page, which says why it does not apply);
    # the menu lists only the one that applies.
    team = {True: st.Page(PAGES / "account.py", title="Account and team", icon="👥"),
            False: st.Page(PAGES / "team.py", title="Team server", icon="🔄")}
    on_server = login.server_configured()
    sections["More"].insert(-1, team[on_server])
    navigation = st.navigation({**sections, "Not listed": [team[not on_server]]}, position="hidden")
    _menu(sections, navigation)
    if navigation.url_path != "takes":
        takelist.finish_removals(cached.store())   # a removed take's undo lasts until the Takes page is left
    navigation.run()


main()
