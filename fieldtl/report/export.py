"""Assessment → the JSON schema of `fieldtl assess`, a CSV band table and a readable text report.

Band values are rounded to 0.1 dB, T to 0.01 s; ``null`` where a band has no value. Keys that do
not apply to the test type are absent.
"""

from __future__ import annotations

import csv
import io
import json
import math
from typing import Any

from fieldtl.assess import Assessment
from fieldtl.bands import BandSpectrum
from fieldtl.report.client import client_assessment
from fieldtl.construction import comparison_to_json
from fieldtl.findings import Finding
from fieldtl.insulation import AirborneResult
from fieldtl.rating import Rating

_ISO_TERM_KEYS = {"Ctr,50-3150": "Ctr50-3150", "Ctr,50-5000": "Ctr50-5000", "Ctr,100-5000": "Ctr100-5000",
                  "CI,50-2500": "CI50-2500"}


def band_columns(assessment: Assessment) -> dict[str, BandSpectrum]:
    """The per-band quantities of the test, keyed by their JSON names, in display order."""
    result = assessment.result
    if isinstance(result, AirborneResult):
        columns = {"L1": result.source_level_db, "L2": result.receiving_level_db, "B": result.background_level_db,
                   "T": result.reverberation_time_s, "D": result.level_difference_db,
                   "Dn": result.normalized_level_difference_db, "DnT": result.standardized_level_difference_db}
        if result.apparent_sound_reduction_index_db is not None:
            columns["R_prime"] = result.apparent_sound_reduction_index_db
        return columns
    return {"Li": result.impact_level_db, "B": result.background_level_db, "T": result.reverberation_time_s,
            "L_prime_n": result.normalized_impact_level_db, "L_prime_nT": result.standardized_impact_level_db}


def _rounded(spectrum: BandSpectrum) -> list[float | None]:
    return list(spectrum.rounded(2 if spectrum.unit == "s" else 1))


def _rating_json(rating: Rating, u_db: float | None) -> Any:
    if rating.standard.startswith("ASTM"):
        return rating.single_number_db
    entry: dict[str, Any] = {"value": rating.single_number_db}
    entry.update({_ISO_TERM_KEYS.get(k, k): v for k, v in rating.adaptation_terms_db.items()})
    entry["value_0.1dB"] = rating.single_number_precise_db
    entry["bound"] = rating.bound
    entry["standard_uncertainty_db"] = u_db
    return entry


def assessment_to_json(assessment: Assessment) -> dict[str, Any]:
    """The JSON document written by ``fieldtl assess --json``."""
    assessment = client_assessment(assessment)     # the unconfirmed mark explained once
    columns = band_columns(assessment)
    verdict = assessment.verdict
    return {
        "title": assessment.title,
        "test_type": assessment.test_type,
        "calibrated": assessment.calibrated,
        "frequencies_hz": [json_number(f) for f in assessment.result.nominal_hz],
        "bands": {name: _rounded(spectrum) for name, spectrum in columns.items()},
        "limited": list(assessment.result.limited),
        "ratings": {r.descriptor: _rating_json(r, assessment.table_uncertainty_db.get(r.descriptor))
                    for r in assessment.ratings},
        "verdict": None if verdict is None else {
            "requirement": str(verdict.requirement),
            "value": round(verdict.value_db, 1),
            "bound": verdict.bound,
            "expanded_uncertainty_db": round(verdict.expanded_uncertainty_db, 1),
            "standard_uncertainty_db": round(verdict.standard_uncertainty_db, 2),
            **_uncertainty_parts(assessment),
            "coverage_factor": verdict.coverage_factor,
            "result": verdict.outcome,
            "rule": verdict.statement,
        },
        "uncertainty_note": assessment.uncertainty_note,
        "uncertainty_situation": assessment.uncertainty_situation,
        "band_uncertainty": {name: _rounded(spectrum) for name, spectrum in uncertainty_columns(assessment).items()},
        "low_frequency_octave_t_s": _low_frequency_t(assessment),
        "construction_check": None if assessment.construction_check is None else {
            key: value for key, value in comparison_to_json(assessment.construction_check).items()
            if key != "warnings"},   # its findings are already under "warnings"
        "rules_applied": list(assessment.rules_applied),
        "warnings": [f.as_json() for f in assessment.findings],
        "cautions": list(assessment.cautions),
    }


def uncertainty_columns(assessment: Assessment) -> dict[str, BandSpectrum]:
    """Per-band standard uncertainties: ISO 12999-1 Table 2/4 (the situation used) and this test's spread."""
    columns = {}
    if assessment.band_uncertainty_db is not None:
        columns["u_iso12999"] = assessment.band_uncertainty_db
    if assessment.band_spread_db is not None:
        columns["u_spread"] = assessment.band_spread_db
    return columns


