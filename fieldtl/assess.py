"""From measured takes to the deliverable: field quantities, ratings, uncertainty, verdict, findings.

:func:`assess` is pure: it takes what was measured (one :class:`~fieldtl.qa.TakeSummary` per
recording or pasted column) and the survey's geometry and requirement, and returns one frozen
:class:`Assessment`. Measuring audio into takes is :mod:`fieldtl.measure`'s job.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from typing import Literal

import numpy as np

from fieldtl.bands import BandSpectrum
from fieldtl.cautions import CAUTIONS
from fieldtl.construction import Comparison, compare_with_measurement
from fieldtl.construction.predict import predict
from fieldtl.errors import InputError
from fieldtl.findings import Finding
from fieldtl.insulation import (AirborneMeasurement, AirborneResult, ImpactMeasurement, ImpactResult,
                                LoudspeakerPosition, Rooms, TappingPosition, airborne_insulation,
                                impact_insulation)
from fieldtl.insulation.astm_field import apparent_transmission_loss_db, normalized_impact_level_db
from fieldtl.qa import (TakeSummary, check_against_lab_rating, check_astm_scope, check_background,
                        check_calibration, check_corners, check_decays, check_durations, check_geometry, check_positions,
                        check_source_spectrum, check_spatial_spread, check_stationarity)
from fieldtl.rating import Rating, rate_e413, rate_e989, rate_iso717_1, rate_iso717_2
from fieldtl.survey import Geometry, Survey
from fieldtl.units import energetic_mean_db
from fieldtl.validate import VERDICT_BLOCKING_CODES
from fieldtl.iso12999 import SITUATIONS, band_uncertainty_db, single_number_uncertainty
from fieldtl.uncertainty import (CombinedUncertainty, Verdict, band_standard_error_db, decide,
                                 measurement_uncertainty, parse_requirement)


SourceCombination = Literal["energy", "arithmetic", "simultaneous"]
AreaRule = Literal["smaller", "receiving", "source", "off"]
DecisionRule = Literal["guarded", "shared_risk"]


@dataclass(frozen=True, slots=True)
class AssessOptions:
    """Choices the standards leave to the user, with the defaults we ship."""

    source_combination: SourceCombination = "energy"   # ISO 16283-1 loudspeaker positions (from memory)
    area_rule: AreaRule = "smaller"                    # S = max(S, V/7.5), V of the smaller room (from memory)
    decision_rule: DecisionRule = "guarded"
    coverage_factor: float | None = None               # None: 1.65 guarded, 1.96 shared risk


@dataclass(frozen=True, slots=True)
class Assessment:
    """Everything one test produced, ready for text, JSON, CSV, plots and the report."""

    title: str
    test_type: str
    source_name: str
    calibrated: bool
    result: AirborneResult | ImpactResult
    ratings: tuple[Rating, ...]
    rated_spectra: tuple[BandSpectrum, ...]      # the spectrum each rating was computed from, same order
    verdict: Verdict | None
    uncertainty: CombinedUncertainty | None
    findings: tuple[Finding, ...]
    takes: tuple[TakeSummary, ...]
    rules_applied: tuple[str, ...]
    cautions: tuple[str, ...] = CAUTIONS
    # ISO 12999-1 single-number u per quantity ("DnT,w", "DnT,w + Ctr" ...); None where no row exists
    table_uncertainty_db: dict[str, float | None] = field(default_factory=dict, hash=False)
    uncertainty_note: str = ""                     # names the ISO 12999-1 tables and the situation used
    uncertainty_situation: str = "B"
    band_uncertainty_db: BandSpectrum | None = None     # ISO 12999-1 Table 2 / Table 4 per band, that situation
    band_spread_db: BandSpectrum | None = None          # this test's own standard error per band (DnT / L'nT)
    construction_check: Comparison | None = None   # declared build-up predicted and compared with R'
    geometry: Geometry | None = None               # as entered in the survey
    construction: str | None = None                # the survey's description of the element
    element_lab_rw_db: float | None = None         # declared laboratory Rw of the element, if given


    def rating(self, descriptor: str) -> Rating | None:
        """The rating with this descriptor ("DnT,w", "NNIC" ...), or None if it was not computed."""
        return next((r for r in self.ratings if r.descriptor == descriptor), None)


def assess(survey: Survey, takes: Sequence[TakeSummary], *, calibrated: bool,
           findings: Sequence[Finding] = (), options: AssessOptions = AssessOptions()) -> Assessment:
    """Compute the field result of one test from its measured takes.

    Quality problems (too few positions, background limits, a rating that cannot be formed) become
    findings; only unusable input (e.g. no receiving-room level at all) raises InputError.
    """
    geometry = survey.geometry
    found: list[Finding] = list(findings)
    found += check_calibration(calibrated=calibrated, test_type=survey.test_type)
    found += check_geometry(receiving_volume_m3=geometry.receiving_volume_m3,
                            source_volume_m3=geometry.source_volume_m3,
                            separating_area_m2=geometry.separating_area_m2)
    found += check_positions(takes, test_type=survey.test_type)
    found += check_corners(takes, test_type=survey.test_type, receiving_volume_m3=geometry.receiving_volume_m3,
                           source_volume_m3=geometry.source_volume_m3)
    found += check_durations(takes)
    found += check_stationarity(takes)
    found += check_spatial_spread(takes)
    found += check_decays(takes)
    decays = tuple(t.reverberation_time_s for t in takes if t.role == "decay" and t.reverberation_time_s is not None)
    if not decays:
        raise InputError(f"{survey.source_name}: no decay gave a reverberation time")
    backgrounds = _levels(takes, "background")
    if survey.test_type == "airborne":
        result = _airborne(survey, takes, backgrounds, decays, options)
        found += check_source_spectrum([t.level_db for t in takes if t.role == "source" and t.level_db],
                                       labels=[t.label for t in takes if t.role == "source" and t.level_db])
        rated, rating_findings = _airborne_ratings(result, survey)
    else:
        result = _impact(survey, takes, backgrounds, decays)
        rated, rating_findings = _impact_ratings(result, survey)
    ratings = tuple(r.rating for r in rated)
    found += result.findings
    found += check_background(result.background_margin_db, result.limited, test_type=survey.test_type)
    found += rating_findings
    field_r = next((r.single_number_db for r in ratings if r.descriptor == "R'w"), None)
    found += check_against_lab_rating(field_rating_db=field_r, lab_rating_db=survey.element_lab_rw_db)
    check = _construction_check(survey, result)
    if check is not None:
        found += check.findings
    situation = survey.uncertainty_situation
    table_u = _table_uncertainties(ratings, situation)
    verdict, combined, verdict_findings = _verdict(survey, result, rated, options)
    blocking = next((f for f in found if f.severity == "error" and f.code in VERDICT_BLOCKING_CODES), None)
    if blocking is not None and survey.requirement:     # input outside the standard's scope: no verdict
        verdict, combined = None, None
        verdict_findings = (Finding("verdict_not_possible", "error", f"no verdict on '{survey.requirement}': "
                                    f"{blocking.message}", blocking.action),)
    found += verdict_findings
    band_u = band_uncertainty_db(survey.test_type, result.nominal_hz, situation=situation)
    return Assessment(title=survey.title, test_type=survey.test_type, source_name=survey.source_name,
                      calibrated=calibrated, result=result, ratings=ratings,
                      rated_spectra=tuple(r.spectrum for r in rated), verdict=verdict,
                      uncertainty=combined, findings=tuple(found), takes=tuple(takes),
                      rules_applied=result.rules_applied,
                      table_uncertainty_db=table_u,
                      uncertainty_note=uncertainty_note(survey.test_type, situation, band_u is not None),
                      uncertainty_situation=situation, band_uncertainty_db=band_u,
                      band_spread_db=_band_spread(result), construction_check=check, geometry=survey.geometry,
                      construction=survey.construction, element_lab_rw_db=survey.element_lab_rw_db)


def uncertainty_note(test_type: str, situation: str, has_band_values: bool) -> str:
    """One sentence naming the ISO 12999-1 tables and the situation behind every u shown."""
    single = "Table 3" if test_type == "airborne" else "Table 5"
    band = (f"per band from {'Table 2' if test_type == 'airborne' else 'Table 4'}" if has_band_values
            else "no per-band values (Table 4 gives none for situation A)")
    return (f"ISO 12999-1:2020, situation {situation} ({SITUATIONS[situation]}): single numbers from {single}, "
            f"{band}")


def _table_uncertainties(ratings: Sequence[Rating], situation: str) -> dict[str, float | None]:
    """The ISO 12999-1 value of every ISO rating and every rating + adaptation term computed."""
    values: dict[str, float | None] = {}
    for rating in ratings:
        if not rating.standard.startswith("ISO"):
            continue
        for term in (None, *rating.adaptation_terms_db):
            row = single_number_uncertainty(rating.descriptor, term, situation=situation)
            values[row.quantity] = row.standard_uncertainty_db
    return values


def _band_spread(result: AirborneResult | ImpactResult) -> BandSpectrum:
    """This test's own standard error per band of DnT (airborne) or L'nT (impact), T spread included."""
    return band_standard_error_db(result, include_reverberation=True)


def _construction_check(survey: Survey, result: AirborneResult | ImpactResult) -> Comparison | None:
    """Predicted R of the declared construction beside the measured R' (airborne tests with S only)."""
    if survey.declared_construction is None or not isinstance(result, AirborneResult) \
            or result.apparent_sound_reduction_index_db is None:
        return None
    return compare_with_measurement(predict(survey.declared_construction),
                                    result.apparent_sound_reduction_index_db, limited=result.limited)


