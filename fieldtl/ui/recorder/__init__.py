"""Recording in the browser: a static HTML/JS Streamlit component and the decoder of its takes.

The component (``index.html``, ``recorder.js``, ``recorder-worklet.js`` in this folder) records
raw PCM from the phone's or laptop's microphone with the browser's echo cancellation, noise
suppression and automatic gain control asked off, and sends each take as a mono 24-bit PCM WAV
at the audio graph's real sample rate, base64-encoded in a JSON object.

:func:`take_from_payload` checks and decodes that object without Streamlit, so it can be
tested alone; :func:`recorder` draws the component (it imports Streamlit only when called).
Neither calibrates, filters nor judges the sound: that is the ingest step's job.
"""

from __future__ import annotations

import base64
import binascii
import io
import math
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import soundfile

from fieldtl.errors import InputError

COMPONENT_DIR = Path(__file__).resolve().parent
# Share of Streamlit's limit on client-sent widget state (server.maxWidgetStateSize) that one
# take may use as base64 text, leaving room for the other widgets on the page.
_TAKE_SHARE_OF_WIDGET_STATE = 0.8


@dataclass(frozen=True, slots=True)
class RecordedTake:
    """One take as the browser recorded it.

    ``settings`` is what the browser says it applied (``MediaStreamTrack.getSettings()``),
    ``warnings`` are the component's plain-language cautions (processing left on, sample rate,
    clipping, a shortened take), ``take_id`` is random and new for every take.
    """

    wav_bytes: bytes
    sample_rate_hz: int
    settings: dict[str, Any]
    warnings: tuple[str, ...]
    take_id: str
    device_label: str


def take_from_payload(payload: object) -> RecordedTake:
    """Check and decode the JSON object the component sends for one take.

    Raises InputError (one line) when a key is missing or mistyped, the base64 is invalid, or
    the bytes are not a readable mono WAV at the stated sample rate. Does not read the samples
    or look at their levels.
    """
    if not isinstance(payload, Mapping):
        raise InputError(f"recorder: expected a take object from the browser, got {type(payload).__name__}")
    missing = [key for key in ("wav_base64", "sample_rate_hz", "settings", "warnings", "take_id",
                               "device_label") if key not in payload]
    if missing:
        raise InputError(f"recorder: the take from the browser lacks {', '.join(missing)}")
    wav_bytes = _wav_bytes_from_base64(payload["wav_base64"])
    sample_rate_hz = _sample_rate_hz(payload["sample_rate_hz"])
    _check_wav(wav_bytes, sample_rate_hz=sample_rate_hz)
    settings = payload["settings"]
    if not isinstance(settings, Mapping) or not all(isinstance(key, str) for key in settings):
        raise InputError("recorder: settings must be an object of named track settings")
    warnings = payload["warnings"]
    if not isinstance(warnings, list) or not all(isinstance(text, str) for text in warnings):
        raise InputError("recorder: warnings must be a list of texts")
    take_id, device_label = payload["take_id"], payload["device_label"]
    if not isinstance(take_id, str) or not take_id:
        raise InputError("recorder: take_id must be a non-empty text")
    if not isinstance(device_label, str):
        raise InputError("recorder: device_label must be a text")
    return RecordedTake(wav_bytes=wav_bytes, sample_rate_hz=sample_rate_hz, settings=dict(settings),
                        warnings=tuple(warnings), take_id=take_id, device_label=device_label)


def _wav_bytes_from_base64(text: object) -> bytes:
    if not isinstance(text, str):
        raise InputError("recorder: wav_base64 must be a text")
    try:
        return base64.b64decode(text, validate=True)
    except (binascii.Error, ValueError):
        raise InputError("recorder: wav_base64 is not valid base64") from None


def _sample_rate_hz(value: object) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"recorder: sample_rate_hz must be a number, got {value!r}")
    if not (math.isfinite(value) and value > 0 and float(value).is_integer()):
        raise InputError(f"recorder: sample_rate_hz must be a positive whole number, got {value!r}")
    return int(value)


def _check_wav(wav_bytes: bytes, *, sample_rate_hz: int) -> None:
    if wav_bytes[:4] != b"RIFF" or wav_bytes[8:12] != b"WAVE":
        raise InputError("recorder: the take is not a WAV file (no RIFF/WAVE header)")
    try:
        info = soundfile.info(io.BytesIO(wav_bytes))
    except RuntimeError:  # soundfile.LibsndfileError derives from it
        raise InputError("recorder: the take's WAV data cannot be read") from None
    if info.channels != 1:
        raise InputError(f"recorder: the take has {info.channels} channels, expected 1")
    if info.samplerate != sample_rate_hz:
        raise InputError(f"recorder: the WAV says {info.samplerate} Hz but the take says {sample_rate_hz} Hz")
    if info.frames == 0:
        raise InputError("recorder: the take holds no samples")


def recorder(*, key: str, duration_s: float, caution: str, label: str) -> RecordedTake | None:
    """Draw the microphone recorder; return the take the browser has just sent, else None.

    A take is returned on the run its arrival starts; the component is then told to let go of
    it (so later reruns do not carry megabytes of sound), and the next run returns None. Store
    the take in Session State or the project store at once; ``take_id`` tells takes apart.
    ``duration_s`` is the length after which recording stops by itself; ``caution`` (hearing
    protection) and ``label`` are shown above the buttons. Raises InputError for a bad
    ``duration_s`` or a take that cannot be decoded.
    """
    import streamlit as st
    from streamlit.components.v1 import declare_component

    if (isinstance(duration_s, bool) or not isinstance(duration_s, (int, float))
            or not (math.isfinite(duration_s) and duration_s > 0)):
        raise InputError(f"recorder: duration_s must be a positive number of seconds, got {duration_s!r}")
    # Declared on every call: Streamlit registers a component only inside a script run.
    component = declare_component("recorder", path=str(COMPONENT_DIR))
    # The value the browser holds now, read before the widget is drawn, so that this very run
    # can tell the component to release it.
    held = st.session_state.get(key)
    release_take_id = held.get("take_id") if isinstance(held, Mapping) else None
    max_take_bytes = st.get_option("server.maxWidgetStateSize") * 1_000_000 * _TAKE_SHARE_OF_WIDGET_STATE
    value = component(key=key, default=None, duration_s=float(duration_s), caution=caution,
                      label=label, max_wav_bytes=int(max_take_bytes * 3 / 4),  # base64: 4 chars per 3 bytes
                      release_take_id=release_take_id)
    return None if value is None else take_from_payload(value)
