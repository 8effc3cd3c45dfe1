"""Test set-up: the separating element, room geometry, requirement and declared construction."""

import dataclasses

import streamlit as st

from fieldtl.construction import MATERIALS
from fieldtl.errors import FieldTLError
from fieldtl.report.client import EXPLANATION, UNCONFIRMED_MARK
from fieldtl.store import CONSTRUCTION_SETTING, TestSetup, declared_construction
from fieldtl.ui import buildup, cached, common, gate, login, state, versions
from fieldtl.uncertainty import EXAMPLE_REQUIREMENTS, SITUATIONS


def _optional(value: float) -> float | None:
    return None if value == 0 else value


gate.require_access()
with common.fenced():
    store = cached.store()
    project = common.open_project()
    st.title("Test set-up")
    if project is None:
        st.info("Choose or create a project first.")
        st.page_link("views/projects.py", label="Go to Projects", icon="📁")
        common.cautions()
        st.stop()

    tests = store.list_tests(project.id)
    choices = [None] + [t.id for t in tests]
    current = state.test_id() if state.test_id() in choices else None
    chosen = st.selectbox("Test", choices, index=choices.index(current),
                          format_func=lambda i: "New test" if i is None else next(t.setup.title for t in tests if t.id == i))
    state.open_test(chosen)
    existing = next((t.setup for t in tests if t.id == chosen), None)
    drawn_version = next((versions.drawn(t) for t in tests if t.id == chosen), None)   # stale edits refused
    old = existing or TestSetup(title="", test_type="airborne", receiving_volume_m3=30.0)
    reviewing = login.reviews_only(project.id)
    if reviewing:
        st.info("You review this project: you can read how its tests are set up, but its testers and "
                "owners change them.")

    with st.form("test-setup"):
        title = common.text_field("Test name (rooms and element)", old.title, limit=common.NAME_CHARS,
                                  placeholder="Bedroom 4 to bedroom 7, level 2")
        test_type = st.radio("What is tested", ["airborne", "impact"], index=["airborne", "impact"].index(old.test_type),
                             format_func={"airborne": "Airborne (wall or floor, loudspeaker)",
                                          "impact": "Impact (floor, tapping machine)"}.get, horizontal=True)
        area = st.number_input("Separating area S, m² (0 if there is no common element)", min_value=0.0,
                               value=float(old.separating_area_m2 or 0.0), step=0.5)
        receiving = st.number_input("Receiving room volume, m³", min_value=0.1, value=float(old.receiving_volume_m3), step=1.0)
        source = st.number_input("Source room volume, m³ (0 if not known)", min_value=0.0,
                                 value=float(old.source_volume_m3 or 0.0), step=1.0)
        construction = common.text_field("Construction (as built, in words)", old.construction,
                                         limit=common.NOTE_CHARS, area=True, height=80)
        requirement = common.text_field("Requirement to check (your local code decides)", old.requirement or "",
                                       limit=common.REQUIREMENT_CHARS, placeholder="DnT,w + Ctr >= 45")
        lab_rw = st.number_input("Laboratory Rw of the element, dB (0 if not declared)", min_value=0.0,
                                 value=float(old.element_lab_rw_db or 0.0), step=1.0)
        situation = st.radio("Uncertainty situation (ISO 12999-1)", list(SITUATIONS),
                             index=list(SITUATIONS).index(old.uncertainty_situation),
                             format_func=lambda k: f"{k}: {SITUATIONS[k]}")
        calibrator_db = st.number_input("Calibrator level, dB", min_value=60.0, max_value=150.0,
                                        value=float(old.calibrator_db), step=1.0)
        build_up = buildup.fields(old.settings.get(CONSTRUCTION_SETTING, ""))
        saved = st.form_submit_button("Save test", disabled=reviewing)

    if saved:
        settings = dict(old.settings)
        construction_toml = buildup.chosen_text(old.settings.get(CONSTRUCTION_SETTING, ""), build_up)
        if construction_toml.strip():
            settings[CONSTRUCTION_SETTING] = construction_toml
        else:
            settings.pop(CONSTRUCTION_SETTING, None)
        try:
            setup = dataclasses.replace(old, title=title, test_type=test_type, separating_area_m2=_optional(area),
                                        receiving_volume_m3=receiving, source_volume_m3=_optional(source),
                                        construction=construction, requirement=requirement.strip() or None,
                                        element_lab_rw_db=_optional(lab_rw), uncertainty_situation=situation,
                                        calibrator_db=calibrator_db, settings=settings)
            declared_construction(setup, "declared build-up")   # refuse a bad construction before saving
            record = (store.update_test(chosen, setup, expected_updated_at=drawn_version) if chosen is not None
                      else store.create_test(project.id, setup))
            versions.forget(record.id)
        except FieldTLError as exc:
            st.error(common.md(exc))
        else:
            state.open_test(record.id)
            st.success("Saved. Next: record or upload the takes.")
            st.page_link("views/takes.py", label="Go to Takes", icon="🎙️")

    with st.expander("Example requirements (examples only: your local code decides)"):
        for label, text in EXAMPLE_REQUIREMENTS.items():
            st.write(f"`{text}` — {common.md(label)}")
        if any(label.endswith(UNCONFIRMED_MARK) for label in EXAMPLE_REQUIREMENTS):
            st.caption(common.md(EXPLANATION))
    with st.expander("Materials known to the construction check"):
        st.write(", ".join(buildup.material_words(name) for name in sorted(MATERIALS)))
    common.cautions()
