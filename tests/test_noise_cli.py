"""`fieldtl record`: outputs written, one-line errors with exit status 2, a damaged file in the middle
reported while the others are analysed (expected levels from the invented tone files)."""

from __future__ import annotations

import json
from datetime import datetime
from pathlib import Path

import numpy as np
import pytest
from noise_night import amplitude, write_wav

from fieldtl.cli import main

RATE_HZ = 44_100


def _night(path: Path, *, local_start: datetime | None) -> Path:
    t_s = np.arange(60 * RATE_HZ) / RATE_HZ
    a = np.where((t_s >= 20.0) & (t_s < 23.0), amplitude(-25.0), amplitude(-50.0))
    return write_wav(path, a * np.sin(2 * np.pi * 1000.0 * t_s), sample_rate_hz=RATE_HZ, local_start=local_start)


@pytest.fixture
def files(tmp_path: Path):
    first = _night(tmp_path / "1.wav", local_start=datetime(2026, 11, 28, 23, 58))
    second = _night(tmp_path / "2.wav", local_start=None)
    diary = tmp_path / "diary.csv"
    diary.write_text("time;heard;disturbance\n23:58;bang;7\n", encoding="utf-16")
    return tmp_path, first, second, diary


def test_record_writes_every_output(files, capsys):
    folder, first, second, diary = files
    out = folder / "out"
    out.mkdir()
    code = main(["record", str(first), str(second), "--timezone", "Europe/London", "--interval", "1min",
                 "--diary", str(diary), "--json", str(out / "r.json"), "--csv", str(out / "r.csv"),
                 "--plot", str(out / "r.png"), "--pdf", str(out / "r.pdf")])
    printed = capsys.readouterr().out
    assert code == 0
    assert sorted(p.name for p in out.iterdir()) == ["r-events.csv", "r.csv", "r.json", "r.pdf", "r.png"]
    document = json.loads((out / "r.json").read_text(encoding="utf-8"))
    starts = [datetime.fromisoformat(e["start"]).timestamp() for e in document["events"]]
    expected = [datetime.fromisoformat(t).timestamp() for t in ("2026-11-28T23:58:20+00:00", "2026-11-28T23:59:20+00:00")]
    assert starts == pytest.approx(expected, abs=0.02)      # 10 ms steps
    assert document["diary"][0]["event_number"] == 1
    assert "not a legal determination" in printed and "2 event(s)" in printed


@pytest.mark.parametrize(("extra", "message"), [
    (["--timezone", "Mars/Base"], "time zone 'Mars/Base' is unknown"),
    (["--interval", "7min"], "choose 1min, 5min, 15min or 60min"),
    (["--start", "28/11/2026"], "write it like 2026-11-28T22:00"),
    (["--event-margin-db", "0.5"], "event margin must be between 1 and 60"),
    (["--json", "/no/such/folder/r.json"], "does not exist"),
])
def test_bad_options_are_one_line(files, capsys, extra, message):
    _, first, _, _ = files
    assert main(["record", str(first), *extra]) == 2
    err = capsys.readouterr().err
    assert message in err and err.count("\n") == 1


def test_missing_start_and_missing_file(files, capsys):
    folder, _, second, _ = files
    assert main(["record", str(second)]) == 2
    assert "2.wav: the file holds no start time" in capsys.readouterr().err
    assert main(["record", str(second), str(folder / "nope.wav"), "--start", "2026-11-28T22:00"]) == 2
    assert capsys.readouterr().err.strip() == "fieldtl: nope.wav: file not found"


def test_damaged_file_in_the_middle(files, capsys):
    folder, first, second, _ = files
    broken = folder / "broken.wav"
    broken.write_bytes(b"RIFF" + bytes(40))
    assert main(["record", str(first), str(broken), str(second), "--timezone", "Europe/London"]) == 0
    printed = capsys.readouterr().out
    assert "ERROR file_unreadable: broken.wav:" in printed
    assert "2 event(s)" in printed          # the files either side were analysed


