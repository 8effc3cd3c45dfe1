"""ASTM E336 / E1007 field quantities built on the ISO band arithmetic.

NR = L1 - L2 (the ISO D) and NNR = NR + 10 lg(T/0.5) (the ISO DnT) need nothing new. ATL and
ANISPL use ASTM's own absorption, A2 = 0.921 V d / c with the decay rate d = 60/T dB/s
(facts sheet 5.1, from memory), which at c = 343 m/s is 0.1611 V/T against ISO's 0.16 V/T.
"""

from __future__ import annotations

import numpy as np

from fieldtl.bands import BandSpectrum
from fieldtl.errors import InputError

SPEED_OF_SOUND_M_S = 343.0          # air at about 20 °C (from memory)
ASTM_REFERENCE_AREA_M2 = 10.0       # A0 of E1007's normalised impact level, metric (from memory)


def astm_absorption_m2(reverberation_time_s: BandSpectrum, *, volume_m3: float,
                       speed_of_sound_m_s: float = SPEED_OF_SOUND_M_S) -> BandSpectrum:
    """A2 = 0.921 V d / c, d = 60 / T (ASTM E336 / E2235 form, from memory), in m2 per band."""
    if volume_m3 <= 0 or speed_of_sound_m_s <= 0:
        raise InputError(f"ASTM absorption: volume and speed of sound must be positive, got {volume_m3}, "
                         f"{speed_of_sound_m_s}")
    t_s = reverberation_time_s.as_array()
    return BandSpectrum.from_array(reverberation_time_s.nominal_hz,
                                   0.921 * volume_m3 * (60.0 / t_s) / speed_of_sound_m_s, "m2", "A2")


def apparent_transmission_loss_db(noise_reduction_db: BandSpectrum, reverberation_time_s: BandSpectrum, *,
                                  area_m2: float, receiving_volume_m3: float) -> BandSpectrum:
    """ATL = NR + 10 lg(S / A2) (ASTM E336)."""
    absorption = astm_absorption_m2(reverberation_time_s, volume_m3=receiving_volume_m3)
    return noise_reduction_db.map_with(absorption, lambda nr, a: nr + 10 * np.log10(area_m2 / a), quantity="ATL")


def normalized_impact_level_db(impact_level_db: BandSpectrum, reverberation_time_s: BandSpectrum, *,
                               receiving_volume_m3: float) -> BandSpectrum:
    """ANISPL = ISPL + 10 lg(A2 / A0), A0 = 10 m2 (ASTM E1007, from memory)."""
    absorption = astm_absorption_m2(reverberation_time_s, volume_m3=receiving_volume_m3)
    return impact_level_db.map_with(absorption, lambda li, a: li + 10 * np.log10(a / ASTM_REFERENCE_AREA_M2),
                                    quantity="ANISPL")
