"""`fieldtl record FILE...`: the noise-record command's work (cli.py holds only its options).

Checks every option, input and output before reading any audio, analyses the files as one
record with the same core the app uses, prints a summary with the cautions, and writes the
outputs asked for. Bad input raises InputError (one line; the CLI exits 2).
"""

from __future__ import annotations

import argparse
from collections.abc import Callable
from contextlib import AbstractContextManager
from pathlib import Path

from fieldtl.cautions import INDICATIVE_CAUTION, NOISE_RECORD_CAUTION, RECORDING_CAUTION
from fieldtl.errors import InputError
from fieldtl.validate import file_label

MAX_FILES = 500
PRINTED_EVENTS = 20


def add_record_options(sub: argparse._SubParsersAction) -> argparse.ArgumentParser:  # noqa: SLF001
    record = sub.add_parser("record", help="noise record for a complaint: levels, events and diary from long recordings")
    record.add_argument("files", type=Path, nargs="+", metavar="FILE", help="WAV/FLAC recordings in time order")
    record.add_argument("--start", help="local start of the first file, e.g. 2026-11-28T22:00 (default: the "
                                        "broadcast-wave origination time in the file)")
    record.add_argument("--timezone", default="UTC", help="time zone of the recording, e.g. Europe/London (default UTC)")
    record.add_argument("--interval", default="15min", help="interval: 1min, 5min, 15min or 60min (default 15min)")
    record.add_argument("--channel", type=int, default=1, help="channel to analyse, 1-based (default 1)")
    record.add_argument("--calibration", type=Path, metavar="CAL.wav", help="recording of the calibrator tone")
    record.add_argument("--calibrator-db", type=float, default=94.0, help="calibrator level in dB (default 94.0)")
    record.add_argument("--event-margin-db", type=float, default=10.0,
                        help="an event is LAF this far above the background LAF90 (default 10)")
    record.add_argument("--event-level-db", type=float, help="also an event: LAF above this level")
    record.add_argument("--count-level-db", type=float, default=45.0,
                        help="count per night the events with LAFmax above this (default 45)")
    record.add_argument("--diary", type=Path, metavar="DIARY.csv", help="occupant's diary: time, heard, disturbance")
    record.add_argument("--limit", action="append", default=[], metavar="NAME:WHAT:DB",
                        help="a local limit to compare with (WHAT: night_laeq, event_lafmax or interval_laeq), "
                             "e.g. 'Local night limit:night_laeq:35'; repeat for more")
    record.add_argument("--separation", type=Path, metavar="TEST.csv",
                        help="a separation test (columns Hz, DnT or L'nT, optional T) to compare the events with")
    record.add_argument("--source-spectrum", type=Path, metavar="SOURCE.csv",
                        help="your own source spectrum for --separation (columns Hz, dB) instead of the invented ones")
    record.add_argument("--json", type=Path, metavar="OUT", help="write the record as JSON")
    record.add_argument("--csv", type=Path, metavar="OUT.csv",
                        help="write intervals as CSV (and the events beside it as OUT-events.csv)")
    record.add_argument("--plot", type=Path, metavar="OUT.png", help="draw the timeline")
    record.add_argument("--pdf", type=Path, metavar="OUT.pdf", help="write the noise-record report")
    record.add_argument("--keep-clips", type=Path, metavar="FOLDER",
                        help="keep short audio clips of the events in FOLDER (check consent and local law first)")
    return record


