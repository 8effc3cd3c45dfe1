"""The access gate: nothing of a project, no page and no page list reaches a browser before the code.

``app.py`` draws the gate instead of the navigation until the session has passed it, and every
page calls :func:`require_access` first, so a page run by any other route refuses too. Whether a
session passed is kept in our own Session State key (server side; never a widget key).
"""

from __future__ import annotations

import os

import streamlit as st
from streamlit.runtime.scriptrunner import get_script_run_ctx

from fieldtl.errors import InputError
from fieldtl.ui import access, login, state


def _configured_code() -> str:
    return os.environ.get(access.ENV_VAR, "")


def passed() -> bool:
    """True when this session may see projects: no code is set (local use) or it was entered;
    with a team server, when an account signed in (ui/login.py)."""
    if login.server_configured():
        return login.signed_in()
    return not _configured_code() or st.session_state.get(state.ACCESS_OK) is True


def client_keys() -> tuple[str, ...]:
    """Keys wrong guesses count against: this session and, where known, the client's address."""
    ctx = get_script_run_ctx()
    keys = [f"session:{ctx.session_id if ctx is not None else 'none'}"]
    address = st.context.ip_address
    if address:
        keys.append(f"address:{address}")
    return tuple(keys)


def draw() -> None:
    """The gate form alone, then stop the script run (nothing after it is drawn)."""
    code = _configured_code()
    st.title("fieldtl")
    if login.server_configured():       # accounts replace the access code
        login.draw(client_keys())
        st.stop()
    try:
        access.check_chosen_code(code)
    except InputError:
        st.error("This server's access code is too easy to guess. Restart it with `fieldtl app` "
                 "(a code is made for you) or choose a longer one.")
        st.stop()
    st.write("This app is shared on the network. Enter the access code shown where it was started.")
    keys = client_keys()
    with st.form("fieldtl-gate", clear_on_submit=True):
        entered = st.text_input("Access code", type="password", max_chars=access.MAX_CODE_CHARS,
                                placeholder="xxxx-xxxx-xxxx")
        submitted = st.form_submit_button("Open")
    wait_s = access.LIMITER.wait_s(keys)
    if submitted and wait_s <= 0 and entered.strip():
        if access.matches(entered, code):
            access.LIMITER.succeeded(keys[:1])       # the address keeps its count: others may share it
            st.session_state[state.ACCESS_OK] = True
            st.rerun()
        wait_s = access.LIMITER.failed(keys)
        st.error("That code is not right." + (f" The next try is looked at in {access.describe_wait(wait_s)}."
                                              if wait_s > 0 else ""))
    elif wait_s > 0:
        st.error(f"Too many wrong codes from here: the next try is looked at in {access.describe_wait(wait_s)}.")
    elif submitted:
        st.info("Type the code first.")
    st.stop()


def require_access() -> None:
    """First call of every page: draw only the gate and stop unless this session passed it."""
    if not passed():
        draw()
