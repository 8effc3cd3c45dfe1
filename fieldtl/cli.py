"""The `fieldtl` command: a thin client of the core; every subcommand calls the same functions as the app.

Bad input never produces a traceback: any FieldTLError (or an unreadable/unwritable path, or a
malformed option) is printed as one line `fieldtl: <file>: <problem>` on stderr with exit status 2.
Options and output paths are checked before any analysis starts. An exception we did not foresee
is a bug: it is reported in one line as an internal error with exit status 70.
"""

from __future__ import annotations

import argparse
import math
import os
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from fieldtl import __version__
from fieldtl.addresses import reachable_addresses
from fieldtl.cautions import CAUTIONS, HEARING_CAUTION
from fieldtl.cli_input import (EXIT_BAD_INPUT, LEVEL_DBFS, OneLineParser, channel_index, check_output, check_paths,
                               input_name, option_number, plot_suffixes, say)
from fieldtl.errors import FieldTLError, InputError
from fieldtl.validate import CALIBRATOR_DB, SWEEP_HZ, SWEEP_S, file_label

EXIT_INTERNAL_ERROR = 70   # EX_SOFTWARE of sysexits.h: a bug of ours, not bad input
EXIT_NO_RESULT = 1         # the input was readable but gave no result (findings say why)
PROGRESS_MIN_S = 20.0   # show a progress bar for recordings at least this long, in a terminal


def main(argv: Sequence[str] | None = None) -> int:
    parser = _parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:            # --help, --version or a malformed option (one line, see OneLineParser)
        return exc.code if isinstance(exc.code, int) else EXIT_BAD_INPUT
    try:
        check_paths(args)
        return int(args.run(args) or 0)
    except FieldTLError as exc:
        say(str(exc))
        return EXIT_BAD_INPUT
    except BrokenPipeError:              # output piped into `head` and closed: not an error of ours
        sys.stdout = open(os.devnull, "w")  # noqa: SIM115 - silence the flush at interpreter exit
        return 0
    except OSError as exc:
        name = file_label(exc.filename) if isinstance(getattr(exc, "filename", None), str) else "file"
        say(f"{name}: {exc.strerror or type(exc).__name__}")
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        say("interrupted")
        return 130
    except Exception as exc:  # noqa: BLE001 - last resort: a bug of ours still gets one line, not a traceback
        say(f"{input_name(args)}: internal error ({type(exc).__name__}); please report it with this file")
        return EXIT_INTERNAL_ERROR


