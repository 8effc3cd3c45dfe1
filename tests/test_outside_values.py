"""Numbers other tests rely on, checked against outside sources instead of fieldtl's own code.

* The independent ISO 717 rater (tests/data/by_hand.py) against published results.
* The invented demo's truth (sample_audio/expected.json: DnT,w 54, R'w 54, DnT,w + Ctr 50), which the
  app and browser tests read back, rated here by that independent rater.
* Predicted Rw of dense-concrete walls (45 dB for 100 mm, 56 dB for 200 mm, used by the assessment,
  CLI and report tests): Sharp's method computed independently from stated material data, and the
  empirical mass law for heavy walls as a second, coarser source.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import by_hand
import numpy as np
import pytest

from fieldtl.construction import construction_from_layers
from fieldtl.construction.predict import predict

DEMO_EXPECTED = Path(__file__).resolve().parents[1] / "sample_audio" / "expected.json"


# --- the independent rater against published values ------------------------------------------------------------

def test_rater_reproduces_a_published_iso_717_1_example():
    # python-acoustics (acoustics/tests/test_building.py) rates this spectrum Rw 22 with X_A1 = 19.657
    # and X_A2 = 18.036, so C = round(19.657 - 22) = -2 and Ctr = round(18.036 - 22) = -4 (ISO 717-1).
    spectrum = [10, 11, 12, 13, 15, 18, 20, 20, 25, 22, 18, 15, 20, 25, 28, 30]
    assert by_hand.airborne_rating(spectrum) == 22
    assert by_hand.adaptation_term(spectrum, by_hand.SPECTRUM_1_DB) == -2
    assert by_hand.adaptation_term(spectrum, by_hand.SPECTRUM_2_DB) == -4


def test_rater_reproduces_the_iso_12999_1_annex_b_rating():
    # ISO 12999-1:2020 Annex B, Table B.1 (R_i, 50 Hz-5 kHz) and Table B.2: Rw = 57.4 dB with 0.1 dB
    # shifts (as transcribed; verify against a licensed copy). The 16 bands 100-3150 Hz are rated.
    r_i = [39.5, 40.3, 41.6, 43.1, 43.3, 43.1, 42.5, 44.7, 48.0, 50.5, 53.2, 55.9, 58.1, 60.0, 62.2, 63.7, 65.4,
           66.8, 68.4, 68.8, 65.1]
    assert by_hand.airborne_rating(r_i[3:19], step_tenths=1) == 57.4
    assert by_hand.airborne_rating(r_i[3:19]) == 57


def test_rater_allows_exactly_32_db():
    # ISO 717-1/-2: the sum of unfavourable deviations may equal 32.0 dB. Reference curve + 2 dB in
    # every band: at +4 dB the 16 bands are each 2 dB below the curve (sum 32.0, allowed), at +5 the
    # sum is 48 -> Rw = 52 + 4 = 56. Impact, mirror image: curve + 2 dB rates at shift 0 (sum 32.0) -> 60.
    assert by_hand.airborne_rating(np.array(by_hand.AIRBORNE_REFERENCE_DB) + 2.0) == 56
    assert by_hand.impact_rating(np.array(by_hand.IMPACT_REFERENCE_DB) + 2.0) == 60


# --- the invented demo's truth ------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def demo():
    return json.loads(DEMO_EXPECTED.read_text(encoding="utf-8"))


def _required(demo, values):
    bands = demo["bands_hz"]
    return [values[bands.index(f)] for f in by_hand.BANDS_100_3150_HZ]


def test_demo_truth_rates_dntw_54_and_rw_54(demo):
    # The invented true spectra of the demo, rated by the independent rater (ISO 717-1): DnT,w 54 (C -1,
    # Ctr -4), R'w 54, so DnT,w + Ctr = 50 against the example requirement of 45. The app and browser
    # tests expect these 54s from the measured demo recordings.
    true = demo["true"]
    dnt = _required(demo, true["standardized_level_difference_db"])
    r_prime = _required(demo, true["apparent_sound_reduction_index_db"])
    assert by_hand.airborne_rating(dnt) == 54
    assert by_hand.airborne_rating(r_prime) == 54
    assert by_hand.adaptation_term(dnt, by_hand.SPECTRUM_1_DB) == -1
    assert by_hand.adaptation_term(dnt, by_hand.SPECTRUM_2_DB) == -4
    assert demo["requirement"]["true_value_db"] == 54 - 4
    # The recorded summary in expected.json says the same (it was written by fieldtl's rater).
    ratings = true["ratings"]
    for key, spectrum in (("DnT", dnt), ("R'", r_prime)):
        assert ratings[key]["single_number_db"] == by_hand.airborne_rating(spectrum)
        assert ratings[key]["single_number_precise_db"] == by_hand.airborne_rating(spectrum, step_tenths=1)
        assert ratings[key]["adaptation_terms_db"]["Ctr"] == by_hand.adaptation_term(spectrum, by_hand.SPECTRUM_2_DB)


def test_demo_ratings_by_the_background_rule(demo):
    # The demo's bands after the ISO 16283-1 background rule, rated by the independent rater.
    rule = demo["by_background_rule"]
    for key, name in (("DnT", "standardized_level_difference_db"), ("R'", "apparent_sound_reduction_index_db")):
        spectrum = _required(demo, rule[name])
        assert rule["ratings"][key]["single_number_db"] == by_hand.airborne_rating(spectrum)


# --- predicted Rw of dense concrete ---------------------------------------------------------------------------

@pytest.mark.parametrize(("thickness_mm", "expected_rw"), [(100, 45), (150, 51), (200, 56)])
def test_predicted_rw_of_dense_concrete(thickness_mm, expected_rw):
    # Sharp's method with edge losses, written out in tests/data/by_hand.py from the stated material
    # data (ρ 2300 kg/m3, E 30 GPa, ν 0.2, η 0.006), rated by the independent ISO 717-1 rater.
    assert by_hand.dense_concrete_rw(thickness_mm / 1000.0) == expected_rw
    # The result does not hinge on evaluating at nominal or exact (IEC 61260-1 base-ten) mid-band
    # frequencies.
    exact_hz = [1000.0 * 10 ** (round(10 * math.log10(f / 1000.0)) / 10) for f in by_hand.BANDS_100_3150_HZ]
    r_exact = by_hand.sharp_single_leaf_r_db(exact_hz, thickness_m=thickness_mm / 1000.0, **by_hand.DENSE_CONCRETE)
    assert by_hand.airborne_rating(r_exact) == expected_rw
    # Second, coarser source: heavy single walls follow Rw ≈ 37.5 lg m'' - 42 dB for m'' >= 150 kg/m2
    # (EN 12354-1 Annex B, from memory): 46.6, 53.2 and 57.9 dB here; Sharp's value lies within 3 dB
    # (a band, not a point: the empirical fit scatters by a few dB, common practice).
    empirical_db = 37.5 * math.log10(2300.0 * thickness_mm / 1000.0) - 42.0
    assert abs(expected_rw - empirical_db) <= 3.0
    # fieldtl's prediction of the same wall.
    prediction = predict(construction_from_layers([f"concrete_dense:{thickness_mm}"]))
    assert prediction.rating.single_number_db == expected_rw
