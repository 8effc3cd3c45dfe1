"""Audio ingest: formats, block reading, signal facts and the one-line errors for bad files."""

import math

import make_data
import numpy as np
import pytest
import soundfile

from fieldtl.audio.ingest import SampleStats, file_sha256, iter_blocks, open_recording, read_samples
from fieldtl.errors import InputError


@pytest.mark.parametrize("subtype", ["PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE"])
@pytest.mark.parametrize("sample_rate_hz", [44_100, 48_000, 96_000])
def test_formats_read_back_to_full_scale_float(tmp_path, subtype, sample_rate_hz):
    # A half-scale sine must come back as +-0.5 whatever the sample format (PCM quantisation:
    # 16-bit step is 2^-15 = 3.1e-5 of full scale, analytic).
    tone = make_data.sine(1000, amplitude=0.5, duration_s=0.2, sample_rate_hz=sample_rate_hz)
    path = make_data.write(tmp_path / "tone.wav", tone, sample_rate_hz=sample_rate_hz, subtype=subtype)
    recording = open_recording(path)
    samples = read_samples(recording)
    assert recording.sample_rate_hz == sample_rate_hz
    assert samples.dtype == np.float64
    assert np.max(np.abs(samples - tone)) < 2 ** -15


def test_flac_and_channel_choice(tmp_path):
    left = make_data.sine(500, amplitude=0.1, duration_s=0.3)
    right = make_data.sine(2000, amplitude=0.4, duration_s=0.3)
    path = tmp_path / "stereo.flac"
    soundfile.write(str(path), np.column_stack([left, right]), 48_000, subtype="PCM_24")
    recording = open_recording(path, channel=1)
    assert recording.channels == 2 and recording.format == "FLAC"
    assert np.max(np.abs(read_samples(recording) - right)) < 1e-6


def test_blocks_cover_the_file_whatever_the_block_size(tmp_path):
    tone = make_data.sine(100, amplitude=0.3, duration_s=1.0)
    recording = open_recording(make_data.write(tmp_path / "t.wav", tone, subtype="FLOAT"))
    for block_frames in (1000, 4096, 48_000, 100_000):
        joined = np.concatenate(list(iter_blocks(recording, block_frames=block_frames)))
        np.testing.assert_array_equal(joined, tone.astype(np.float32).astype(np.float64))


def test_signal_facts_of_a_clean_tone(tmp_path):
    tone = make_data.sine(1000, amplitude=0.5, duration_s=0.5)
    recording = open_recording(make_data.write(tmp_path / "t.wav", tone))
    stats = SampleStats(sample_rate_hz=recording.sample_rate_hz, source_name=recording.name)
    for _ in stats.watch(iter_blocks(recording, block_frames=1000)):
        pass
    facts = stats.facts()
    assert facts.duration_s == pytest.approx(0.5)
    assert facts.peak_dbfs == pytest.approx(20 * math.log10(0.5), abs=0.01)  # analytic
    assert facts.clip_runs == 0 and facts.findings == ()


def test_clipping_runs_are_counted_across_block_edges():
    stats = SampleStats(sample_rate_hz=48_000, source_name="clip.wav")
    samples = np.tile([0.1, -0.1], 1000)
    samples[998:1003] = 1.0        # one run of 5 full-scale samples, split by the block edge at 1000
    samples[1500] = -1.0           # a single full-scale sample is a legitimate peak, not a run
    stats.update(samples[:1000])
    stats.update(samples[1000:])
    facts = stats.facts()
    assert (facts.clip_runs, facts.clipped_samples) == (1, 5)
    assert [f.code for f in facts.findings] == ["clipping"]


def test_digital_silence_dropout_and_dc_are_findings_not_errors():
    silent = SampleStats(sample_rate_hz=48_000, source_name="s.wav")
    silent.update(np.zeros(4800))
    assert [f.code for f in silent.facts().findings] == ["digital_silence"]
    gappy = SampleStats(sample_rate_hz=48_000, source_name="g.wav")
    noise = 0.05 * np.random.default_rng(0).standard_normal(48_000) + 0.02
    noise[10_000:11_000] = 0.0     # 20.8 ms of exact zeros
    gappy.update(noise)
    assert {f.code for f in gappy.facts().findings} == {"dropout", "dc_offset"}


def test_checksum_is_sha256_of_the_bytes(tmp_path):
    import hashlib
    path = tmp_path / "x.wav"
    path.write_bytes(b"abc")
    assert file_sha256(path) == hashlib.sha256(b"abc").hexdigest()  # FIPS 180-4 via hashlib


def _one_line_error(func, *args, **kwargs) -> str:
    with pytest.raises(InputError) as info:
        func(*args, **kwargs)
    message = str(info.value)
    assert "\n" not in message
    return message


def test_bad_files_give_one_line_errors_naming_the_file(tmp_path):
    good = make_data.write(tmp_path / "good.wav", make_data.sine(1000, amplitude=0.5, duration_s=0.5))
    assert "missing.wav: file not found" in _one_line_error(open_recording, tmp_path / "missing.wav")
    (tmp_path / "empty.wav").write_bytes(b"")
    assert "empty.wav: file is empty" in _one_line_error(open_recording, tmp_path / "empty.wav")
    (tmp_path / "notes.wav").write_text("not audio at all\n" * 20)
    assert "notes.wav: not a readable WAV or FLAC file" in _one_line_error(open_recording, tmp_path / "notes.wav")
    truncated = make_data.truncated_copy(good, tmp_path / "cut.wav")
    assert "cut.wav: truncated file" in _one_line_error(open_recording, truncated)
    assert "channel 3 requested" in _one_line_error(open_recording, good, channel=2)
    low_rate = make_data.write(tmp_path / "low.wav", np.zeros(800), sample_rate_hz=8000)
    assert "low.wav: sample rate 8000 Hz" in _one_line_error(open_recording, low_rate)


def test_truncated_flac_fails_while_reading(tmp_path):
    flac = tmp_path / "full.flac"
    soundfile.write(str(flac), 0.1 * np.random.default_rng(2).standard_normal(96_000), 48_000)
    cut = make_data.truncated_copy(flac, tmp_path / "cut.flac")
    message = _one_line_error(lambda: list(iter_blocks(open_recording(cut))))
    assert message.startswith("cut.flac: damaged or truncated file")


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite_float_samples_are_rejected(tmp_path, bad):
    samples = np.zeros(48_000)
    samples[30_000] = bad
    path = make_data.write(tmp_path / "float.wav", samples, subtype="FLOAT")
    message = _one_line_error(lambda: list(iter_blocks(open_recording(path), block_frames=4096)))
    assert message == "float.wav: contains NaN or infinite samples (first at 0.625 s)"
