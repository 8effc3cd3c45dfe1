"""Account and team: on a team server, your own account (password, sign out), the members of the
projects you own (grant and take back roles), and new accounts (administrators only).

Only on a team server; with a device's own store this page says so and stops. Every change goes
through the signed-in account's store handle, so the server's role checks decide (a refusal is
one line). Passwords typed here are passed on and never kept.
"""

import streamlit as st

from fieldtl.errors import FieldTLError
from fieldtl.ui import cached, common, gate, login

ROLE_CHOICES = {"tester": "Tester: adds and changes tests and takes", "reviewer": "Reviewer: reads and signs off",
                "owner": "Owner: everything, and gives roles"}

gate.require_access()
with common.fenced():
    st.title("Account and team")
    if not login.server_configured():
        st.info("Accounts belong to a team server. This app works on this device's own store, where no "
                "account is needed; to work with a team server, use the Team server page.")
        common.cautions()
        st.stop()
    store = cached.store()
    me = store.account
    st.write(f"Signed in as **{common.md(me.name)}**" + (" (administrator)." if me.is_admin else "."))
    if st.button("Sign out"):
        login.sign_out()
        st.rerun()

    st.subheader("Project members")
    owned = [p for p in store.list_projects() if me.is_admin or store.role_on(p.id) == "owner"]
    if not owned:
        st.write("You own no project, so you give no roles. A project's owner gives them.")
    else:
        chosen = st.selectbox("Project", [p.id for p in owned],
                              format_func=lambda i: next(p.name for p in owned if p.id == i))
        with st.form("fieldtl-grant", clear_on_submit=True):
            name = st.text_input("Account name", max_chars=login.MAX_NAME_CHARS, key="fieldtl-grant-name")
            role = st.selectbox("Role", list(ROLE_CHOICES), format_func=ROLE_CHOICES.get, key="fieldtl-grant-role")
            if st.form_submit_button("Give this role"):
                try:
                    store.grant(chosen, name.strip(), role)
                except FieldTLError as exc:
                    st.error(common.md(exc))
                else:
                    st.success(f"{common.md(name.strip())} is now {role} on this project.")

    if me.is_admin:
        st.subheader("New account")
        with st.form("fieldtl-new-account", clear_on_submit=True):
            name = st.text_input("Name of the new account", max_chars=login.MAX_NAME_CHARS, key="fieldtl-new-name")
            password = st.text_input("Its first password", type="password", max_chars=login.MAX_NAME_CHARS,
                                     key="fieldtl-new-password")
            admin = st.checkbox("Administrator (adds accounts, sees every project)")
            if st.form_submit_button("Add the account"):
                try:
                    made = store.create_account(name.strip(), password, admin=admin)
                except FieldTLError as exc:
                    st.error(common.md(exc))
                else:
                    st.success(f"Account {common.md(made.name)} added. Give it a role on a project above.")
    common.cautions()
