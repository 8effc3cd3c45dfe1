"""The browser recorder component: decoding its takes, its static files, its JS helpers (in node)
and one real take through Chromium's fake microphone."""

import base64
import io
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import make_data
from conftest import node_executable
from live_server import free_port, start_server, stop_server, wait_until_healthy
import numpy as np
import pytest
import soundfile

from fieldtl.errors import InputError
from fieldtl.ui.recorder import COMPONENT_DIR, RecordedTake, take_from_payload

REPO = Path(__file__).resolve().parents[1]
INDEX_HTML = (COMPONENT_DIR / "index.html").read_text()
RECORDER_JS = (COMPONENT_DIR / "recorder.js").read_text()


def wav_bytes(samples, *, sample_rate_hz=48_000, subtype="PCM_24", file_format="WAV"):
    buffer = io.BytesIO()
    soundfile.write(buffer, samples, sample_rate_hz, subtype=subtype, format=file_format)
    return buffer.getvalue()


def payload(wav: bytes, **changes):
    value = {"wav_base64": base64.b64encode(wav).decode("ascii"), "sample_rate_hz": 48_000,
             "settings": {"echoCancellation": False, "sampleRate": 48_000},
             "warnings": ["The sample rate is fine."], "take_id": "take-1",
             "device_label": "USB measurement microphone"}
    value.update(changes)
    return value


# ------------------------------------------------------------------ decoding (no streamlit)

def test_a_wav_made_here_round_trips():
    tone = make_data.sine(1000, amplitude=0.5, duration_s=0.25)
    wav = wav_bytes(tone)
    take = take_from_payload(payload(wav))
    assert take == RecordedTake(wav_bytes=wav, sample_rate_hz=48_000,
                                settings={"echoCancellation": False, "sampleRate": 48_000},
                                warnings=("The sample rate is fine.",), take_id="take-1",
                                device_label="USB measurement microphone")
    samples, sample_rate_hz = soundfile.read(io.BytesIO(take.wav_bytes))
    # One 24-bit PCM step (2^-23 of full scale, analytic) bounds the error: half a step of
    # rounding plus libsndfile writing floats with the scale 2^23 - 1 and reading with 2^23.
    assert sample_rate_hz == 48_000 and np.max(np.abs(samples - tone)) <= 2 ** -23


def test_whole_number_float_sample_rate_is_accepted_as_int():
    # JavaScript numbers are doubles; AudioContext.sampleRate may arrive as 44100.0.
    take = take_from_payload(payload(wav_bytes(np.zeros(64), sample_rate_hz=44_100), sample_rate_hz=44_100.0))
    assert take.sample_rate_hz == 44_100 and isinstance(take.sample_rate_hz, int)


@pytest.mark.parametrize(("change", "message"), [
    ({"wav_base64": "not base64 at all!"}, "not valid base64"),
    ({"wav_base64": "QUJ"}, "not valid base64"),               # bad padding
    ({"wav_base64": 12}, "wav_base64 must be a text"),
    ({"wav_base64": base64.b64encode(b"hello, this is no sound file").decode()}, "not a WAV file"),
    ({"wav_base64": base64.b64encode(b"RIFF\x00\x00\x00\x00WAVEjunkjunk").decode()}, "cannot be read"),
    ({"sample_rate_hz": 44_100}, "WAV says 48000 Hz but the take says 44100 Hz"),
    ({"sample_rate_hz": True}, "must be a number"),
    ({"sample_rate_hz": 48_000.5}, "positive whole number"),
    ({"sample_rate_hz": -48_000}, "positive whole number"),
    ({"settings": ["echoCancellation"]}, "settings must be an object"),
    ({"warnings": "clipped"}, "warnings must be a list"),
    ({"warnings": [1]}, "warnings must be a list"),
    ({"take_id": ""}, "take_id must be a non-empty text"),
    ({"device_label": None}, "device_label must be a text"),
])
def test_bad_payloads_raise_one_line(change, message):
    with pytest.raises(InputError, match=re.escape(message)) as caught:
        take_from_payload(payload(wav_bytes(np.zeros(480)), **change))
    assert "\n" not in str(caught.value)


