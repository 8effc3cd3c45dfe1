"""ISO 12999-1:2020 uncertainty tables and the Annex B propagation through single-number ratings.

Tables 2-5 and Table D.2 below are as transcribed from ISO 12999-1:2020 (a careful secondary
transcription quoting table numbers; not read in the licensed standard: verify against a licensed
copy). The sensitivities are the analytic ones of Annex B: an adaptation-term sum
X = -10 lg Σ 10^((L_j - X_j)/10) moves by w_j = 10^((L_j - X_j)/10) / Σ_k 10^((L_k - X_k)/10) per dB
of band j (Formulae B.2-B.6); a reference-curve rating whose sum of unfavourable deviations is
held at its limit moves by 1/n per dB of each of the n bands that deviate (derived here by
differentiating the shift rule; it reproduces the published u(Rw) of the worked example).
Bands uncorrelated: u = sqrt(Σ (c_j u_j)²) (Formula B.2); fully correlated: u = Σ |c_j| u_j.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType
from typing import Literal

import numpy as np

from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, BandSpectrum, nominal_bands_hz
from fieldtl.errors import InputError
from fieldtl.rating.astm import E413_CONTOUR_RELATIVE, E989_CONTOUR_RELATIVE
from fieldtl.rating.iso717 import (AIRBORNE_REFERENCE_THIRDS, AIRBORNE_SPECTRA_THIRDS, IMPACT_REFERENCE_THIRDS,
                                   IMPACT_TERM_RANGES_HZ, required_levels_db)

Situation = Literal["A", "B", "C"]

# ISO 12999-1:2020 clause 4 situations (as transcribed).
SITUATIONS: Mapping[str, str] = MappingProxyType({
    "A": "laboratory characterisation of an element (ISO 10140), reproducibility between laboratories",
    "B": "the same building location measured by different teams and equipment",
    "C": "the same location, team and equipment, measurement repeated (repeatability)",
})
FIELD_DEFAULT_SITUATION: Situation = "B"   # field compliance: different teams could test the same location

EDITION = "ISO 12999-1:2020"
_BANDS_HZ = THIRD_OCTAVES_50_5000_HZ   # 50 Hz ... 5 kHz, 21 one-third octaves

# Table 2: airborne, standard uncertainty per one-third octave 50 Hz - 5 kHz, dB (as transcribed).
TABLE_2_AIRBORNE_BAND_DB: Mapping[str, tuple[float, ...]] = MappingProxyType({
    "A": (6.8, 4.6, 3.8, 3.0, 2.7, 2.4, 2.1, 1.8, 1.8, 1.8, 1.8, 1.8, 1.8, 1.8, 1.8, 1.8, 1.8, 1.9, 2.0, 2.4, 2.8),
    "B": (4.0, 3.6, 3.2, 2.8, 2.4, 2.0, 1.8, 1.6, 1.4, 1.2, 1.1, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.3, 1.6, 1.9, 2.2),
    "C": (2.0, 1.8, 1.6, 1.4, 1.2, 1.0, 0.9, 0.8, 0.7, 0.6, 0.6, 0.6, 0.6, 0.6, 0.6, 0.6, 0.6, 0.6, 0.6, 0.6, 0.6),
})
# Table 4: impact, per one-third octave, situations B and C only (as transcribed). The 2020 print
# is reported to lack the 500 Hz row; 500 Hz here is the 2014 print's value (B 1.2, C 0.8), which
# equals its neighbours 400 and 630 Hz.
TABLE_4_IMPACT_BAND_DB: Mapping[str, tuple[float, ...]] = MappingProxyType({
    "B": (3.2, 2.8, 2.4, 2.0, 1.6, 1.4, 1.3, 1.2, 1.2, 1.2, 1.2, 1.2, 1.2, 1.2, 1.3, 1.4, 1.5, 1.7, 1.9, 2.1, 2.3),
    "C": (1.5, 1.4, 1.3, 1.2, 1.1, 1.0, 0.9, 0.8, 0.8, 0.8, 0.8, 0.8, 0.8, 0.8, 0.8, 0.8, 0.8, 1.0, 1.2, 1.4, 1.6),
})
# Table 3: airborne single numbers, (A, B, C) in dB; one row serves Rw, R'w, Dn,w and DnT,w.
# Key: the adaptation term added ("" for the rating alone). The +Ctr,50-5000 row is printed out of
# pattern in the standard (B 1.0 below C's neighbours' pattern) and is kept as printed.
TABLE_3_AIRBORNE_SINGLE_DB: Mapping[str, tuple[float, float, float]] = MappingProxyType({
    "": (1.2, 0.9, 0.4), "C": (1.3, 0.9, 0.5), "C100-5000": (1.3, 1.1, 0.5), "C50-3150": (1.3, 1.0, 0.7),
    "C50-5000": (1.3, 1.1, 0.7), "Ctr": (1.5, 1.1, 0.7), "Ctr,100-5000": (1.5, 1.1, 0.7),
    "Ctr,50-3150": (1.5, 1.3, 1.0), "Ctr,50-5000": (1.5, 1.0, 1.0),
})
# Table 5: impact single numbers, (A, B, C) in dB; one row serves Ln,w, L'n,w and L'nT,w (the
# situation A values are estimates, per the table's footnote). No row for CI,50-2500 was transcribed.
TABLE_5_IMPACT_SINGLE_DB: Mapping[str, tuple[float, float, float]] = MappingProxyType({
    "": (1.5, 1.0, 0.5), "CI": (1.5, 1.0, 0.6),
})
# Annex D Table D.2: sigma_R95, upper limit of the reproducibility (situation A), airborne only.
SIGMA_R95_DB: Mapping[str, float] = MappingProxyType({"": 2.0, "C": 2.1, "Ctr": 2.4})

_AIRBORNE_ISO = ("R'w", "DnT,w", "Dn,w", "Dw", "Rw")
_IMPACT_ISO = ("L'nT,w", "L'n,w", "Ln,w")


@dataclass(frozen=True, slots=True)
class TableUncertainty:
    """A single-number standard uncertainty read from ISO 12999-1 Table 3 or 5 (or none found)."""

    quantity: str                       # e.g. "DnT,w + Ctr"
    situation: Situation
    standard_uncertainty_db: float | None   # None: the table has no row for this quantity
    table: str                          # e.g. "ISO 12999-1:2020 Table 3"; "" when no table applies
    row: str                            # e.g. "+Ctr"
    sigma_r95_db: float | None = None   # situation A only (Table D.2)

    def describe(self) -> str:
        if self.standard_uncertainty_db is None:
            return (f"{EDITION} gives no single-number value for {self.quantity}; situation {self.situation} "
                    f"({SITUATIONS[self.situation]})")
        upper = (f"; upper limit sigma_R95 = {self.sigma_r95_db:.1f} dB (Table D.2)"
                 if self.sigma_r95_db is not None else "")
        return (f"{self.table}, row {self.row}, situation {self.situation} ({SITUATIONS[self.situation]}): "
                f"u = {self.standard_uncertainty_db:.1f} dB{upper}")


def _check_situation(situation: str) -> Situation:
    if situation not in SITUATIONS:
        raise InputError(f"uncertainty situation must be A, B or C, got {situation!r}")
    return situation  # type: ignore[return-value]


def single_number_uncertainty(descriptor: str, term: str | None = None, *,
                              situation: str = FIELD_DEFAULT_SITUATION) -> TableUncertainty:
    """The ISO 12999-1 row for ``descriptor`` (+ ``term``): Table 3 airborne, Table 5 impact.

    ``term`` uses the ISO 717 names of :mod:`fieldtl.rating.iso717` ("Ctr", "C50-3150",
    "Ctr,50-5000", "CI" ...). ASTM ratings and CI,50-2500 have no row: the value is then None.
    """
    where = _check_situation(situation)
    column = "ABC".index(where)
    quantity = descriptor if term is None else f"{descriptor} + {term}"
    key = term or ""
    if descriptor in _AIRBORNE_ISO and key in TABLE_3_AIRBORNE_SINGLE_DB:
        family = "Ctr" if key.startswith("Ctr") else "C" if key else ""
        sigma = SIGMA_R95_DB[family] if where == "A" else None
        return TableUncertainty(quantity, where, TABLE_3_AIRBORNE_SINGLE_DB[key][column], f"{EDITION} Table 3",
                                _row_name(descriptor, key, "Rw"), sigma)
    if descriptor in _IMPACT_ISO and key in TABLE_5_IMPACT_SINGLE_DB:
        return TableUncertainty(quantity, where, TABLE_5_IMPACT_SINGLE_DB[key][column], f"{EDITION} Table 5",
                                _row_name(descriptor, key, "Ln,w"))
    return TableUncertainty(quantity, where, None, "", "")


def _row_name(descriptor: str, key: str, first: str) -> str:
    return first if not key else f"{first} + {key}"


def band_uncertainty_source(test_type: str, situation: str) -> str:
    """The table giving per-band uncertainties for this kind of test, and the situation (chart legends)."""
    return f"ISO 12999-1:2020 Table {2 if test_type == 'airborne' else 4}, situation {situation}"


def band_uncertainty_db(test_type: str, nominal_hz: Sequence[float], *,
                        situation: str = FIELD_DEFAULT_SITUATION) -> BandSpectrum | None:
    """Table 2 (airborne) or Table 4 (impact) per band, for ``nominal_hz``; None when no column exists.

    Table 4 has no situation A column, so impact with situation A gives None.
    """
    where = _check_situation(situation)
    table = TABLE_2_AIRBORNE_BAND_DB if test_type == "airborne" else TABLE_4_IMPACT_BAND_DB
    if where not in table:
        return None
    values = dict(zip(_BANDS_HZ, table[where]))
    name = "Table 2" if test_type == "airborne" else "Table 4"
    return BandSpectrum(tuple(nominal_hz), tuple(values.get(float(f)) for f in nominal_hz), "dB",
                        f"u {EDITION} {name} ({where})")


# --- Annex B: sensitivities ------------------------------------------------------------------------

Unfavourable = Literal["below", "above"]


def curve_fit_sensitivity(values_db: np.ndarray, curve_db: np.ndarray, *, unfavourable: Unfavourable,
                          max_sum_db: float, max_single_db: float | None = None) -> np.ndarray:
    """d(rating)/d(band value) of a reference-curve rating, on the continuous (unstepped) fit.

    The curve sits where the unfavourable deviations sum to ``max_sum_db``: with n bands deviating
    the position is (max_sum + Σ room_j) / n, so each of those bands moves it by 1/n. Where a
    single-band limit ``max_single_db`` (ASTM's 8 dB) is reached first, the band with the least
    room moves it one for one. Returned for a rating that rises with the curve (ISO 717 values at
    500 Hz); negate for ratings counted downwards (ASTM IIC = 110 - contour).
    """
    sign = 1.0 if unfavourable == "below" else -1.0
    room = sign * (np.asarray(values_db, dtype=float) - np.asarray(curve_db, dtype=float))
    order = np.argsort(room)
    ordered = room[order]
    cumulative = np.cumsum(ordered)
    position = math.inf
    active = len(ordered)
    for k in range(1, len(ordered) + 1):
        candidate = (max_sum_db + cumulative[k - 1]) / k
        if candidate > ordered[k - 1] and (k == len(ordered) or candidate <= ordered[k]):
            position, active = candidate, k
            break
    coefficients = np.zeros(len(room))
    if max_single_db is not None and ordered[0] + max_single_db < position:
        coefficients[order[0]] = 1.0
    else:
        coefficients[order[:active]] = 1.0 / active
    return coefficients   # d rating / d value_j for both directions (room_j = ±(value - curve))


def adaptation_sum_sensitivity(values_db: np.ndarray, spectrum_db: np.ndarray) -> np.ndarray:
    """w_j of X_A = -10 lg Σ 10^((L_j - X_j)/10) (ISO 12999-1 Annex B; ISO 717-1 adaptation terms)."""
    energy = 10.0 ** ((np.asarray(spectrum_db, dtype=float) - np.asarray(values_db, dtype=float)) / 10.0)
    return energy / energy.sum()


def energy_sum_sensitivity(values_db: np.ndarray) -> np.ndarray:
    """w_j of L_sum = 10 lg Σ 10^(L_j/10) (ISO 717-2 CI: L'n,w + CI = L_sum - 15)."""
    energy = 10.0 ** (np.asarray(values_db, dtype=float) / 10.0)
    return energy / energy.sum()


@dataclass(frozen=True, slots=True)
class Propagated:
    """A band uncertainty carried to a single number both ways (ISO 12999-1 Annex B)."""

    uncorrelated_db: float   # root-sum-square of c_j u_j (Formula B.2)
    correlated_db: float     # linear sum of |c_j| u_j (Formulae B.3-B.6)


def propagate(coefficients: np.ndarray, band_u_db: np.ndarray) -> Propagated:
    """Both propagations of ``band_u_db`` (NaN counts as 0) through sensitivities ``coefficients``."""
    u = np.where(np.isfinite(band_u_db), band_u_db, 0.0)
    c = np.abs(np.asarray(coefficients, dtype=float))
    return Propagated(float(np.sqrt(np.sum((c * u) ** 2))), float(np.sum(c * u)))


def single_number_sensitivity(standard: str, spectrum: BandSpectrum, term: str | None = None
                              ) -> tuple[tuple[float, ...], np.ndarray]:
    """The bands a single number depends on and d(single number)/d(band value) for each.

    ``standard`` as in :class:`fieldtl.rating.Rating` ("ISO 717-1", "ISO 717-2", "ASTM E413",
    "ASTM E989"); ``term`` an ISO 717 adaptation term, for the sum rating + term. One-third
    octaves only. InputError when a band the number needs has no value.
    """
    if spectrum.fraction != 3:
        raise InputError(f"{spectrum.quantity}: sensitivities are computed for one-third-octave values only")
    if standard == "ISO 717-1" and term is not None:
        reference = AIRBORNE_SPECTRA_THIRDS.get(term)
        if reference is None:
            raise InputError(f"ISO 717-1 has no adaptation term {term!r}")
        values = required_levels_db(spectrum, reference.nominal_hz, standard=standard)
        return reference.nominal_hz, adaptation_sum_sensitivity(values, reference.as_array())
    if standard == "ISO 717-2" and term is not None:
        low_hz, high_hz = IMPACT_TERM_RANGES_HZ[3][term]
        bands = nominal_bands_hz(low_hz, high_hz)
        return bands, energy_sum_sensitivity(required_levels_db(spectrum, bands, standard=standard))
    curves = {"ISO 717-1": (AIRBORNE_REFERENCE_THIRDS, "below", 32.0, None, 1.0),
              "ISO 717-2": (IMPACT_REFERENCE_THIRDS, "above", 32.0, None, 1.0),
              "ASTM E413": (E413_CONTOUR_RELATIVE, "below", 32.0, 8.0, 1.0),
              "ASTM E989": (E989_CONTOUR_RELATIVE, "above", 32.0, 8.0, -1.0)}   # IIC = 110 - contour
    if standard not in curves or term is not None:
        raise InputError(f"no sensitivity for {standard}{'' if term is None else ' + ' + term}")
    curve, unfavourable, max_sum_db, max_single_db, sign = curves[standard]
    values = required_levels_db(spectrum, curve.nominal_hz, standard=standard)
    return curve.nominal_hz, sign * curve_fit_sensitivity(values, curve.as_array(), unfavourable=unfavourable,
                                                          max_sum_db=max_sum_db, max_single_db=max_single_db)
