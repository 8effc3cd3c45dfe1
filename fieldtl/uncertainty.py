"""Uncertainty of single-number results and the verdict against a requirement.

Three parts: (1) a table standard uncertainty by ISO 12999-1 situation A, B or C, whose numbers
here are PLACEHOLDERS (the real ISO 12999-1 values were not verified, facts sheet 9); (2) the
measurement's own spread propagated to the single number by Monte Carlo; (3) the requirement
parser and a configurable decision rule ("guarded" or "shared risk").
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Literal

import numpy as np

from fieldtl.bands import BandSpectrum, require_same_bands
from fieldtl.errors import InputError
from fieldtl.insulation.airborne import AirborneResult
from fieldtl.insulation.impact import ImpactResult

Situation = Literal["A", "B", "C"]
DecisionRule = Literal["guarded", "shared_risk"]
Bound = Literal["exact", "lower", "upper"]
Outcome = Literal["pass", "fail", "undecided"]
Direction = Literal[">=", "<="]

SITUATIONS: Mapping[str, str] = MappingProxyType({  # ISO 12999-1 situations (facts sheet 9, from memory)
    "A": "an element characterised at different sites by different teams (reproducibility)",
    "B": "the same building location measured by different teams and equipment",
    "C": "the same location, team and equipment, measurement repeated (repeatability)",
})

PLACEHOLDER_NOTE = "placeholder, not from ISO 12999-1 — set from your copy of the standard"

# Standard uncertainties of single numbers, dB, by situation and descriptor ("*" = any descriptor).
# PLACEHOLDER, NOT FROM ISO 12999-1 — SET FROM YOUR COPY OF THE STANDARD. Only their order
# A > B > C and "of the order of 1 dB" (facts sheet 9, from memory, low confidence) are intended.
SINGLE_NUMBER_UNCERTAINTY_DB: Mapping[str, Mapping[str, float]] = MappingProxyType({
    "A": MappingProxyType({"*": 1.5}),
    "B": MappingProxyType({"*": 1.0}),
    "C": MappingProxyType({"*": 0.5}),
})
SINGLE_NUMBER_UNCERTAINTY_SOURCE = PLACEHOLDER_NOTE

ONE_SIDED_95_K = 1.65  # one-sided 95 % coverage factor (facts sheet 9; normal distribution)
TWO_SIDED_95_K = 1.96  # two-sided 95 % coverage factor (facts sheet 9; normal distribution)
_DECISION_TOLERANCE_DB = 1e-9  # X - U exactly at the limit counts as at the limit (float noise only)


# --- (1) table uncertainty -------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class TableUncertainty:
    """A standard uncertainty read from a table, with where the number came from."""

    descriptor: str
    situation: Situation
    standard_uncertainty_db: float
    source: str

    def describe(self) -> str:
        return (f"table u = {self.standard_uncertainty_db:.2f} dB for {self.descriptor}, situation "
                f"{self.situation} ({SITUATIONS[self.situation]}); source: {self.source}")


def table_uncertainty(descriptor: str, *, situation: Situation = "B",
                      table: Mapping[str, Mapping[str, float]] | None = None,
                      source: str | None = None) -> TableUncertainty:
    """The standard uncertainty of ``descriptor`` (e.g. "DnT,w + Ctr") for an ISO 12999-1 situation.

    Without ``table`` the module's SINGLE_NUMBER_UNCERTAINTY_DB is read (at call time) and its
    source is the placeholder note. With your own ``table``, say where it came from in ``source``.
    Situation B is the usual one for a field compliance test (facts sheet 9, from memory).
    """
    if situation not in SITUATIONS:
        raise InputError(f"uncertainty situation must be A, B or C, got {situation!r}")
    if table is None:
        table, default_source = SINGLE_NUMBER_UNCERTAINTY_DB, SINGLE_NUMBER_UNCERTAINTY_SOURCE
    else:
        default_source = "user-supplied table (source not stated)"
    row = table.get(situation, {})
    value = row.get(descriptor, row.get("*"))
    if value is None:
        raise InputError(f"uncertainty table has no value for {descriptor!r} in situation {situation}")
    if not math.isfinite(value) or value < 0.0:
        raise InputError(f"uncertainty table value for {descriptor!r} must be >= 0 dB, got {value!r}")
    return TableUncertainty(descriptor, situation, float(value), source or default_source)


# --- (2) the measurement's own spread --------------------------------------------------------------

def band_standard_error_db(result: AirborneResult | ImpactResult, *,
                           include_reverberation: bool = True) -> BandSpectrum:
    """Standard error of the mean of a band result from the spread of positions and decays.

    Airborne: u² = s(L1)²/n1 + s(L2)²/n2 [+ (10/ln 10 · s(T) / (T √nT))²]; impact: the same
    without the L1 term. Leave the T term out for D (``include_reverberation=False``); keep it for
    Dn, DnT, R', L'n, L'nT (T enters them as ±10 lg T). A band is None where any included spread
    is unknown (fewer than two readings; T given as already averaged, in which case pass
    ``include_reverberation=False`` and say so). Treats positions as independent random samples of the room's
    field; does not include calibration, background correction, V or S errors.
    """
    spread = result.spread
    variance = spread.receiving_std_db.as_array() ** 2 / max(spread.receiving_count, 1)
    if spread.source_std_db is not None:
        variance = variance + spread.source_std_db.as_array() ** 2 / max(spread.source_count, 1)
    if include_reverberation:
        relative_t = spread.reverberation_std_s.as_array() / result.reverberation_time_s.as_array()
        variance = variance + (10.0 / math.log(10.0) * relative_t) ** 2 / max(spread.decay_count, 1)
    return BandSpectrum.from_array(spread.receiving_std_db.nominal_hz, np.sqrt(variance), "dB", "u(band)")


@dataclass(frozen=True, slots=True)
class MeasurementUncertainty:
    """The spread of the band results carried through the rating to the single number."""

    standard_uncertainty_db: float
    draws: int
    bands_without_spread_hz: tuple[float, ...]

    def describe(self) -> str:
        missing = (f"; no spread known at {', '.join(f'{f:g}' for f in self.bands_without_spread_hz)} Hz "
                   "(taken as 0)") if self.bands_without_spread_hz else ""
        return (f"measurement u = {self.standard_uncertainty_db:.2f} dB (band standard errors of the "
                f"mean carried through the rating by {self.draws} Monte Carlo draws, bands independent"
                f"{missing})")


def propagate_to_single_number(rating: Callable[[BandSpectrum], float], spectrum: BandSpectrum,
                               band_standard_error: BandSpectrum, *, draws: int = 2000,
                               seed: int = 12999) -> MeasurementUncertainty:
    """Standard deviation of ``rating`` when each band varies by its standard error.

    Monte Carlo in the manner of GUM Supplement 1 (JCGM 101, from memory): every band gets an
    independent normal perturbation of its standard error; the result is the sample standard
    deviation of ``rating`` over ``draws`` perturbed spectra (fixed ``seed``: same inputs, same
    answer). Chosen over finite differences because ISO 717 ratings are step functions of the band
    values. Pass a rating with 0.1 dB resolution (ISO 717-1:2020); a 1 dB-step rating mostly
    measures its own rounding. Does not model correlation between bands (one position shifts all
    bands together), so it can understate u; bands without a standard error are not varied.
    """
    require_same_bands(spectrum, band_standard_error)
    if draws < 2:
        raise InputError(f"Monte Carlo draws must be at least 2, got {draws}")
    values = spectrum.as_array()
    errors = band_standard_error.as_array()
    unknown = np.isnan(errors) & ~np.isnan(values)
    sigma = np.where(np.isnan(errors), 0.0, errors)
    noise = np.random.default_rng(seed).standard_normal((draws, values.size)) * sigma
    ratings = [rating(BandSpectrum.from_array(spectrum.nominal_hz, values + row, spectrum.unit,
                                              spectrum.quantity)) for row in noise]
    return MeasurementUncertainty(float(np.std(ratings, ddof=1)), draws,
                                  tuple(f for f, flag in zip(spectrum.nominal_hz, unknown) if flag))


@dataclass(frozen=True, slots=True)
class CombinedUncertainty:
    """u = sqrt(u_table² + u_meas²), with the parts kept for the report."""

    table: TableUncertainty
    measurement: MeasurementUncertainty | None

    @property
    def standard_uncertainty_db(self) -> float:
        u_meas = 0.0 if self.measurement is None else self.measurement.standard_uncertainty_db
        return math.hypot(self.table.standard_uncertainty_db, u_meas)

    def describe(self) -> str:
        parts = [self.table.describe()]
        if self.measurement is not None:
            parts.append(self.measurement.describe())
        return f"combined u = {self.standard_uncertainty_db:.2f} dB from " + "; ".join(parts)


# --- (3) requirements and the verdict ----------------------------------------------------------------

# Descriptors a requirement may name, with the direction that complies. ISO 717 names from the
# standards; the ASTM field names (E336 / E1007 with E413 / E989) are from memory (facts sheet 13).
_DESCRIPTORS: Mapping[str, Direction] = MappingProxyType({
    "R'w": ">=", "DnT,w": ">=", "Dn,w": ">=", "Dw": ">=", "L'nT,w": "<=", "L'n,w": "<=",
    "ASTC": ">=", "NIC": ">=", "NNIC": ">=", "AIIC": ">=", "NISR": ">=",
})
_AIRBORNE_TERMS = ("C", "Ctr")  # ISO 717-1 spectrum adaptation terms
_IMPACT_TERMS = ("CI",)  # ISO 717-2 spectrum adaptation term
_TERM_RANGES: Mapping[str, tuple[str, ...]] = MappingProxyType({  # enlarged ranges, ISO 717 (from memory)
    "C": ("50-3150", "50-5000", "100-5000"), "Ctr": ("50-3150", "50-5000", "100-5000"), "CI": ("50-2500",),
})
_REQUIREMENT = re.compile(
    r"^(?P<descriptor>[^+<>=]+?)\s*(?:\+\s*(?P<term>[^<>=]+?)\s*)?(?P<op>>=|<=)\s*"
    r"(?P<limit>[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(?:dB)?\s*$")


@dataclass(frozen=True, slots=True)
class Requirement:
    """One requirement: "descriptor [+ adaptation term] >= or <= limit" in dB."""

    descriptor: str  # canonical, e.g. "DnT,w", "L'nT,w"
    adaptation_term: str | None  # canonical, e.g. "Ctr", "C50-3150", "CI,50-2500"
    direction: Direction
    limit_db: float

    @property
    def quantity(self) -> str:
        """The quantity compared with the limit, e.g. "DnT,w + Ctr"."""
        return self.descriptor if self.adaptation_term is None else f"{self.descriptor} + {self.adaptation_term}"

    def __str__(self) -> str:
        limit = self.limit_db
        text = str(int(limit)) if limit.is_integer() and abs(limit) < 1e15 else repr(limit)
        return f"{self.quantity} {self.direction} {text}"


def parse_requirement(text: str) -> Requirement:
    """Parse "DnT,w + Ctr >= 45", "L'nT,w <= 62 dB", "R'w ≥ 53" into a Requirement.

    Case and spaces are free; ’ and ′ count as '; ≥ and ≤ as >= and <=. Adaptation terms: C, Ctr
    (airborne ISO descriptors), CI (impact), optionally with an enlarged range ("Ctr,50-3150").
    The direction must be the compliant one for the descriptor (airborne ">=", ISO impact "<=").
    Bad text raises InputError with one line naming it.
    """
    normalised = (str(text).replace("’", "'").replace("′", "'").replace("‘", "'")
                  .replace("≥", ">=").replace("≤", "<=").strip())
    match = _REQUIREMENT.match(normalised)
    if match is None:
        raise InputError(f"requirement {text!r}: expected 'descriptor [+ term] >= limit' or '<= limit', "
                         "e.g. \"DnT,w + Ctr >= 45\"")
    descriptor = _canonical_descriptor(match["descriptor"], text)
    term = None if match["term"] is None else _canonical_term(match["term"], descriptor, text)
    if match["op"] != _DESCRIPTORS[descriptor]:
        raise InputError(f"requirement {text!r}: {descriptor} complies when it is "
                         f"{'at least' if _DESCRIPTORS[descriptor] == '>=' else 'at most'} the limit, "
                         f"use {_DESCRIPTORS[descriptor]}")
    return Requirement(descriptor, term, match["op"], float(match["limit"]))


def _canonical_descriptor(raw: str, text: str) -> str:
    key = re.sub(r"\s+", "", raw).lower()
    for name in _DESCRIPTORS:
        if name.lower() == key:
            return name
    raise InputError(f"requirement {text!r}: unknown descriptor {raw.strip()!r} "
                     f"(known: {', '.join(_DESCRIPTORS)})")


def _canonical_term(raw: str, descriptor: str, text: str) -> str:
    match = re.fullmatch(r"(?P<base>ctr|ci|c),?(?P<range>\d+-\d+)?", re.sub(r"[\s_]+", "", raw).lower())
    if match is None:
        raise InputError(f"requirement {text!r}: unknown adaptation term {raw.strip()!r} (C, Ctr or CI)")
    base = {"c": "C", "ctr": "Ctr", "ci": "CI"}[match["base"]]
    allowed = _IMPACT_TERMS if descriptor in ("L'nT,w", "L'n,w") else _AIRBORNE_TERMS if descriptor in (
        "R'w", "DnT,w", "Dn,w", "Dw") else ()
    if base not in allowed:
        raise InputError(f"requirement {text!r}: {descriptor} takes no {base} term"
                         + (f" (use {' or '.join(allowed)})" if allowed else ""))
    if match["range"] is None:
        return base
    if match["range"] not in _TERM_RANGES[base]:
        raise InputError(f"requirement {text!r}: {base} has no {match['range']} Hz range "
                         f"(ranges: {', '.join(_TERM_RANGES[base])})")
    return f"C{match['range']}" if base == "C" else f"{base},{match['range']}"  # ISO 717 notation (from memory)


# Examples only, so users see the format: the figures are England & Wales Approved Document E
# (facts sheet 11, from memory). They are not defaults; the user's local building code decides.
EXAMPLE_REQUIREMENTS: Mapping[str, str] = MappingProxyType({
    "EXAMPLE ONLY (England & Wales, from memory): new dwellings, separating walls and floors": "DnT,w + Ctr >= 45",
    "EXAMPLE ONLY (England & Wales, from memory): new dwellings, separating floors, impact": "L'nT,w <= 62",
    "EXAMPLE ONLY (England & Wales, from memory): material change of use, airborne": "DnT,w + Ctr >= 43",
    "EXAMPLE ONLY (England & Wales, from memory): material change of use, impact": "L'nT,w <= 64",
})


@dataclass(frozen=True, slots=True)
class Verdict:
    """The outcome of comparing one single-number value with one requirement."""

    requirement: Requirement
    value_db: float
    bound: Bound
    rule: DecisionRule
    coverage_factor: float
    standard_uncertainty_db: float
    expanded_uncertainty_db: float
    outcome: Outcome
    statement: str  # the rule, the numbers and the outcome in plain words
    uncertainty_note: str  # where u came from, including the placeholder marking when it applies


def decide(requirement: Requirement, value_db: float, uncertainty: CombinedUncertainty, *,
           rule: DecisionRule = "guarded", coverage_factor: float | None = None,
           bound: Bound = "exact") -> Verdict:
    """Pass, fail or undecided for ``value_db`` against ``requirement``.

    "guarded" (k = 1.65 one-sided 95 % by default): for ">=" pass if X - k u >= limit, fail if
    X + k u < limit, else undecided; mirrored for "<=" (facts sheet 9, from memory).
    "shared_risk": pass if X meets the limit, else fail; U (k = 1.96 by default) is only reported.
    ``bound`` says the value is a bound because bands were background-limited ("lower" airborne,
    "upper" impact). When the true value can only be better than X (lower bound with ">=", upper
    bound with "<="), a pass stands and anything else becomes "undecided" (a fail cannot be
    shown); when it can only be worse, a fail stands and anything else becomes "undecided".
    Does not round X: pass the value the rule needs (the 0.1 dB rating for uncertainty work,
    the integer rating where a regulation compares integers).
    """
    if rule not in ("guarded", "shared_risk"):
        raise InputError(f"decision rule must be 'guarded' or 'shared_risk', got {rule!r}")
    if bound not in ("exact", "lower", "upper"):
        raise InputError(f"bound must be 'exact', 'lower' or 'upper', got {bound!r}")
    x = float(value_db)
    if not math.isfinite(x):
        raise InputError(f"value for {requirement.quantity} must be a finite number, got {value_db!r}")
    k = (ONE_SIDED_95_K if rule == "guarded" else TWO_SIDED_95_K) if coverage_factor is None else coverage_factor
    if not math.isfinite(k) or k < 0.0:
        raise InputError(f"coverage factor must be >= 0, got {coverage_factor!r}")
    u = uncertainty.standard_uncertainty_db
    expanded = k * u  # U = k u (facts sheet 9)
    sign = 1.0 if requirement.direction == ">=" else -1.0  # mirror "<=" onto ">="
    margin = sign * (x - requirement.limit_db)  # > 0: better than the limit
    if rule == "guarded":
        if margin - expanded >= -_DECISION_TOLERANCE_DB:
            outcome: Outcome = "pass"
        elif margin + expanded < -_DECISION_TOLERANCE_DB:
            outcome = "fail"
        else:
            outcome = "undecided"
    else:
        outcome = "pass" if margin >= -_DECISION_TOLERANCE_DB else "fail"
    unbounded_outcome = outcome
    if bound != "exact":
        better_only = (bound == "lower") == (requirement.direction == ">=")
        kept = "pass" if better_only else "fail"
        outcome = outcome if outcome == kept else "undecided"
    note = uncertainty.describe()
    statement = _statement(requirement, x, bound, rule, k, u, expanded, unbounded_outcome, outcome)
    return Verdict(requirement, x, bound, rule, k, u, expanded, outcome, f"{statement} Uncertainty: {note}.", note)


def _statement(req: Requirement, x: float, bound: Bound, rule: DecisionRule, k: float, u: float,
               expanded: float, unbounded: Outcome, outcome: Outcome) -> str:
    q, op, lim = req.quantity, req.direction, f"{req.limit_db:g} dB"
    k_text = {ONE_SIDED_95_K: ", one-sided 95 %", TWO_SIDED_95_K: ", two-sided 95 %"}.get(k, "")
    if rule == "guarded":
        worse, better = ("-", "+") if op == ">=" else ("+", "-")
        fails = "<" if op == ">=" else ">"
        text = (f"Guarded decision (k = {k:.2f}{k_text}): pass when {q} {worse} k·u {op} {lim}, fail when "
                f"{q} {better} k·u {fails} {lim}, otherwise undecided. ")
    else:
        text = (f"Shared-risk decision: pass when {q} {op} {lim}; the expanded uncertainty "
                f"(k = {k:.2f}{k_text}) is reported, not used. ")
    text += f"Measured {q} = {x:.1f} dB, u = {u:.2f} dB, U = {expanded:.2f} dB: {unbounded}."
    if bound != "exact":
        which = "at least" if bound == "lower" else "at most"
        text += (f" The value is a {bound} bound (background noise limited some bands: the true value "
                 f"is {which} {x:.1f} dB), so the verdict is {outcome}.")
    return text