def test_event_clips_only_when_switched_on(files, capsys):
    import soundfile

    from fieldtl.noise.clips import delete_clips

    folder, first, second, _ = files
    clips = folder / "clips"
    assert main(["record", str(first), str(second), "--json", str(folder / "r.json")]) == 0
    assert not clips.exists() and json.loads((folder / "r.json").read_text())["settings"]["event_clips_kept"] is False
    assert main(["record", str(first), str(second), "--keep-clips", str(clips)]) == 0
    printed = capsys.readouterr().out
    assert "consent" in printed and "2 event clip(s) kept" in printed
    names = sorted(p.name for p in clips.iterdir())
    assert len(names) == 2 and names[0].startswith("event-001-20261128-2358")
    samples, rate_hz = soundfile.read(clips / names[0])
    # 1 s before the 3 s burst at -25 dB re full scale, the burst, 1 s after: the whole burst is inside.
    # A sine exceeds 0.9 of its peak for 1 - (2/π) asin(0.9) = 28.7 % of the time (analytic).
    loud = np.abs(samples) > amplitude(-25.0) * 0.9
    expected_s = 3.0 * (1 - 2 / np.pi * np.arcsin(0.9))
    assert rate_hz == RATE_HZ and loud.sum() / rate_hz == pytest.approx(expected_s, rel=0.01)
    assert delete_clips(clips) == 2 and not clips.exists()


def test_calibrated_record_against_a_separation_test(files, capsys):
    folder, first, second, _ = files
    t_s = np.arange(5 * RATE_HZ) / RATE_HZ
    calibration = write_wav(folder / "cal.wav", amplitude(-20.0) * np.sin(2 * np.pi * 1000.0 * t_s),
                            sample_rate_hz=RATE_HZ)
    test = folder / "dnt.csv"
    test.write_text("Hz;DnT;T\n100;45,0;0,5\n125;47;0,5\n1000;55;1,0\n", encoding="utf-8")
    assert main(["record", str(first), str(second), "--calibration", str(calibration), "--separation", str(test),
                 "--json", str(folder / "r.json")]) == 0
    document = json.loads((folder / "r.json").read_text(encoding="utf-8"))
    # calibrator 94 dB read at -20 dB re full scale: offset 114 dB; the -25 dB re FS bursts read 89 dB
    assert document["events"][0]["lafmax_db"] == pytest.approx(89.0, abs=0.1)
    music = document["wall"][0]
    assert music["source"] == "music with bass" and music["band_frequencies_hz"] == [100, 125, 1000]
    # ISO 16283-1: L2 = L1 - DnT + 10 lg(T/0.5 s); the invented music spectrum has 88 dB at 100 Hz, 73 dB at 1 kHz
    assert music["expected_db"] == pytest.approx([88.0 - 45.0, 85.0 - 47.0, 73.0 - 55.0 + 10 * np.log10(2.0)], abs=0.05)
    assert [w["source"] for w in document["wall"]] == ["music with bass", "television", "raised speech"]
    assert "invented" in capsys.readouterr().out


def test_local_limits(files, capsys):
    folder, first, second, _ = files
    t_s = np.arange(5 * RATE_HZ) / RATE_HZ
    calibration = write_wav(folder / "cal.wav", amplitude(-20.0) * np.sin(2 * np.pi * 1000.0 * t_s),
                            sample_rate_hz=RATE_HZ)
    # the two bursts read 89 dB (offset 114 dB): a limit at 88.9 has both above, at 89.1 none
    assert main(["record", str(first), str(second), "--calibration", str(calibration),
                 "--limit", "Local event limit:event_lafmax:88.9", "--limit", "Upper:event_lafmax:89.1"]) == 0
    printed = capsys.readouterr().out
    assert "Local event limit 88.9 dB: 2 of 2 events above" in printed
    assert "Upper 89.1 dB: 0 of 2 events above" in printed
    assert main(["record", str(first), "--limit", "no level here"]) == 2
    assert "write it as NAME:WHAT:DB" in capsys.readouterr().err


def test_own_source_spectrum(files):
    folder, first, second, _ = files
    t_s = np.arange(5 * RATE_HZ) / RATE_HZ
    calibration = write_wav(folder / "cal.wav", amplitude(-20.0) * np.sin(2 * np.pi * 1000.0 * t_s),
                            sample_rate_hz=RATE_HZ)
    (folder / "dnt.csv").write_text("Hz,DnT\n500,50\n1000,55\n", encoding="utf-8")
    (folder / "hifi.csv").write_text("Hz;dB\n500;80,5\n1000;82\n", encoding="utf-8")
    assert main(["record", str(first), str(second), "--calibration", str(calibration), "--separation",
                 str(folder / "dnt.csv"), "--source-spectrum", str(folder / "hifi.csv"),
                 "--json", str(folder / "r.json")]) == 0
    (wall,) = json.loads((folder / "r.json").read_text(encoding="utf-8"))["wall"]
    # ISO 16283-1 with T = T0: L2 = L1 - DnT
    assert (wall["source"], wall["source_origin"]) == ("hifi.csv", "entered by the user")
    assert wall["expected_db"] == pytest.approx([80.5 - 50.0, 82.0 - 55.0])
    assert main(["record", str(first), "--source-spectrum", str(folder / "hifi.csv")]) == 2
