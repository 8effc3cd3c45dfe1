"""Review on a team server: the test's sign-offs, a sign-off button, and who changed what and when.

Drawn on the Report page; draws nothing with the embedded (single-user) store. The list of
changes is told in words from the audit table (fieldtl.store.postgres): never storage names or
hashes, which the audit rows also hold.
"""

from __future__ import annotations

import streamlit as st

from fieldtl.errors import FieldTLError
from fieldtl.ui import cached, common, login

_TABLE_WORDS = {"tests": "the test", "takes": "a take", "sign_offs": "a sign-off", "projects": "the project",
                "project_roles": "a role"}
_FIELD_WORDS = {"settings": "settings", "band_levels_csv": "pasted band levels", "excluded": "included/excluded",
                "channel": "channel", "role": "role", "speaker": "position", "method": "decay method"}
_HIDDEN = frozenset({"file_name", "sha256"})


def describe(entry) -> str:  # entry: fieldtl.store.postgres.AuditEntry
    """One change in words: what was done to what (names of takes, never their storage names)."""
    detail = entry.detail
    if entry.table_name == "takes" and entry.action == "insert":
        return f"added take {detail.get('original_name', '')}".strip()
    if entry.table_name == "sign_offs" and entry.action == "insert":
        return "signed the test off" + (f": {detail['note']}" if detail.get("note") else "")
    if entry.table_name == "tests" and entry.action == "insert":
        return "created the test"
    thing = _TABLE_WORDS.get(entry.table_name, entry.table_name)
    if entry.action == "delete":
        return f"removed {thing}"
    changed = [_FIELD_WORDS.get(k, k.replace("_", " ")) for k in detail if k not in _HIDDEN]
    return f"changed {thing}" + (f" ({', '.join(changed)})" if changed else "")


def draw(test_id: int) -> None:
    """Sign-offs, the sign-off button (reviewers and owners) and the changes, on a team server only."""
    if not login.server_configured():
        return
    store = cached.store()
    st.subheader("Review")
    with common.fenced():
        signed = store.sign_offs(test_id)
        for item in signed:
            st.write(f"Signed off by {common.md(item.user_name)} on {item.signed_at[:16].replace('T', ' ')} UTC"
                     + (f": {common.md(item.note)}" if item.note else ""))
        if not signed:
            st.write("Not signed off yet.")
        if store.role_on(store.get_test(test_id).project_id) in ("owner", "reviewer"):
            with st.form("fieldtl-sign-off", clear_on_submit=True):
                note = st.text_input("Note with the sign-off (optional)", max_chars=200)
                if st.form_submit_button("Sign off this test"):
                    try:
                        store.sign_off(test_id, note)
                    except FieldTLError as exc:
                        st.error(common.md(exc))
                    else:
                        st.rerun()
        with st.expander("Changes to this test"):
            st.table([{"When (UTC)": e.changed_at[:19].replace("T", " "), "Who": e.user_name, "What": describe(e)}
                      for e in store.audit_for_test(test_id)])
