"""ISO 16283-1 / -2 field insulation arithmetic: band levels in, D, Dn, DnT, R', L'n, L'nT out."""

from fieldtl.insulation.airborne import (
    AirborneMeasurement,
    AirborneResult,
    LoudspeakerPosition,
    Rooms,
    airborne_insulation,
    combine_source_positions,
    separating_area_m2,
)
from fieldtl.insulation.background import background_corrected_db
from fieldtl.insulation.common import BandSpread
from fieldtl.insulation.impact import ImpactMeasurement, ImpactResult, TappingPosition, impact_insulation
from fieldtl.insulation.low_frequency import corner_level_db, low_frequency_applies, low_frequency_level_db
from fieldtl.insulation.octaves import octave_level_difference_db, octave_level_sum_db, octave_limited

__all__ = [
    "AirborneMeasurement", "AirborneResult", "BandSpread", "ImpactMeasurement", "ImpactResult",
    "LoudspeakerPosition", "Rooms", "TappingPosition", "airborne_insulation", "background_corrected_db",
    "combine_source_positions", "corner_level_db", "low_frequency_applies", "impact_insulation", "low_frequency_level_db", "octave_level_difference_db",
    "octave_level_sum_db", "octave_limited", "separating_area_m2",
]
