"""A and C frequency weightings and the F/S time weighting (IEC 61672-1:2013)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from fieldtl.analysis.weighting import (a_weighting_db, c_weighting_db, exponential_coefficient, weighting_db,
                                        weighting_sos)
from fieldtl.errors import InputError

# IEC 61672-1:2013 weighting table at the nominal frequencies 31.5, 50, 63, 100, 125, 160, 250, 500,
# 1000, 2000, 2500, 4000, 5000, 8000, 10000 Hz (checked against python-acoustics
# iec_61672_1_2013.csv and pyfar constants/frequency_weighting.py). x is the base-ten band
# number: exact f = 1000 * 10^(x/10).
TABLE_X = (-15, -13, -12, -10, -9, -8, -6, -3, 0, 3, 4, 6, 7, 9, 10)
TABLE_A_DB = (-39.4, -30.2, -26.2, -19.1, -16.1, -13.4, -8.6, -3.2, 0.0, 1.2, 1.3, 1.0, 0.5, -1.1, -2.5)
TABLE_C_DB = (-3.0, -1.3, -0.8, -0.3, -0.2, -0.1, 0.0, 0.0, 0.0, -0.2, -0.3, -0.8, -1.3, -3.0, -4.4)
EXACT_HZ = np.array([1000.0 * 10 ** (x / 10) for x in TABLE_X])
TABLES = {"A": TABLE_A_DB, "C": TABLE_C_DB}
SAMPLE_RATES_HZ = (44_100.0, 48_000.0, 96_000.0)


def round_half_up(value_db: float) -> float:
    # the IEC 61672-1:2013 table is rounded to 0.1 dB; half-up reproduces it (computed)
    return math.floor(value_db * 10 + 0.5) / 10


@pytest.mark.parametrize("weighting", ["A", "C"])
def test_analytic_curve_reproduces_the_iec_table(weighting):
    # IEC 61672-1:2013 Annex E formulas (checked against python-acoustics and pyfar): the rounded
    # poles 20.60, 107.7, 737.9, 12194 Hz at the exact base-ten frequencies reproduce every entry
    computed = [round_half_up(v) for v in weighting_db(weighting, EXACT_HZ)]
    assert computed == pytest.approx(TABLES[weighting], abs=1e-9)


def test_curves_are_zero_at_1_khz():
    # IEC 61672-1: both weightings are 0.0 dB at the 1 kHz reference (A1000 / C1000 normalise them;
    # the Annex E formula gives A(1000 Hz) = +0.0001 dB with these constants, computed)
    assert a_weighting_db(1000.0) == pytest.approx(0.0, abs=2e-4)
    assert c_weighting_db(1000.0) == pytest.approx(0.0, abs=2e-4)


@pytest.mark.parametrize("sample_rate_hz", SAMPLE_RATES_HZ)
@pytest.mark.parametrize("weighting", ["A", "C"])
def test_digital_filter_matches_the_table(weighting, sample_rate_hz):
    # IEC 61672-1:2013 table to its own rounding (0.05 dB) plus 0.01 dB for the digital design
    _, response = signal.sosfreqz(weighting_sos(weighting, sample_rate_hz=sample_rate_hz), worN=EXACT_HZ,
                                  fs=sample_rate_hz)
    assert 20 * np.log10(np.abs(response)) == pytest.approx(TABLES[weighting], abs=0.06)


@pytest.mark.parametrize("sample_rate_hz", [*SAMPLE_RATES_HZ, 32_000.0])   # 32 kHz: fitted in the process
@pytest.mark.parametrize("weighting", ["A", "C"])
def test_digital_filter_follows_the_analytic_curve_to_20_khz(weighting, sample_rate_hz):
    # IEC 61672-1 Annex E curve: the digital filter must not drift near the Nyquist frequency, where
    # a plain bilinear transform loses 1.2 dB at 10 kHz (48 kHz sampling, computed)
    frequency_hz = np.geomspace(10.0, min(20_000.0, 0.45 * sample_rate_hz), 2000)
    _, response = signal.sosfreqz(weighting_sos(weighting, sample_rate_hz=sample_rate_hz), worN=frequency_hz,
                                  fs=sample_rate_hz)
    error_db = 20 * np.log10(np.abs(response)) - weighting_db(weighting, frequency_hz)
    assert np.max(np.abs(error_db)) < 0.01


def test_weighting_filter_is_designed_once_per_rate_and_shared_read_only():
    # issue 10 item 3: the least-squares fit runs once per weighting and rate in a process
    a_48k = weighting_sos("A", sample_rate_hz=48_000.0)
    assert weighting_sos("A", sample_rate_hz=48_000) is a_48k
    assert weighting_sos("A", sample_rate_hz=44_100.0) is not a_48k
    assert weighting_sos("C", sample_rate_hz=48_000.0) is not a_48k
    with pytest.raises(ValueError, match="read-only"):
        a_48k[0, 0] = 1.0


def test_unknown_weighting_and_low_rate_are_refused():
    with pytest.raises(InputError, match="'Z'"):
        weighting_sos("Z", sample_rate_hz=48_000.0)  # type: ignore[arg-type]
    with pytest.raises(InputError, match="8000 Hz"):
        weighting_sos("A", sample_rate_hz=4000.0)


def test_exponential_time_weighting_reaches_1_minus_1_over_e_after_one_time_constant():
    # analytic: a unit step of x² through y[n] = α y[n-1] + (1 - α) x²[n] gives 1 - α^(n+1);
    # after τ seconds that is 1 - e^-1 to within one sample (IEC 61672-1 exponential averaging)
    sample_rate_hz = 48_000.0
    alpha = exponential_coefficient(0.125, sample_rate_hz=sample_rate_hz)
    response = signal.lfilter([1 - alpha], [1, -alpha], np.ones(int(0.125 * sample_rate_hz)))
    assert response[-1] == pytest.approx(1 - math.exp(-1), abs=1e-4)


@pytest.mark.parametrize("sample_rate_hz", SAMPLE_RATES_HZ)
@pytest.mark.parametrize("weighting", ["A", "C"])
def test_kept_designs_are_what_a_fresh_fit_gives(weighting, sample_rate_hz):
    # the filters kept for the common rates (fieldtl.analysis.weighting_designs) are the fit's own
    # result: a fresh fit responds within 0.001 dB of them from 10 Hz to 0.45 fs
    from fieldtl.analysis.weighting import fitted_sos

    frequency_hz = np.geomspace(10.0, 0.45 * sample_rate_hz, 500)
    kept = signal.sosfreqz(weighting_sos(weighting, sample_rate_hz=sample_rate_hz), worN=frequency_hz,
                           fs=sample_rate_hz)[1]
    fresh = signal.sosfreqz(fitted_sos(weighting, sample_rate_hz), worN=frequency_hz, fs=sample_rate_hz)[1]
    assert np.max(np.abs(20 * np.log10(np.abs(kept) / np.abs(fresh)))) < 0.001
