"""Single-number ratings of band spectra: ISO 717-1/-2 and ASTM E413/E989 (pure arithmetic, no I/O)."""

from fieldtl.rating.astm import E413_CONTOUR_RELATIVE, E989_CONTOUR_RELATIVE, rate_e413, rate_e989
from fieldtl.rating.iso717 import (AIRBORNE_REFERENCE_OCTAVES, AIRBORNE_REFERENCE_THIRDS, AIRBORNE_SPECTRA_OCTAVES,
                                   AIRBORNE_SPECTRA_THIRDS, IMPACT_REFERENCE_OCTAVES, IMPACT_REFERENCE_THIRDS, Bound,
                                   Rating, rate_iso717_1, rate_iso717_2)

__all__ = ["AIRBORNE_REFERENCE_OCTAVES", "AIRBORNE_REFERENCE_THIRDS", "AIRBORNE_SPECTRA_OCTAVES",
           "AIRBORNE_SPECTRA_THIRDS", "E413_CONTOUR_RELATIVE", "E989_CONTOUR_RELATIVE", "IMPACT_REFERENCE_OCTAVES",
           "IMPACT_REFERENCE_THIRDS", "Bound", "Rating", "rate_e413", "rate_e989", "rate_iso717_1", "rate_iso717_2"]
