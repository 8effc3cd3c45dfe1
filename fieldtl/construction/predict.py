"""Predicted sound reduction index R of a declared single or double leaf, one-third octaves 50-5000 Hz.

Single leaf (facts sheet 10; B.H. Sharp, "Prediction methods for the sound transmission of
building elements", Noise Control Engineering 11, 1978, from memory):

* f < fc/2:       R = 20 lg(m'' f) - 47                       (field-incidence mass law)
* f >= fc:        R = 20 lg(m'' f) + 10 lg(2 η f / (π fc)) - 47
* fc/2 .. fc:     straight line on a log-frequency axis between the two values above.

Double leaf (Sharp 1978, from memory; the same outline in Bies & Hansen, "Engineering Noise
Control", from memory):

* f < f0:         the two leaves as one leaf (masses and stiffnesses added, see :class:`Leaf`)
* f0 <= f < fl:   R = R1 + R2 + 20 lg(2 k d)    (k = 2π f / c; Sharp's "20 lg(f d) - 29")
* f >= fl:        R = R1 + R2 + 20 lg 2         (≈ +6 dB)

with the mass-air-mass resonance f0 = (1/2π) sqrt(ρ0 c² (m1 + m2) / (d m1 m2)) and the cavity
limiting frequency fl = c / (2π d). We use ρ0 = 1.21 kg/m³ and c = 343 m/s, so the constant
(1/2π) sqrt(ρ0 c²) is 60.05: the "60" of the often-quoted f0 = 60 sqrt((m1 + m2)/(d m1 m2))
(d in m; Fahy, "Sound and Structural Vibration", and Bies & Hansen, both from memory).

Limits, also returned as notes with every prediction: infinite thin plates (no size or thick-plate
effects, no orthotropy); the double-leaf model assumes porous absorbent in the cavity, independent
leaves have no structural bridging and no flanking; timber studs get Sharp's line-bridge limit
(from memory); steel studs and empty cavities are flagged as upper bounds. The predicted values are
capped at 80 dB (see :data:`MAX_PREDICTED_R_DB`) and floored at 0 dB.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from fieldtl.bands import THIRD_OCTAVES_50_5000_HZ, BandSpectrum
from fieldtl.construction.materials import SPEED_OF_SOUND_M_S
from fieldtl.construction.spec import Construction, Leaf
from fieldtl.findings import unconfirmed
from fieldtl.rating.iso717 import Rating, rate_iso717_1

AIR_DENSITY_KG_M3 = 1.21         # air at about 20 °C (common textbook value, from memory)
FIELD_INCIDENCE_OFFSET_DB = 47.0  # R = 20 lg(m'' f) - 47 (facts sheet 10, from memory)
EDGE_LOSS_CONSTANT = 485.0        # η_tot = η_int + m''/(485 sqrt f): ISO 12354-1 Annex C, laboratory (from memory)
# Largest predicted R. Common practice: even laboratory suites rarely measure much above 80 dB
# because of their own flanking, and ideal double-leaf formulas grow without limit.
MAX_PREDICTED_R_DB = 80.0


@dataclass(frozen=True, slots=True)
class Prediction:
    """Predicted R per band and its ISO 717-1 rating (descriptor "Rw")."""

    construction: Construction
    r_db: BandSpectrum                            # quantity "R", one-third octaves 50-5000 Hz
    rating: Rating
    surface_mass_kg_m2: float                     # all leaves together
    leaf_critical_frequencies_hz: tuple[float, ...]
    mass_air_mass_resonance_hz: float | None      # double leaf only
    cavity_limit_hz: float | None                 # double leaf only
    method: str
    notes: tuple[str, ...]
    upper_bound: bool                             # a known transmission path is left out

    @property
    def critical_frequency_hz(self) -> float:
        """The lowest critical frequency of the leaves."""
        return min(self.leaf_critical_frequencies_hz)


def mass_law_db(surface_mass_kg_m2: float, frequency_hz: ArrayLike) -> np.ndarray:
    """Field-incidence mass law R = 20 lg(m'' f) - 47 dB (facts sheet 10, from memory)."""
    return 20.0 * np.log10(surface_mass_kg_m2 * np.asarray(frequency_hz, dtype=float)) - FIELD_INCIDENCE_OFFSET_DB


def total_loss_factor(internal_loss_factor: float, surface_mass_kg_m2: float, frequency_hz: ArrayLike) -> np.ndarray:
    """η_tot = η_int + m''/(485 sqrt f): edge losses of an element built into heavy surroundings.

    ISO 12354-1 (EN 12354-1:2000) Annex C, laboratory situation, from memory. It matters for
    masonry and concrete (m'' of hundreds of kg/m²) and is negligible for boards and glass.
    """
    return internal_loss_factor + surface_mass_kg_m2 / (EDGE_LOSS_CONSTANT * np.sqrt(np.asarray(frequency_hz, float)))


def single_leaf_r_db(frequency_hz: ArrayLike, *, surface_mass_kg_m2: float, critical_frequency_hz: float,
                     loss_factor: float, edge_losses: bool = True) -> np.ndarray:
    """R of one leaf by Sharp's method (facts sheet 10; B.H. Sharp 1978, from memory).

    ``loss_factor`` is the internal loss factor; ``edge_losses`` adds the ISO 12354-1 Annex C
    term. Above fc the value is also kept at or below the mass law, since resonant transmission
    adds to the forced (mass-law) transmission (our reading; it only acts on very damped leaves).
    Does not model thick-plate (shear) effects or the finite size of the element.
    """
    f = np.asarray(frequency_hz, dtype=float)
    m, fc = surface_mass_kg_m2, critical_frequency_hz

    def eta(at_hz: ArrayLike) -> np.ndarray:
        return total_loss_factor(loss_factor, m, at_hz) if edge_losses else np.full(np.shape(at_hz), loss_factor)

    def damped(at_hz: ArrayLike) -> np.ndarray:
        # R = 20 lg(m'' f) + 10 lg(2 η f / (π fc)) - 47 for f >= fc (Sharp 1978)
        at = np.asarray(at_hz, dtype=float)
        return np.minimum(mass_law_db(m, at) + 10.0 * np.log10(2.0 * eta(at) * at / (math.pi * fc)),
                          mass_law_db(m, at))

    r_a = float(mass_law_db(m, fc / 2.0))     # point A: mass law at fc/2
    r_b = float(damped(fc))                   # point B: Sharp's damped value at fc
    between = r_a + (r_b - r_a) * np.log2(f / (fc / 2.0))   # straight line in log f over the octave
    return np.where(f < fc / 2.0, mass_law_db(m, f), np.where(f < fc, between, damped(f)))


def mass_air_mass_resonance_hz(mass_1_kg_m2: float, mass_2_kg_m2: float, depth_m: float) -> float:
    """f0 = (1/2π) sqrt(ρ0 c² (m1 + m2) / (d m1 m2)), adiabatic cavity air (module docstring).

    Does not lower f0 for a porous fill (isothermal air lowers it by up to sqrt(1.4), from memory).
    """
    stiffness = AIR_DENSITY_KG_M3 * SPEED_OF_SOUND_M_S ** 2 / depth_m
    return math.sqrt(stiffness * (mass_1_kg_m2 + mass_2_kg_m2) / (mass_1_kg_m2 * mass_2_kg_m2)) / (2.0 * math.pi)


def cavity_limit_hz(depth_m: float) -> float:
    """fl = c / (2π d), where 2 k d = 2 (Sharp 1978, from memory)."""
    return SPEED_OF_SOUND_M_S / (2.0 * math.pi * depth_m)


def double_leaf_r_db(frequency_hz: ArrayLike, *, r1_db: ArrayLike, r2_db: ArrayLike, r_together_db: ArrayLike,
                     mass_1_kg_m2: float, mass_2_kg_m2: float, depth_m: float) -> np.ndarray:
    """R of two leaves without structural bridges, Sharp's double-panel model (module docstring).

    ``r1_db``/``r2_db`` are the leaves' own R, ``r_together_db`` the R of both as one leaf.
    Assumes porous absorbent in the cavity.
    """
    f = np.asarray(frequency_hz, dtype=float)
    f0_hz = mass_air_mass_resonance_hz(mass_1_kg_m2, mass_2_kg_m2, depth_m)
    fl_hz = cavity_limit_hz(depth_m)
    sum_db = np.asarray(r1_db, float) + np.asarray(r2_db, float)
    two_kd = 2.0 * (2.0 * math.pi * f / SPEED_OF_SOUND_M_S) * depth_m
    middle = sum_db + 20.0 * np.log10(two_kd)           # R1 + R2 + 20 lg(2 k d), f0 <= f < fl
    high = sum_db + 20.0 * math.log10(2.0)              # R1 + R2 + 6, f >= fl
    return np.where(f < f0_hz, np.asarray(r_together_db, float), np.where(f < fl_hz, middle, high))


def line_bridge_correction_db(spacing_m: float, critical_frequency_hz: float, mass_kg_m2: float,
                              total_mass_kg_m2: float) -> float:
    """ΔR_M = 10 lg(b fc) + 20 lg(m1 / (m1 + m2)) - 18: rigid line bridges (studs at spacing b).

    Sharp 1978 (from memory): above the bridge frequency R follows the mass law of the total mass
    plus ΔR_M. ``mass_kg_m2`` and ``critical_frequency_hz`` belong to the same leaf.
    """
    return (10.0 * math.log10(spacing_m * critical_frequency_hz)
            + 20.0 * math.log10(mass_kg_m2 / total_mass_kg_m2) - 18.0)


def predict(construction: Construction, *, edge_losses: bool = True) -> Prediction:
    """Predicted R at the nominal one-third-octave frequencies 50-5000 Hz, rated with ISO 717-1.

    Does not include flanking, leaks or workmanship: it is the direct path of the declared element.
    """
    bands_hz = THIRD_OCTAVES_50_5000_HZ
    f = np.asarray(bands_hz)
    leaves = construction.leaves
    together = Leaf(tuple(layer for leaf in leaves for layer in leaf.layers))
    r_together = _leaf_r_db(together, f, edge_losses)
    notes = ["infinite thin plates: finite size, thick-plate (shear) effects and orthotropy are not modelled",
             f"values capped at {MAX_PREDICTED_R_DB:g} dB and floored at 0 dB"]
    if len(together.layers) > 1:
        notes.append("bonded layers (and both leaves below f0): masses and bending stiffnesses added, "
                     "loss factor mass-weighted")
    if edge_losses:
        # ISO 12354-1 Annex C's edge-loss term from memory
        notes.append(unconfirmed("loss factor includes the edge-loss term m''/(485 sqrt f) of ISO 12354-1 Annex C"))
    f0_hz = fl_hz = None
    upper_bound = False
    if construction.cavity is None:
        r_db = r_together
        method = "single leaf: field-incidence mass law and Sharp's coincidence method (B.H. Sharp 1978)"
    else:
        cavity = construction.cavity
        depth_m = cavity.depth_mm / 1000.0
        m1, m2 = (leaf.surface_mass_kg_m2 for leaf in leaves)
        f0_hz, fl_hz = mass_air_mass_resonance_hz(m1, m2, depth_m), cavity_limit_hz(depth_m)
        r_db = double_leaf_r_db(f, r1_db=_leaf_r_db(leaves[0], f, edge_losses),
                                r2_db=_leaf_r_db(leaves[1], f, edge_losses), r_together_db=r_together,
                                mass_1_kg_m2=m1, mass_2_kg_m2=m2, depth_m=depth_m)
        method = "double leaf: Sharp's double-panel model (B.H. Sharp 1978)"
        if cavity.studs == "timber":
            total = m1 + m2
            bridge_db = min(line_bridge_correction_db(cavity.stud_spacing_mm / 1000.0, leaf.critical_frequency_hz,
                                                      leaf.surface_mass_kg_m2, total) for leaf in leaves)
            # Above f0, R is the lower of the ideal double leaf and the line-bridged limit.
            r_db = np.where(f < f0_hz, r_db, np.minimum(r_db, mass_law_db(total, f) + bridge_db))
            method += f" with Sharp's line-bridge limit for timber studs at {cavity.stud_spacing_mm:g} mm"
            notes.append(f"timber studs: rigid line bridges, ΔR_M = {bridge_db:.1f} dB over the total-mass law "
                         "(lower of the two leaf assignments)")
        elif cavity.studs == "steel":
            upper_bound = True
            notes.append("steel studs: no bridge correction (light-gauge studs are compliant); "
                         "the result is an upper bound")
        else:
            notes.append("independent leaves: no structural bridging")
        if cavity.fill == "none":
            upper_bound = True
            notes.append("empty cavity: the model assumes absorbent; cavity resonances lower R above "
                         "f0 by an amount not modelled, so the result is an upper bound")
        elif cavity.fill == "partial":
            notes.append("partial fill treated as full (common practice: a partial fill gives most of the benefit)")
        notes.append("f0 uses adiabatic cavity air; a porous fill can lower it (not modelled)")
    r_db = np.clip(r_db, 0.0, MAX_PREDICTED_R_DB)
    spectrum = BandSpectrum(bands_hz, tuple(round(float(v), 1) for v in r_db), "dB", "R")
    return Prediction(construction=construction, r_db=spectrum, rating=rate_iso717_1(spectrum),
                      surface_mass_kg_m2=together.surface_mass_kg_m2,
                      leaf_critical_frequencies_hz=tuple(leaf.critical_frequency_hz for leaf in leaves),
                      mass_air_mass_resonance_hz=f0_hz, cavity_limit_hz=fl_hz, method=method,
                      notes=tuple(notes), upper_bound=upper_bound)


def _leaf_r_db(leaf: Leaf, frequency_hz: np.ndarray, edge_losses: bool) -> np.ndarray:
    return single_leaf_r_db(frequency_hz, surface_mass_kg_m2=leaf.surface_mass_kg_m2,
                            critical_frequency_hz=leaf.critical_frequency_hz, loss_factor=leaf.loss_factor,
                            edge_losses=edge_losses)


def prediction_to_json(prediction: Prediction) -> dict[str, Any]:
    """The dictionary the CLI writes: band values, fc, and the Rw rating with C and Ctr."""
    rating = prediction.rating
    terms = rating.adaptation_terms_db

    def rounded(value: float | None) -> float | None:
        return None if value is None else round(value, 1)

    return {
        "construction": prediction.construction.name,
        "area_m2": prediction.construction.area_m2,
        "frequencies_hz": list(prediction.r_db.nominal_hz),
        "R_db": list(prediction.r_db.values),
        "critical_frequency_hz": rounded(prediction.critical_frequency_hz),
        "leaf_critical_frequencies_hz": [rounded(v) for v in prediction.leaf_critical_frequencies_hz],
        "mass_air_mass_resonance_hz": rounded(prediction.mass_air_mass_resonance_hz),
        "cavity_limit_hz": rounded(prediction.cavity_limit_hz),
        "surface_mass_kg_m2": rounded(prediction.surface_mass_kg_m2),
        "ratings": {rating.descriptor: {"value": rating.single_number_db, "C": terms["C"], "Ctr": terms["Ctr"]}},
        "adaptation_terms_db": dict(terms),
        "upper_bound": prediction.upper_bound,
        "cap_db": MAX_PREDICTED_R_DB,
        "method": prediction.method,
        "notes": list(prediction.notes),
    }
