"""Calculations written out independently of fieldtl, for tests only: ISO 717-1/-2 single numbers
and Sharp's single-leaf prediction.

Used as the expected value wherever a test would otherwise take a number from fieldtl's own code.
Ratings are done in integer tenths of a decibel, so the 32.0 dB criterion is exact.

* ISO 717-1 reference curve, one-third octaves 100-3150 Hz (ISO 717-1:2020, clause 3 table of reference
  values): 33 36 39 42 45 48 51 52 53 54 55 56 56 56 56 56 dB. Shift in 1 dB steps (0.1 dB steps for
  the ISO 717-1:2020 precise value) to the highest position where the sum of unfavourable deviations
  (measured below the curve) is at most 32.0 dB; the rating is the curve at 500 Hz.
* Spectrum adaptation terms (ISO 717-1, sound level spectra No. 1 and No. 2, 100-3150 Hz):
  X_A = -10 lg Σ 10^((L_i - X_i)/10), C = X_A - X_w rounded to an integer (half up, common practice).
* ISO 717-2 reference curve 100-3150 Hz: 62 x 6, 61 60 59 58 57 54 51 48 45 42 dB; the lowest position
  with unfavourable deviations (measured above the curve) summing to at most 32.0 dB.
Band values are rounded to 0.1 dB before rating (ISO 717-1/-2, from memory).
"""

from __future__ import annotations

import math

import numpy as np

AIRBORNE_REFERENCE_DB = (33, 36, 39, 42, 45, 48, 51, 52, 53, 54, 55, 56, 56, 56, 56, 56)
IMPACT_REFERENCE_DB = (62, 62, 62, 62, 62, 62, 61, 60, 59, 58, 57, 54, 51, 48, 45, 42)
SPECTRUM_1_DB = (-29, -26, -23, -21, -19, -17, -15, -13, -12, -11, -10, -9, -9, -9, -9, -9)    # for C
SPECTRUM_2_DB = (-20, -20, -18, -16, -15, -14, -13, -12, -11, -9, -8, -9, -10, -11, -13, -15)  # for Ctr
BANDS_100_3150_HZ = (100, 125, 160, 200, 250, 315, 400, 500, 630, 800, 1000, 1250, 1600, 2000, 2500, 3150)


def _tenths(values_db) -> list[int]:
    values = [float(v) for v in values_db]
    assert len(values) == 16, "ISO 717 one-third-octave ratings need the 16 bands 100-3150 Hz"
    return [math.floor(v * 10.0 + 0.5 + 1e-9) for v in values]       # round half up to 0.1 dB


def airborne_rating(values_db, *, step_tenths: int = 10) -> float:
    """R'w, DnT,w ... (value at 500 Hz of the highest shifted curve with Σ unfavourable <= 32.0 dB)."""
    data = _tenths(values_db)
    shift = -1000
    while sum(max(0, 10 * ref + shift + step_tenths - x) for ref, x in zip(AIRBORNE_REFERENCE_DB, data)) <= 320:
        shift += step_tenths
    assert shift > -1000 + step_tenths, "start the scan lower"
    return (520 + shift) / 10.0


def impact_rating(values_db, *, step_tenths: int = 10) -> float:
    """L'n,w, L'nT,w (value at 500 Hz of the lowest shifted curve with Σ unfavourable <= 32.0 dB)."""
    data = _tenths(values_db)
    shift = 1000
    while sum(max(0, x - (10 * ref + shift - step_tenths)) for ref, x in zip(IMPACT_REFERENCE_DB, data)) <= 320:
        shift -= step_tenths
    assert shift < 1000 - step_tenths, "start the scan higher"
    return (600 + shift) / 10.0


def adaptation_term(values_db, spectrum_db) -> int:
    """C (spectrum No. 1) or Ctr (No. 2) for one-third octaves 100-3150 Hz."""
    data = np.array(_tenths(values_db)) / 10.0
    x_a = -10.0 * math.log10(float(np.sum(10.0 ** ((np.array(spectrum_db) - data) / 10.0))))
    return math.floor(x_a - airborne_rating(values_db) + 0.5)


def sharp_single_leaf_r_db(frequencies_hz, *, thickness_m: float, density_kg_m3: float, youngs_modulus_pa: float,
                           poisson_ratio: float, loss_factor: float, speed_of_sound_m_s: float = 343.0):
    """R of a homogeneous single leaf in a heavy surrounding, by Sharp's method (B.H. Sharp, Noise Control
    Engineering 11, 1978, as outlined in Bies & Hansen, "Engineering Noise Control"; from memory):

    * m'' = ρ h, B = E h³ / (12 (1 - ν²)), fc = (c² / 2π) sqrt(m''/B);
    * f < fc/2: field-incidence mass law R = 20 lg(m'' f) - 47 dB;
    * f >= fc: R = 20 lg(m'' f) - 47 + 10 lg(2 η f / (π fc));
    * fc/2 <= f < fc: a straight line in log f between the two values at fc/2 and fc;
    * η = η_int + m''/(485 sqrt f): edge losses into the surrounding structure (ISO 12354-1 Annex C,
      laboratory situation; from memory).
    """
    f = np.asarray(frequencies_hz, dtype=float)
    m = density_kg_m3 * thickness_m
    bending = youngs_modulus_pa * thickness_m ** 3 / (12.0 * (1.0 - poisson_ratio ** 2))
    fc = speed_of_sound_m_s ** 2 / (2.0 * math.pi) * math.sqrt(m / bending)

    def mass_law(at):
        return 20.0 * np.log10(m * at) - 47.0

    def damped(at):
        eta = loss_factor + m / (485.0 * np.sqrt(at))
        return mass_law(at) + 10.0 * np.log10(2.0 * eta * at / (math.pi * fc))

    r_a, r_b = mass_law(fc / 2.0), damped(fc)
    return np.where(f < fc / 2.0, mass_law(f),
                    np.where(f < fc, r_a + (r_b - r_a) * np.log2(f / (fc / 2.0)), damped(f)))


# Dense concrete: ρ 2300 kg/m3, E 30 GPa, ν 0.2, internal loss factor 0.006: typical handbook values
# (from memory; published material tables vary by about ±20 %). These are the stated inputs of the check.
DENSE_CONCRETE = {"density_kg_m3": 2300.0, "youngs_modulus_pa": 30e9, "poisson_ratio": 0.2, "loss_factor": 0.006}


def dense_concrete_rw(thickness_m: float) -> int:
    """Rw of a dense-concrete wall by Sharp's method above, rated by airborne_rating."""
    return int(airborne_rating(sharp_single_leaf_r_db(BANDS_100_3150_HZ, thickness_m=thickness_m, **DENSE_CONCRETE)))
