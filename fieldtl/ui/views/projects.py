"""Projects: choose or create a project and its tests; move a project between devices."""

import io

import streamlit as st

from fieldtl.errors import FieldTLError
from fieldtl.store import export_project, import_project
from fieldtl.ui import cached, common, gate, state

gate.require_access()
with common.fenced():
    store = cached.store()
    st.title("Projects")
    projects = store.list_projects()
    if projects:
        ids = [p.id for p in projects]
        current = state.project_id()
        chosen = st.selectbox("Project", ids, index=ids.index(current) if current in ids else 0,
                              format_func=lambda i: next(p.name for p in projects if p.id == i))
        state.open_project(chosen)
        project = store.get_project(chosen)
        st.caption(" · ".join(common.md(x) for x in (project.client, project.address, project.engineer) if x))
        tests = store.list_tests(project.id)
        open_test = next((t for t in tests if t.id == state.test_id()), None)
        if open_test is not None:            # a reload, a shared link or the last test used
            st.info(f"Open test: {common.md(open_test.setup.title)}")
            left, right = st.columns(2)
            with left:
                st.page_link("views/takes.py", label="Continue with its takes", icon="🎙️")
            with right:
                st.page_link("views/results.py", label="See its results", icon="📊")
        st.subheader("Tests")
        if not tests:
            st.write("No tests yet: set one up.")
        for test in tests:
            missing = common.missing_words(test)
            source = "pasted levels" if test.band_levels_csv is not None else "recordings"
            status = f"{source}, ready for results" if not missing else f"still needs: {missing}"
            opened = " (open)" if test.id == state.test_id() else ""
            if st.button(f"{common.md(test.setup.title)}{opened} — {test.setup.test_type}, {status}",
                         key=f"open-test-{test.id}"):
                state.open_test(test.id)
                st.switch_page("views/takes.py")
        if st.button("➕ New test in this project"):
            state.open_test(None)
            st.switch_page("views/setup.py")
    else:
        st.write("No projects yet.")

    with st.expander("New project", expanded=not projects):
        with st.form("new-project", clear_on_submit=True):
            name = common.text_field("Project name", limit=common.NAME_CHARS)
            client = common.text_field("Client", limit=common.NAME_CHARS)
            address = common.text_field("Site address", limit=common.ADDRESS_CHARS)
            engineer = common.text_field("Engineer", limit=common.NAME_CHARS)
            if st.form_submit_button("Create project"):
                try:
                    created = store.create_project(name, client=client, address=address, engineer=engineer)
                except FieldTLError as exc:
                    st.error(common.md(exc))
                else:
                    state.open_project(created.id)
                    st.rerun()

    with st.expander("Move a project to another device"):
        if projects:
            open_id = state.project_id()

            def _archive() -> bytes:      # made when the button is pressed, not on every page run
                buffer = io.BytesIO()
                export_project(store, open_id, buffer)
                return buffer.getvalue()

            common.download_button("Download this project as one archive", _archive,
                                   file_name=f"fieldtl-project-{open_id}.zip", mime="application/zip")
        archive = st.file_uploader("Add a project from an archive", type=["zip"], key="import-archive")
        if archive is not None and archive.file_id not in state.remembered(state.STORED_UPLOADS):
            state.remembered(state.STORED_UPLOADS).add(archive.file_id)
            try:
                imported = import_project(store, io.BytesIO(archive.getvalue()), source_name=archive.name)
            except FieldTLError as exc:
                st.error(common.md(exc))
            else:
                state.open_project(imported.id)
                st.success(f"Added {common.md(imported.name)}.")

    common.cautions()
