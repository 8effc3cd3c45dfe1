"""Predicted R of the declared construction beside the measured field R': gaps and findings.

The gap is predicted minus measured (positive: the field result is below the prediction). What
the gaps usually mean is common practice, not a standard (facts sheet 10 and 11): a field R'w
3-5 dB below the element's own Rw is typical of flanking through well-detailed junctions; 5-10 dB
or more points to poor junctions, continuous linings, leaks or services; a field result above
the element's own value usually means an input error (S, V, T) or a construction other than
declared. The thresholds below are ours and stated beside each constant.

Does not change the measurement, and does not say which flanking path is responsible.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from fieldtl.bands import THIRD_OCTAVES_100_3150_HZ, BandSpectrum, band_index
from fieldtl.construction.predict import Prediction
from fieldtl.errors import InputError
from fieldtl.findings import Finding
from fieldtl.rating.iso717 import Rating, has_levels, rate_iso717_1

FLANKING_TYPICAL_DB = (3.0, 5.0)     # R'w this far below Rw: flanking, good junctions (facts sheet 10, common practice)
FLANKING_POOR_DB = 10.0              # beyond this: poor junctions or leaks, or another construction (common practice)
FIELD_ABOVE_PREDICTION_DB = 3.0      # measured this far above the prediction: input error (common practice, ~2-3 dB)
DIP_DEPTH_DB = 3.0                   # a band this far below the mean of its two neighbours is a narrow dip (our choice)
DIP_REACH_BANDS = 1                  # "near" fc or f0: within ±1/3 octave (our choice)
HF_START_HZ = 1000.0                 # high-frequency shortfall: bands from 1 kHz up (common practice)
HF_REFERENCE_HZ = (200.0, 800.0)     # mid-frequency bands whose median gap is the baseline (our choice)
HF_SHORTFALL_DB = 5.0                # mean extra gap above 1 kHz over the baseline (our choice)
HF_BAND_EXCESS_DB = 3.0              # ... with at least 3/4 of those bands this far over it: broadband (our choice)
_CLAUSE = "common practice"   # facts sheet 10, 11


@dataclass(frozen=True, slots=True)
class Comparison:
    """Prediction and measurement on their common bands, the gaps, and what they suggest."""

    predicted_db: BandSpectrum      # "R" predicted
    measured_db: BandSpectrum       # "R'" measured
    gap_db: BandSpectrum            # predicted - measured; None where the measurement has no value
    predicted_rating: Rating
    measured_rating: Rating | None  # None unless 100-3150 Hz are all measured
    rating_gap_db: int | None       # Rw predicted - R'w measured
    mean_gap_db: float | None       # arithmetic mean of the band gaps
    findings: tuple[Finding, ...]


def compare_with_measurement(prediction: Prediction, measured: BandSpectrum, *,
                             limited: Sequence[bool] | None = None) -> Comparison:
    """Compare predicted R with a measured one-third-octave R' (``limited`` as for rate_iso717_1)."""
    if measured.unit != "dB" or measured.fraction != 3 or measured.quantity not in ("R'", "R"):
        raise InputError(f"{measured.quantity}: the construction check needs a one-third-octave R' in dB "
                         f"(got {measured.quantity}, {measured.unit}, fraction {measured.fraction})")
    bands_hz = tuple(f for f in measured.nominal_hz if f in prediction.r_db.nominal_hz)
    measured_values = measured.select(bands_hz)
    if all(v is None for v in measured_values.values):
        raise InputError(f"{measured.quantity}: no measured band in common with the prediction (50-5000 Hz)")
    predicted_values = prediction.r_db.select(bands_hz)
    gap = predicted_values.map_with(measured_values, lambda p, m: round(p - m, 1), quantity="R - R'")
    measured_rating = (rate_iso717_1(measured, limited=limited)
                       if has_levels(measured, THIRD_OCTAVES_100_3150_HZ) else None)
    rating_gap = (None if measured_rating is None
                  else prediction.rating.single_number_db - measured_rating.single_number_db)
    valid_gaps = [v for v in gap.values if v is not None]
    mean_gap = round(float(np.mean(valid_gaps)), 1)
    findings = (*_overall_findings(prediction, measured_rating, rating_gap, mean_gap),
                *_dip_findings(prediction, measured_values),
                *_high_frequency_findings(gap))
    return Comparison(predicted_db=predicted_values, measured_db=measured_values, gap_db=gap,
                      predicted_rating=prediction.rating, measured_rating=measured_rating,
                      rating_gap_db=rating_gap, mean_gap_db=mean_gap, findings=findings)


