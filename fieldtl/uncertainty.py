"""Uncertainty of single-number results and the verdict against a requirement.

Three parts: (1) the ISO 12999-1:2020 single-number value for the requirement's quantity and
situation (Table 3 airborne, Table 5 impact; :mod:`fieldtl.iso12999`); (2) the measurement's own
spread (standard errors of the band means from positions and decays) carried to the single number
with the analytic sensitivities of ISO 12999-1 Annex B, both with independent bands and with fully
correlated bands; (3) the requirement parser and a configurable decision rule ("guarded" or
"shared risk"). The verdict's u combines (1) and the correlated form of (2) in quadrature.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Literal

import numpy as np

from fieldtl.bands import BandSpectrum, require_same_bands
from fieldtl.errors import InputError
from fieldtl.findings import unconfirmed
from fieldtl.insulation.airborne import AirborneResult
from fieldtl.insulation.impact import ImpactResult
from fieldtl.iso12999 import SITUATIONS, TableUncertainty, propagate, single_number_sensitivity

__all__ = ["SITUATIONS", "CombinedUncertainty", "MeasurementUncertainty", "Requirement", "TableUncertainty",
           "Verdict", "band_standard_error_db", "decide", "measurement_uncertainty", "parse_requirement"]

DecisionRule = Literal["guarded", "shared_risk"]
Bound = Literal["exact", "lower", "upper"]
Outcome = Literal["pass", "fail", "undecided"]
Direction = Literal[">=", "<="]

ONE_SIDED_95_K = 1.65  # one-sided 95 % coverage factor (ISO 12999-1 conformity test; normal distribution)
TWO_SIDED_95_K = 1.96  # two-sided 95 % coverage factor (normal distribution)
_DECISION_TOLERANCE_DB = 1e-9  # X - k u within this of the limit counts as exactly at it (float noise only)
VERDICT_PROPAGATION = "correlated"   # the measurement part of the verdict's u: bands fully correlated


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
    """The spread of the band results carried to the single number, both ways (ISO 12999-1 Annex B)."""

    uncorrelated_db: float    # root-sum-square of sensitivity x band standard error
    correlated_db: float      # linear sum of sensitivity x band standard error
    bands_without_spread_hz: tuple[float, ...]

    @property
    def standard_uncertainty_db(self) -> float:
        """The form the verdict uses: bands fully correlated (one position moves every band)."""
        return self.correlated_db

    def describe(self) -> str:
        missing = (f"; no spread known at {', '.join(f'{f:g}' for f in self.bands_without_spread_hz)} Hz "
                   "(taken as 0)") if self.bands_without_spread_hz else ""
        return (f"this test's own spread (standard errors of the band means from positions and decays, "
                f"carried through the rating with the analytic sensitivities of ISO 12999-1 Annex B): "
                f"{self.correlated_db:.2f} dB with bands fully correlated (used), "
                f"{self.uncorrelated_db:.2f} dB if the bands were independent{missing}")


def measurement_uncertainty(standard: str, spectrum: BandSpectrum, band_standard_error: BandSpectrum, *,
                            term: str | None = None) -> MeasurementUncertainty:
    """Carry ``band_standard_error`` through the rating of ``spectrum`` (+ ``term``) analytically.

    Sensitivities from :func:`fieldtl.iso12999.single_number_sensitivity`; bands without a
    standard error count as 0 and are listed. No draws: the same inputs always give the same answer.
    """
    require_same_bands(spectrum, band_standard_error)
    bands_hz, coefficients = single_number_sensitivity(standard, spectrum, term)
    errors = band_standard_error.select(bands_hz).as_array()
    propagated = propagate(coefficients, errors)
    unknown = tuple(f for f, e, c in zip(bands_hz, errors, coefficients) if not np.isfinite(e) and c != 0.0)
    return MeasurementUncertainty(propagated.uncorrelated_db, propagated.correlated_db, unknown)


@dataclass(frozen=True, slots=True)
class CombinedUncertainty:
    """u = sqrt(u_table² + u_meas²) with u_meas in its correlated form; the parts kept for the report."""

    table: TableUncertainty
    measurement: MeasurementUncertainty | None

    @property
    def table_db(self) -> float:
        return self.table.standard_uncertainty_db or 0.0

    @property
    def measurement_db(self) -> float:
        return 0.0 if self.measurement is None else self.measurement.standard_uncertainty_db

    @property
    def standard_uncertainty_db(self) -> float:
        return math.hypot(self.table_db, self.measurement_db)

    def describe(self) -> str:
        parts = [self.table.describe()]
        if self.measurement is not None:
            parts.append(self.measurement.describe())
        how = (f"u = sqrt({self.table_db:.2f}² + {self.measurement_db:.2f}²) = "
               f"{self.standard_uncertainty_db:.2f} dB (table value and this test's correlated spread "
               "combined in quadrature)")
        return how + " from " + "; ".join(parts)


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
# (facts sheet 11, from memory: so each label is marked unconfirmed). They are not defaults; the user's
# local building code decides.
EXAMPLE_REQUIREMENTS: Mapping[str, str] = MappingProxyType({
    unconfirmed("EXAMPLE ONLY (England & Wales): new dwellings, separating walls and floors"): "DnT,w + Ctr >= 45",
    unconfirmed("EXAMPLE ONLY (England & Wales): new dwellings, separating floors, impact"): "L'nT,w <= 62",
    unconfirmed("EXAMPLE ONLY (England & Wales): material change of use, airborne"): "DnT,w + Ctr >= 43",
    unconfirmed("EXAMPLE ONLY (England & Wales): material change of use, impact"): "L'nT,w <= 64",
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
    uncertainty_note: str  # where u came from: the ISO 12999-1 table, row and situation, and the spread


def decide(requirement: Requirement, value_db: float, uncertainty: CombinedUncertainty, *,
           rule: DecisionRule = "guarded", coverage_factor: float | None = None,
           bound: Bound = "exact") -> Verdict:
    """Pass, fail or undecided for ``value_db`` against ``requirement``.

    "guarded" (k = 1.65 one-sided 95 % by default): for ">=" pass if X - k u > limit (strict, as
    ISO 12999-1 writes its conformity test; X - k u exactly at the limit is not a pass), fail if
    X + k u < limit, else undecided; mirrored for "<=": pass if X + k u < limit, fail if
    X - k u > limit.
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
    expanded = k * u  # U = k u (ISO 12999-1)
    sign = 1.0 if requirement.direction == ">=" else -1.0  # mirror "<=" onto ">="
    margin = sign * (x - requirement.limit_db)  # > 0: better than the limit
    if rule == "guarded":
        if margin - expanded > _DECISION_TOLERANCE_DB:   # strict, as ISO 12999-1 writes conformity
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
        passes, fails = (">", "<") if op == ">=" else ("<", ">")
        text = (f"Guarded decision (k = {k:.2f}{k_text}): pass when {q} {worse} k·u {passes} {lim}, fail when "
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
