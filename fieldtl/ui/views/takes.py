"""Takes: the checklist of what is still needed, and adding takes by recording, upload or pasting."""

import streamlit as st

from fieldtl.cautions import HEARING_CAUTION
from fieldtl.checklist import TakeCount, checklist
from fieldtl.errors import FieldTLError
from fieldtl.naming import NO_SOURCE_POSITION, renamed_text, take_names
from fieldtl.store import take_roles
from fieldtl.ui import cached, common, gate, login, state, takelist, takeview
from fieldtl.ui.recorder import recorder


def _checklist(test, included) -> None:
    """The progress bar and the list of what the test still needs (or the pasted columns present)."""
    setup = test.setup
    if test.band_levels_csv is not None:
        pasted_items = takelist.pasted_checklist(test)
        needed = [i for i in pasted_items if i.required]
        done = sum(1 for i in needed if i.have)
        st.progress(done / len(needed), text=f"Pasted levels: {done} of {len(needed)} needed columns present")
        with st.expander("Columns of the pasted levels", expanded=done < len(needed)):
            for item in pasted_items:
                state_word = (f"present ({item.have} column{'s' if item.have != 1 else ''})" if item.have
                              else "missing")
                st.write(f"{'✅' if item.have else '⬜'} **{state_word}**: `{item.column}`, {item.meaning}")
        st.caption("This test uses band levels pasted from a sound level meter: no recordings are needed, "
                   "and meter levels count as calibrated.")
    else:
        items = checklist(test_type=setup.test_type, receiving_volume_m3=setup.receiving_volume_m3,
                          source_volume_m3=setup.source_volume_m3,
                          takes=[TakeCount(t.role, t.speaker) for t in included])
        done = sum(item.done for item in items)
        st.progress(done / len(items), text=f"Checklist: {done} of {len(items)} done")
        with st.expander("What is still needed", expanded=done < len(items)):
            for item in items:
                word = "done" if item.done else "to do"
                st.write(f"{'✅' if item.done else '⬜'} **{word}**: {item.label}: {item.have} of {item.need}")


