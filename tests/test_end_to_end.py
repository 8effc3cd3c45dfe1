"""Synthetic recordings with a known truth through the whole chain: files → survey → D, DnT, R', ratings.

The recordings are written by tests/data/make_data.py (airborne_survey) from chosen spectra; the
expected values are computed here from the ISO 16283-1 formulas (facts sheet 1.1), independently of
the measuring code.
"""

import json

import make_data
import numpy as np
import pytest

from fieldtl.bands import THIRD_OCTAVES_100_3150_HZ, BandSpectrum
from fieldtl.cli import main
from fieldtl.rating import rate_iso717_1, rate_iso717_2

BANDS = make_data.WALL_BANDS
S_M2, V2_M3, V1_M3 = make_data.WALL_S_M2, make_data.WALL_V2_M3, make_data.WALL_V1_M3
R_TRUE, L1_TRUE, B_TRUE, T_TRUE = make_data.WALL_R_TRUE, make_data.WALL_L1_TRUE, make_data.WALL_B_TRUE, make_data.WALL_T_TRUE


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    folder = tmp_path_factory.mktemp("survey")
    survey = make_data.airborne_survey(folder, reduction_db=R_TRUE, source_db=L1_TRUE, background_db=B_TRUE,
                                       reverberation_s=T_TRUE, area_m2=S_M2, receiving_volume_m3=V2_M3,
                                       source_volume_m3=V1_M3)
    assert main(["assess", str(survey), "--json", str(folder / "out.json")]) == 0
    return json.loads((folder / "out.json").read_text())


def _expected():
    t_s = T_TRUE.as_array()
    a_m2 = 0.16 * V2_M3 / t_s                                     # A = 0.16 V / T
    d = R_TRUE.as_array() - 10 * np.log10(S_M2 / a_m2)           # R' = D + 10 lg(S/A)
    return {"D": d, "DnT": d + 10 * np.log10(t_s / 0.5), "R_prime": R_TRUE.as_array()}   # DnT = D + 10 lg(T/T0)


@pytest.mark.parametrize("quantity", ["D", "DnT", "R_prime"])
def test_band_values_within_half_a_decibel(result, quantity):
    measured = np.array(result["bands"][quantity], dtype=float)
    expected = _expected()[quantity]
    required = [BANDS.index(f) for f in THIRD_OCTAVES_100_3150_HZ]
    error_db = np.abs(measured[required] - expected[required])
    assert error_db.max() < 0.5, dict(zip(THIRD_OCTAVES_100_3150_HZ, np.round(error_db, 2)))


def test_levels_are_calibrated(result):
    # Calibrator written at 94 dB - 125 dB full scale: L1 reads back as the chosen source spectrum.
    measured = np.array(result["bands"]["L1"], dtype=float)
    required = [BANDS.index(f) for f in THIRD_OCTAVES_100_3150_HZ]
    assert np.abs(measured[required] - L1_TRUE.as_array()[required]).max() < 0.5
    assert result["calibrated"] is True


def test_single_numbers_match_the_truth(result):
    # ISO 717-1 applied to the true spectra (rate_iso717_1 is itself tested against the standard's
    # rule and the facts sheet vectors): the measured 0.1 dB ratings within 0.5 dB, integers within 1.
    for key, descriptor, truth in (("R'w", "R'w", R_TRUE.as_array()), ("DnT,w", "DnT,w", _expected()["DnT"])):
        expected = rate_iso717_1(BandSpectrum.from_array(BANDS, truth, "dB", descriptor))
        measured = result["ratings"][key]
        assert abs(measured["value_0.1dB"] - expected.single_number_precise_db) <= 0.5
        assert abs(measured["value"] - expected.single_number_db) <= 1
        assert abs(measured["Ctr"] - expected.adaptation_terms_db["Ctr"]) <= 1


def test_nothing_is_limited_and_the_verdict_is_stated(result):
    assert not any(result["limited"])
    assert result["verdict"]["result"] == "pass"
    # the verdict names the ISO 12999-1:2020 table and the situation it used (field default B)
    assert "ISO 12999-1:2020 Table 3" in result["verdict"]["rule"] and "situation B" in result["verdict"]["rule"]


LI_TRUE = BandSpectrum(BANDS, tuple(62.0 - 0.4 * i for i in range(len(BANDS))), "dB", "Li")


def test_impact_survey_gives_l_prime_n_and_l_prime_nt(tmp_path):
    # ISO 16283-2: L'n = Li + 10 lg(A/A0), A0 = 10 m2; L'nT = Li - 10 lg(T/T0), T0 = 0.5 s (facts sheet 2).
    survey = make_data.impact_survey(tmp_path, impact_db=LI_TRUE, background_db=B_TRUE, reverberation_s=T_TRUE,
                                     receiving_volume_m3=V2_M3)
    assert main(["assess", str(survey), "--json", str(tmp_path / "out.json")]) == 0
    result = json.loads((tmp_path / "out.json").read_text())
    assert set(result["bands"]) == {"Li", "B", "T", "L_prime_n", "L_prime_nT"}
    t_s = T_TRUE.as_array()
    expected = {"L_prime_n": LI_TRUE.as_array() + 10 * np.log10(0.16 * V2_M3 / t_s / 10.0),
                "L_prime_nT": LI_TRUE.as_array() - 10 * np.log10(t_s / 0.5)}
    required = [BANDS.index(f) for f in THIRD_OCTAVES_100_3150_HZ]
    for quantity, values in expected.items():
        measured = np.array(result["bands"][quantity], dtype=float)
        assert np.abs(measured[required] - values[required]).max() < 0.5, quantity
    truth = rate_iso717_2(BandSpectrum.from_array(BANDS, expected["L_prime_nT"], "dB", "L'nT"))
    assert abs(result["ratings"]["L'nT,w"]["value_0.1dB"] - truth.single_number_precise_db) <= 0.5
    assert result["verdict"]["requirement"] == "L'nT,w <= 62"
    assert {"AIIC", "NISR"} <= set(result["ratings"])
