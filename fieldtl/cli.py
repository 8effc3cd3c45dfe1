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
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from fieldtl import __version__
from fieldtl.cli_app import add_app_command
from fieldtl.cli_input import EXIT_BAD_INPUT, OneLineParser, check_output, check_paths, input_name, plot_suffixes, say
from fieldtl.cli_output import ProgressBar, write_json, write_text
from fieldtl.cli_recording import add_recording_commands, add_signal_command
from fieldtl.errors import FieldTLError, InputError
from fieldtl.validate import file_label

EXIT_INTERNAL_ERROR = 70   # EX_SOFTWARE of sysexits.h: a bug of ours, not bad input


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

    add_recording_commands(sub)

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

    add_signal_command(sub)

    predict = sub.add_parser("predict", help="predicted sound reduction R of a declared wall or floor")
    predict.add_argument("construction", type=Path, nargs="?", metavar="CONSTRUCTION.toml",
                         help="a construction file (or give --layer)")
    predict.add_argument("--layer", action="append", default=[], metavar="MATERIAL:THICKNESS_MM",
                         help="a layer of a single leaf (repeat for layers bonded together)")
    predict.add_argument("--json", type=Path, metavar="OUT", help="write the prediction as JSON")
    predict.set_defaults(run=_run_predict)

    add_app_command(sub)

    demo = sub.add_parser("demo", help="assess the invented demo survey in sample_audio/")
    demo.add_argument("--out", type=Path, help="folder for demo JSON, CSV and chart (default: print only)")
    demo.set_defaults(run=_run_demo)

    store = sub.add_parser("store", help="look after the project store")
    store_actions = store.add_subparsers(dest="store_action", required=True, metavar="ACTION")
    clean = store_actions.add_parser("clean", help="remove audio no take refers to and unfinished uploads or "
                                                   "exports older than an hour")
    clean.add_argument("--data-dir", type=Path, help="folder of the project store (default: your user data folder)")
    clean.add_argument("--store", help="postgresql:// URL of a team server to clean instead (default: FIELDTL_STORE_URL "
                                       "when no --data-dir is given); its audio is in its database")
    clean.set_defaults(run=_run_store_clean)

    from fieldtl.noise.command import add_record_options
    add_record_options(sub).set_defaults(run=_run_record)
    from fieldtl.team_command import add_team_options, run_team
    add_team_options(sub).set_defaults(run=run_team)
    return parser


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
    with ProgressBar(survey.source_name, math.inf) as progress, user_cache(fresh=fresh) as cache:
        assessment = assess_survey(survey, cache=cache, progress=progress,
                                   options=AssessOptions(decision_rule=decision, source_combination=speaker_rule))
    print(assessment_to_text(assessment))
    if json_path:
        write_json(json_path, assessment_to_json(assessment))
    if csv_path:
        write_text(csv_path, assessment_to_csv(assessment))
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
    from fieldtl.report.client import EXPLANATION, UNCONFIRMED_MARK

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
    for note in prediction.notes:
        print(f"note: {note}")
    if any(note.endswith(UNCONFIRMED_MARK) for note in prediction.notes):
        print(EXPLANATION)
    if args.json:
        write_json(args.json, prediction_to_json(prediction))
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

    return run_record(args, progress_bar=lambda: ProgressBar("record", math.inf), check_output=check_output,
                      plot_suffixes=plot_suffixes)


if __name__ == "__main__":
    sys.exit(main())
