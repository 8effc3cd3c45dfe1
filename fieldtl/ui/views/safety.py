"""Safety and about: the cautions in full, what the tool does, and where the demo comes from."""

import streamlit as st

from fieldtl import __version__
from fieldtl.cautions import HEARING_CAUTION, INDICATIVE_CAUTION
from fieldtl.ui import common, gate

gate.require_access()
with common.fenced():
    st.title("Safety and about")
    st.warning(f"⚠️ {HEARING_CAUTION}")
    st.warning(f"⚖️ {INDICATIVE_CAUTION}")
    st.write(
        "fieldtl turns on-site recordings into field sound-insulation results: calibrated one-third-octave "
        "levels, reverberation times, D, Dn, DnT and R' (ISO 16283-1) or L'n and L'nT (ISO 16283-2), ratings "
        "(ISO 717-1/-2, ASTM E336/E413, E1007/E989), an uncertainty-aware verdict against your requirement, "
        "quality findings and a report.")
    st.write("Uncertainties follow ISO 12999-1:2020 (Tables 2 to 5) for the situation chosen in the test set-up; "
             "a field compliance test normally uses situation B.")
    st.write("The demo project is **invented**: a fictional building with synthesised recordings.")
    st.caption(f"fieldtl {__version__}")