def _parser() -> argparse.ArgumentParser:
    parser = OneLineParser(prog="fieldtl", description="Field sound insulation from on-site recordings.")
    parser.add_argument("--version", action="version", version=f"fieldtl {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    bands = sub.add_parser("bands", help="band levels (Leq), LAeq, LCeq and maxima of one recording")
    bands.add_argument("file", type=Path, metavar="REC.wav", help="the recording (WAV or FLAC)")
    bands.add_argument("--channel", type=int, default=1, help="channel to analyse, 1-based (default 1)")
    bands.add_argument("--calibration", type=Path, metavar="CAL.wav", help="recording of the calibrator tone")
    bands.add_argument("--calibrator-db", type=float, default=94.0, help="calibrator level in dB (default 94.0)")
    bands.add_argument("--octave", action="store_true", help="octave bands instead of one-third octaves")
    bands.add_argument("--json", type=Path, metavar="OUT", help="write the results as JSON")
    bands.set_defaults(run=_run_bands)

    decay = sub.add_parser("decay", help="reverberation times (T20, T30, EDT) of one decay recording")
    decay.add_argument("file", type=Path, metavar="DECAY.wav", help="the decay recording (WAV or FLAC)")
    decay.add_argument("--method", required=True, choices=("impulse", "interrupted", "sweep"))
    decay.add_argument("--channel", type=int, default=1, help="channel to analyse, 1-based (default 1)")
    decay.add_argument("--octave", action="store_true", help="octave bands instead of one-third octaves")
    decay.add_argument("--sweep-start-hz", type=float, help="sweep method: start frequency of the sweep played")
    decay.add_argument("--sweep-stop-hz", type=float, help="sweep method: stop frequency of the sweep played")
    decay.add_argument("--sweep-length-s", type=float, help="sweep method: duration of the sweep played")
    decay.add_argument("--json", type=Path, metavar="OUT", help="write the results as JSON")
    decay.set_defaults(run=_run_decay)

    assess = sub.add_parser("assess", help="field result, ratings, verdict and quality findings of a survey")
    assess.add_argument("survey", type=Path, metavar="SURVEY.toml", help="the survey file naming the recordings")
    assess.add_argument("--json", type=Path, metavar="OUT.json", help="write the results as JSON")
    assess.add_argument("--csv", type=Path, metavar="OUT.csv", help="write the band table as CSV")
    assess.add_argument("--plot", type=Path, metavar="OUT.png", help="draw the measured and reference curves")
    assess.add_argument("--decision", choices=("guarded", "shared-risk"), default="guarded",
                        help="verdict rule: guarded by the expanded uncertainty (default) or shared risk")
    assess.add_argument("--speaker-rule", choices=("energy", "arithmetic", "simultaneous"), default="energy",
                        help="how loudspeaker positions are combined (default energy)")
    assess.add_argument("--fresh", action="store_true", help="measure every recording again instead of reading "
                        "the measurements kept in your fieldtl store (as FIELDTL_NO_CACHE=1 does)")
    assess.set_defaults(run=_run_assess)

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
    signal_cmd.set_defaults(run=_run_signal)

    predict = sub.add_parser("predict", help="predicted sound reduction R of a declared wall or floor")
    predict.add_argument("construction", type=Path, nargs="?", metavar="CONSTRUCTION.toml",
                         help="a construction file (or give --layer)")
    predict.add_argument("--layer", action="append", default=[], metavar="MATERIAL:THICKNESS_MM",
                         help="a layer of a single leaf (repeat for layers bonded together)")
    predict.add_argument("--json", type=Path, metavar="OUT", help="write the prediction as JSON")
    predict.set_defaults(run=_run_predict)

    app = sub.add_parser("app", help="start the field app (opens the invented demo project on first start)")
    app.add_argument("--host", default="127.0.0.1",
                     help="address to serve on (default 127.0.0.1; use 0.0.0.0 for a phone on the site Wi-Fi)")
    app.add_argument("--port", type=int, default=8501)
    app.add_argument("--data-dir", type=Path, help="folder for the project store (default: your user data folder)")
    app.add_argument("--access-code", help="code asked of every browser, at least 40 bits (e.g. k7m2-q9tx-4hvw); "
                                           "also read from FIELDTL_ACCESS_CODE (default when served beyond this "
                                           "machine: a new random code, printed here)")
    app.add_argument("--cert", type=Path, help="TLS certificate (PEM); phones only allow recording over https")
    app.add_argument("--key", type=Path, help="TLS private key (PEM) for --cert")
    app.add_argument("--store", help="team server: postgresql://user@host/database (also FIELDTL_STORE_URL; "
                                     "default: the SQLite store in --data-dir)")
    app.add_argument("--https", action="store_true",
                     help="serve over https with a self-signed certificate kept in the data folder")
    app.set_defaults(run=_run_app)

    demo = sub.add_parser("demo", help="assess the invented demo survey in sample_audio/")
    demo.add_argument("--out", type=Path, help="folder for demo JSON, CSV and chart (default: print only)")
    demo.set_defaults(run=_run_demo)

    store = sub.add_parser("store", help="look after the project store")
    store_actions = store.add_subparsers(dest="store_action", required=True, metavar="ACTION")
    clean = store_actions.add_parser("clean", help="remove audio no take refers to and unfinished uploads or "
                                                   "exports older than an hour")
    clean.add_argument("--data-dir", type=Path, help="folder of the project store (default: your user data folder)")
    clean.add_argument("--store", help="postgresql:// URL of a team server to clean instead (default: FIELDTL_STORE_URL "
                                       "when no --data-dir is given); its audio is in DATA_DIR/audio")
    clean.set_defaults(run=_run_store_clean)

    from fieldtl.noise.command import add_record_options
    add_record_options(sub).set_defaults(run=_run_record)
    from fieldtl.team_command import add_team_options, run_team
    add_team_options(sub).set_defaults(run=run_team)
    return parser


# --- one recording --------------------------------------------------------------------------------

def _run_bands(args: argparse.Namespace) -> int:
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
    with _progress_bar(recording.name, recording.duration_s) as progress:
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
    _print_findings(findings)
    if args.json:
        _write_json(args.json, {
            "frequencies_hz": _frequencies(analysis.band_leq.nominal_hz),
            "leq_db": list(analysis.band_leq.rounded(1)),
            "calibrated": calibration is not None,
            "laeq_db": _round(analysis.laeq_db, 1), "lceq_db": _round(analysis.lceq_db, 1),
            "lafmax_db": _round(analysis.lafmax_db, 1), "lasmax_db": _round(analysis.lasmax_db, 1),
            "duration_s": round(recording.duration_s, 3),
            "warnings": [f.as_json() for f in findings],
        })
    return 0


def _run_decay(args: argparse.Namespace) -> int:
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
    _print_findings(findings)
    if args.json:
        _write_json(args.json, {
            "frequencies_hz": _frequencies(analysis.nominal_hz),
            **{f"{name}_s": list(spectrum.rounded(3)) for name, spectrum in columns.items()},
            "averaging": analysis.averaging,
            "warnings": [f.as_json() for f in findings],
        })
    # No band gave a T (e.g. no impulse in an impulse recording): the run failed, say so by the status.
    return 0 if any(v is not None for spectrum in columns.values() for v in spectrum.values) else EXIT_NO_RESULT


# --- a whole survey ----------------------------------------------------------------------------------

def _run_assess(args: argparse.Namespace) -> int:
    from fieldtl.survey import load_survey

    check_output(args.json, "--json")
    check_output(args.csv, "--csv")
    check_output(args.plot, "--plot", suffixes=plot_suffixes() if args.plot else ())
    survey = load_survey(args.survey)
    return _assess_and_report(survey, json_path=args.json, csv_path=args.csv, plot_path=args.plot,
                              decision=args.decision.replace("-", "_"), speaker_rule=args.speaker_rule,
                              fresh=args.fresh)


def _assess_and_report(survey: Any, *, json_path: Path | None, csv_path: Path | None, plot_path: Path | None,
                       decision: str = "guarded", speaker_rule: str = "energy", fresh: bool = False) -> int:
    from fieldtl.assess import AssessOptions
    from fieldtl.report.export import assessment_to_csv, assessment_to_json, assessment_to_text
    from fieldtl.testrun import assess_survey, user_cache

    # The app's path: takes measured before (same audio, same settings) are read from the user's store.
    with _progress_bar(survey.source_name, math.inf) as progress, user_cache(fresh=fresh) as cache:
        assessment = assess_survey(survey, cache=cache, progress=progress,
                                   options=AssessOptions(decision_rule=decision, source_combination=speaker_rule))
    print(assessment_to_text(assessment))
    if json_path:
        _write_json(json_path, assessment_to_json(assessment))
    if csv_path:
        _write_text(csv_path, assessment_to_csv(assessment))
    if plot_path:
        from fieldtl.report.plot import save_assessment_plot
        save_assessment_plot(assessment, plot_path)
    return 0


def _run_demo(args: argparse.Namespace) -> int:
    from fieldtl.survey import load_survey

    survey_path = Path(__file__).resolve().parent.parent / "sample_audio" / "survey.toml"
    if not survey_path.is_file():
        raise InputError(f"survey.toml: the demo survey is missing ({survey_path}); run from a clone of the repository")
    print("Invented demo data: a fictional building, not a real measurement.\n")
    out = args.out
    if out is not None:
        if out.exists() and not out.is_dir():
            raise InputError(f"{file_label(out)}: --out must be a folder, and this is a file")
        out.mkdir(parents=True, exist_ok=True)
    written = [out / name for name in ("demo.json", "demo.csv", "demo.png")] if out else [None] * 3
    status = _assess_and_report(load_survey(survey_path), json_path=written[0], csv_path=written[1],
                                plot_path=written[2])
    for path in written if out else ():
        if path.is_file():
            print(f"wrote {path}")
    return status


# --- construction prediction ------------------------------------------------------------------------

def _run_predict(args: argparse.Namespace) -> int:
    from fieldtl.construction import construction_from_layers, load_construction, prediction_to_json
    from fieldtl.construction.predict import predict
    from fieldtl.report.client import EXPLANATION, UNCONFIRMED_MARK, marked

    if (args.construction is None) == (not args.layer):
        raise InputError("predict: give either a construction file or one or more --layer MATERIAL:THICKNESS_MM")
    check_output(args.json, "--json")
    construction = load_construction(args.construction) if args.construction else construction_from_layers(args.layer)
    prediction = predict(construction)
    rating = prediction.rating
    print(f"{construction.name}: {prediction.method}")
    print(f"surface mass {prediction.surface_mass_kg_m2:.1f} kg/m2, critical frequency "
          f"{prediction.critical_frequency_hz:.0f} Hz"
          + (f", mass-air-mass resonance {prediction.mass_air_mass_resonance_hz:.0f} Hz"
             if prediction.mass_air_mass_resonance_hz else ""))
    print(f"{'band Hz':>8}  {'R dB':>6}")
    for frequency_hz, value in zip(prediction.r_db.nominal_hz, prediction.r_db.values):
        print(f"{frequency_hz:>8g}  {'-' if value is None else f'{value:.1f}':>6}")
    terms = rating.adaptation_terms_db
    print(f"Rw {rating.single_number_db} dB (C {terms['C']:+d}; Ctr {terms['Ctr']:+d})"
          + ("  — an upper bound: see the notes" if prediction.upper_bound else ""))
    notes = [marked(note) for note in prediction.notes]       # no internal notes for the user
    for note in notes:
        print(f"note: {note}")
    if any(note.endswith(UNCONFIRMED_MARK) for note in notes):
        print(EXPLANATION)
    if args.json:
        _write_json(args.json, {**prediction_to_json(prediction), "notes": notes})
    return 0


# --- the app ---------------------------------------------------------------------------------------------

LOCAL_HOSTS = ("127.0.0.1", "localhost", "::1")


def _run_app(args: argparse.Namespace) -> int:
    from fieldtl.store import default_data_dir
    from fieldtl.ui import access

    if (args.cert is None) != (args.key is None):
        raise InputError("app: give both --cert and --key, or neither")
    if args.https and args.cert is not None:
        raise InputError("app: --https makes its own certificate; leave out --cert and --key")
    for path in (args.cert, args.key):
        if path is not None and not path.is_file():
            raise InputError(f"{path.name}: file not found ({path})")
    chosen = args.access_code if args.access_code is not None else os.environ.get(access.ENV_VAR) or None
    if chosen is not None:
        access.check_chosen_code(chosen, source="--access-code" if args.access_code is not None else access.ENV_VAR)
    data_dir = (args.data_dir or default_data_dir()).expanduser().resolve()
    data_dir.mkdir(parents=True, exist_ok=True)
    if args.https:
        from fieldtl.tls import self_signed_certificate
        args.cert, args.key = self_signed_certificate(data_dir / "tls")
        print("https with a self-signed certificate: each browser asks once whether to trust it")
    env = {k: v for k, v in os.environ.items() if k != access.ENV_VAR}
    env["FIELDTL_DATA_DIR"] = str(data_dir)
    from fieldtl.store.location import STORE_URL_VARIABLE, check_store_url
    if args.store is not None:          # the team server (fieldtl.store.location); its audio in data_dir
        check_store_url(args.store, "--store")
        env[STORE_URL_VARIABLE] = args.store
    server = env.get(STORE_URL_VARIABLE, "").strip()
    # On a team server accounts sign in (ui/login.py) and no access code is asked.
    code = None if server else chosen or (access.new_code() if args.host not in LOCAL_HOSTS else None)
    if code is not None:
        env[access.ENV_VAR] = code
        print(f"Access code for every browser: {code}  (spaces, dashes and capitals do not matter)")
    app_path = Path(__file__).resolve().parent / "ui" / "app.py"
    root = app_path.parents[2]          # the repository, whose .streamlit/config.toml sets upload limits
    command = [sys.executable, "-m", "streamlit", "run", str(app_path), "--server.address", args.host,
               "--server.port", str(args.port), "--server.headless", "true", "--browser.gatherUsageStats", "false"]
    if args.cert is not None:
        command += ["--server.sslCertFile", str(args.cert.resolve()), "--server.sslKeyFile", str(args.key.resolve())]
    scheme = "https" if args.cert else "http"
    urls = ", ".join(f"{scheme}://{a}:{args.port}" for a in reachable_addresses(args.host))   # never 0.0.0.0
    if server:
        from fieldtl.store.pg_database import shown_url
        print(f"fieldtl app on {urls}  (team server {shown_url(server)}, audio in {data_dir}); Ctrl+C stops it")
    else:
        print(f"fieldtl app on {urls}  (store: {data_dir}); Ctrl+C stops it")
    print(f"CAUTION: {CAUTIONS[0]}\nCAUTION: {CAUTIONS[1]}")
    sys.stdout.flush()
    sys.stderr.flush()
    if (root / ".streamlit" / "config.toml").is_file():
        os.chdir(root)
    # The server replaces this process: SIGTERM and SIGINT reach it directly and no child is left behind.
    os.execve(sys.executable, command, env)


# --- test signals -------------------------------------------------------------------------------------

def _run_signal(args: argparse.Namespace) -> int:
    from fieldtl.audio.signals import SweepSpec, exponential_sweep, pink_noise, white_noise, write_signal_wav

    from fieldtl.audio.signals import MAX_SEED

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


def _run_store_clean(args: argparse.Namespace) -> int:
    from fieldtl.measure_cache import analysis_version
    from fieldtl.store.maintenance import clean_store

    done = clean_store(analysis_version=analysis_version(), data_dir=args.data_dir, store_url=args.store)
    for path in done.removed:
        print(f"removed {path.parent.name}/{path.name}")
    if done.forgotten:
        print(f"{done.forgotten} kept measurement{'' if done.forgotten == 1 else 's'} of an earlier analysis "
              "version removed")
    print(f"{len(done.removed)} file{'' if len(done.removed) == 1 else 's'} removed from the store in {done.where}")
    return 0


def _run_record(args: argparse.Namespace) -> int:
    from fieldtl.noise.command import run_record

    return run_record(args, progress_bar=lambda: _progress_bar("record", math.inf), check_output=check_output,
                      plot_suffixes=plot_suffixes)


# --- helpers ------------------------------------------------------------------------------------------

def _frequencies(nominal_hz: Sequence[float]) -> list[float | int]:
    from fieldtl.report.export import json_number
    return [json_number(f) for f in nominal_hz]


def _round(value: float, digits: int) -> float | None:
    return round(value, digits) if math.isfinite(value) else None


def _print_findings(findings: Sequence[Any]) -> None:
    for finding in findings:
        band = "" if finding.band_hz is None else f" [{finding.band_hz:g} Hz]"
        print(f"{finding.severity.upper()} {finding.code}{band}: {finding.message}")


def _write_json(path: Path, document: dict[str, Any]) -> None:
    from fieldtl.report.export import json_text
    _write_text(path, json_text(document))


def _write_text(path: Path, text: str) -> None:
    try:
        path.write_text(text, encoding="utf-8")
    except BrokenPipeError:              # output piped into `head` and closed: not an error of ours
        sys.stdout = open(os.devnull, "w")  # noqa: SIM115 - silence the flush at interpreter exit
        return 0
    except OSError as exc:
        raise InputError(f"{path.name}: cannot write ({exc.strerror or exc})") from None


class _progress_bar:
    """A one-line progress bar on stderr for long jobs in a terminal; a no-op otherwise."""

    def __init__(self, name: str, duration_s: float) -> None:
        self._name = name
        self._active = sys.stderr.isatty() and duration_s >= PROGRESS_MIN_S

    def __enter__(self) -> Callable[..., None] | None:
        return self._update if self._active else None

    def _update(self, *progress: Any) -> None:
        """Called as (fraction) for one recording or (take name, fraction) for a survey."""
        name, done = (self._name, progress[0]) if len(progress) == 1 else progress
        filled = int(30 * done)
        sys.stderr.write(f"\r{name[:30]:<30} [{'#' * filled}{'.' * (30 - filled)}] {done:4.0%}")
        sys.stderr.flush()

    def __exit__(self, *exc: object) -> None:
        if self._active:
            sys.stderr.write("\n")


if __name__ == "__main__":
    sys.exit(main())
