"""The `fieldtl` commands about one recording (bands, decay) and the test signal (signal)."""

from __future__ import annotations

import argparse
from pathlib import Path

from fieldtl.cautions import HEARING_CAUTION
from fieldtl.cli_input import LEVEL_DBFS, channel_index, check_output, option_number
from fieldtl.cli_output import ProgressBar, frequencies, print_findings, rounded, write_json
from fieldtl.validate import CALIBRATOR_DB, SWEEP_HZ, SWEEP_S

EXIT_NO_RESULT = 1         # the input was readable but gave no result (findings say why)


def add_recording_commands(sub: argparse._SubParsersAction) -> None:  # noqa: SLF001
    """The parsers of `fieldtl bands` and `fieldtl decay`."""
    bands = sub.add_parser("bands", help="band levels (Leq), LAeq, LCeq and maxima of one recording")
    bands.add_argument("file", type=Path, metavar="REC.wav", help="the recording (WAV or FLAC)")
    bands.add_argument("--channel", type=int, default=1, help="channel to analyse, 1-based (default 1)")
    bands.add_argument("--calibration", type=Path, metavar="CAL.wav", help="recording of the calibrator tone")
    bands.add_argument("--calibrator-db", type=float, default=94.0, help="calibrator level in dB (default 94.0)")
    bands.add_argument("--octave", action="store_true", help="octave bands instead of one-third octaves")
    bands.add_argument("--json", type=Path, metavar="OUT", help="write the results as JSON")
    bands.set_defaults(run=run_bands)

    decay = sub.add_parser("decay", help="reverberation times (T20, T30, EDT) of one decay recording")
    decay.add_argument("file", type=Path, metavar="DECAY.wav", help="the decay recording (WAV or FLAC)")
    decay.add_argument("--method", required=True, choices=("impulse", "interrupted", "sweep"))
    decay.add_argument("--channel", type=int, default=1, help="channel to analyse, 1-based (default 1)")
    decay.add_argument("--octave", action="store_true", help="octave bands instead of one-third octaves")
    decay.add_argument("--sweep-start-hz", type=float, help="sweep method: start frequency of the sweep played")
    decay.add_argument("--sweep-stop-hz", type=float, help="sweep method: stop frequency of the sweep played")
    decay.add_argument("--sweep-length-s", type=float, help="sweep method: duration of the sweep played")
    decay.add_argument("--json", type=Path, metavar="OUT", help="write the results as JSON")
    decay.set_defaults(run=run_decay)



def add_signal_command(sub: argparse._SubParsersAction) -> None:  # noqa: SLF001
    """The parser of `fieldtl signal`."""
    signal_cmd = sub.add_parser("signal", help="write a test signal for the loudspeaker (pink, white, sweep)")
    signal_cmd.add_argument("kind", choices=("pink", "white", "sweep"))
    signal_cmd.add_argument("out", type=Path, metavar="OUT.wav", help="the WAV file to write")
    signal_cmd.add_argument("--seconds", type=float, default=None, help="length (default 30 s; sweep: 10 s)")
    signal_cmd.add_argument("--level-dbfs", type=float, default=-18.0,
                            help="RMS level in dB re full scale (default -18; noise peaks ~13 dB higher)")
    signal_cmd.add_argument("--low-hz", type=float, default=40.0, help="lowest frequency (default 40 Hz)")
    signal_cmd.add_argument("--high-hz", type=float, default=12_500.0, help="highest frequency (default 12.5 kHz)")
    signal_cmd.add_argument("--fade-s", type=float, default=0.05, help="noise fade in and out (default 0.05 s)")
    signal_cmd.add_argument("--sample-rate-hz", type=int, default=48_000)
    signal_cmd.add_argument("--seed", type=int, help="noise seed, for a reproducible file")
    signal_cmd.set_defaults(run=run_signal)


def run_bands(args: argparse.Namespace) -> int:
    from fieldtl.analysis.levels import analyse_levels
    from fieldtl.audio.ingest import SampleStats, iter_blocks, open_recording
    from fieldtl.measure import calibrate_file

    channel = channel_index(args.channel, args.file)
    option_number(args.calibrator_db, "--calibrator-db", CALIBRATOR_DB, " dB")
    check_output(args.json, "--json")
    recording = open_recording(args.file, channel=channel)
    calibration = (None if args.calibration is None
                   else calibrate_file(args.calibration, 0, args.calibrator_db))
    stats = SampleStats(sample_rate_hz=recording.sample_rate_hz, source_name=recording.name)
    with ProgressBar(recording.name, recording.duration_s) as progress:
        analysis = analyse_levels(stats.watch(iter_blocks(recording)), sample_rate_hz=recording.sample_rate_hz,
                                  level_offset_db=0.0 if calibration is None else calibration.offset_db,
                                  fraction=1 if args.octave else 3, total_frames=recording.frames,
                                  progress=progress, source_name=recording.name)
    findings = stats.facts().findings + (calibration.findings if calibration else ())
    unit = "dB" if calibration else "dB re FS"
    print(f"{recording.name}: {recording.duration_s:.1f} s at {recording.sample_rate_hz} Hz, "
          f"{'calibrated' if calibration else 'not calibrated (levels in dB re full scale)'}")
    print(f"{'band Hz':>8}  {'Leq ' + unit:>12}")
    for frequency_hz, level in zip(analysis.band_leq.nominal_hz, analysis.band_leq.values):
        print(f"{frequency_hz:>8g}  {'-' if level is None else f'{level:.1f}':>12}")
    print(f"LAeq {analysis.laeq_db:.1f}  LCeq {analysis.lceq_db:.1f}  LAFmax {analysis.lafmax_db:.1f}  "
          f"LASmax {analysis.lasmax_db:.1f}  ({unit})")
    print_findings(findings)
    if args.json:
        write_json(args.json, {
            "frequencies_hz": frequencies(analysis.band_leq.nominal_hz),
            "leq_db": list(analysis.band_leq.rounded(1)),
            "calibrated": calibration is not None,
            "laeq_db": rounded(analysis.laeq_db, 1), "lceq_db": rounded(analysis.lceq_db, 1),
            "lafmax_db": rounded(analysis.lafmax_db, 1), "lasmax_db": rounded(analysis.lasmax_db, 1),
            "duration_s": round(recording.duration_s, 3),
            "warnings": [f.as_json() for f in findings],
        })
    return 0