def run_record(args: argparse.Namespace, *, progress_bar: Callable[[], AbstractContextManager],
               check_output: Callable[..., None], plot_suffixes: Callable[[], tuple[str, ...]]) -> int:
    """Run the command; ``progress_bar()`` gives a context whose value is a progress callback or None."""
    from fieldtl.noise.settings import RecordSettings, parse_interval, parse_start, zone
    from fieldtl.validate import CALIBRATOR_DB, CHANNEL, number

    if len(args.files) > MAX_FILES:
        raise InputError(f"record: at most {MAX_FILES} files, got {len(args.files)}")
    for path in args.files + [p for p in (args.diary, args.separation, args.source_spectrum) if p is not None]:
        if not path.is_file():
            raise InputError(f"{file_label(path)}: file not found")
    channel = int(number(args.channel, "--channel", low=CHANNEL[0], high=CHANNEL[1], integer=True)) - 1
    number(args.calibrator_db, "--calibrator-db", low=CALIBRATOR_DB[0], high=CALIBRATOR_DB[1], unit=" dB")
    tz = zone(args.timezone)
    settings = RecordSettings(zone_name=args.timezone, interval_min=parse_interval(args.interval),
                              event_margin_db=args.event_margin_db, event_level_db=args.event_level_db,
                              count_level_db=args.count_level_db, keep_clips=args.keep_clips is not None)
    start, start_notes = parse_start(args.start, tz) if args.start else (None, ())
    limits = tuple(_limit(text) for text in args.limit)
    for path, option, suffixes in ((args.json, "--json", ()), (args.csv, "--csv", ("csv",)),
                                   (args.pdf, "--pdf", ("pdf",)),
                                   (args.plot, "--plot", plot_suffixes() if args.plot else ())):
        check_output(path, option, suffixes=suffixes)
    if args.csv is not None:
        check_output(_events_csv(args.csv), "--csv")
    if args.keep_clips is not None and args.keep_clips.exists() and not args.keep_clips.is_dir():
        raise InputError(f"{file_label(args.keep_clips)}: --keep-clips must be a folder")
    from fieldtl.tomlfile import read_text_file

    diary_text = None
    if args.diary is not None:
        diary_text = read_text_file(args.diary, what="diary")
    separation = None
    if args.separation is not None:
        from fieldtl.noise.wall import read_separation_csv
        separation = read_separation_csv(read_text_file(args.separation, what="separation test"),
                                         source_name=file_label(args.separation))
        if args.source_spectrum is not None:
            from fieldtl.noise.wall import read_source_csv
            kind = "impact" if separation[0].quantity == "L'nT" else "airborne"
            own = read_source_csv(read_text_file(args.source_spectrum, what="source spectrum"),
                                  name=file_label(args.source_spectrum), kind=kind)
            separation = (*separation, own)
    elif args.source_spectrum is not None:
        raise InputError("--source-spectrum is compared through a separation test: give --separation too")
    print(f"CAUTION: {NOISE_RECORD_CAUTION}\nCAUTION: {INDICATIVE_CAUTION}")
    if args.keep_clips is not None:
        print(f"CAUTION: {RECORDING_CAUTION}")
    offset_db = None
    if args.calibration is not None:
        from fieldtl.measure import calibrate_file
        offset_db = calibrate_file(args.calibration, 0, args.calibrator_db).offset_db
    return _analyse_and_write(args, settings, start, start_notes, offset_db, channel, diary_text, separation,
                              limits, progress_bar)


def _limit(text: str):
    from fieldtl.noise.reference import reference_line
    from fieldtl.validate import echo

    name, _, rest = text.rpartition(":")
    name, _, metric = name.rpartition(":")
    try:
        level_db = float(rest)
    except ValueError:
        raise InputError(f"--limit {echo(text)}: write it as NAME:WHAT:DB, e.g. 'Local night limit:night_laeq:35'") from None
    return reference_line(name, metric, level_db)


def _events_csv(path: Path) -> Path:
    return path.with_name(f"{path.stem}-events.csv")


