"""Small CLI faults of issue 11 item 10, each checked from the outside (the files written, the exit
status, the printed help)."""

import numpy as np
import soundfile

from fieldtl.cli import main


def test_a_sweep_of_30_s_lasts_30_s_and_the_default_is_10_s(tmp_path, capsys):
    # the sweep is followed by 3 s of silence for the room's decay (fieldtl signal's own layout)
    assert main(["signal", "sweep", str(tmp_path / "long.wav"), "--seconds", "30"]) == 0
    assert soundfile.info(tmp_path / "long.wav").duration == 30 + 3
    assert main(["signal", "sweep", str(tmp_path / "default.wav")]) == 0
    assert soundfile.info(tmp_path / "default.wav").duration == 10 + 3
    assert main(["signal", "pink", str(tmp_path / "pink.wav"), "--seconds", "2"]) == 0
    assert soundfile.info(tmp_path / "pink.wav").duration == 2


def test_an_impulse_decay_without_an_impulse_does_not_exit_0(tmp_path, capsys):
    noise = np.random.default_rng(1).normal(0.0, 0.1, 48_000 * 2)        # steady noise: no impulse in it
    soundfile.write(tmp_path / "noise.wav", noise, 48_000)
    assert main(["decay", str(tmp_path / "noise.wav"), "--method", "impulse"]) == 1
    assert "impulse_start_not_found" in capsys.readouterr().out


def test_demo_out_says_which_files_it_wrote(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path / "out")]) == 0
    out = capsys.readouterr().out
    for name in ("demo.json", "demo.csv", "demo.png"):
        assert f"wrote {tmp_path / 'out' / name}" in out and (tmp_path / "out" / name).is_file()


def test_positional_arguments_have_help(capsys):
    for command, word in (("assess", "survey file"), ("bands", "recording"), ("decay", "decay recording"),
                          ("signal", "WAV file to write"), ("predict", "construction file")):
        try:
            main([command, "--help"])
        except SystemExit:
            pass
        assert word in capsys.readouterr().out, command
