"""Working offline from this device: this session's sign-in to a team server, and the words the
Team server page (views/team.py) shows for a check-out and a push.

Only with the embedded store (the app on a tester's own device). The signed-in account's handle
is kept for this session only, in our own Session State key; the password is never kept. Each
server address gets one connection pool per app process, opened at the first sign-in and
closed when the process ends (:func:`close_all`). Wrong passwords count against the session
and the client's address as wrong access codes do (ui/access.py).
"""

from __future__ import annotations

import atexit
import re
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import streamlit as st

from fieldtl.errors import InputError
from fieldtl.store.errors import PermissionDenied
from fieldtl.store.location import check_store_url
from fieldtl.ui import access, gate
from fieldtl.validate import echo

_STORED_NAME = re.compile(r"\b[0-9a-f]{64}(\.[A-Za-z0-9]+)?\b")   # the store's name of an audio file
LINK_KEY = "fieldtl.team_link"         # Session State: this session's Link, or absent
MAX_ADDRESS_CHARS = 300

_SERVERS: dict[tuple[str, Path], Any] = {}   # (address, recordings folder) → the server's own handle (its pool)
_LOCK = threading.Lock()


@dataclass(frozen=True, slots=True)
class Link:
    server: str          # the server's address as shown (never its password)
    account: Any         # fieldtl.store.postgres.ServerStore of the signed-in account


def current() -> Link | None:
    return st.session_state.get(LINK_KEY)


def sign_in(address: str, recordings: str, name: str, password: str, *, own_audio: Path) -> str | None:
    """Sign this session in; returns None, or a sentence saying why not (nothing is kept then).

    ``recordings`` is the folder where the team server keeps its audio, as this device reaches it
    (a shared folder); it must exist and must not be this device's own audio folder ``own_audio``
    (whose unused files this device's store removes). A wrong address, folder or an unreachable
    server raises a FieldTLError (one line, no password)."""
    keys = gate.client_keys()
    wait_s = access.LIMITER.wait_s(keys)
    if wait_s > 0:
        return f"Too many wrong passwords from here: the next try is looked at in {access.describe_wait(wait_s)}."
    address = address.strip()
    check_store_url(address, "Team server address")
    folder = Path(recordings.strip()).expanduser()
    if not recordings.strip() or not folder.is_dir():
        raise InputError(f"Team recordings folder: no folder {echo(recordings.strip())} on this device")
    if folder.resolve() == own_audio.resolve():
        raise InputError("Team recordings folder: that is this device's own recordings folder; "
                         "give the team server's shared folder")
    server = _server(address, folder.resolve())
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


def _server(address: str, recordings: Path) -> Any:
    # the driver is imported only when a server is used
    from fieldtl.store.postgres import ServerStore

    with _LOCK:
        found = _SERVERS.get((address, recordings))
        if found is None:
            found = _SERVERS[(address, recordings)] = ServerStore.open(address, audio_dir=recordings)
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
    words = plain(exc)
    hint = " Is the team recordings folder the right one?" if words != str(exc) else ""
    return f"Nothing was checked out: {words}.{hint}"


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
