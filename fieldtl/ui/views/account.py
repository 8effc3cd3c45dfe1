"""Account and team: on a team server, your own account (password, sign out), the members of each
project you have a role on (its owners give and take back roles), and new accounts
(administrators only).

Only on a team server; with a device's own store this page says so and stops. Every change goes
through the signed-in account's store handle, so the server's role checks decide (a refusal is
one line). Passwords typed here are passed on and never kept.
"""

import streamlit as st

from fieldtl.errors import FieldTLError
from fieldtl.ui import cached, common, gate, login

ROLE_CHOICES = {"tester": "Tester: adds and changes tests and takes", "reviewer": "Reviewer: reads and signs off",
                "owner": "Owner: everything, and gives roles"}
DONE = "fieldtl.members_done"     # Session State: what the last change of roles did, shown after the rerun

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
    if st.button("Sign out", width="stretch"):
        login.sign_out()
        st.rerun()

    with st.expander("Change your password"):
        with st.form("fieldtl-password", clear_on_submit=True):
            current = st.text_input("Current password", type="password", max_chars=login.MAX_NAME_CHARS)
            new = st.text_input("New password", type="password", max_chars=login.MAX_NAME_CHARS)
            again = st.text_input("New password again", type="password", max_chars=login.MAX_NAME_CHARS)
            changing = st.form_submit_button("Change password", width="stretch")
        if changing:
            try:
                refused = login.change_password(current, new, again)
            except FieldTLError as exc:
                refused = f"{common.md(exc)}."
            if refused is None:
                st.success("Password changed. Use the new one next time you sign in.")
            else:
                st.error(f"{refused} The password is unchanged.")

    st.subheader("Project members")
    projects = store.list_projects()
    if not projects:
        st.write("You have no role on any project yet. A project's owner gives roles.")
    else:
        chosen = st.selectbox("Project", [p.id for p in projects], key="fieldtl-members-project",
                              format_func=lambda i: next(p.name for p in projects if p.id == i))
        members = store.members(chosen)
        st.table([{"Account": m.name, "Role": m.role} for m in members])
        if st.session_state.get(DONE):
            st.success(st.session_state.pop(DONE))
        if not (me.is_admin or store.role_on(chosen) == "owner"):
            st.caption("Only the project's owners give and take back roles.")
        else:
            with st.form("fieldtl-grant", clear_on_submit=True):
                name = st.selectbox("Account", [a.name for a in store.accounts()], key="fieldtl-grant-name")
                role = st.selectbox("Role", list(ROLE_CHOICES), format_func=ROLE_CHOICES.get, key="fieldtl-grant-role")
                if st.form_submit_button("Give this role", width="stretch"):
                    try:
                        store.grant(chosen, name, role)
                    except FieldTLError as exc:
                        st.error(common.md(exc))
                    else:
                        st.session_state[DONE] = f"{common.md(name)} is now {role} on this project."
                        st.rerun()
            with st.form("fieldtl-revoke", clear_on_submit=True):
                gone = st.selectbox("Member", [m.name for m in members], key="fieldtl-revoke-name")
                if st.form_submit_button("Take the role away", width="stretch"):
                    try:
                        store.revoke(chosen, gone)
                    except FieldTLError as exc:
                        st.error(common.md(exc))
                    else:
                        st.session_state[DONE] = f"{common.md(gone)} no longer has a role on this project."
                        st.rerun()

    if me.is_admin:
        st.subheader("New account")
        with st.form("fieldtl-new-account", clear_on_submit=True):
            name = st.text_input("Name of the new account", max_chars=login.MAX_NAME_CHARS, key="fieldtl-new-name")
            password = st.text_input("Its first password", type="password", max_chars=login.MAX_NAME_CHARS,
                                     key="fieldtl-new-password")
            admin = st.checkbox("Administrator (adds accounts, sees every project)")
            if st.form_submit_button("Add the account", width="stretch"):
                try:
                    made = store.create_account(name.strip(), password, admin=admin)
                except FieldTLError as exc:
                    st.error(common.md(exc))
                else:
                    st.success(f"Account {common.md(made.name)} added. Give it a role on a project above.")
    common.cautions()
