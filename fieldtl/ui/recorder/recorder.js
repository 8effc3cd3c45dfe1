// fieldtl microphone recorder: a static Streamlit component (no build step, no external files).
//
// It records raw PCM from getUserMedia through an AudioWorklet (ScriptProcessor where the browser
// has none), with the browser's echo cancellation, noise suppression and automatic gain control
// asked off, and sends one 24-bit PCM WAV per take to Python. It never uses MediaRecorder or a
// lossy codec, and it does not calibrate, filter or judge the sound: Python does that.
"use strict";

const PROCESSING_SWITCHES = ["echoCancellation", "noiseSuppression", "autoGainControl"];
const WANTED_SAMPLE_RATE_HZ = 48000;
// A sample at or above this magnitude counts as clipped (-0.009 dBFS; common practice).
const FULL_SCALE_THRESHOLD = 0.999;
const WAV_HEADER_BYTES = 44;
const WAV_BYTES_PER_SAMPLE = 3; // 24-bit PCM: quantisation floor near -144 dBFS
const METER_FLOOR_DB = -60;
const DEVICE_STORAGE_KEY = "fieldtl.recorder.deviceId";

// ---------------------------------------------------------------- pure helpers (tested in node)

function audioConstraints(deviceId) {
  const audio = {
    echoCancellation: false,
    noiseSuppression: false,
    autoGainControl: false,
    sampleRate: WANTED_SAMPLE_RATE_HZ,
    channelCount: 1,
  };
  if (deviceId) audio.deviceId = { exact: deviceId };
  return { audio, video: false };
}

// Warnings about what the browser really applied (MediaStreamTrack.getSettings()).
function processingWarnings(settings, sampleRateHz) {
  const names = {
    echoCancellation: "Echo cancellation",
    noiseSuppression: "Noise suppression",
    autoGainControl: "Automatic gain control",
  };
  const warnings = [];
  for (const key of PROCESSING_SWITCHES) {
    if (settings[key] === true) {
      warnings.push(`${names[key]} is still on: the browser would not switch it off, ` +
                    "so the recorded levels may be altered.");
    } else if (settings[key] !== false) {
      warnings.push(`${names[key]}: the browser did not say whether it is off, ` +
                    "so the recorded levels may be altered.");
    }
  }
  if (sampleRateHz !== WANTED_SAMPLE_RATE_HZ) {
    warnings.push(`The sample rate is ${sampleRateHz} Hz, not ${WANTED_SAMPLE_RATE_HZ} Hz.`);
  }
  if (typeof settings.sampleRate === "number" && settings.sampleRate !== sampleRateHz) {
    warnings.push(`The microphone runs at ${settings.sampleRate} Hz and the browser resamples ` +
                  `it to ${sampleRateHz} Hz.`);
  }
  if (typeof settings.channelCount === "number" && settings.channelCount > 1) {
    warnings.push(`The microphone delivers ${settings.channelCount} channels; ` +
                  "only the first is kept.");
  }
  return warnings;
}

// Largest take, in frames, whose base64 WAV fits in maxWavBytes (Infinity when no limit is given).
function maxFramesFor(maxWavBytes) {
  if (!(typeof maxWavBytes === "number" && maxWavBytes > WAV_HEADER_BYTES)) return Infinity;
  return Math.floor((maxWavBytes - WAV_HEADER_BYTES) / WAV_BYTES_PER_SAMPLE);
}

