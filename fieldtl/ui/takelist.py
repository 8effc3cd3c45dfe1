"""Takes page parts: storing a take once, messages that stay until the next take, removal with
undo (until the page is left), corrections, and the checklist of a test fed by pasted levels."""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from dataclasses import dataclass

import streamlit as st

from fieldtl.errors import FieldTLError
from fieldtl.naming import NO_SOURCE_POSITION, take_titles
from fieldtl.store import Store, TakeRecord, TestRecord, take_roles
from fieldtl.store.survey_view import band_columns
from fieldtl.survey import REQUIRED_ROLES
from fieldtl.ui import common

MESSAGES = "fieldtl.take_messages"      # (test id, [(kind, text)]) about the last take(s); kept until the next
REMOVED = "fieldtl.removed_takes"       # {take id: excluded before removal}; deleted when the page is left

# Pasted columns: title, what it holds (the paste help and the pasted-levels checklist share these words).
COLUMNS: dict[str, tuple[str, str]] = {
    "source": ("L1", "source-room level with the loudspeaker on, dB"),
    "receiving": ("L2", "receiving-room level with the loudspeaker on, dB"),
    "impact": ("Li", "receiving-room level with the tapping machine on, dB"),
    "background": ("B", "background noise in the receiving room, dB"),
    "decay": ("T", "reverberation time of the receiving room, s"),
    "source_corner": ("L1c", "source-room corner level (rooms under 25 m³), dB"),
    "receiving_corner": ("L2c", "receiving-room corner level (rooms under 25 m³), dB"),
    "background_corner": ("Bc", "background noise in a receiving-room corner, source off (`_s2`: corner 2), dB"),
}


def say(kind: str, text: str) -> None:
    """Add a message about the take just handled (shown until the next take is stored)."""
    st.session_state[MESSAGES][1].append((kind, text))


def show_messages(test_id: int) -> None:
    # Always one container, however many messages: the widgets below keep their place in the page,
    # so the recorder's frame is not drawn anew (and does not lose its state) when a message appears.
    with st.container():
        shown_for, messages = st.session_state.get(MESSAGES, (None, []))
        for kind, text in messages if shown_for == test_id else ():
            {"success": st.success, "warning": st.warning, "error": st.error}.get(kind, st.info)(text)


def new_batch(test_id: int) -> None:
    """A new take arrived for this test: the messages about the previous one go."""
    st.session_state[MESSAGES] = (test_id, [])


def removed() -> dict[int, bool]:
    return st.session_state.setdefault(REMOVED, {})


def finish_removals(store: Store) -> None:
    """Delete the takes removed on the Takes page (called when another page runs)."""
    pending = st.session_state.get(REMOVED)
    if not pending:
        return
    for take_id in list(pending):
        try:
            store.delete_take(take_id)
        except FieldTLError:
            pass            # already gone (another tab)
        pending.pop(take_id, None)


def duplicate_of(data: bytes, takes: Sequence[TakeRecord]) -> TakeRecord | None:
    """The take of this test already holding exactly this audio (same SHA-256 of the file), if any."""
    digest = hashlib.sha256(data).hexdigest()
    return next((t for t in takes if t.sha256 == digest), None)


@dataclass(frozen=True, slots=True)
class PastedItem:
    column: str
    meaning: str
    have: int
    required: bool


def pasted_checklist(test: TestRecord) -> tuple[PastedItem, ...]:
    """Which columns the pasted band levels hold and which the test type still needs."""
    columns = band_columns(test.setup, test.band_levels_csv, "pasted levels")
    required = REQUIRED_ROLES[test.setup.test_type]
    items = []
    for role in take_roles(test.setup.test_type):
        if role not in COLUMNS:
            continue
        title, meaning = COLUMNS[role]
        have = sum(1 for c in columns if c.role == role)
        if have or role in required:
            items.append(PastedItem(title, meaning, have, role in required))
    return tuple(items)


def paste_help(test_type: str) -> str:
    """The header row and every column, in words."""
    roles = [r for r in take_roles(test_type) if r in COLUMNS]
    example = ("frequency_hz,L1_s1,L2_s1,L1_s2,L2_s2,B,T" if test_type == "airborne"
               else "frequency_hz,Li_s1,Li_s2,Li_s3,Li_s4,B,T")
    lines = [f"First row, the header: `{example}` (the first column is always `frequency_hz`). "
             "Then one row per one-third-octave band, e.g. 50 to 5000 Hz. Columns:"]
    lines += [f"- `{COLUMNS[r][0]}`: {COLUMNS[r][1]}" for r in roles]
    position = "tapping-machine" if test_type == "impact" else "loudspeaker"
    lines.append(f"- add `_s2` (and so on) for {position} position 2 (without it, position 1), and `_a`, `_b`... "
                 "to tell microphone positions apart, e.g. `L2_s1_a,L2_s1_b`.")
    lines.append("An empty cell means not measured. Separate cells by commas, semicolons or tabs. "
                 "Levels from a sound level meter count as calibrated.")
    return "\n".join(lines)


def correction_form(store: Store, take: TakeRecord, test_type: str) -> None:
    """Correct the take's role, position and decay method."""
    roles = take_roles(test_type)
    with st.form(f"correct-take-{take.id}"):
        role = st.selectbox("What this take is", roles, index=roles.index(take.role),
                            format_func=common.ROLE_NAMES.get, key=f"correct-role-{take.id}")
        speaker = int(st.number_input(common.position_label(test_type) + " (not used for background or calibrator; "
                                      "the corner number for a corner's background)",
                                      min_value=1, max_value=20, value=take.speaker, step=1,
                                      key=f"correct-speaker-{take.id}"))
        methods = list(common.METHOD_NAMES)
        method = st.selectbox("Decay method (decays only)", methods,
                              index=methods.index(take.method) if take.method in methods else 0,
                              format_func=common.METHOD_NAMES.get, key=f"correct-method-{take.id}")
        if st.form_submit_button("Save the correction"):
            decay = role == "decay"
            sweep = {k: getattr(take, k) for k in ("sweep_start_hz", "sweep_stop_hz", "sweep_length_s")} \
                if decay and method == "sweep" else {}
            try:
                store.update_take(take.id, role=role, speaker=1 if role in NO_SOURCE_POSITION else speaker,
                                  method=method if decay else None, **sweep)
            except FieldTLError as exc:
                st.error(common.md(common.plain_roles(str(exc))))
            else:
                st.rerun()


def titles(takes: Sequence[TakeRecord], test_type: str) -> dict[int, str]:
    return take_titles(takes, test_type=test_type)
