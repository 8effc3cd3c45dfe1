"""Levels, energies and the reference pressure.

Every helper works on numpy arrays or floats and returns the same shape it was given.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

P_REF_PA = 20e-6  # reference sound pressure in air, 20 µPa (IEC 61672-1; pyfar `decibel` uses 2e-5)


def db_to_energy(level_db: ArrayLike) -> np.ndarray:
    """10^(L/10): relative energy (power) of a level."""
    return np.power(10.0, np.asarray(level_db, dtype=float) / 10.0)


def energy_to_db(energy: ArrayLike) -> np.ndarray:
    """10 lg(E); zero energy gives -inf without a warning."""
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(np.asarray(energy, dtype=float))


def energetic_mean_db(levels_db: ArrayLike, *, axis: int = 0) -> np.ndarray:
    """L = 10 lg((1/n) Σ 10^(Li/10)) along ``axis`` (ISO 16283-1 energy average)."""
    return energy_to_db(np.mean(db_to_energy(levels_db), axis=axis))


def energetic_sum_db(levels_db: ArrayLike, *, axis: int = 0) -> np.ndarray:
    """L = 10 lg(Σ 10^(Li/10)) along ``axis`` (octave impact level from three thirds)."""
    return energy_to_db(np.sum(db_to_energy(levels_db), axis=axis))
