"""Signing in to a team server: with a server store (FIELDTL_STORE_URL) each session signs in with an
account and password instead of the access code, and every page works through that account's store
handle, so its roles on each project decide what it may read and change (fieldtl.store.postgres).

The signed-in handle is kept in our own Session State key (server side; never a widget key).
Wrong passwords count against the session and the client's address as wrong access codes do.
"""

from __future__ import annotations

import os

import streamlit as st

from fieldtl.store.errors import PermissionDenied
from fieldtl.store.location import STORE_URL_VARIABLE
from fieldtl.ui import access

ACCOUNT_KEY = "fieldtl_account_store"     # Session State: the signed-in account's ServerStore
MAX_NAME_CHARS = 200


def server_configured() -> bool:
    return bool(os.environ.get(STORE_URL_VARIABLE, "").strip())


def signed_in() -> bool:
    return st.session_state.get(ACCOUNT_KEY) is not None


def reviews_only(project_id: int) -> bool:
    """Whether this session's account only reads and signs off on the project (the reviewer role).

    The pages then offer no way to add or change takes; the server refuses such writes anyway.
    """
    return server_configured() and signed_in() and account_store().role_on(project_id) == "reviewer"


def account_store():  # -> fieldtl.store.postgres.ServerStore
    """This session's account handle (the gate lets no page run before there is one)."""
    return st.session_state[ACCOUNT_KEY]


def draw(keys: tuple[str, ...]) -> None:
    """The sign-in form; on success the session keeps the account's handle and the script reruns."""
    from fieldtl.ui import cached

    st.write("This app works on a team server. Sign in with your account.")
    with st.form("fieldtl-login", clear_on_submit=True):
        name = st.text_input("Account", max_chars=MAX_NAME_CHARS)
        password = st.text_input("Password", type="password", max_chars=MAX_NAME_CHARS)
        submitted = st.form_submit_button("Sign in")
    wait_s = access.LIMITER.wait_s(keys)
    if submitted and wait_s <= 0 and name.strip() and password:
        try:
            st.session_state[ACCOUNT_KEY] = cached.server_store().login(name.strip(), password)
        except PermissionDenied:
            wait_s = access.LIMITER.failed(keys)
            st.error("Account name or password not recognised."
                     + (f" The next try is looked at in {access.describe_wait(wait_s)}." if wait_s > 0 else ""))
        else:
            access.LIMITER.succeeded(keys[:1])
            st.rerun()
    elif wait_s > 0:
        st.error(f"Too many wrong passwords from here: the next try is looked at in {access.describe_wait(wait_s)}.")
    elif submitted:
        st.info("Type your account name and password first.")


def change_password(current: str, new: str, again: str) -> str | None:
    """Change the signed-in account's own password; returns None, or a sentence saying why not.

    A wrong current password counts as a wrong guess (and waits as at sign-in); a new password the
    server refuses (too short) raises its one-line InputError."""
    from fieldtl.ui import gate

    keys = gate.client_keys()
    wait_s = access.LIMITER.wait_s(keys)
    if wait_s > 0:
        return f"Too many wrong passwords from here: the next try is looked at in {access.describe_wait(wait_s)}."
    if new != again:
        return "The two new passwords differ."
    try:
        account_store().change_password(current, new)
    except PermissionDenied:
        wait_s = access.LIMITER.failed(keys)
        return "The current password is not right." + (
            f" The next try is looked at in {access.describe_wait(wait_s)}." if wait_s > 0 else "")
    access.LIMITER.succeeded(keys[:1])
    return None


def sign_out() -> None:
    """Forget this session's account: the next run shows the sign-in form."""
    st.session_state.pop(ACCOUNT_KEY, None)
