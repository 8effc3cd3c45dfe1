"""Test signals: noise and sweeps to play through the loudspeaker, with the hearing caution first."""

import io

import streamlit as st

from fieldtl.audio.signals import SweepSpec, exponential_sweep, pink_noise, white_noise, write_signal_wav
from fieldtl.cautions import HEARING_CAUTION
from fieldtl.errors import FieldTLError
from fieldtl.ui import common, gate

gate.require_access()
with common.fenced():
    st.title("Test signals")
    st.warning(f"⚠️ {HEARING_CAUTION}")
    kind = st.radio("Signal", ["pink", "white", "sweep"], horizontal=True,
                    format_func={"pink": "Pink noise", "white": "White noise", "sweep": "Sweep (for decays)"}.get)
    seconds = st.number_input("Length, s", min_value=1.0, max_value=600.0, value=10.0 if kind == "sweep" else 60.0)
    level_dbfs = st.number_input("Level, dB re full scale (RMS)", min_value=-60.0, max_value=-3.1,
                                 value=-10.0 if kind == "sweep" else -18.0)
    low_hz = st.number_input("Lowest frequency, Hz", min_value=10.0, max_value=1000.0, value=40.0)
    high_hz = st.number_input("Highest frequency, Hz", min_value=1000.0, max_value=20_000.0, value=12_500.0)
    if st.button("Make the signal"):
        try:
            if kind == "sweep":
                samples = exponential_sweep(SweepSpec(duration_s=seconds, low_hz=low_hz, high_hz=high_hz,
                                                      level_dbfs=level_dbfs), silence_s=3.0)
            else:
                make = pink_noise if kind == "pink" else white_noise
                samples = make(seconds, level_dbfs=level_dbfs, low_hz=low_hz, high_hz=high_hz, fade_in_s=0.05,
                               fade_out_s=0.05)
            buffer = io.BytesIO()
            write_signal_wav(buffer, samples, sample_rate_hz=48_000)
        except FieldTLError as exc:
            st.error(common.md(exc))
        else:
            st.audio(buffer.getvalue(), format="audio/wav")      # play it here, through the phone's output
            common.download_button("Download the WAV file", buffer.getvalue(), file_name=f"fieldtl-{kind}.wav",
                                   mime="audio/wav")
            if kind == "sweep":
                st.info(f"When you store a decay recorded with this sweep, enter: start {low_hz:g} Hz, stop "
                        f"{high_hz:g} Hz, length {seconds:g} s.")
    common.cautions()
