"""Noise complaints: a complaint file's recording periods, the occupant's diary, the link to a
separation test of this store, reference lines, and the noise-record report. Widgets only: the
analysis is fieldtl.noise, the rows are fieldtl.store.complaints."""

import json
import tempfile
from pathlib import Path

import streamlit as st

from fieldtl.cautions import NOISE_RECORD_CAUTION, RECORDING_CAUTION
from fieldtl.errors import FieldTLError, InputError
from fieldtl.ui import cached, common, gate

COMPLAINT_ID = "fieldtl.complaint_id"      # our own Session State key (not a widget's)
ZONES = ("Europe/London", "Europe/Dublin", "Europe/Paris", "Europe/Berlin", "Europe/Madrid", "Europe/Rome",
         "America/New_York", "America/Chicago", "America/Denver", "America/Los_Angeles", "America/Toronto",
         "Australia/Sydney", "Asia/Tokyo", "UTC")

gate.require_access()
with common.fenced():
    from fieldtl.noise.diary import match_diary, read_diary_csv
    from fieldtl.noise.export import events_to_csv, intervals_to_csv, record_to_json
    from fieldtl.noise.reference import WHO_BEDROOM_NIGHT, compare
    from fieldtl.noise.stored import record_from_json
    from fieldtl.report.export import json_text

    store = cached.store()
    rows = store.complaints
    st.title("Noise complaints")
    st.info(f"ℹ️ {NOISE_RECORD_CAUTION}")
    if rows is None:
        st.warning("Complaint files are kept in this device's own store; this app is connected to a team "
                   "server, which does not hold them.")
        common.cautions()
        st.stop()
    complaints = rows.list()
    if complaints:
        ids = [c.id for c in complaints]
        current = st.session_state.get(COMPLAINT_ID)
        chosen = st.selectbox("Complaint file", ids, index=ids.index(current) if current in ids else 0,
                              format_func=lambda i: next(c.reference for c in complaints if c.id == i))
        st.session_state[COMPLAINT_ID] = chosen
    else:
        chosen = None
        st.write("No complaint files yet.")

    with st.expander("New complaint file", expanded=not complaints):
        with st.form("new-complaint", clear_on_submit=True):
            reference = common.text_field("Reference (anonymous, e.g. Flat 2, 14 Station Road)", limit=common.NAME_CHARS)
            rooms = common.text_field("Rooms (e.g. bedroom next to flat 3)", limit=common.NAME_CHARS)
            zone_name = st.selectbox("Time zone of the recordings", ZONES)
            if st.form_submit_button("Create complaint file"):
                if not reference.strip():
                    st.error("Give the complaint a reference.")
                else:
                    st.session_state[COMPLAINT_ID] = rows.create(reference, rooms=rooms, time_zone=zone_name).id
                    st.rerun()

    if chosen is not None:
        complaint = rows.get(chosen)
        st.caption(f"{common.md(complaint.rooms)} · {complaint.time_zone}")
        tests = [(t.id, f"{p.name}: {t.setup.title} ({t.setup.test_type})")
                 for p in store.list_projects() for t in store.list_tests(p.id)]
        test_ids = [None] + [i for i, _ in tests]
        linked = st.selectbox("Separation test of the wall or floor", test_ids,
                              index=test_ids.index(complaint.test_id) if complaint.test_id in test_ids else 0,
                              format_func=lambda i: "none" if i is None else common.md(dict(tests)[i]))
        if linked != complaint.test_id:
            complaint = rows.update(complaint.id, reference=complaint.reference, rooms=complaint.rooms,
                                    time_zone=complaint.time_zone, test_id=linked, diary_csv=complaint.diary_csv)

        st.subheader("Recording periods")
        periods = rows.periods(complaint.id)
        for period in periods:
            left, right = st.columns([4, 1])
            left.write(f"{common.md(period.name)}" + (" · event clips kept" if period.keep_clips else ""))
            if right.button("Delete", key=f"delete-period-{period.id}",
                            help="Deletes the period's levels and every audio clip of it"):
                rows.delete_period(period.id)
                st.rerun()
        with st.expander("Add a recording period", expanded=not periods):
            with st.form("new-period", clear_on_submit=True):
                name = common.text_field("Name (e.g. night of 28 November)", limit=common.NAME_CHARS)
                uploads = st.file_uploader("Recordings (WAV or FLAC, in time order)", type=["wav", "flac"],
                                           accept_multiple_files=True)
                start_text = st.text_input("Start of the first recording (e.g. 2026-11-28T22:00); leave empty "
                                           "when the recorder wrote it into the file", max_chars=40)
                interval = st.selectbox("Interval", ("1min", "5min", "15min", "60min"), index=2)
                calibration = st.file_uploader("Calibrator tone (optional)", type=["wav", "flac"])
                calibrator_db = st.number_input("Calibrator level, dB", min_value=60.0, max_value=150.0, value=94.0)
                keep_clips = st.checkbox("Keep short audio clips of the events")
                st.caption(f"⚠️ {RECORDING_CAUTION}")
                if st.form_submit_button("Analyse and keep the levels"):
                    from fieldtl.noise.clips import write_event_clips
                    from fieldtl.noise.record import analyse_record
                    from fieldtl.noise.settings import RecordSettings, parse_interval, parse_start, zone

                    try:
                        if not uploads:
                            raise InputError("choose one or more recordings")
                        settings = RecordSettings(zone_name=complaint.time_zone, interval_min=parse_interval(interval),
                                                  keep_clips=keep_clips)
                        start, _ = (parse_start(start_text, zone(complaint.time_zone)) if start_text.strip()
                                    else (None, ()))
                        with tempfile.TemporaryDirectory(prefix="fieldtl-period-") as folder:
                            paths = []
                            for number, upload in enumerate(uploads):
                                path = Path(folder) / f"{number:03d}-{Path(upload.name).name[-80:]}"
                                path.write_bytes(upload.getvalue())
                                paths.append(path)
                            offset_db = None
                            if calibration is not None:
                                from fieldtl.measure import calibrate_file
                                cal_path = Path(folder) / f"calibration-{Path(calibration.name).name[-80:]}"
                                cal_path.write_bytes(calibration.getvalue())
                                offset_db = calibrate_file(cal_path, 0, calibrator_db).offset_db
                            bar = st.progress(0.0, text="Analysing the recordings…")
                            shown = [0]

                            def progress(done: float) -> None:
                                if int(done * 100) > shown[0]:          # at most a hundred updates
                                    shown[0] = int(done * 100)
                                    bar.progress(done, text="Analysing the recordings…")
                            record = analyse_record(paths, settings, start=start, level_offset_db=offset_db,
                                                    progress=progress)
                            record_json = json_text(record_to_json(record))
                            period = rows.add_period(complaint.id, name or f"period {len(periods) + 1}",
                                                     record_json=record_json, keep_clips=keep_clips)
                            if keep_clips:
                                write_event_clips(record, rows.clips_folder(period.id))
                    except FieldTLError as exc:
                        st.error(common.md(exc))
                    else:
                        st.rerun()

        st.subheader("Diary")
        with st.form("diary-entry", clear_on_submit=True):
            when = st.text_input("When (e.g. 23:15 or 2026-11-28 23:15)", max_chars=40)
            heard = common.text_field("What was heard", limit=common.NAME_CHARS)
            disturbance = st.select_slider("How disturbing (0 none, 10 unbearable)", options=list(range(11)), value=5)
            if st.form_submit_button("Add the entry"):
                lines = complaint.diary_csv or "time,heard,disturbance\n"
                cells = [when.strip(), heard.replace('"', "'"), str(disturbance)]
                lines += ",".join(f'"{c}"' for c in cells) + "\n"
                complaint = rows.update(complaint.id, reference=complaint.reference, rooms=complaint.rooms,
                                        time_zone=complaint.time_zone, test_id=complaint.test_id, diary_csv=lines)
        pasted = common.text_field("Diary as CSV (time, heard, disturbance); paste or edit", complaint.diary_csv,
                                   limit=50_000, area=True)
        if pasted != complaint.diary_csv and st.button("Keep the diary"):
            complaint = rows.update(complaint.id, reference=complaint.reference, rooms=complaint.rooms,
                                    time_zone=complaint.time_zone, test_id=complaint.test_id, diary_csv=pasted)

        for period in periods:
            record = record_from_json(json.loads(period.record_json))
            st.subheader(common.md(period.name))
            diary = ()
            if complaint.diary_csv.strip():
                try:
                    diary = match_diary(record, read_diary_csv(complaint.diary_csv, zone_name=complaint.time_zone,
                                                               first_date=record.start))
                except FieldTLError as exc:
                    st.warning(common.md(exc))
            from fieldtl.noise.chart import timeline_figure
            st.pyplot(timeline_figure(record, diary=diary), width="stretch")
            st.dataframe([{"period": f"{p.name} {p.date}", "hours": round(p.levels.covered_s / 3600, 1),
                           "LAeq": p.levels.laeq_db, "LAFmax": p.levels.lafmax_db, "LAF90": p.levels.laf90_db,
                           "events": p.events} for p in record.periods], hide_index=True)
            if record.events:
                low = [i for i, f in enumerate(record.bands_hz) if f <= 200]
                st.dataframe([{"start": f"{e.start:%Y-%m-%d %H:%M:%S}", "s": round(e.duration_s, 1),
                               "LAFmax": round(e.lafmax_db, 1), "LAE": round(e.lae_db, 1),
                               "background": round(e.background_db, 1),
                               "max 20-200 Hz": round(max(e.band_leq_db[i] for i in low), 1)}
                              for e in record.events], hide_index=True)
            for night in record.nights:
                st.write(f"Night of {night.date}: {night.events_above} event(s) above {night.count_level_db:g} dB LAFmax")
            for number, match in enumerate(diary, start=1):
                st.caption(f"Diary {number} ({match.entry.time:%H:%M}, {common.md(match.entry.heard)}): "
                           f"{match.statement}")      # our words and numbers only
            references = compare(record, WHO_BEDROOM_NIGHT)
            for comparison in references:
                st.caption(common.md(comparison.text))
            wall = ()
            if complaint.test_id is not None and record.calibrated and record.events:
                from fieldtl.noise.wall import DEFAULT_SOURCES, compare_with_wall, events_spectrum
                assessment = common.assessment_of(store.get_test(complaint.test_id))
                if assessment is not None:
                    result = assessment.result
                    airborne = assessment.test_type == "airborne"
                    separation = (result.standardized_level_difference_db if airborne
                                  else result.standardized_impact_level_db)
                    names = [s.name for s in DEFAULT_SOURCES if (s.kind == "airborne") == airborne]
                    name = st.selectbox("Typical source next door (invented spectra)", names, key=f"src-{period.id}")
                    source = next(s for s in DEFAULT_SOURCES if s.name == name)
                    from fieldtl.noise.wall import edited_source
                    edited = st.data_editor({"Hz": list(source.levels_db.nominal_hz),
                                             "dB": list(source.levels_db.values)}, disabled=["Hz"],
                                            hide_index=True, key=f"spectrum-{period.id}-{name}")
                    source = edited_source(source, tuple(edited["dB"]))
                    st.caption(f"Source spectrum: {source.origin}")
                    wall = (compare_with_wall(source, events_spectrum(record), separation=separation,
                                              reverberation_time_s=result.reverberation_time_s),)
                    st.dataframe({"Hz": wall[0].nominal_hz, "expected dB": wall[0].expected_db,
                                  "recorded dB": wall[0].recorded_db, "excess dB": wall[0].excess_db}, hide_index=True)
                    st.write(common.md(wall[0].conclusion))
            document = record_to_json(record, diary=diary, wall=wall, references=references)
            common.download_button("Noise record (JSON)", json_text(document), file_name="noise-record.json",
                                   mime="application/json", key=f"json-{period.id}")
            common.download_button("Intervals (CSV)", intervals_to_csv(record), file_name="intervals.csv",
                                   mime="text/csv", key=f"csv-{period.id}")
            common.download_button("Events (CSV)", events_to_csv(record), file_name="events.csv", mime="text/csv",
                                   key=f"events-{period.id}")
            if st.button("Make the PDF report", key=f"pdf-{period.id}"):
                from fieldtl.report.noise_pdf import record_to_pdf
                common.download_button("Noise record (PDF)", record_to_pdf(record, reference=complaint.reference,
                                       diary=diary, wall=wall, references=references),
                                       file_name="noise-record.pdf", mime="application/pdf", key=f"pdfd-{period.id}")
        if st.button("Delete this complaint file", help="Deletes its periods, diary and every audio clip"):
            rows.delete(complaint.id)
            st.session_state[COMPLAINT_ID] = None
            st.rerun()
    common.cautions()