def _analyse_and_write(args, settings, start, start_notes, offset_db, channel, diary_text, separation, limits,
                       progress_bar) -> int:
    import dataclasses

    from fieldtl.noise.diary import match_diary, read_diary_csv
    from fieldtl.noise.export import events_to_csv, intervals_to_csv, level_unit, record_to_json
    from fieldtl.noise.record import analyse_record
    from fieldtl.noise.reference import WHO_BEDROOM_NIGHT, compare
    from fieldtl.report.export import json_text

    with progress_bar() as progress:
        record = analyse_record(args.files, settings, start=start, level_offset_db=offset_db, channel=channel,
                                progress=progress)
    record = dataclasses.replace(record, findings=tuple(start_notes) + record.findings)
    diary = ()
    if diary_text is not None:
        entries = read_diary_csv(diary_text, zone_name=settings.zone_name, first_date=record.start,
                                 source_name=file_label(args.diary))
        diary = match_diary(record, entries)
    references = compare(record, WHO_BEDROOM_NIGHT + limits)
    wall = _wall(record, separation)
    _print_summary(record, diary, references, level_unit(record))
    for comparison in wall:
        print(f"{comparison.source.name} ({comparison.source.origin}): {comparison.conclusion}")
    if args.json:
        _write(args.json, json_text(record_to_json(record, diary=diary, wall=wall, references=references)))
    if args.csv:
        _write(args.csv, intervals_to_csv(record))
        _write(_events_csv(args.csv), events_to_csv(record))
    if args.plot:
        from fieldtl.noise.chart import save_timeline
        save_timeline(record, args.plot, diary=diary)
    if args.pdf:
        from fieldtl.report.noise_pdf import record_to_pdf
        data = record_to_pdf(record, diary=diary, wall=wall, references=references)
        try:
            args.pdf.write_bytes(data)
        except OSError as exc:
            raise InputError(f"{file_label(args.pdf)}: cannot write ({exc.strerror or exc})") from None
    if args.keep_clips is not None:
        from fieldtl.noise.clips import write_event_clips
        clips = write_event_clips(record, args.keep_clips, channel=channel)
        print(f"{len(clips)} event clip(s) kept in {file_label(args.keep_clips)}")
    return 0


def _wall(record, separation) -> tuple:
    """Every default source of the test's kind against the events' spectrum; none without a test.
    An uncalibrated record or one without events cannot be compared: said in one printed line."""
    if separation is None:
        return ()
    from fieldtl.noise.wall import DEFAULT_SOURCES, compare_with_wall, events_spectrum

    test, room_t, *own = separation
    try:
        recorded = events_spectrum(record)
    except InputError as exc:
        print(f"link to the separating element: not made ({exc})")
        return ()
    kind = "impact" if test.quantity == "L'nT" else "airborne"
    sources = own or [source for source in DEFAULT_SOURCES if source.kind == kind]
    return tuple(compare_with_wall(source, recorded, separation=test, reverberation_time_s=room_t)
                 for source in sources)


def _print_summary(record, diary, references, unit: str) -> None:
    print(f"record {record.start:%Y-%m-%d %H:%M} to {record.end:%Y-%m-%d %H:%M} ({record.settings.zone_name}), "
          f"{len(record.files)} file(s), levels in {unit}")
    print(f"{'period':<22} {'hours':>5} {'LAeq':>6} {'LAFmax':>7} {'LAF90':>6} {'events':>6}")
    for p in record.periods:
        lv = p.levels
        print(f"{p.name + ' ' + p.date:<22} {lv.covered_s / 3600:>5.1f} {lv.laeq_db:>6.1f} {lv.lafmax_db:>7.1f} "
              f"{lv.laf90_db:>6.1f} {p.events:>6}")
    for night in record.nights:
        print(f"night of {night.date}: {night.events_above} event(s) with LAFmax above {night.count_level_db:g} {unit}")
    print(f"{len(record.events)} event(s)" + (":" if record.events else ""))
    for number, e in enumerate(record.events[:PRINTED_EVENTS], start=1):
        print(f"  {number:>3} {e.start:%Y-%m-%d %H:%M:%S} {e.duration_s:6.1f} s  LAFmax {e.lafmax_db:5.1f}  "
              f"LAE {e.lae_db:5.1f}  background {e.background_db:5.1f}")
    if len(record.events) > PRINTED_EVENTS:
        print(f"  ... {len(record.events) - PRINTED_EVENTS} more in the CSV/JSON")
    for number, match in enumerate(diary, start=1):
        print(f"diary {number}: {match.entry.time:%Y-%m-%d %H:%M} {match.entry.heard[:40]!s}: {match.statement}")
    for comparison in references:
        print(comparison.text)
    for finding in record.findings:
        print(f"{finding.severity.upper()} {finding.code}: {finding.message}")


def _write(path: Path, text: str) -> None:
    try:
        path.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise InputError(f"{file_label(path)}: cannot write ({exc.strerror or exc})") from None