def test_missing_keys_are_named():
    value = payload(wav_bytes(np.zeros(480)))
    del value["take_id"], value["settings"]
    with pytest.raises(InputError, match="lacks settings, take_id$"):
        take_from_payload(value)


def test_not_an_object_is_refused():
    with pytest.raises(InputError, match="got str"):
        take_from_payload("RIFF")


@pytest.mark.parametrize(("wav", "message"), [
    (wav_bytes(np.zeros((480, 2))), "2 channels, expected 1"),
    (wav_bytes(np.zeros(0)), "holds no samples"),
    (wav_bytes(np.zeros(480), file_format="FLAC"), "not a WAV file"),
])
def test_wrong_sound_content_is_refused(wav, message):
    with pytest.raises(InputError, match=message):
        take_from_payload(payload(wav))


# ------------------------------------------------------------------ the static files

def test_component_files_are_local_only():
    # No CDN and no network: the phone may be on a site without internet.
    assert "http://" not in INDEX_HTML and "https://" not in INDEX_HTML
    for name in ("index.html", "recorder.js", "recorder-worklet.js"):
        text = (COMPONENT_DIR / name).read_text()
        # The JS may tell the user to open an "https:// address", but names no host.
        assert re.search(r"https?://[\w\[]", text) is None, name
        assert re.search(r"""["']//""", text) is None, name   # no protocol-relative URLs
    referenced = re.findall(r"""(?:src|href)\s*=\s*["']([^"']+)["']""", INDEX_HTML)
    assert referenced == ["recorder.js"]
    assert (COMPONENT_DIR / "recorder.js").is_file()
    assert re.findall(r"""addModule\(\s*["']([^"']+)["']""", RECORDER_JS) == ["recorder-worklet.js"]
    assert (COMPONENT_DIR / "recorder-worklet.js").is_file()


def test_every_static_file_is_covered_by_package_data():
    # pyproject.toml ships ui/recorder/*.html and *.js; any other kind of file would be lost.
    static = [p.name for p in COMPONENT_DIR.iterdir() if p.is_file() and p.suffix != ".py"]
    assert static and all(name.endswith((".html", ".js")) for name in static), static
    assert '"ui/recorder/*.html", "ui/recorder/*.js"' in (REPO / "pyproject.toml").read_text()


def test_js_asks_the_three_processing_switches_off():
    constraints = RECORDER_JS[RECORDER_JS.index("function audioConstraints"):]
    constraints = constraints[:constraints.index("\n}\n")]
    for switch in ("echoCancellation", "noiseSuppression", "autoGainControl"):
        assert re.search(rf"\b{switch}: false\b", constraints), switch
    assert re.search(r"MediaRecorder\s*\(", RECORDER_JS) is None   # raw PCM only, never a codec


def test_element_ids_used_by_the_js_exist_in_the_html():
    used = set(re.findall(r"""el\("([a-z-]+)"\)""", RECORDER_JS))
    present = set(re.findall(r'id="fieldtl-record-([a-z-]+)"', INDEX_HTML))
    assert {"start", "stop", "status"} <= present   # the selectors browser tests rely on
    assert used <= present and used, used - present
    assert 'id="fieldtl-record-status" data-state="idle"' in INDEX_HTML


def test_start_and_stop_buttons_are_touch_sized():
    # 48 CSS px: the common-practice minimum touch target on phones.
    button_rule = re.search(r"\n\s*button \{([^}]*)\}", INDEX_HTML).group(1)
    assert "min-height: 48px" in button_rule
    assert ".actions button { width: 100%; }" in INDEX_HTML


# ------------------------------------------------------------------ the JS helpers, run in node

def run_node(script: str):
    node = node_executable()   # tests/conftest.py: skips locally, fails under CI=true
    code = f"const r = require({json.dumps(str(COMPONENT_DIR / 'recorder.js'))});\n{script}"
    done = subprocess.run([node, "-e", code], capture_output=True, text=True, check=True)
    return json.loads(done.stdout)


