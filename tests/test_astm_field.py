"""ASTM field quantities: the ASTM absorption and its relation to the ISO one."""

import math

import pytest

from fieldtl.bands import BandSpectrum
from fieldtl.insulation.astm_field import (apparent_transmission_loss_db, astm_absorption_m2,
                                           normalized_impact_level_db)

BANDS = (125.0, 500.0)
T = BandSpectrum(BANDS, (0.5, 1.0), "s", "T")


def test_astm_absorption_is_about_sabine():
    # 0.921 V (60/T) / c with c = 343 m/s: 55.26 V / (343 T) = 0.16111 V/T (computed), vs ISO 0.16 V/T.
    a = astm_absorption_m2(T, volume_m3=50.0)
    assert a.values[0] == pytest.approx(0.161108 * 50 / 0.5, rel=1e-5)
    assert a.values[1] == pytest.approx(0.161108 * 50 / 1.0, rel=1e-5)


def test_atl_and_anispl_follow_their_definitions():
    nr = BandSpectrum(BANDS, (40.0, 50.0), "dB", "NR")
    atl = apparent_transmission_loss_db(nr, T, area_m2=10.0, receiving_volume_m3=50.0)
    # ATL = NR + 10 lg(S/A2): A2 = 16.111 m2 at 125 Hz -> 40 + 10 lg(10/16.111) = 37.928 dB (computed)
    assert atl.values[0] == pytest.approx(40 + 10 * math.log10(10 / 16.1108), abs=1e-3)
    assert atl.quantity == "ATL"
    li = BandSpectrum(BANDS, (60.0, 60.0), "dB", "ISPL")
    anispl = normalized_impact_level_db(li, T, receiving_volume_m3=50.0)
    assert anispl.values[1] == pytest.approx(60 + 10 * math.log10(8.0554 / 10), abs=1e-3)