def _levels(takes: Sequence[TakeSummary], role: str, speaker: int | None = None) -> tuple[BandSpectrum, ...]:
    return tuple(t.level_db for t in takes
                 if t.role == role and t.level_db is not None and (speaker is None or t.speaker == speaker))


def _octave_63(takes: Sequence[TakeSummary]) -> tuple[float, ...]:
    """63 Hz octave T of the decays that gave one third-octave T too (small rooms, 50-80 Hz)."""
    return tuple(t.octave_63_reverberation_time_s for t in takes
                 if t.role == "decay" and t.reverberation_time_s is not None
                 and t.octave_63_reverberation_time_s is not None)


def _corner_backgrounds(takes: Sequence[TakeSummary], speakers: Sequence[int]) -> tuple[BandSpectrum, ...]:
    """Background at each receiving-room corner, in corner order, or () to use the room's average.

    Corner k is the k-th receiving_corner take of each source position; its background is the
    background_corner take numbered k (energy mean if several). ISO 16283-1/-2 low-frequency
    procedure (as transcribed): each corner is corrected by its own background. When positions have
    different corner counts or a corner used has no background, () is returned and every corner is
    corrected by the room's average (finding corner_background_missing).
    """
    counts = {len(_levels(takes, "receiving_corner", s)) for s in speakers}
    if len(counts) != 1 or 0 in counts:
        return ()
    by_corner = [_levels(takes, "background_corner", k) for k in range(1, counts.pop() + 1)]
    if not all(by_corner):
        return ()
    return tuple(found[0] if len(found) == 1 else _energy_mean(found) for found in by_corner)


