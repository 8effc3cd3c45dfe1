"""The timeline chart of a noise record (matplotlib, imported only when a chart is drawn).

LAeq per interval as steps, LAF90 as the shaded background below, LAFmax per interval as small
markers, events as upward ticks at their LAFmax, diary entries numbered along the bottom, night
periods shaded. Sized for a phone held upright (6.4 x 4.2 inches at 150 dpi, large type, the
legend under the plot); time on the axis is the record's local time.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from datetime import datetime, timedelta
from pathlib import Path
from typing import TYPE_CHECKING

from fieldtl.noise.diary import DiaryMatch
from fieldtl.noise.record import NoiseRecord

if TYPE_CHECKING:
    from matplotlib.figure import Figure

FIGURE_SIZE_IN = (6.4, 4.2)
FIGURE_DPI = 150
FONT_SIZE = 9
LAEQ_COLOUR = "#1b4f72"
BACKGROUND_COLOUR = "#b3c7d6"
MAX_COLOUR = "#7d7d7d"
EVENT_COLOUR = "#c0392b"
DIARY_COLOUR = "#8e44ad"
NIGHT_COLOUR = "#ececf4"


def timeline_figure(record: NoiseRecord, *, diary: Sequence[DiaryMatch] = ()) -> Figure:
    import matplotlib.dates as mdates
    from matplotlib.figure import Figure

    zone = record.settings.zone
    figure = Figure(figsize=FIGURE_SIZE_IN, dpi=FIGURE_DPI, layout="constrained")
    axes = figure.add_subplot()
    for start, end in night_spans(record):
        axes.axvspan(start, end, color=NIGHT_COLOUR, zorder=0, lw=0)
    starts = [i.start for i in record.intervals]
    step = timedelta(minutes=record.settings.interval_min)
    edges = starts + [starts[-1] + step] if starts else []
    laeq = [i.laeq_db for i in record.intervals]
    background = [i.laf90_db for i in record.intervals]
    floor = min([v for v in background + laeq if math.isfinite(v)] or [0.0]) - 5
    if starts:
        axes.stairs(background, edges, baseline=floor, fill=True, color=BACKGROUND_COLOUR, label="LAF90 (background)")
        axes.stairs(laeq, edges, color=LAEQ_COLOUR, lw=1.8, label="LAeq per interval")
        axes.plot([s + step / 2 for s in starts], [i.lafmax_db for i in record.intervals], "v", ms=4,
                  color=MAX_COLOUR, label="LAFmax per interval")
    if record.events:
        axes.plot([e.start for e in record.events], [e.lafmax_db for e in record.events], "^", ms=6,
                  color=EVENT_COLOUR, label="event (at its LAFmax)")
    inside = [m for m in diary if m.status != "outside"]
    for number, match in enumerate(inside, start=1):
        axes.annotate(str(number), (match.entry.time, floor), xytext=(0, 6), textcoords="offset points",
                      ha="center", fontsize=FONT_SIZE - 1, color="white",
                      bbox={"boxstyle": "circle,pad=0.2", "fc": DIARY_COLOUR, "lw": 0})
    if inside:
        axes.plot([], [], "o", color=DIARY_COLOUR, label="diary entry (numbered)")
    axes.set_ylim(bottom=floor)
    axes.set_xlim(record.start, record.end)
    locator = mdates.AutoDateLocator(tz=zone, minticks=3, maxticks=8)
    axes.xaxis.set_major_locator(locator)
    axes.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator, tz=zone, show_offset=False))
    axes.tick_params(labelsize=FONT_SIZE)
    unit = "dB" if record.calibrated else "dB re full scale"
    axes.set_ylabel(f"level ({unit})", fontsize=FONT_SIZE)
    axes.set_xlabel(f"local time ({record.settings.zone_name}); shaded: night", fontsize=FONT_SIZE)
    axes.grid(alpha=0.3)
    axes.legend(fontsize=FONT_SIZE - 1, loc="upper center", bbox_to_anchor=(0.5, -0.22), ncol=2, frameon=False)
    return figure


def night_spans(record: NoiseRecord) -> list[tuple[datetime, datetime]]:
    """Start and end of every night period the record touches (local wall-clock times)."""
    zone = record.settings.zone
    spans = []
    for period in record.periods:
        if not period.night:
            continue
        spec = next(p for p in record.settings.periods if p.name == period.name)
        day = datetime.fromisoformat(period.date)
        start = (day + timedelta(minutes=spec.start_min)).replace(tzinfo=zone)
        end_day = day + timedelta(days=1 if spec.end_min <= spec.start_min else 0)
        spans.append((start, (end_day + timedelta(minutes=spec.end_min)).replace(tzinfo=zone)))
    return spans


def save_timeline(record: NoiseRecord, path: str | Path, *, diary: Sequence[DiaryMatch] = ()) -> Path:
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    figure = timeline_figure(record, diary=diary)
    FigureCanvasAgg(figure)
    figure.savefig(path, dpi=FIGURE_DPI)
    return Path(path)