def test_js_wav_encoder_is_read_by_libsndfile_as_exact_24_bit_pcm():
    # 24-bit PCM stores round(x * 2^23), held to [-2^23, 2^23 - 1]; libsndfile (soundfile) is the
    # independent reader. NaN must not become noise.
    out = run_node("""
        const edge = Float32Array.from([0, 0.5, -0.5, 1, -1, 1.5, -1.5, NaN, 2 ** -23, -3 * 2 ** -23, 0.25]);
        const long = new Float32Array(48000).map((_, i) => 0.9 * Math.sin(2 * Math.PI * 1000 * i / 48000));
        console.log(JSON.stringify({
          edge: r.bytesToBase64(r.encodeWav24(edge, 48000)),
          long: r.bytesToBase64(r.encodeWav24(long, 48000)) }));""")
    edge = take_from_payload(payload(base64.b64decode(out["edge"])))
    ints, _ = soundfile.read(io.BytesIO(edge.wav_bytes), dtype="int32")
    assert soundfile.info(io.BytesIO(edge.wav_bytes)).subtype == "PCM_24"
    assert (ints >> 8).tolist() == [0, 4194304, -4194304, 8388607, -8388608, 8388607, -8388608,
                                    0, 1, -3, 2097152]
    # 48000 samples = 144000 bytes: crosses the base64 helper's 32768-byte steps.
    long = take_from_payload(payload(base64.b64decode(out["long"])))
    samples, _ = soundfile.read(io.BytesIO(long.wav_bytes))
    tone = make_data.sine(1000, amplitude=0.9, duration_s=1.0).astype(np.float32)
    assert len(samples) == 48_000 and np.max(np.abs(samples - tone)) <= 2 ** -23


def test_js_warns_when_processing_stays_on_or_is_not_reported():
    out = run_node("""
        const off = {echoCancellation: false, noiseSuppression: false, autoGainControl: false,
                     sampleRate: 48000, channelCount: 1};
        console.log(JSON.stringify({
          clean: r.processingWarnings(off, 48000),
          echo: r.processingWarnings({...off, echoCancellation: true}, 48000),
          silent: r.processingWarnings({echoCancellation: false, autoGainControl: false}, 48000),
          rate: r.processingWarnings({...off, sampleRate: 44100}, 44100),
          resampled: r.processingWarnings(off, 44100),
          stereo: r.processingWarnings({...off, channelCount: 2}, 48000) }));""")
    assert out["clean"] == []
    assert len(out["echo"]) == 1 and out["echo"][0].startswith("Echo cancellation is still on")
    assert len(out["silent"]) == 1 and "Noise suppression: the browser did not say" in out["silent"][0]
    assert out["rate"] == ["The sample rate is 44100 Hz, not 48000 Hz."]
    assert out["resampled"] == ["The sample rate is 44100 Hz, not 48000 Hz.",
                                "The microphone runs at 48000 Hz and the browser resamples it to 44100 Hz."]
    assert out["stereo"] == ["The microphone delivers 2 channels; only the first is kept."]


def test_js_constraints_and_take_length_limit():
    out = run_node("""
        console.log(JSON.stringify({
          chosen: r.audioConstraints("usb-mic"), plain: r.audioConstraints(""),
          frames: r.maxFramesFor(44 + 3 * 1000), unlimited: r.maxFramesFor(undefined) === Infinity }));""")
    assert out["chosen"] == {"audio": {"echoCancellation": False, "noiseSuppression": False,
                                       "autoGainControl": False, "sampleRate": 48000, "channelCount": 1,
                                       "deviceId": {"exact": "usb-mic"}}, "video": False}
    assert "deviceId" not in out["plain"]["audio"]
    assert out["frames"] == 1000 and out["unlimited"] is True


# ------------------------------------------------------------------ one real take in Chromium

