"""fieldtl's Streamlit app: the entrypoint draws the access gate, the navigation, and runs a page.

Start it with ``fieldtl app`` (which sets FIELDTL_DATA_DIR and, when served beyond this machine,
FIELDTL_ACCESS_CODE). Pages hold widgets only; everything they compute comes from the core.
"""

from __future__ import annotations

import hmac
import os
from pathlib import Path

import streamlit as st

from fieldtl.ui import state

PAGES = Path(__file__).resolve().parent / "pages"

# Phone-first: large touch targets, tables that never overflow, one column below 640 px.
_STYLE = """
<style>
.stButton button, .stDownloadButton button, .stFormSubmitButton button { min-height: 48px; width: 100%; }
div[data-baseweb="select"] > div, .stTextInput input, .stNumberInput input { min-height: 44px; }
.block-container { padding-left: 0.8rem; padding-right: 0.8rem; max-width: 760px; }
[data-testid="stDataFrame"] { max-width: 100%; overflow-x: hidden; }
</style>
"""


def _access_granted() -> bool:
    code = os.environ.get("FIELDTL_ACCESS_CODE", "")
    if not code or st.session_state.get(state.ACCESS_OK):
        return True
    st.title("fieldtl")
    st.write("This app is shared on the network. Enter the access code shown where it was started.")
    entered = st.text_input("Access code", type="password")
    if entered:
        if hmac.compare_digest(entered.strip(), code):
            st.session_state[state.ACCESS_OK] = True
            st.rerun()
        st.error("That code is not right.")
    return False


def main() -> None:
    st.set_page_config(page_title="fieldtl", page_icon="🧱", layout="centered")
    st.markdown(_STYLE, unsafe_allow_html=True)   # our own constant CSS; no user text here
    if not _access_granted():
        st.stop()
    navigation = st.navigation({
        "Site work": [
            st.Page(PAGES / "projects.py", title="Projects", icon="📁", default=True),
            st.Page(PAGES / "setup.py", title="Test set-up", icon="📐"),
            st.Page(PAGES / "takes.py", title="Takes", icon="🎙️"),
            st.Page(PAGES / "results.py", title="Results", icon="📊"),
        ],
        "More": [
            st.Page(PAGES / "construction.py", title="Construction check", icon="🧱"),
            st.Page(PAGES / "report.py", title="Report and export", icon="📄"),
            st.Page(PAGES / "signals.py", title="Test signals", icon="🔊"),
            st.Page(PAGES / "safety.py", title="Safety and about", icon="⚠️"),
        ],
    }, position="top")
    navigation.run()


main()