def _energy_mean(spectra: Sequence[BandSpectrum]) -> BandSpectrum:
    bands = spectra[0].nominal_hz
    return BandSpectrum.from_array(bands, energetic_mean_db(np.vstack([s.select(bands).as_array() for s in spectra])),
                                   "dB", spectra[0].quantity)


def _speakers(takes: Sequence[TakeSummary], role: str) -> list[int]:
    return sorted({t.speaker for t in takes if t.role == role and t.level_db is not None})


def _airborne(survey: Survey, takes: Sequence[TakeSummary], backgrounds: tuple[BandSpectrum, ...],
              decays: tuple[BandSpectrum, ...], options: AssessOptions) -> AirborneResult:
    speakers = _speakers(takes, "receiving")
    missing = [s for s in speakers if not _levels(takes, "source", s)]
    if missing:
        raise InputError(f"{survey.source_name}: loudspeaker position {missing[0]} has receiving-room "
                         "recordings but no source-room recording")
    positions = tuple(LoudspeakerPosition(source_levels_db=_levels(takes, "source", s),
                                          receiving_levels_db=_levels(takes, "receiving", s),
                                          source_corner_levels_db=_levels(takes, "source_corner", s),
                                          receiving_corner_levels_db=_levels(takes, "receiving_corner", s))
                      for s in speakers)
    geometry = survey.geometry
    measurement = AirborneMeasurement(positions=positions, background_levels_db=backgrounds,
                                      background_corner_levels_db=_corner_backgrounds(takes, speakers),
                                      reverberation_times_s=decays, octave_63_reverberation_times_s=_octave_63(takes))
    rooms = Rooms(source_volume_m3=geometry.source_volume_m3 or geometry.receiving_volume_m3,
                  receiving_volume_m3=geometry.receiving_volume_m3, common_area_m2=geometry.separating_area_m2)
    return airborne_insulation(measurement, rooms, source_combination=options.source_combination,
                               area_rule=options.area_rule)


