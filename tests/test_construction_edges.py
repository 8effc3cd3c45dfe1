"""Construction-check thresholds at their edges (fieldtl.construction.compare), one case either side.

The measured R' is the prediction shifted by a chosen amount in every band, so the gap the check sees
is that amount by construction. Only bands 100-2500 Hz are given, so R'w cannot be formed (ISO 717-1
needs 100-3150 Hz) and the check uses the mean band gap, which resolves 0.1 dB. Thresholds are common
practice: a field R'w typically lies 3-5 dB below the element's own R at well-detailed junctions and
5-10 dB or more below with poor junctions or leaks; a field value 2-3 dB or more above the element's
own prediction points to an input error.
"""

import pytest

from fieldtl.bands import BandSpectrum
from fieldtl.construction import compare_with_measurement, construction_from_layers
from fieldtl.construction.predict import predict

CONCRETE_150 = predict(construction_from_layers(["concrete_dense:150"]))
BANDS = [f for f in CONCRETE_150.r_db.nominal_hz if 100 <= f <= 2500]


def _findings(shortfall_db):
    predicted = CONCRETE_150.r_db.select(BANDS)
    measured = BandSpectrum(predicted.nominal_hz, tuple(round(v - shortfall_db, 1) for v in predicted.values),
                            "dB", "R'")
    comparison = compare_with_measurement(CONCRETE_150, measured)
    assert comparison.measured_rating is None and comparison.mean_gap_db == pytest.approx(shortfall_db)
    return [(f.code, f.severity, f.message) for f in comparison.findings]


@pytest.mark.parametrize(("shortfall_db", "expected", "words"), [
    (2.9, None, None),                                          # under 3 dB: nothing to say
    (3.0, ("flanking_gap", "info"), "typical of flanking"),     # 3-5 dB: good junctions
    (5.0, ("flanking_gap", "info"), "typical of flanking"),
    (5.1, ("flanking_gap", "warning"), "more than the 3-5 dB"),
    (10.0, ("flanking_gap", "warning"), "more than the 3-5 dB"),
    (10.1, ("flanking_gap", "warning"), "far more than flanking"),
    (-2.9, None, None),                                         # less than 3 dB above: quiet
    (-3.0, ("field_above_prediction", "warning"), "above"),     # 3 dB above the prediction: input error
])
def test_gap_thresholds(shortfall_db, expected, words):
    findings = _findings(shortfall_db)
    if expected is None:
        assert findings == []
    else:
        assert [(code, severity) for code, severity, _ in findings] == [expected]
        assert words in findings[0][2]