gate.require_access()
with common.fenced():
    store = cached.store()
    project, test = common.require_test()
    setup = test.setup
    st.title("Takes")
    common.heading(project, test)
    pending = takelist.removed()
    takes = [t for t in store.list_takes(test.id) if t.id not in pending]
    titles = takelist.titles(takes, setup.test_type)
    names = take_names(takes, test_type=setup.test_type)
    pasted = test.band_levels_csv is not None
    reviewing = login.reviews_only(project.id)

    # The checklist and the messages are drawn into these places once the takes that arrived in this
    # run are stored: one script run shows a new take everywhere (no second run after storing).
    checklist_box = st.container()
    st.page_link("views/results.py", label="See the results", icon="📊")

    # --- adding a take -------------------------------------------------------------------------------------
    if reviewing:
        st.info("You review this project: you can read its takes and results and sign off, "
                "but takes and levels are added and changed by its testers and owners.")
    else:
        st.subheader("Pasted band levels" if pasted else "Add a take")
        messages_box = st.container()
        role, speaker, method, channel = "source", 1, None, 0
        sweep: dict[str, float] = {}
        if not pasted:                           # what the next recording is (a pasted test needs none)
            roles = take_roles(setup.test_type)
            role = st.selectbox("What is this take", roles, format_func=common.ROLE_NAMES.get)
            if role not in NO_SOURCE_POSITION:
                label = ("Corner number (the k-th corner take of each position)" if role == "background_corner"
                         else common.position_label(setup.test_type))
                speaker = int(st.number_input(label, min_value=1, max_value=20, value=1, step=1))
            if role == "decay":
                method = st.radio("How the decay was made", list(common.METHOD_NAMES),
                                  format_func=common.METHOD_NAMES.get)
                if method == "sweep":
                    sweep = {"sweep_start_hz": st.number_input("Sweep start, Hz", value=40.0),
                             "sweep_stop_hz": st.number_input("Sweep stop, Hz", value=12_500.0),
                             "sweep_length_s": st.number_input("Sweep length, s", value=10.0)}
            channel = int(st.number_input("Channel of the file to use", min_value=1, max_value=16, value=1)) - 1

        def _store_take(data: bytes, name: str, *, source: str = "upload", recorder_settings: dict | None = None) -> None:
            existing = takelist.duplicate_of(data, takes)
            if existing is not None:
                takelist.say("warning", f"{common.md(name)} is already stored in this test as "
                                        f"{common.md(titles[existing.id])}: not stored again.")
                return
            try:
                take = store.add_take(test.id, data=data, original_name=name, role=role, speaker=speaker, method=method,
                                      channel=channel, source=source, recorder_settings=recorder_settings, **sweep)
            except FieldTLError as exc:
                takelist.say("error", common.md(common.plain_roles(renamed_text(str(exc), names))))
            else:
                takes.append(take)
                titles.update(takelist.titles(takes, setup.test_type))
                takelist.say("success", f"Stored {common.md(titles[take.id])}.")
                takeview.choose(take.id)          # the take just stored is the one offered for correction

        if pasted:
            tabs = dict(zip(("paste",), st.tabs(["Paste levels"])))
        else:
            tabs = dict(zip(("record", "upload", "paste"), st.tabs(["Record", "Upload files", "Paste levels"])))
        if "record" in tabs:
            with tabs["record"]:
                duration_s = st.number_input("Recording length, s", min_value=1.0, max_value=100.0,
                                             value=6.0 if role != "decay" else 3.0, step=1.0)
                point = "corner" if role == "background_corner" else "position"
                recorded = recorder(key="fieldtl-recorder", duration_s=duration_s, caution=HEARING_CAUTION,
                                    label=common.ROLE_NAMES[role] + ("" if role in NO_SOURCE_POSITION
                                                                     else f", {point} {speaker}"))
                if recorded is not None and recorded.take_id not in state.remembered(state.STORED_RECORDINGS):
                    state.remembered(state.STORED_RECORDINGS).add(recorded.take_id)
                    takelist.new_batch(test.id)
                    _store_take(recorded.wav_bytes, f"recorded-{recorded.take_id[:8]}.wav", source="recorder",
                                recorder_settings={**recorded.settings, "warnings": list(recorded.warnings),
                                                   "device_label": recorded.device_label})
                    for warning in recorded.warnings:
                        takelist.say("warning", common.md(warning))
        if "upload" in tabs:
            with tabs["upload"]:
                uploads = st.file_uploader("WAV or FLAC files from a recorder or sound level meter",
                                           type=["wav", "flac"], accept_multiple_files=True, key="take-upload")
                fresh = [u for u in uploads or [] if u.file_id not in state.remembered(state.STORED_UPLOADS)]
                if fresh:
                    takelist.new_batch(test.id)
                    for upload in fresh:
                        state.remembered(state.STORED_UPLOADS).add(upload.file_id)
                        _store_take(upload.getvalue(), upload.name)
        with tabs["paste"]:
            with st.expander("What to paste", expanded=pasted is False):
                st.markdown(takelist.paste_help(setup.test_type))
            text = common.text_field("Band levels", test.band_levels_csv or "", limit=common.BAND_TABLE_CHARS, area=True,
                                     height=160, placeholder="frequency_hz,L1_s1,L2_s1,B,T\n100,92.1,55.0,30.2,0.61")
            if st.button("Use these band levels"):
                try:
                    store.set_band_levels(test.id, text.strip() or None)
                except FieldTLError as exc:
                    st.error(common.md(exc))
                else:
                    st.rerun()
            if pasted and st.button("Clear the pasted levels (use recordings instead)"):
                store.set_band_levels(test.id, None)
                st.rerun()

    with checklist_box:
        _checklist(test, [t for t in takes if not t.excluded])
    if not reviewing:
        with messages_box:
            takelist.show_messages(test.id)
    if not pasted:
        takeview.draw(store, test, takes, titles, take_names(takes, test_type=setup.test_type), editable=not reviewing)
    st.page_link("views/results.py", label="See the results", icon="📊")
    common.cautions()
    if not pasted:
        cached.prepare_measuring()      # a restarted app: the analysis imported before the next take arrives
