"""Takes: the checklist of what is still needed, and adding takes by recording, upload or pasting."""

import streamlit as st

from fieldtl.cautions import HEARING_CAUTION
from fieldtl.checklist import TakeCount, background_level_db, checklist, describe_take
from fieldtl.errors import FieldTLError
from fieldtl.store import take_roles
from fieldtl.survey import TakeSpec
from fieldtl.ui import cached, common, gate, state
from fieldtl.ui.recorder import recorder

gate.require_access()
with common.fenced():
    store = cached.store()
    project, test = common.require_test()
    setup = test.setup
    st.title("Takes")
    common.heading(project, test)
    takes = store.list_takes(test.id)
    included = [t for t in takes if not t.excluded]

    # --- checklist ------------------------------------------------------------------------------------
    items = checklist(test_type=setup.test_type, receiving_volume_m3=setup.receiving_volume_m3,
                      source_volume_m3=setup.source_volume_m3,
                      takes=[TakeCount(t.role, t.speaker) for t in included],
                      band_levels_pasted=test.band_levels_csv is not None)
    done = sum(item.done for item in items)
    st.progress(done / len(items), text=f"Checklist: {done} of {len(items)} done")
    with st.expander("What is still needed", expanded=done < len(items)):
        for item in items:
            st.write(f"{'✅' if item.done else '⬜'} {item.label}: {item.have} of {item.need}")
    if test.band_levels_csv is not None:
        st.info("This test uses pasted band levels; recordings of level roles are not needed.")

    # --- adding a take -------------------------------------------------------------------------------------
    st.subheader("Add a take")
    roles = take_roles(setup.test_type)
    role = st.selectbox("What is this take", roles, format_func=common.ROLE_NAMES.get)
    position_label = "Tapping-machine position" if setup.test_type == "impact" else "Loudspeaker position"
    speaker = int(st.number_input(position_label, min_value=1, max_value=20, value=1, step=1))
    method = None
    sweep: dict[str, float] = {}
    if role == "decay":
        method = st.radio("How the decay was made", list(common.METHOD_NAMES), format_func=common.METHOD_NAMES.get)
        if method == "sweep":
            sweep = {"sweep_start_hz": st.number_input("Sweep start, Hz", value=40.0),
                     "sweep_stop_hz": st.number_input("Sweep stop, Hz", value=12_500.0),
                     "sweep_length_s": st.number_input("Sweep length, s", value=10.0)}
    channel = int(st.number_input("Channel of the file to use", min_value=1, max_value=16, value=1)) - 1

    def _store_take(data: bytes, name: str, *, source: str = "upload", recorder_settings: dict | None = None) -> None:
        try:
            take = store.add_take(test.id, data=data, original_name=name, role=role, speaker=speaker, method=method,
                                  channel=channel, source=source, recorder_settings=recorder_settings, **sweep)
        except FieldTLError as exc:
            st.error(common.md(exc))
        else:
            st.success(f"Stored {common.md(take.original_name)} as {common.ROLE_NAMES[take.role].lower()}, "
                       f"position {take.speaker}.")

    record_tab, upload_tab, paste_tab = st.tabs(["Record", "Upload files", "Paste levels"])
    with record_tab:
        duration_s = st.number_input("Recording length, s", min_value=1.0, max_value=100.0, value=6.0 if role != "decay"
                                     else 3.0, step=1.0)
        recorded = recorder(key="fieldtl-recorder", duration_s=duration_s, caution=HEARING_CAUTION,
                            label=f"{common.ROLE_NAMES[role]}, position {speaker}")
        if recorded is not None and recorded.take_id not in state.remembered(state.STORED_RECORDINGS):
            state.remembered(state.STORED_RECORDINGS).add(recorded.take_id)
            _store_take(recorded.wav_bytes, f"recorded-{recorded.take_id[:8]}.wav", source="recorder",
                        recorder_settings={**recorded.settings, "warnings": list(recorded.warnings),
                                           "device_label": recorded.device_label})
            for warning in recorded.warnings:
                st.warning(common.md(warning))
    with upload_tab:
        uploads = st.file_uploader("WAV or FLAC files from a recorder or sound level meter", type=["wav", "flac"],
                                   accept_multiple_files=True, key="take-upload")
        for upload in uploads or []:
            if upload.file_id not in state.remembered(state.STORED_UPLOADS):
                state.remembered(state.STORED_UPLOADS).add(upload.file_id)
                _store_take(upload.getvalue(), upload.name)
    with paste_tab:
        st.caption("One row per band: frequency, then columns L1, L2, Li, B, T, L1c, L2c "
                   "(add _s2 for position 2). Comma, semicolon or tab separated.")
        text = common.text_field("Band levels", test.band_levels_csv or "", limit=common.BAND_TABLE_CHARS, area=True,
                                 height=160,
                            placeholder="frequency_hz,L1_s1_a,L2_s1_a,B,T\n100,92.1,55.0,30.2,0.61")
        if st.button("Use these band levels"):
            try:
                store.set_band_levels(test.id, text.strip() or None)
            except FieldTLError as exc:
                st.error(common.md(exc))
            else:
                st.success("Band levels stored.")
                st.rerun()

    # --- what each take showed --------------------------------------------------------------------------------
    st.subheader(f"Takes so far ({len(included)} used, {len(takes) - len(included)} left out)")
    calibration_take = next((t for t in included if t.role == "calibration"), None)
    offset_db = 0.0
    if calibration_take is not None:
        try:
            offset_db = cached.calibration(store.take_path(calibration_take), calibration_take.channel,
                                           setup.calibrator_db).offset_db
        except FieldTLError as exc:
            st.error(common.md(exc))
    summaries = {}
    with st.spinner("Reading the takes…"):
        for take in takes:
            if take.role in ("calibration", "calibration_after"):
                continue
            spec = TakeSpec(file=store.take_path(take), role=take.role, speaker=take.speaker, channel=take.channel,
                            method=take.method, sweep_start_hz=take.sweep_start_hz, sweep_stop_hz=take.sweep_stop_hz,
                            sweep_length_s=take.sweep_length_s)
            try:
                summaries[take.id] = cached.take_measurement(spec, offset_db)
            except FieldTLError as exc:
                summaries[take.id] = exc
    background = background_level_db([summaries[t.id][0] for t in included if isinstance(summaries.get(t.id), tuple)])
    for take in reversed(takes):
        with st.container(border=True):
            st.write(f"**{common.ROLE_NAMES[take.role]}**, position {take.speaker} · {common.md(take.original_name)}")
            result = summaries.get(take.id)
            if isinstance(result, FieldTLError):
                st.error(common.md(result))
            elif result is not None:
                st.caption(common.md(describe_take(result[0], result[1], background_db=background,
                                                   calibrated=calibration_take is not None)))
            elif take.role == "calibration" and calibration_take is not None and take.id == calibration_take.id:
                st.caption(f"calibration offset {offset_db:.2f} dB ({setup.calibrator_db:g} dB calibrator)")
            keep = st.toggle("Use this take", value=not take.excluded, key=f"use-take-{take.id}")
            if keep == take.excluded:
                store.set_take_excluded(take.id, not keep)
                st.rerun()
            if take.source == "upload":
                chosen_channel = int(st.number_input("Channel", min_value=1, max_value=16, value=take.channel + 1,
                                                     key=f"channel-take-{take.id}")) - 1
                if chosen_channel != take.channel:
                    try:
                        store.set_take_channel(take.id, chosen_channel)
                    except FieldTLError as exc:
                        st.error(common.md(exc))
                    else:
                        st.rerun()
    st.page_link("views/results.py", label="See the results", icon="📊")
    common.cautions()
