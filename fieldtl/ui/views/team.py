"""Team server: sign in to the team's server, take a project onto this device, send the work back.

Only for the app on a device's own store; on a team server this page says so and stops. The
account's sign-in lasts for this browser session only (ui/teamlink.py); the password is never
kept. Check-out, the preview of a push and the push itself are the core's (fieldtl.store.offline).
"""

import streamlit as st

from fieldtl.errors import FieldTLError
from fieldtl.store import offline
from fieldtl.ui import cached, common, gate, login, state, teamlink

ROLE_WORDS = {"owner": "owner", "tester": "tester", "reviewer": "reviewer: reads and signs off"}
CHOICES = {"mine": "Keep mine", "server": "Keep the server's"}
PREVIEWS = "fieldtl.push_previews"       # Session State: local project id → the last preview drawn
OUTCOMES = "fieldtl.push_outcomes"       # Session State: local project id → (kind, sentence) after a push


def _when(iso_utc: str) -> str:
    return f"{iso_utc[:16].replace('T', ' ')} UTC"


gate.require_access()
with common.fenced():
    st.title("Team server")
    if login.server_configured():
        st.info("This app already works on the team server: every change goes straight to it. To work "
                "without a network, check the project out from the fieldtl app on your own device.")
        common.cautions()
        st.stop()
    local = cached.store()
    link = teamlink.current()
    st.caption("Take a project from your team's server onto this device, work on site without a network, "
               "and send the work back when you are in range again.")

    if link is None:
        st.subheader("Sign in to the team server")
        with st.form("fieldtl-team-sign-in", clear_on_submit=True):
            address = st.text_input("Team server address", max_chars=teamlink.MAX_ADDRESS_CHARS,
                                    placeholder="postgresql://fieldtl@server.example/fieldtl")
            name = st.text_input("Account", max_chars=login.MAX_NAME_CHARS)
            password = st.text_input("Password", type="password", max_chars=login.MAX_NAME_CHARS)
            submitted = st.form_submit_button("Sign in", width="stretch")
        if submitted:
            if not (address.strip() and name.strip() and password):
                st.info("Type the server address, your account name and your password first.")
            else:
                try:
                    refused = teamlink.sign_in(address, name, password)
                except FieldTLError as exc:
                    st.error(common.md(exc))
                else:
                    if refused is None:
                        st.rerun()
                    st.error(refused)
        st.caption("Your password is used to sign in and is not kept on this device.")
    else:
        account = link.account
        st.write(f"Signed in as **{common.md(account.account.name)}** on {common.md(link.server)}.")
        if st.button("Sign out of the team server", width="stretch"):
            teamlink.sign_out()
            st.rerun()
        st.subheader("Check a project out to this device")
        projects = account.list_projects()
        if not projects:
            st.write("This account has no role on any project of the team server yet.")
        else:
            roles = {p.id: account.role_on(p.id) for p in projects}
            chosen = st.selectbox("Project on the team server", [p.id for p in projects],
                                  format_func=lambda i: next(f"{p.name} ({ROLE_WORDS.get(roles[i], 'administrator')})"
                                                             for p in projects if p.id == i))
            earlier = [r for r in offline.checked_out_projects(local)
                       if r.server == link.server and r.server_project_id == chosen]
            if earlier:
                st.caption(f"Already checked out here on {_when(earlier[0].checked_out_at)}; checking it out "
                           "again makes a second copy on this device.")
            if st.button("Check out to this device", width="stretch"):
                try:
                    local_id = offline.check_out(account, chosen, local)
                except FieldTLError as exc:
                    st.error(common.md(teamlink.checkout_refusal(exc)))
                else:
                    state.open_project(local_id)
                    st.success(f"{common.md(local.get_project(local_id).name)} is now on this device: open it "
                               "from Projects, work offline, and send it back below.")

    st.subheader("Projects checked out here")
    records = offline.checked_out_projects(local)
    if not records:
        st.write("None yet.")
    previews, outcomes = st.session_state.setdefault(PREVIEWS, {}), st.session_state.setdefault(OUTCOMES, {})
    for record in records:
        pid = record.local_project_id
        with st.container(border=True):
            st.write(f"**{common.md(local.get_project(pid).name)}** — from {common.md(record.server)}, "
                     f"checked out {_when(record.checked_out_at)}")
            kind, sentence = outcomes.get(pid, (None, ""))
            if kind is not None:
                getattr(st, kind)(sentence)
            if link is None or link.server != record.server:
                st.caption(f"Sign in to {common.md(record.server)} above to send this project back.")
                continue
            role = link.account.role_on(record.server_project_id)
            if role not in ("owner", "tester") and not link.account.account.is_admin:
                st.caption(f"Your role on this project ({ROLE_WORDS.get(role, 'none')}) does not allow sending "
                           "changes; the team server will refuse them.")
            if st.button("Check what would be sent", key=f"preview-{pid}", width="stretch"):
                outcomes.pop(pid, None)
                try:
                    previews[pid] = offline.preview_push(local, link.account, pid)
                except FieldTLError as exc:
                    previews.pop(pid, None)
                    st.error(common.md(exc))
            preview = previews.get(pid)
            if preview is None:
                continue
            st.write(teamlink.preview_words(preview))
            resolve = {}
            for conflict in preview.conflicts:
                st.markdown(f"**{common.md(conflict.title)}**: changed here and on the team server.")
                st.table(teamlink.conflict_rows(conflict))
                picked = st.radio(f"What to keep for {common.md(conflict.title)}", list(CHOICES),
                                  format_func=CHOICES.get, index=None, key=f"resolve-{pid}-{conflict.local_test_id}")
                if picked is not None:
                    resolve[conflict.local_test_id] = picked
            unresolved = len(resolve) < len(preview.conflicts)
            if unresolved:
                st.caption("Choose what to keep for each test above before sending.")
            if st.button("Send to the team server", key=f"push-{pid}", disabled=unresolved, type="primary",
                         width="stretch"):
                previews.pop(pid, None)
                try:
                    result = offline.push(local, link.account, pid, resolve=resolve)
                except offline.SentNotUpdatedHere as exc:     # the server has it; this device is behind
                    said = common.md(teamlink.plain(exc))
                    outcomes[pid] = ("warning", f"{said[:1].upper()}{said[1:]}.")
                except FieldTLError as exc:
                    outcomes[pid] = ("error", f"Nothing was sent. {common.md(teamlink.plain(exc))}")
                else:
                    if result.pushed:
                        outcomes[pid] = ("success", f"Sent to the team server: {teamlink.result_words(result)}.")
                    else:
                        previews[pid] = offline.preview_push(local, link.account, pid)
                        outcomes[pid] = ("error", ("Nothing was sent: the team server changed meanwhile. "
                                                   "Choose again for each test."))
                st.rerun()
    common.cautions()