def _impact(survey: Survey, takes: Sequence[TakeSummary], backgrounds: tuple[BandSpectrum, ...],
            decays: tuple[BandSpectrum, ...]) -> ImpactResult:
    speakers = _speakers(takes, "impact")
    positions = tuple(TappingPosition(receiving_levels_db=_levels(takes, "impact", s),
                                      receiving_corner_levels_db=_levels(takes, "receiving_corner", s))
                      for s in speakers)
    measurement = ImpactMeasurement(positions=positions, background_levels_db=backgrounds,
                                    background_corner_levels_db=_corner_backgrounds(takes, speakers),
                                    reverberation_times_s=decays, octave_63_reverberation_times_s=_octave_63(takes))
    return impact_insulation(measurement, receiving_volume_m3=survey.geometry.receiving_volume_m3)


def _renamed(spectrum: BandSpectrum, quantity: str) -> BandSpectrum:
    return BandSpectrum(spectrum.nominal_hz, spectrum.values, spectrum.unit, quantity, spectrum.fraction)


@dataclass(frozen=True, slots=True)
class RatedSpectrum:
    """A rating and the band spectrum it was computed from."""

    rating: Rating
    spectrum: BandSpectrum


def _try_rating(rate: Callable[..., Rating], spectrum: BandSpectrum, limited: tuple[bool, ...],
                descriptor: str) -> tuple[RatedSpectrum | None, tuple[Finding, ...]]:
    try:
        return RatedSpectrum(rate(spectrum, limited=limited, descriptor=descriptor), spectrum), ()
    except InputError as exc:
        return None, (Finding("rating_not_possible", "warning", f"{descriptor} not computed: {exc}",
                              "Measure the missing bands (levels and decays) and re-run."),)


def _collect(pairs: Sequence[tuple[RatedSpectrum | None, tuple[Finding, ...]]]
             ) -> tuple[tuple[RatedSpectrum, ...], tuple[Finding, ...]]:
    rated = tuple(r for r, _ in pairs if r is not None)
    return rated, tuple(f for _, fs in pairs for f in fs)


def _airborne_ratings(result: AirborneResult, survey: Survey) -> tuple[tuple[RatedSpectrum, ...], tuple[Finding, ...]]:
    limited = result.limited
    pairs = []
    if result.apparent_sound_reduction_index_db is not None:
        pairs.append(_try_rating(rate_iso717_1, result.apparent_sound_reduction_index_db, limited, "R'w"))
    pairs.append(_try_rating(rate_iso717_1, result.standardized_level_difference_db, limited, "DnT,w"))
    pairs.append(_try_rating(rate_iso717_1, result.normalized_level_difference_db, limited, "Dn,w"))
    # ASTM E336 with E413: NR is the ISO D, NNR the ISO DnT (T0 = 0.5 s); ATL uses ASTM's absorption.
    pairs.append(_try_rating(rate_e413, _renamed(result.level_difference_db, "NR"), limited, "NIC"))
    pairs.append(_try_rating(rate_e413, _renamed(result.standardized_level_difference_db, "NNR"), limited, "NNIC"))
    scope = check_astm_scope(receiving_volume_m3=survey.geometry.receiving_volume_m3,
                             source_volume_m3=survey.geometry.source_volume_m3)
    if result.separating_area_m2 is not None and not scope:
        atl = apparent_transmission_loss_db(result.level_difference_db, result.reverberation_time_s,
                                            area_m2=result.separating_area_m2,
                                            receiving_volume_m3=survey.geometry.receiving_volume_m3)
        pairs.append(_try_rating(rate_e413, atl, limited, "ASTC"))
    ratings, findings = _collect(pairs)
    return ratings, findings + scope