def _overall_findings(prediction: Prediction, measured_rating: Rating | None, rating_gap: int | None,
                      mean_gap: float) -> tuple[Finding, ...]:
    predicted_rw = prediction.rating.single_number_db
    if measured_rating is not None and rating_gap is not None:
        gap_db = float(rating_gap)
        seen = f"R'w {measured_rating.single_number_db} dB against the predicted Rw {predicted_rw} dB"
    else:
        gap_db = mean_gap
        seen = "the mean band gap (R'w needs every band 100-3150 Hz)"
    caveats = ""
    if prediction.upper_bound:
        caveats += " The prediction is an upper bound for this construction, so part of the gap is the model's."
    if measured_rating is not None and measured_rating.bound == "lower":
        caveats += " The measured R'w is a lower bound (background-limited bands)."
    if -gap_db >= FIELD_ABOVE_PREDICTION_DB:
        return (Finding("field_above_prediction", "warning",
                        f"the field result is {-gap_db:g} dB above the prediction ({seen}); a field value above "
                        "the element's own is usually an input error",
                        "Check S, V and T, the role of every recording, and the declared construction "
                        "(thicker or heavier than declared?).", clause=_CLAUSE),)
    low_db, high_db = FLANKING_TYPICAL_DB
    if gap_db < low_db:
        return ()
    if gap_db <= high_db:
        return (Finding("flanking_gap", "info",
                        f"the field result is {gap_db:g} dB below the prediction ({seen}): typical of flanking "
                        f"through well-detailed junctions.{caveats}",
                        "No action needed for the separating element itself.", clause=_CLAUSE),)
    cause = ("far more than flanking through good junctions: points to poor junctions, leaks or a construction "
             "other than declared" if gap_db > FLANKING_POOR_DB else
             f"more than the {low_db:g}-{high_db:g} dB typical of flanking through good junctions: points to "
             "poor junctions, continuous linings, services or leaks")
    return (Finding("flanking_gap", "warning", f"the field result is {gap_db:g} dB below the prediction ({seen}), "
                    f"{cause}.{caveats}",
                    "Inspect junctions, linings and penetrations (sockets, pipes, ceiling voids); check the "
                    "declared construction against what was built.", clause=_CLAUSE),)


def _third_octave_number(frequency_hz: float) -> int:
    """x of IEC 61260-1 for the band whose exact centre is nearest (fm = 1000 · 10^(x/10))."""
    return round(10.0 * math.log10(frequency_hz / 1000.0))


def _dip_findings(prediction: Prediction, measured: BandSpectrum) -> tuple[Finding, ...]:
    """Narrow measured dips within ±1/3 octave of a predicted fc or f0: explained, not defects."""
    features = [("dip_near_critical", "critical frequency fc", f) for f in prediction.leaf_critical_frequencies_hz]
    if prediction.mass_air_mass_resonance_hz is not None:
        features.append(("dip_near_mass_air_mass", "mass-air-mass resonance f0",
                         prediction.mass_air_mass_resonance_hz))
    values = measured.values
    found: list[Finding] = []
    for i in range(1, len(values) - 1):
        below, value, above = values[i - 1], values[i], values[i + 1]
        if below is None or value is None or above is None:
            continue
        depth_db = (below + above) / 2.0 - value
        if depth_db < DIP_DEPTH_DB:
            continue
        band_hz = measured.nominal_hz[i]
        reported: set[str] = set()
        for code, what, feature_hz in features:
            if code in reported or abs(band_index(band_hz) - _third_octave_number(feature_hz)) > DIP_REACH_BANDS:
                continue
            reported.add(code)
            found.append(Finding(code, "info",
                                 f"{band_hz:g} Hz: a {depth_db:.1f} dB dip lies within 1/3 octave of the predicted "
                                 f"{what} ({feature_hz:.0f} Hz) and is explained by it",
                                 "None: a property of the construction, not of the measurement.",
                                 band_hz=band_hz, clause="panel physics"))   # facts sheet 10
    return tuple(found)


def _high_frequency_findings(gap: BandSpectrum) -> tuple[Finding, ...]:
    """A broadband shortfall above 1 kHz that grows with frequency, over the mid-frequency gap."""
    low_hz, high_hz = HF_REFERENCE_HZ
    reference = [v for f, v in zip(gap.nominal_hz, gap.values) if low_hz <= f <= high_hz and v is not None]
    high = [v for f, v in zip(gap.nominal_hz, gap.values) if f >= HF_START_HZ and v is not None]
    if len(reference) < 3 or len(high) < 3:
        return ()
    excess = np.asarray(high) - float(np.median(reference))
    half = len(excess) // 2
    broadband = np.mean(excess >= HF_BAND_EXCESS_DB) >= 0.75
    growing = np.mean(excess[half:]) >= np.mean(excess[:half])
    if np.mean(excess) < HF_SHORTFALL_DB or not broadband or not growing:
        return ()
    return (Finding("high_frequency_shortfall", "warning",
                    f"above {HF_START_HZ:g} Hz the field result falls short of the prediction by "
                    f"{np.mean(excess):.1f} dB more than at {low_hz:g}-{high_hz:g} Hz, growing with frequency: "
                    "typical of air paths (gaps, unsealed joints, back-to-back sockets)",
                    "Look for and seal air paths: perimeter gaps, sockets, service penetrations, door and "
                    "hatch seals. Very thick walls also fall short of thin-plate theory at high frequencies.",
                    clause=_CLAUSE),)


def comparison_to_json(comparison: Comparison) -> dict[str, Any]:
    """The dictionary the CLI writes: bands, both curves, gaps, single numbers and findings."""
    measured = comparison.measured_rating
    return {
        "frequencies_hz": list(comparison.gap_db.nominal_hz),
        "predicted_R_db": list(comparison.predicted_db.values),
        "measured_R_prime_db": list(comparison.measured_db.values),
        "gap_db": list(comparison.gap_db.values),
        "predicted_Rw": comparison.predicted_rating.single_number_db,
        "measured_R_prime_w": None if measured is None else measured.single_number_db,
        "measured_bound": None if measured is None else measured.bound,
        "rating_gap_db": comparison.rating_gap_db,
        "mean_gap_db": comparison.mean_gap_db,
        "warnings": [finding.as_json() for finding in comparison.findings],
    }