def _uncertainty_parts(assessment: Assessment) -> dict[str, Any]:
    """The parts of the verdict's u, both propagations shown (JSON)."""
    combined = assessment.uncertainty
    if combined is None:
        return {}
    parts: dict[str, Any] = {"table_uncertainty_db": combined.table.standard_uncertainty_db,
                             "table": f"{combined.table.table}, row {combined.table.row}" if combined.table.table
                             else None,
                             "situation": combined.table.situation}
    if combined.measurement is not None:
        parts["spread_uncertainty_db"] = {"correlated": round(combined.measurement.correlated_db, 2),
                                          "uncorrelated": round(combined.measurement.uncorrelated_db, 2),
                                          "used": "correlated"}
    return parts


def _low_frequency_t(assessment: Assessment) -> float | None:
    value = assessment.result.low_frequency_octave_t_s
    return None if value is None else round(value, 2)


def low_frequency_t_note(assessment: Assessment) -> str | None:
    """The sentence every output carries when the 63 Hz octave T replaced 50-80 Hz (small room)."""
    value = assessment.result.low_frequency_octave_t_s
    if value is None:
        return None
    return (f"Receiving room under 25 m3: T at 50, 63 and 80 Hz is the 63 Hz octave-band T = {value:.2f} s "
            "(ISO 16283-1/-2 clause 10.4).")


def assessment_to_csv(assessment: Assessment) -> str:
    """One row per band: frequency, every band quantity, the band uncertainties, whether it is a limit.

    ``u_iso12999_table2_B_db`` (say) is ISO 12999-1:2020 Table 2 (airborne) or Table 4 (impact) for
    the situation used; ``u_spread_db`` this test's own standard error of DnT / L'nT; ``T_basis`` says where the 63 Hz
    octave-band T of a small room replaced the one-third-octave T.
    """
    columns = band_columns(assessment) | uncertainty_columns(assessment)
    octave_t = assessment.result.low_frequency_octave_t_s is not None
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(["frequency_hz", *(_csv_header(name, assessment) for name in columns), "T_basis", "limited"])
    rows = zip(assessment.result.nominal_hz, *(_rounded(s) for s in columns.values()), assessment.result.limited)
    for frequency_hz, *values, limited in rows:
        basis = "63 Hz octave" if octave_t and frequency_hz in (50.0, 63.0, 80.0) else "third octave"
        writer.writerow([json_number(frequency_hz), *("" if v is None else v for v in values), basis,
                         "yes" if limited else ""])
    return out.getvalue()


def _csv_header(name: str, assessment: Assessment) -> str:
    """Column titles; the ISO 12999-1 column names its table and situation, e.g. u_iso12999_table2_B_db."""
    if name == "u_iso12999":
        table = "table2" if assessment.test_type == "airborne" else "table4"
        return f"u_iso12999_{table}_{assessment.uncertainty_situation}_db"
    return "u_spread_db" if name == "u_spread" else name