// Mono 24-bit PCM WAV (RIFF, WAVE_FORMAT_PCM); samples in [-1, 1) map to integers x * 2^23,
// rounded, and anything beyond full scale is held at the largest integer.
function encodeWav24(samples, sampleRateHz) {
  const dataBytes = samples.length * WAV_BYTES_PER_SAMPLE;
  const bytes = new Uint8Array(WAV_HEADER_BYTES + dataBytes);
  const view = new DataView(bytes.buffer);
  const ascii = (offset, text) => {
    for (let i = 0; i < text.length; i += 1) bytes[offset + i] = text.charCodeAt(i);
  };
  ascii(0, "RIFF");
  view.setUint32(4, 36 + dataBytes, true);
  ascii(8, "WAVE");
  ascii(12, "fmt ");
  view.setUint32(16, 16, true); // fmt chunk size
  view.setUint16(20, 1, true); // WAVE_FORMAT_PCM
  view.setUint16(22, 1, true); // one channel
  view.setUint32(24, sampleRateHz, true);
  view.setUint32(28, sampleRateHz * WAV_BYTES_PER_SAMPLE, true); // bytes per second
  view.setUint16(32, WAV_BYTES_PER_SAMPLE, true); // block align
  view.setUint16(34, 8 * WAV_BYTES_PER_SAMPLE, true); // bits per sample
  ascii(36, "data");
  view.setUint32(40, dataBytes, true);
  let offset = WAV_HEADER_BYTES;
  for (let i = 0; i < samples.length; i += 1) {
    let value = Math.round(samples[i] * 8388608);
    if (value > 8388607) value = 8388607;
    else if (value < -8388608) value = -8388608;
    else if (Number.isNaN(value)) value = 0;
    bytes[offset] = value & 0xff;
    bytes[offset + 1] = (value >> 8) & 0xff;
    bytes[offset + 2] = (value >> 16) & 0xff;
    offset += 3;
  }
  return bytes;
}

function bytesToBase64(bytes) {
  const step = 0x8000; // String.fromCharCode takes a bounded number of arguments
  let binary = "";
  for (let i = 0; i < bytes.length; i += step) {
    binary += String.fromCharCode.apply(null, bytes.subarray(i, i + step));
  }
  return btoa(binary);
}

function joinChunks(chunks, frames) {
  const samples = new Float32Array(frames);
  let offset = 0;
  for (const chunk of chunks) {
    samples.set(chunk, offset);
    offset += chunk.length;
  }
  return samples;
}

function newTakeId() {
  if (typeof crypto.randomUUID === "function") return crypto.randomUUID();
  const bytes = crypto.getRandomValues(new Uint8Array(16));
  return Array.from(bytes, (b) => b.toString(16).padStart(2, "0")).join("");
}

// ---------------------------------------------------------------- the component in the browser

