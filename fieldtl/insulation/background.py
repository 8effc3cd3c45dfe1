"""Background-noise correction of field band levels, shared by ISO 16283-1 (airborne) and
ISO 16283-2 (impact). Section numbers ("facts sheet 1.8") point to the project's standards facts
sheet, which says for each number whether it was verified, computed or recalled from memory.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from fieldtl.units import db_to_energy, energy_to_db

NO_CORRECTION_MARGIN_DB = 10.0  # margin >= 10 dB: no correction; 10.0 itself falls here (from memory)
LIMIT_MARGIN_DB = 6.0  # margin <= 6 dB: fixed correction, band marked as a limit (facts sheet 1.8)
LIMIT_CORRECTION_DB = 1.3  # -10 lg(1 - 10^-0.6) = 1.256, rounded by the standard to 1.3 (facts sheet 1.8)
EDGE_TOLERANCE_DB = 1e-9  # a margin within this of 6 or 10 dB counts as exactly 6 or 10 (float noise only)

# Where it is used, the rule is marked unconfirmed (fieldtl.findings.unconfirmed): that 10.0 dB itself
# counts as "no correction" is from memory.
BACKGROUND_RULE = (
    "background correction per band (ISO 16283-1/-2): margin >= 10 dB no correction (10.0 dB itself "
    "is treated as 'no correction'); 6 dB < margin < 10 dB energy subtraction "
    "10 lg(10^(Lsb/10) - 10^(Lb/10)); margin <= 6 dB subtract 1.3 dB and mark the band as a "
    "measurement limit")


class BackgroundCorrection(NamedTuple):
    """Per-band result of :func:`background_corrected_db` (arrays of the input's shape)."""

    level_db: np.ndarray  # corrected signal level
    margin_db: np.ndarray  # signal-plus-background level minus background level
    limited: np.ndarray  # bool: margin <= 6 dB, the corrected level is only a bound


def background_corrected_db(signal_db: ArrayLike, background_db: ArrayLike) -> BackgroundCorrection:
    """Correct signal-plus-background levels for background noise, band by band.

    ISO 16283-1 / ISO 16283-2 background rule (facts sheet 1.8). Margins within 1e-9 dB of 6 or
    10 dB count as exactly 6 or 10 (so 46.0 - 40.0 is "6 dB" whatever the float rounding).
    Does not decide which way a limited band bounds the result: that depends on the quantity
    (airborne: lower bound; impact: upper bound). NaN inputs give NaN levels and unflagged bands.
    """
    signal = np.asarray(signal_db, dtype=float)
    background = np.asarray(background_db, dtype=float)
    margin = signal - background
    with np.errstate(invalid="ignore", divide="ignore"):
        no_correction = margin >= NO_CORRECTION_MARGIN_DB - EDGE_TOLERANCE_DB  # Δ >= 10 dB: none
        limited = margin <= LIMIT_MARGIN_DB + EDGE_TOLERANCE_DB  # Δ <= 6 dB: 1.3 dB and a limit
        subtracted = energy_to_db(db_to_energy(signal) - db_to_energy(background))  # 6 < Δ < 10
    level = np.where(no_correction, signal, np.where(limited, signal - LIMIT_CORRECTION_DB, subtracted))
    return BackgroundCorrection(level, margin, limited)