def assessment_to_text(assessment: Assessment) -> str:
    """A plain-text report for the terminal: band table, single numbers, verdict, findings, cautions."""
    assessment = client_assessment(assessment)
    columns = band_columns(assessment)
    limited = assessment.result.limited
    # Background-limited bands: corrected receiving levels are upper bounds, so airborne results
    # (D, Dn, DnT, R') are lower bounds and impact results (L'n, L'nT) upper bounds.
    upper_bound_columns = {"L2", "Li", "L_prime_n", "L_prime_nT"}
    lower_bound_columns = {"D", "Dn", "DnT", "R_prime"}
    lines = [assessment.title, f"{assessment.test_type} test; levels "
             f"{'calibrated (dB re 20 µPa)' if assessment.calibrated else 'in dB re full scale (no calibration)'}", ""]
    header = f"{'Hz':>6} " + " ".join(f"{name.replace('_prime_', chr(39)).replace('_prime', chr(39)):>8}"
                                      for name in columns)
    lines += [header, "-" * len(header)]
    for i, frequency_hz in enumerate(assessment.result.nominal_hz):
        cells = []
        for name, spectrum in columns.items():
            value = spectrum.values[i]
            text = "-" if value is None else (f"{value:.2f}" if spectrum.unit == "s" else f"{value:.1f}")
            if limited[i] and name in upper_bound_columns | lower_bound_columns:
                text = ("≤" if name in upper_bound_columns else "≥") + text
            cells.append(f"{text:>8}")
        lines.append(f"{json_number(frequency_hz):>6} " + " ".join(cells))
    lines.append("≥ / ≤ mark a band limited by background noise: the true value is at least / at most this.")
    lines += ["", "Single numbers"]
    for rating in assessment.ratings:
        terms = ", ".join(f"{k} {v:+d}" for k, v in rating.adaptation_terms_db.items())
        bound = {"lower": " (lower bound)", "upper": " (upper bound)"}.get(rating.bound or "", "")
        precise = "" if rating.single_number_precise_db is None else f" [{rating.single_number_precise_db:.1f}]"
        lines.append(f"  {rating.descriptor:<7} {rating.single_number_db:>3} dB{precise}{bound}"
                     + (f"   ({terms})" if terms else ""))
    if assessment.uncertainty_note:
        lines.append(f"  Uncertainty: {assessment.uncertainty_note}")
        rows = {}   # one ISO 12999-1 row serves every rating of a kind: show each term once
        for quantity, u_db in assessment.table_uncertainty_db.items():
            if u_db is not None:
                rows.setdefault(quantity.partition(" + ")[2] or "rating", u_db)
        if rows:
            lines.append("  u (dB) of each rating with: " + ", ".join(f"{t} {u:.1f}" for t, u in rows.items()))
        band = uncertainty_columns(assessment)
        if band:
            lines.append("  Per band (dB), " + "; ".join(
                f"{name}: " + " ".join("-" if v is None else f"{v:.1f}" for v in spectrum.values)
                for name, spectrum in band.items()))
    lf_note = low_frequency_t_note(assessment)
    if lf_note:
        lines.append(f"  {lf_note}")
    check = assessment.construction_check
    if check is not None:
        measured = "not rated" if check.measured_rating is None else f"R'w {check.measured_rating.single_number_db} dB"
        lines += ["", f"Construction check: the declared build-up predicts Rw {check.predicted_rating.single_number_db} "
                      f"dB; measured {measured}; mean band gap {check.mean_gap_db:+.1f} dB (prediction minus field)"]
    if assessment.verdict is not None:
        verdict = assessment.verdict
        lines += ["", f"Verdict: {verdict.outcome.upper()} against '{verdict.requirement}'", f"  {verdict.statement}"]
    if assessment.findings:
        lines += ["", "Quality findings (most serious first; repeats in other bands folded together)"]
        for finding, count, bands in grouped_findings(assessment.findings):
            more = f" (and {count - 1} more: {', '.join(f'{json_number(b)}' for b in bands[1:])} Hz)" if count > 1 else ""
            lines.append(f"  {finding.severity.upper():<7} {finding.code}: {finding.message}{more}")
            if finding.action:
                lines.append(f"          → {finding.action}")
    lines += ["", *(f"Caution: {c}" for c in assessment.cautions)]
    return "\n".join(lines)


_SEVERITY_ORDER = {"error": 0, "warning": 1, "info": 2}


def grouped_findings(findings: tuple[Finding, ...]) -> list[tuple[Finding, int, tuple[float, ...]]]:
    """Findings folded by (code, action, the take named before the first comma), most serious first.

    Returns (first finding of the group, how many, the bands of the group in order). The JSON keeps
    every finding; this is for people reading on a screen.
    """
    groups: dict[tuple[str, str, str], list[Finding]] = {}
    for finding in findings:
        if finding.band_hz is None:
            take = finding.message
        else:   # "<take>, <band> Hz: ..." names a take; "<band> Hz: ..." is about the test as a whole
            take = finding.message.split(",")[0] if f", {finding.band_hz:g} Hz" in finding.message else ""
        groups.setdefault((finding.code, finding.action, take), []).append(finding)
    folded = [(members[0], len(members), tuple(f.band_hz for f in members if f.band_hz is not None))
              for members in groups.values()]
    return sorted(folded, key=lambda group: _SEVERITY_ORDER.get(group[0].severity, 3))


def json_text(document: dict[str, Any]) -> str:
    """``document`` as strict JSON text (RFC 8259: no NaN or Infinity), as every JSON output writes it.

    A float that is not finite becomes null; a document with a "warnings" list then gains one
    ``non_finite_value`` finding naming where. Does not change ``document``.
    """
    replaced: list[str] = []
    cleaned = _finite_only(document, "", replaced)
    if replaced and isinstance(cleaned.get("warnings"), list):
        cleaned["warnings"] += [Finding("non_finite_value", "warning",
                                        f"{where}: not a finite number; written as null",
                                        "check the recording or the input that led to this value").as_json()
                                for where in replaced]
    return json.dumps(cleaned, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def _finite_only(value: Any, where: str, replaced: list[str]) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        replaced.append(where or "value")
        return None
    if isinstance(value, dict):
        return {key: _finite_only(item, f"{where}.{key}" if where else str(key), replaced)
                for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite_only(item, f"{where}[{i}]", replaced) for i, item in enumerate(value)]
    return value


def json_number(value: float) -> float | int:
    """A band frequency as JSON and tables show it: 1000, not 1000.0; 31.5 stays 31.5."""
    return int(value) if float(value).is_integer() else float(value)
