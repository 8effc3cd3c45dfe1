"""Working offline from this device: this session's sign-in to a team server, and the words the
Team server page (views/team.py) shows for a check-out and a push.

Only with the embedded store (the app on a tester's own device). The signed-in account's handle
is kept for this session only, in our own Session State key; the password is never kept. Each
server address gets one connection pool per app process, opened at the first sign-in and
closed when the process ends (:func:`close_all`); the recordings come from the server's database
(cached in this device's data folder, apart from its own recordings). Wrong passwords count
against the session and the client's address as wrong access codes do (ui/access.py).
"""

from __future__ import annotations

import atexit
import re
import threading
from dataclasses import dataclass
from typing import Any

import streamlit as st

from fieldtl.store.errors import PermissionDenied
from fieldtl.store.location import check_store_url
from fieldtl.ui import access, gate

_STORED_NAME = re.compile(r"\b[0-9a-f]{64}(\.[A-Za-z0-9]+)?\b")   # the store's name of an audio file
LINK_KEY = "fieldtl.team_link"         # Session State: this session's Link, or absent
MAX_ADDRESS_CHARS = 300

_SERVERS: dict[str, Any] = {}   # address → the server's own handle (its pool; its audio cached in the data folder)
_LOCK = threading.Lock()


@dataclass(frozen=True, slots=True)
class Link:
    server: str          # the server's address as shown (never its password)
    account: Any         # fieldtl.store.postgres.ServerStore of the signed-in account


def current() -> Link | None:
    return st.session_state.get(LINK_KEY)


def sign_in(address: str, name: str, password: str) -> str | None:
    """Sign this session in; returns None, or a sentence saying why not (nothing is kept then).

    The server keeps its recordings in its database: the address and the account are all it
    takes. A wrong address or an unreachable server raises a FieldTLError (one line, no password)."""
    keys = gate.client_keys()
    wait_s = access.LIMITER.wait_s(keys)
    if wait_s > 0:
        return f"Too many wrong passwords from here: the next try is looked at in {access.describe_wait(wait_s)}."
    address = address.strip()
    check_store_url(address, "Team server address")
    server = _server(address)
    try:
        account = server.login(name.strip(), password)
    except PermissionDenied:
        wait_s = access.LIMITER.failed(keys)
        return "Account name or password not recognised." + (
            f" The next try is looked at in {access.describe_wait(wait_s)}." if wait_s > 0 else "")
    access.LIMITER.succeeded(keys[:1])
    st.session_state[LINK_KEY] = Link(server.name, account)
    return None


def sign_out() -> None:
    st.session_state.pop(LINK_KEY, None)


def _server(address: str) -> Any:
    # the driver is imported only when a server is used
    from fieldtl.store.postgres import ServerStore

    with _LOCK:
        found = _SERVERS.get(address)
        if found is None:
            found = _SERVERS[address] = ServerStore.open(address)
        return found


@atexit.register
def close_all() -> None:
    """Close every server's pool (at exit; tests call it between servers)."""
    with _LOCK:
        for server in _SERVERS.values():
            server.close()
        _SERVERS.clear()


def plain(exc: Exception) -> str:
    """A core message with any stored file name (the audio's content hash) replaced by plain words."""
    return _STORED_NAME.sub("a recording", str(exc))


def checkout_refusal(exc: Exception) -> str:
    """Why a check-out failed, in plain words (nothing was copied: the core adds the project last)."""
    return f"Nothing was checked out: {plain(exc)}."


# --- words -------------------------------------------------------------------------------------------


def conflict_rows(conflict) -> list[dict[str, str]]:  # conflict: fieldtl.store.offline.SettingsConflict
    """The side-by-side table of one test in conflict: what differs, its value here and on the server."""
    return [{"What": d.name, "On this device": d.here, "On the team server": d.server} for d in conflict.differences]


def _n(count: int, word: str) -> str:
    return f"{count} {word}{'' if count == 1 else 's'}"


def preview_words(preview) -> str:  # preview: fieldtl.store.offline.PushPreview
    """What a push would do, in counts, one line each: added, updated, removed (and the tests waiting
    for a choice). Markdown line breaks between the lines."""
    if not preview.conflicts and not any((preview.tests_to_add, preview.takes_to_add, preview.tests_to_update,
                                          preview.takes_to_update, preview.takes_to_remove)):
        return "Nothing to send: the team server already has everything of this project."
    lines = [f"Would be added: {_n(preview.tests_to_add, 'test')}, {_n(preview.takes_to_add, 'take')}.",
             (f"Would be updated: {_n(preview.tests_to_update, 'test')} (settings), "
              f"{_n(preview.takes_to_update, 'take')} (details)."),
             f"Would be removed: {_n(preview.takes_to_remove, 'take')} (removed on this device)."]
    if preview.conflicts:
        lines.append(f"{_n(len(preview.conflicts), 'test')} changed here and on the team server: choose below "
                     "what to keep (not counted until then).")
    return "  \n".join(lines)


def result_words(result) -> str:  # result: fieldtl.store.offline.PushResult
    """What a push did, in counts."""
    return (f"added {_n(result.tests_added, 'test')} and {_n(result.takes_added, 'take')}; updated "
            f"{_n(result.tests_updated, 'test')} (settings) and {_n(result.takes_updated, 'take')} (details); "
            f"removed {_n(result.takes_removed, 'take')}")