function startComponent() {
  const el = (id) => document.getElementById(`fieldtl-record-${id}`);
  const ui = {
    label: el("label"), caution: el("caution"), device: el("device"), devices: el("devices"),
    start: el("start"), stop: el("stop"), time: el("time"), peak: el("peak"), clip: el("clip"),
    bar: el("meter-bar"), status: el("status"), warnings: el("warnings"),
  };
  const session = { args: {}, disabled: false, take: null, heldTakeId: null };

  const post = (type, data) => {
    window.parent.postMessage(Object.assign({ isStreamlitMessage: true, type }, data), "*");
  };
  const sendHeight = () => {
    const bottom = document.getElementById("fieldtl-recorder").getBoundingClientRect().bottom;
    post("streamlit:setFrameHeight", { height: Math.ceil(bottom + window.scrollY) + 4 });
  };
  const setStatus = (state, text) => {
    ui.status.dataset.state = state;
    ui.status.textContent = text;
  };
  const showWarnings = (warnings) => {
    ui.warnings.replaceChildren(...warnings.map((text) => {
      const item = document.createElement("li");
      item.textContent = text;
      return item;
    }));
  };
  const refreshButtons = () => {
    const busy = session.take !== null;
    ui.start.disabled = busy || session.disabled;
    ui.stop.disabled = !busy || session.take.stopping;
    ui.device.disabled = busy;
    ui.devices.disabled = busy;
  };
  const targetSeconds = () => {
    const seconds = Number(session.args.duration_s);
    return Number.isFinite(seconds) && seconds > 0 ? seconds : Infinity;
  };
  const showTime = (take) => {
    const elapsed = take ? take.frames / take.sampleRateHz : 0;
    const limit = take ? take.targetFrames / take.sampleRateHz : targetSeconds();
    ui.time.textContent = Number.isFinite(limit)
      ? `${elapsed.toFixed(1)} s of ${limit.toFixed(1)} s` : `${elapsed.toFixed(1)} s`;
  };
  const showPeak = (peak, clipped) => {
    const levelDb = peak > 0 ? 20 * Math.log10(peak) : -Infinity;
    const fraction = Math.min(1, Math.max(0, (levelDb - METER_FLOOR_DB) / -METER_FLOOR_DB));
    ui.bar.style.width = `${(100 * fraction).toFixed(1)}%`;
    ui.bar.classList.toggle("hot", levelDb > -6);
    ui.peak.textContent = Number.isFinite(levelDb) ? `peak ${levelDb.toFixed(1)} dBFS` : "peak — dBFS";
    ui.clip.hidden = !clipped;
  };

  const rememberDevice = (deviceId) => {
    try { window.localStorage.setItem(DEVICE_STORAGE_KEY, deviceId); } catch (error) { /* private mode */ }
  };
  const rememberedDevice = () => {
    try { return window.localStorage.getItem(DEVICE_STORAGE_KEY) || ""; } catch (error) { return ""; }
  };
  const listDevices = async () => {
    if (!navigator.mediaDevices || !navigator.mediaDevices.enumerateDevices) return;
    const chosen = ui.device.value || rememberedDevice();
    const inputs = (await navigator.mediaDevices.enumerateDevices())
      .filter((device) => device.kind === "audioinput" && device.deviceId !== "default");
    const options = [new Option("Browser default", "")];
    inputs.forEach((device, index) => {
      options.push(new Option(device.label || `Microphone ${index + 1}`, device.deviceId));
    });
    ui.device.replaceChildren(...options);
    ui.device.value = inputs.some((device) => device.deviceId === chosen) ? chosen : "";
  };

  const microphoneMissing = () => !window.isSecureContext || !navigator.mediaDevices ||
    !navigator.mediaDevices.getUserMedia;
  const failMicrophone = (error) => {
    const reasons = {
      NotAllowedError: "Microphone permission was refused. Allow it in the browser's site settings.",
      NotFoundError: "No microphone was found.",
      NotReadableError: "The microphone is in use by another program or could not be opened.",
      OverconstrainedError: "The chosen microphone is not available; choose another one.",
    };
    setStatus("error", reasons[error && error.name] || `Recording failed: ${error && error.message}`);
  };

  const makeCapture = async (context, onSamples) => {
    if (context.audioWorklet && typeof AudioWorkletNode === "function") {
      await context.audioWorklet.addModule("recorder-worklet.js");
      const node = new AudioWorkletNode(context, "fieldtl-capture", {
        numberOfInputs: 1, numberOfOutputs: 1, outputChannelCount: [1],
        channelCount: 1, channelCountMode: "explicit", channelInterpretation: "discrete",
      });
      let flushed = null;
      node.port.onmessage = (event) => {
        if (event.data.type === "samples") onSamples(event.data.samples);
        else if (event.data.type === "flushed" && flushed) flushed();
      };
      const flush = () => new Promise((resolve) => {
        flushed = resolve;
        node.port.postMessage("flush");
        window.setTimeout(resolve, 500); // a closed context never answers
      });
      return { node, flush, warnings: [] };
    }
    const node = context.createScriptProcessor(4096, 1, 1);
    node.onaudioprocess = (event) => onSamples(new Float32Array(event.inputBuffer.getChannelData(0)));
    return {
      node, flush: async () => undefined,
      warnings: ["This browser has no AudioWorklet; the older capture path was used, " +
                 "which can drop sound while the phone is busy."],
    };
  };

  const teardown = (take) => {
    take.stream.getTracks().forEach((track) => track.stop());
    if (take.capture) {
      take.capture.node.disconnect();
      if (take.capture.node.port) take.capture.node.port.onmessage = null;
      else take.capture.node.onaudioprocess = null;
    }
    if (take.source) take.source.disconnect();
    if (take.context) take.context.close();
  };

  const finish = async (take) => {
    if (session.take !== take) return;
    session.take = null;
    teardown(take);
    refreshButtons();
    if (take.frames === 0) {
      setStatus("error", "No sound was captured; nothing was sent.");
      return;
    }
    setStatus("encoding", "Preparing the take…");
    const warnings = take.warnings.slice();
    if (take.clippedSamples > 0) {
      warnings.push(`${take.clippedSamples} samples reached full scale (clipping): lower the ` +
                    "level or the input gain and record again.");
    }
    showWarnings(warnings);
    const wav = encodeWav24(joinChunks(take.chunks, take.frames), take.sampleRateHz);
    const value = {
      wav_base64: bytesToBase64(wav),
      sample_rate_hz: take.sampleRateHz,
      settings: take.settings,
      warnings,
      device_label: take.deviceLabel,
      take_id: newTakeId(),
    };
    post("streamlit:setComponentValue", { value, dataType: "json" });
    session.heldTakeId = value.take_id;
    ui.status.dataset.takeId = value.take_id;
    const seconds = (take.frames / take.sampleRateHz).toFixed(1);
    setStatus("sent", `Take sent: ${seconds} s at ${take.sampleRateHz} Hz.`);
  };

  const onSamples = (take, samples) => {
    if (session.take !== take) return;
    const wanted = Math.min(samples.length, take.targetFrames - take.frames);
    if (wanted <= 0) return;
    const kept = samples.length === wanted ? samples : samples.slice(0, wanted);
    let peak = 0;
    for (let i = 0; i < kept.length; i += 1) {
      const magnitude = Math.abs(kept[i]);
      if (magnitude > peak) peak = magnitude;
      if (magnitude >= FULL_SCALE_THRESHOLD) take.clippedSamples += 1;
    }
    take.chunks.push(kept);
    take.frames += kept.length;
    showTime(take);
    showPeak(peak, take.clippedSamples > 0);
    if (take.frames >= take.targetFrames) finish(take);
  };

  const startRecording = async () => {
    if (session.take !== null) return;
    if (microphoneMissing()) {
      setStatus("error", "The microphone can only be used over https:// or on this computer " +
                         "(localhost). Open the app at an https:// address.");
      return;
    }
    const take = {
      stream: null, context: null, source: null, capture: null, chunks: [], frames: 0,
      targetFrames: 0, sampleRateHz: 0, clippedSamples: 0, warnings: [], settings: {},
      deviceLabel: "", stopping: false,
    };
    session.take = take;
    refreshButtons();
    showWarnings([]);
    showPeak(0, false);
    delete ui.status.dataset.takeId;
    setStatus("requesting", "Asking for the microphone…");
    try {
      const chosen = ui.device.value;
      take.stream = await navigator.mediaDevices.getUserMedia(audioConstraints(chosen));
      rememberDevice(chosen);
      const track = take.stream.getAudioTracks()[0];
      take.settings = Object.assign({}, track.getSettings());
      take.deviceLabel = track.label || "";
      await listDevices();
      const AudioContextClass = window.AudioContext || window.webkitAudioContext;
      try {
        // Run the graph at the microphone's own rate so that nothing is resampled.
        take.context = take.settings.sampleRate
          ? new AudioContextClass({ sampleRate: take.settings.sampleRate })
          : new AudioContextClass();
      } catch (error) {
        take.context = new AudioContextClass();
      }
      if (take.context.state === "suspended") await take.context.resume();
      take.sampleRateHz = take.context.sampleRate;
      take.capture = await makeCapture(take.context, (samples) => onSamples(take, samples));
      const maxFrames = maxFramesFor(Number(session.args.max_wav_bytes));
      const wantedFrames = Math.round(targetSeconds() * take.sampleRateHz);
      take.targetFrames = Math.min(wantedFrames, maxFrames);
      take.warnings = processingWarnings(take.settings, take.sampleRateHz)
        .concat(take.capture.warnings);
      if (wantedFrames > maxFrames) {
        take.warnings.push(`The take is limited to ${(maxFrames / take.sampleRateHz).toFixed(1)} s ` +
                           "so that it fits in one message to the app.");
      }
      showWarnings(take.warnings);
      track.onended = () => {
        take.warnings.push("The microphone stopped delivering sound (disconnected?).");
        finish(take);
      };
      // A silent sink keeps the graph pulling samples without playing anything back.
      const sink = take.context.createGain();
      sink.gain.value = 0;
      sink.connect(take.context.destination);
      take.source = take.context.createMediaStreamSource(take.stream);
      take.source.connect(take.capture.node);
      take.capture.node.connect(sink);
      showTime(take);
      setStatus("recording", `Recording from ${take.deviceLabel || "the default microphone"}…`);
      refreshButtons();
    } catch (error) {
      session.take = null;
      if (take.stream) teardown(take);
      refreshButtons();
      failMicrophone(error);
    }
  };

  const stopRecording = async () => {
    const take = session.take;
    if (take === null || take.capture === null || take.stopping) return;
    take.stopping = true;
    refreshButtons();
    await take.capture.flush();
    finish(take);
  };

  const applyTheme = (theme) => {
    if (!theme) return;
    const vars = {
      "--primary": theme.primaryColor, "--text": theme.textColor,
      "--background": theme.backgroundColor, "--panel": theme.secondaryBackgroundColor,
      "--font": theme.font,
    };
    for (const [name, value] of Object.entries(vars)) {
      if (typeof value === "string" && value) document.documentElement.style.setProperty(name, value);
    }
  };

  const render = (args, disabled, theme) => {
    session.args = args;
    session.disabled = Boolean(disabled);
    applyTheme(theme);
    ui.label.textContent = typeof args.label === "string" ? args.label : "";
    ui.label.hidden = !ui.label.textContent;
    ui.caution.textContent = typeof args.caution === "string" ? args.caution : "";
    ui.caution.hidden = !ui.caution.textContent;
    if (session.take === null && ui.status.dataset.state === "idle") showTime(null);
    // Python has the take: free the widget value so later reruns do not carry the sound again.
    if (session.heldTakeId !== null && args.release_take_id === session.heldTakeId) {
      session.heldTakeId = null;
      post("streamlit:setComponentValue", { value: null, dataType: "json" });
    }
    refreshButtons();
  };

  window.addEventListener("message", (event) => {
    if (event.source !== window.parent || !event.data || event.data.type !== "streamlit:render") return;
    render(event.data.args || {}, event.data.disabled, event.data.theme);
  });
  ui.start.addEventListener("click", startRecording);
  ui.stop.addEventListener("click", stopRecording);
  ui.device.addEventListener("change", () => rememberDevice(ui.device.value));
  ui.devices.addEventListener("click", async () => {
    if (microphoneMissing()) {
      setStatus("error", "The microphone can only be used over https:// or on localhost.");
      return;
    }
    try {
      const stream = await navigator.mediaDevices.getUserMedia({ audio: true });
      stream.getTracks().forEach((track) => track.stop());
      await listDevices();
      const state = ui.status.dataset.state === "error" ? "idle" : ui.status.dataset.state;
      setStatus(state, `${ui.device.options.length - 1} microphone(s) found.`);
    } catch (error) {
      failMicrophone(error);
    }
  });
  if (navigator.mediaDevices && navigator.mediaDevices.addEventListener) {
    navigator.mediaDevices.addEventListener("devicechange", listDevices);
  }
  listDevices().catch(() => undefined);
  new ResizeObserver(sendHeight).observe(document.getElementById("fieldtl-recorder"));
  post("streamlit:componentReady", { apiVersion: 1 });
  sendHeight();
}

if (typeof module !== "undefined" && module.exports) {
  module.exports = { audioConstraints, processingWarnings, maxFramesFor, encodeWav24, bytesToBase64 };
} else if (typeof document !== "undefined") {
  startComponent();
}