def run_decay(args: argparse.Namespace) -> int:
    from fieldtl.audio.ingest import open_recording, read_samples
    from fieldtl.bands import nominal_bands_hz
    from fieldtl.measure import analyse_decay
    from fieldtl.survey import TakeSpec

    channel = channel_index(args.channel, args.file)
    for option, value, bounds, unit in (("--sweep-start-hz", args.sweep_start_hz, SWEEP_HZ, " Hz"),
                                        ("--sweep-stop-hz", args.sweep_stop_hz, SWEEP_HZ, " Hz"),
                                        ("--sweep-length-s", args.sweep_length_s, SWEEP_S, " s")):
        if value is not None:
            option_number(value, option, bounds, unit)
    check_output(args.json, "--json")
    recording = open_recording(args.file, channel=channel)
    spec = TakeSpec(file=args.file, role="decay", speaker=1, channel=recording.channel, method=args.method,
                    sweep_start_hz=args.sweep_start_hz, sweep_stop_hz=args.sweep_stop_hz,
                    sweep_length_s=args.sweep_length_s)
    if args.method == "sweep":           # the played sweep is rebuilt in memory: check it before reading audio
        from fieldtl.measure import sweep_from_spec
        sweep_from_spec(spec, sample_rate_hz=recording.sample_rate_hz, source_name=recording.name)
    samples = read_samples(recording)
    bands = nominal_bands_hz(63, 4000, fraction=1) if args.octave else nominal_bands_hz(50, 5000)
    analysis = analyse_decay(samples, sample_rate_hz=recording.sample_rate_hz, spec=spec,
                             source_name=recording.name, nominal_hz=bands, fraction=1 if args.octave else 3)
    columns = {name: analysis.spectrum(name) for name in ("T20", "T30", "EDT")}
    print(f"{recording.name}: {args.method} method, {analysis.decay_count} decay(s) ({analysis.averaging})")
    print(f"{'band Hz':>8}  {'T20 s':>7}  {'T30 s':>7}  {'EDT s':>7}")
    for i, frequency_hz in enumerate(analysis.nominal_hz):
        cells = [columns[name].values[i] for name in columns]
        print(f"{frequency_hz:>8g}  " + "  ".join(f"{'-' if v is None else f'{v:.2f}':>7}" for v in cells))
    findings = analysis.all_findings()
    print_findings(findings)
    if args.json:
        write_json(args.json, {
            "frequencies_hz": frequencies(analysis.nominal_hz),
            **{f"{name}_s": list(spectrum.rounded(3)) for name, spectrum in columns.items()},
            "averaging": analysis.averaging,
            "warnings": [f.as_json() for f in findings],
        })
    # No band gave a T (e.g. no impulse in an impulse recording): the run failed, say so by the status.
    return 0 if any(v is not None for spectrum in columns.values() for v in spectrum.values) else EXIT_NO_RESULT


def run_signal(args: argparse.Namespace) -> int:
    from fieldtl.audio.signals import (MAX_SEED, SweepSpec, exponential_sweep, pink_noise, white_noise,
                                       write_signal_wav)

    check_output(args.out, "OUT.wav", suffixes=("wav",))
    if args.seed is not None:
        option_number(args.seed, "--seed", (0, MAX_SEED), "", integer=True)
    option_number(args.level_dbfs, "--level-dbfs", LEVEL_DBFS, " dB re full scale")
    print(f"CAUTION: {HEARING_CAUTION}")
    if args.kind == "sweep":
        duration_s = 10.0 if args.seconds is None else args.seconds      # an explicit 30 s is 30 s
        # Default fades, exactly as fieldtl.measure.sweep_from_spec rebuilds the sweep for deconvolution.
        spec = SweepSpec(duration_s=duration_s, sample_rate_hz=args.sample_rate_hz, low_hz=args.low_hz,
                         high_hz=args.high_hz, level_dbfs=args.level_dbfs)
        samples = exponential_sweep(spec, silence_s=3.0)
        print(f"sweep {spec.low_hz:g}-{spec.high_hz:g} Hz over {spec.duration_s:g} s, then 3 s of silence; "
              f"analyse with: fieldtl decay REC.wav --method sweep --sweep-start-hz {spec.low_hz:g} "
              f"--sweep-stop-hz {spec.high_hz:g} --sweep-length-s {spec.duration_s:g}")
    else:
        make = pink_noise if args.kind == "pink" else white_noise
        args.seconds = 30.0 if args.seconds is None else args.seconds
        samples = make(args.seconds, sample_rate_hz=args.sample_rate_hz, level_dbfs=args.level_dbfs,
                       low_hz=args.low_hz, high_hz=args.high_hz, fade_in_s=args.fade_s, fade_out_s=args.fade_s,
                       seed=args.seed)
        print(f"{args.kind} noise {args.low_hz:g}-{args.high_hz:g} Hz, {args.seconds:g} s at "
              f"{args.level_dbfs:g} dB re full scale RMS")
    write_signal_wav(args.out, samples, sample_rate_hz=args.sample_rate_hz)
    print(f"wrote {args.out}")
    return 0