def _impact_ratings(result: ImpactResult, survey: Survey) -> tuple[tuple[RatedSpectrum, ...], tuple[Finding, ...]]:
    limited = result.limited
    anispl = normalized_impact_level_db(_renamed(result.impact_level_db, "ISPL"), result.reverberation_time_s,
                                        receiving_volume_m3=survey.geometry.receiving_volume_m3)
    return _collect([
        _try_rating(rate_iso717_2, result.standardized_impact_level_db, limited, "L'nT,w"),
        _try_rating(rate_iso717_2, result.normalized_impact_level_db, limited, "L'n,w"),
        # ASTM E1007 with E989: AIIC from ANISPL, NISR from RTNISPL (T-normalised ISPL, = L'nT); ISR from
        # ISPL is not offered here. E1007 names other than RTNISPL are from memory.
        _try_rating(rate_e989, anispl, limited, "AIIC"),
        _try_rating(rate_e989, _renamed(result.standardized_impact_level_db, "RTNISPL"), limited, "NISR"),
    ])


def _verdict(survey: Survey, result: AirborneResult | ImpactResult, rated: tuple[RatedSpectrum, ...],
             options: AssessOptions) -> tuple[Verdict | None, CombinedUncertainty | None, tuple[Finding, ...]]:
    if not survey.requirement:
        return None, None, ()
    requirement = parse_requirement(survey.requirement)
    match = next((r for r in rated if r.rating.descriptor == requirement.descriptor), None)
    term = requirement.adaptation_term
    if match is None or (term is not None and term not in match.rating.adaptation_terms_db):
        return None, None, (Finding("verdict_not_possible", "error",
                                    f"{requirement.quantity} could not be computed from this test, so there is "
                                    f"no verdict on '{requirement}'",
                                    "Check the requirement matches the test type, and measure the bands the "
                                    "rating needs."),)
    rating, spectrum = match.rating, match.spectrum
    include_t = requirement.descriptor not in ("NIC", "ISR")  # only these carry no T term
    errors = band_standard_error_db(result, include_reverberation=include_t).select(spectrum.nominal_hz)
    measurement_u = measurement_uncertainty(rating.standard, spectrum, errors, term=term)
    table = single_number_uncertainty(rating.descriptor, term, situation=survey.uncertainty_situation)
    combined = CombinedUncertainty(table, measurement_u)
    findings: tuple[Finding, ...] = ()
    if table.standard_uncertainty_db is None:
        findings = (Finding("uncertainty_table_row_missing", "warning",
                            f"ISO 12999-1 gives no single-number uncertainty for {requirement.quantity}; the "
                            "verdict's u is this test's own spread only and misses the between-team part",
                            "Use a requirement ISO 12999-1 covers (an ISO 717 rating) or state the uncertainty "
                            "separately."),)
    # One number, as requirements are written: the integer rating plus the integer term (ISO 717
    # rounds both to whole dB), the value the single-number table shows; the 0.1 dB value is given
    # for information beside the uncertainty.
    term_db = rating.adaptation_terms_db[term] if term else 0
    value_db = float(rating.single_number_db + term_db)
    bound = (rating.adaptation_term_bounds.get(term) if term else rating.bound) or "exact"
    verdict = decide(requirement, value_db, combined, rule=options.decision_rule,
                     coverage_factor=options.coverage_factor, bound=bound)
    formed = (f"{rating.descriptor} + {term} = {rating.single_number_db} {'-' if term_db < 0 else '+'} "
              f"{abs(term_db)} = {value_db:.0f} dB" if term else f"{rating.descriptor} = {value_db:.0f} dB")
    rule = (f"Compared value: {formed} (the whole-dB rating{' plus the whole-dB term' if term else ''}, as "
            f"requirements are written; to 0.1 dB it is {_precise_value(rating, term):.1f} dB). ")
    return replace(verdict, statement=rule + verdict.statement), combined, findings


def _precise_value(rating: Rating, term: str | None) -> float:
    """The value uncertainty work uses: the 0.1 dB rating, or the unrounded rating + term."""
    if term is not None:
        return rating.adapted_precise_db[term]
    return rating.single_number_precise_db if rating.single_number_precise_db is not None \
        else float(rating.single_number_db)