APP = '''
import pathlib
import streamlit as st
from fieldtl.ui.recorder import recorder

out = pathlib.Path({out!r})
take = recorder(key="take", duration_s=1.0, caution="Wear hearing protection.", label="Test position")
if take is not None:
    (out / "wav").write_bytes(take.wav_bytes)
    with open(out / "returns.txt", "a") as log:
        log.write(take.take_id + "\\n")
    (out / "take.json").write_text(__import__("json").dumps(
        {{"sample_rate_hz": take.sample_rate_hz, "warnings": list(take.warnings)}}))
    st.session_state.takes = st.session_state.get("takes", 0) + 1
st.session_state.runs = st.session_state.get("runs", 0) + 1
st.write(f"takes={{st.session_state.get('takes', 0)}} runs={{st.session_state.runs}}"
         f" held={{st.session_state.get('take') is not None}}")
st.button("Rerun")
'''


@pytest.fixture
def streamlit_app(tmp_path):
    (tmp_path / "app.py").write_text(APP.format(out=str(tmp_path)))
    port = free_port()
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")]))
    server = start_server(
        [sys.executable, "-m", "streamlit", "run", str(tmp_path / "app.py"), "--server.headless", "true",
         "--server.port", str(port), "--server.address", "127.0.0.1",
         "--browser.gatherUsageStats", "false", "--server.fileWatcherType", "none"],
        cwd=tmp_path, env=env)
    url = f"http://127.0.0.1:{port}"
    try:
        wait_until_healthy(url)
        yield url, tmp_path
    finally:
        stop_server(server)


@pytest.mark.browser
@pytest.mark.slow
def test_a_take_through_chromiums_fake_microphone(streamlit_app, chromium_path):
    from playwright.sync_api import sync_playwright
    url, out = streamlit_app
    # Chromium plays this file as its fake microphone: a 1 kHz sine of peak 0.1, whose RMS level
    # is 20 lg(0.1 / sqrt 2) = -23.01 dBFS (analytic).
    tone_path = make_data.write(out / "tone.wav", make_data.sine(1000, amplitude=0.1, duration_s=3.0),
                                 subtype="PCM_16")
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=chromium_path, args=[
            "--use-fake-ui-for-media-stream", "--use-fake-device-for-media-stream",
            f"--use-file-for-fake-audio-capture={tone_path}"])
        try:
            page = browser.new_page()
            page.goto(url)
            frame = page.frame_locator('iframe[title="fieldtl.ui.recorder.recorder"]')
            frame.locator("#fieldtl-record-start").click()
            frame.locator('#fieldtl-record-status[data-state="sent"]').wait_for(timeout=30_000)
            # Python got the take and the browser has let go of it.
            released = page.get_by_text(re.compile(r"takes=1 runs=\d+ held=False"))
            released.wait_for(timeout=30_000)
            runs = int(re.search(r"runs=(\d+)", released.inner_text()).group(1))
            page.get_by_role("button", name="Rerun").click()
            page.get_by_text(f"takes=1 runs={runs + 1} held=False").wait_for(timeout=30_000)
            take_id = frame.locator("#fieldtl-record-status").get_attribute("data-take-id")
        finally:
            browser.close()
    assert (out / "returns.txt").read_text().split() == [take_id]   # returned on one run only
    facts = json.loads((out / "take.json").read_text())
    samples, sample_rate_hz = soundfile.read(out / "wav")
    assert sample_rate_hz == facts["sample_rate_hz"]
    assert len(samples) == sample_rate_hz                            # duration_s = 1.0 exactly
    assert not any("still on" in w or "did not say" in w for w in facts["warnings"])
    assert any("not 48000 Hz" in w for w in facts["warnings"]) == (sample_rate_hz != 48_000)
    settled = samples[sample_rate_hz // 2:]
    rms_db = 20 * np.log10(np.sqrt(np.mean(settled ** 2)))
    assert rms_db == pytest.approx(20 * np.log10(0.1 / np.sqrt(2)), abs=0.1)   # no gain applied
    spectrum = np.abs(np.fft.rfft(settled * np.hanning(len(settled))))
    assert np.fft.rfftfreq(len(settled), 1 / sample_rate_hz)[np.argmax(spectrum)] == pytest.approx(1000, abs=4)
