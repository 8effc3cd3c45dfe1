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


def _facts(path):
    recording = open_recording(path)
    stats = SampleStats(sample_rate_hz=recording.sample_rate_hz, source_name=recording.name)
    read_samples(recording, stats=stats)
    return stats.facts()


@pytest.mark.parametrize("subtype", ["FLOAT", "DOUBLE"])
def test_float_samples_beyond_full_scale_are_a_finding_at_the_edge(tmp_path, subtype):
    # Full scale is 1.0 (the value fixed-point formats map their largest code to); a float file
    # may hold more. Exactly 1.0 is not beyond it; the next float32 above 1.0 (1 + 2**-23,
    # IEEE 754 binary32) is.
    samples = 0.1 * make_data.sine(100, amplitude=1.0, duration_s=0.2)
    samples[100] = 1.0
    at = _facts(make_data.write(tmp_path / "at.wav", samples, subtype=subtype))
    assert at.over_full_scale_samples == 0 and "beyond_full_scale" not in [f.code for f in at.findings]
    samples[200] = samples[300] = 1.0 + 2.0 ** -23
    beyond = _facts(make_data.write(tmp_path / "beyond.wav", samples, subtype=subtype))
    finding = next(f for f in beyond.findings if f.code == "beyond_full_scale")
    assert beyond.over_full_scale_samples == 2 and finding.severity == "warning"
    assert finding.message.startswith("beyond.wav: 2 samples beyond full scale (peak +0.0 dBFS)")


def test_denormal_samples_are_a_finding_at_the_edge(tmp_path):
    # IEEE 754 binary32: the smallest normal value is 2**-126 = 1.1754944e-38; 2**-127 is a denormal.
    samples = 0.1 * make_data.sine(100, amplitude=1.0, duration_s=0.2)
    samples[1000] = 2.0 ** -126
    normal = _facts(make_data.write(tmp_path / "normal.wav", samples, subtype="FLOAT"))
    assert normal.denormal_samples == 0 and "denormal_samples" not in [f.code for f in normal.findings]
    samples[1000] = 2.0 ** -127
    samples[2000] = -(2.0 ** -149)                       # the smallest binary32 denormal
    denormal = _facts(make_data.write(tmp_path / "denormal.wav", samples, subtype="FLOAT"))
    assert denormal.denormal_samples == 2
    assert [f.severity for f in denormal.findings if f.code == "denormal_samples"] == ["warning"]


def test_pcm_files_never_show_full_scale_or_denormal_findings(tmp_path):
    # The largest 16-bit code is 32767/32768 of full scale and the smallest non-zero 2**-15: both
    # inside (2**-126, 1] (two's complement PCM, analytic).
    samples = np.array([1.0, -1.0, 2.0 ** -15, 0.0] * 1000)
    facts = _facts(make_data.write(tmp_path / "pcm.wav", samples, subtype="PCM_16"))
    assert facts.over_full_scale_samples == 0 and facts.denormal_samples == 0


def test_whole_reads_are_limited_before_reading(tmp_path):
    # Decays and calibration tones are read whole: one frame beyond the limit is refused, from the
    # header, with one line naming the file and the limit.
    from fieldtl.audio.ingest import MAX_WHOLE_READ_S, check_whole_read

    rate = 48_000
    inside = make_data.write(tmp_path / "inside.wav", np.zeros(int(MAX_WHOLE_READ_S * rate)), subtype="PCM_16")
    check_whole_read(open_recording(inside))                      # exactly the limit: accepted
    outside = make_data.write(tmp_path / "long decay.wav", np.zeros(int(MAX_WHOLE_READ_S * rate) + 1),
                              subtype="PCM_16")
    message = _one_line_error(read_samples, open_recording(outside))
    assert message == "long decay.wav: 120.0 s is longer than the 120 s allowed for a decay or calibration recording"


def test_blocks_of_many_channels_stay_within_the_block_byte_limit(tmp_path, monkeypatch):
    import fieldtl.audio.ingest as ingest

    samples = np.zeros((10_000, 8))
    samples[:, 5] = make_data.sine(100, amplitude=0.3, duration_s=10_000 / 48_000)
    path = tmp_path / "eight.wav"
    soundfile.write(str(path), samples, 48_000, subtype="FLOAT")
    monkeypatch.setattr(ingest, "MAX_BLOCK_BYTES", 8 * 8 * 1000)     # 1000 frames of 8 float64 channels
    blocks = list(iter_blocks(open_recording(path, channel=5)))
    assert max(b.size for b in blocks) == 1000 and sum(b.size for b in blocks) == 10_000
    np.testing.assert_array_equal(np.concatenate(blocks), samples[:, 5].astype(np.float32))


def test_a_run_continues_across_an_empty_block():
    # 3 full-scale samples split 2 + 1 around an empty block are one clipped run (CLIP_RUN_SAMPLES = 3),
    # and 2 alone are not a run
    stats = SampleStats(sample_rate_hz=48_000, source_name="clip.wav")
    stats.update(np.array([0.1, 1.0, 1.0]))
    stats.update(np.empty(0))
    stats.update(np.array([1.0, 0.1, -1.0, -1.0, 0.1]))
    facts = stats.facts()
    assert (facts.clip_runs, facts.clipped_samples) == (1, 3)
