"""The link to the wall: what a measured separation test implies for a typical source next door,
beside what the record measured in the complainant's room.

Airborne sources: ISO 16283-1 defines DnT = D + 10 lg(T/T0) with D = L1 - L2 and T0 = 0.5 s, so the
level expected in the receiving room is

    L2 = L1 - DnT + 10 lg(T / T0)

band by band: with the room's reverberation time at the reference T0 = 0.5 s the correction is
zero and L2 = L1 - DnT; a more reverberant room (larger T) holds the transmitted sound longer and
reads higher. Footsteps (impact sources) are not predicted by an airborne test: they need an
impact test, whose L'nT (ISO 16283-2, standardised to the same T0) gives L2 = L'nT + ΔL + 10 lg(T/T0)
with ΔL the footsteps' level relative to the standard tapping machine.

The default source spectra are INVENTED round numbers (labelled so wherever shown), for a first
look only; the user edits them or enters a measured source. They are not from a published source.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fieldtl.bands import BandSpectrum, nominal_bands_hz
from fieldtl.errors import InputError
from fieldtl.noise.record import NoiseRecord

REFERENCE_TIME_S = 0.5          # T0 of ISO 16283-1 and -2
# An excess of this much in a band is "large" (our choice: twice the 3 dB a listener reliably
# notices, and above the few dB by which a real source differs from a typical spectrum).
LARGE_EXCESS_DB = 6.0
LOW_BANDS_UP_TO_HZ = 200.0      # the low-frequency view of the record

_BANDS = nominal_bands_hz(50, 5000)


def _invented(name: str, kind: str, levels: tuple[float, ...]) -> SourceSpectrum:
    return SourceSpectrum(name, kind, BandSpectrum(_BANDS, levels, "dB", "L1"), "invented (not measured)")


@dataclass(frozen=True, slots=True)
class SourceSpectrum:
    """A source next door: one-third-octave levels in the source room (airborne), or levels
    relative to the standard tapping machine (impact), and where the numbers come from."""

    name: str
    kind: str                   # "airborne" or "impact"
    levels_db: BandSpectrum
    origin: str


@dataclass(frozen=True, slots=True)
class WallComparison:
    source: SourceSpectrum
    nominal_hz: tuple[float, ...]
    expected_db: tuple[float, ...]     # in the complainant's room, through the measured element alone
    recorded_db: tuple[float, ...]
    excess_db: tuple[float, ...]       # recorded - expected
    conclusion: str


DEFAULT_SOURCES: tuple[SourceSpectrum, ...] = (
    _invented("music with bass", "airborne", (85, 88, 90, 88, 85, 82, 80, 79, 78, 77, 76, 75, 74, 73, 72, 71, 70, 68,
                                              66, 64, 62)),
    _invented("television", "airborne", (55, 58, 60, 62, 64, 65, 66, 67, 67, 67, 67, 66, 65, 64, 62, 60, 58, 56, 54,
                                         51, 48)),
    _invented("raised speech", "airborne", (35, 40, 45, 50, 55, 58, 60, 62, 63, 63, 63, 62, 60, 58, 56, 54, 52, 50,
                                            48, 46, 44)),
    _invented("footsteps (relative to the tapping machine)", "impact",
              (-4, -4, -5, -5, -6, -7, -8, -9, -10, -11, -12, -13, -14, -15, -16, -17, -18, -19, -20, -21, -22)),
)


def events_spectrum(record: NoiseRecord) -> BandSpectrum:
    """Energy mean of the band levels of every event in the record (nan bands left out)."""
    if not record.calibrated:
        raise InputError("the record is not calibrated: its levels cannot be set against a source's sound levels")
    if not record.events:
        raise InputError("the record has no events to compare with the wall")
    levels = np.array([e.band_leq_db for e in record.events], dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = 10 * np.log10(np.nanmean(10 ** (levels / 10), axis=0))
    return BandSpectrum.from_array(record.bands_hz, mean, "dB", "L2 recorded")


def compare_with_wall(source: SourceSpectrum, recorded: BandSpectrum, *, separation: BandSpectrum,
                      reverberation_time_s: BandSpectrum | float | None = None) -> WallComparison:
    """Expected level in the complainant's room beside ``recorded`` (module docstring).

    ``separation`` is DnT for an airborne source, L'nT for an impact source (its ``quantity`` says
    which). ``reverberation_time_s`` is the complainant's room's T (per band, or one value); None
    means T = T0 and no correction.
    """
    impact_test = "L'nT" in separation.quantity or "L_prime_nT" in separation.quantity
    if (source.kind == "impact") != impact_test:
        need = "an impact test (L'nT)" if source.kind == "impact" else "an airborne test (DnT)"
        raise InputError(f"{source.name}: this source needs {need}; the test given holds {separation.quantity}")
    bands = tuple(f for f in source.levels_db.nominal_hz if f in separation.nominal_hz and f in recorded.nominal_hz)
    if not bands:
        raise InputError(f"{source.name}: the source, the test and the record share no band")
    expected, measured, excess = [], [], []
    for f in bands:
        level, through, heard = source.levels_db.at(f), separation.at(f), recorded.at(f)
        correction = _time_correction_db(reverberation_time_s, f)
        if level is None or through is None:
            value = math.nan
        elif source.kind == "impact":
            value = through + level + correction        # L'nT + ΔL + 10 lg(T/T0)
        else:
            value = level - through + correction        # L1 - DnT + 10 lg(T/T0)
        expected.append(value)
        measured.append(math.nan if heard is None else heard)
        excess.append(measured[-1] - value)
    return WallComparison(source, bands, tuple(expected), tuple(measured), tuple(excess),
                          _conclusion(bands, np.array(excess)))


def _time_correction_db(time_s: BandSpectrum | float | None, nominal_hz: float) -> float:
    value = time_s.at(nominal_hz) if isinstance(time_s, BandSpectrum) else time_s
    if value is None:
        return 0.0
    if not (math.isfinite(value) and value > 0):
        raise InputError(f"reverberation time at {nominal_hz:g} Hz must be a positive number of seconds")
    return 10 * math.log10(value / REFERENCE_TIME_S)


def _conclusion(bands: tuple[float, ...], excess: np.ndarray) -> str:
    """Which is more likely, and why (reasoning of common practice; a comparison, not a finding of fact)."""
    known = np.isfinite(excess)
    if not known.any():
        return "No band could be compared."
    low = np.array([f <= LOW_BANDS_UP_TO_HZ for f in bands]) & known
    high = np.array([f > LOW_BANDS_UP_TO_HZ for f in bands]) & known
    if np.max(excess[known]) < LARGE_EXCESS_DB:
        return ("Consistent: the recorded levels are within 6 dB of what the measured element lets through "
                "from such a source.")
    low_db = float(np.mean(excess[low])) if low.any() else math.nan
    high_db = float(np.mean(excess[high])) if high.any() else math.nan
    spread_db = float(np.ptp(excess[known]))
    if math.isfinite(low_db) and math.isfinite(high_db) and low_db - high_db >= LARGE_EXCESS_DB:
        return (f"Excess concentrated at low frequencies (mean {low_db:.0f} dB up to 200 Hz, {high_db:.0f} dB above): "
                "more likely a source with more bass than assumed, or sound carried through the structure "
                "(flanking walls and floors, impacts), which favours low frequencies, than a gap or door.")
    if math.isfinite(low_db) and math.isfinite(high_db) and high_db - low_db >= LARGE_EXCESS_DB:
        return (f"Excess concentrated above 200 Hz (mean {high_db:.0f} dB, {low_db:.0f} dB below): more likely an "
                "air path around the element (a door, gaps, ventilation, the façade or an open window), since "
                "small openings let mid and high frequencies through far more than a solid wall does.")
    mean_db = float(np.mean(excess[known]))
    if spread_db <= LARGE_EXCESS_DB:
        return (f"Broadband excess (mean {mean_db:.0f} dB, similar in every band): more likely a louder source than "
                "assumed, since a louder source raises every band alike, whereas another path changes the "
                "spectrum's shape.")
    return (f"Excess of {mean_db:.0f} dB on average, uneven across bands: another path and a louder source are "
            "both possible; compare the bands above with the wall's weak bands.")


def read_separation_csv(text: str, *, source_name: str) -> tuple[BandSpectrum, BandSpectrum | None]:
    """A separation test typed or exported as CSV: columns ``Hz`` and ``DnT`` (or ``L'nT``), and
    optionally ``T`` (the complainant's room, seconds). Comma, semicolon or tab separated."""
    import csv
    import io

    lines = [line for line in text.splitlines() if line.strip()]
    if len(lines) < 2:
        raise InputError(f"{source_name}: needs a header row and at least one band")
    delimiter = max((",", ";", "\t"), key=lines[0].count)
    rows = list(csv.reader(io.StringIO("\n".join(lines)), delimiter=delimiter))
    header = [cell.strip().lower().replace("’", "'") for cell in rows[0]]
    names = {"hz": "hz", "dnt": "DnT", "l'nt": "L'nT", "lnt": "L'nT", "t": "T"}
    columns = {names[h]: i for i, h in enumerate(header) if h in names}
    quantity = "DnT" if "DnT" in columns else "L'nT" if "L'nT" in columns else None
    if "hz" not in columns or quantity is None:
        raise InputError(f"{source_name}: the first row must name the columns Hz and DnT (or L'nT)")
    bands, values, times = [], [], []
    for number, row in enumerate(rows[1:], start=2):
        cells = [c.strip().replace(",", ".") if delimiter != "," else c.strip() for c in row]
        try:
            frequency = float(cells[columns["hz"]])
            value = float(cells[columns[quantity]])
            time_s = float(cells[columns["T"]]) if "T" in columns and cells[columns["T"]] else math.nan
        except (ValueError, IndexError):
            raise InputError(f"{source_name}: row {number} is not a band with numbers") from None
        if not (math.isfinite(value) and -20 <= value <= 120):
            raise InputError(f"{source_name}: row {number}: {quantity} must be -20 to 120 dB")
        bands.append(frequency)
        values.append(value)
        times.append(time_s)
    if sorted(set(bands)) != bands or any(f not in nominal_bands_hz(20, 20000) for f in bands):
        raise InputError(f"{source_name}: bands must be nominal one-third-octave frequencies, ascending")
    separation = BandSpectrum(tuple(bands), tuple(values), "dB", quantity)
    if "T" not in columns:
        return separation, None
    return separation, BandSpectrum.from_array(bands, times, "s", "T")


def edited_source(source: SourceSpectrum, levels_db: tuple[float, ...], *, name: str | None = None) -> SourceSpectrum:
    """``source`` with the user's band levels (same bands); its origin says so when they changed."""
    if len(levels_db) != len(source.levels_db.nominal_hz):
        raise InputError(f"{source.name}: {len(levels_db)} levels for {len(source.levels_db.nominal_hz)} bands")
    low, high = (-60.0, 60.0) if source.kind == "impact" else (-20.0, 140.0)
    for frequency_hz, value in zip(source.levels_db.nominal_hz, levels_db):
        if not (isinstance(value, (int, float)) and math.isfinite(value) and low <= value <= high):
            raise InputError(f"{source.name}: the level at {frequency_hz:g} Hz must be {low:g} to {high:g} dB")
    levels = tuple(float(v) for v in levels_db)
    if levels == source.levels_db.values and name is None:
        return source
    origin = (f"entered by the user" if name is not None else f"edited by the user from: {source.origin}")
    return SourceSpectrum(name or source.name, source.kind,
                          BandSpectrum(source.levels_db.nominal_hz, levels, "dB", source.levels_db.quantity), origin)


def read_source_csv(text: str, *, name: str, kind: str) -> SourceSpectrum:
    """A user's source spectrum: columns ``Hz`` and ``dB`` (source-room levels; for an impact source
    the levels relative to the tapping machine)."""
    import csv
    import io

    lines = [line for line in text.splitlines() if line.strip()]
    if len(lines) < 2:
        raise InputError(f"{name}: needs a header row and at least one band")
    delimiter = max((",", ";", "\t"), key=lines[0].count)
    rows = list(csv.reader(io.StringIO("\n".join(lines)), delimiter=delimiter))
    header = [cell.strip().lower() for cell in rows[0]]
    if "hz" not in header or "db" not in header:
        raise InputError(f"{name}: the first row must name the columns Hz and dB")
    bands, levels = [], []
    for number, row in enumerate(rows[1:], start=2):
        cells = [c.strip().replace(",", ".") if delimiter != "," else c.strip() for c in row]   # decimal commas
        try:
            bands.append(float(cells[header.index("hz")]))
            levels.append(float(cells[header.index("db")]))
        except (ValueError, IndexError):
            raise InputError(f"{name}: row {number} is not a band with a number") from None
    if sorted(set(bands)) != bands or any(f not in nominal_bands_hz(20, 20000) for f in bands):
        raise InputError(f"{name}: bands must be nominal one-third-octave frequencies, ascending")
    start = SourceSpectrum(name, kind, BandSpectrum(tuple(bands), tuple(0.0 for _ in bands), "dB", "L1"), "")
    return edited_source(start, tuple(levels), name=name)
