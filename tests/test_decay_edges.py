"""Reverberation-time quality thresholds tested at their edges, one case just inside and one just outside.

Every decay curve here is built analytically (straight lines, broken lines, a line plus a
perturbation of known size), so the expected T, ξ and curvature come from the construction of the
curve and a least-squares line written in this file, never from fieldtl's own output.

Sources of the thresholds (ISO 3382-2:2008; clause numbers not verified, values from memory unless
stated otherwise):
* evaluation ranges EDT 0 to -10 dB, T20 -5 to -25 dB, T30 -5 to -35 dB: ISO 3382-1/-2 definitions,
  the same limits as pyrato's ``reverberation_time_linear_regression`` (pyrato 1.1, parameters.py);
* bottom of the evaluation range at least 10 dB above the background noise (so EDT needs 20 dB,
  T20 35 dB, T30 45 dB of decay above the noise): ISO 3382-2, from memory;
* non-linearity ξ = 1000 (1 - r²) above 10 ‰ and curvature C = 100 (T30/T20 - 1) above 10 % are
  suspicious: ISO 3382-2 Annex B, from memory;
* B·T > 16 for forward-filtered decays, > 4 with time-reversed filtering: ISO 3382-2, from memory
  (the time-reversed relaxation is due to Jacobsen and Rindel, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from fieldtl.analysis.decay import DecayCurve, evaluate_curve

STEP_S = 0.001


def _curve(level_db, *, range_db=100.0, kind="integrated_impulse_response", nominal_hz=1000.0, step_s=STEP_S):
    return DecayCurve(nominal_hz, 3, step_s, tuple(float(v) for v in level_db), range_db, kind, 1.0)


def _line(reverberation_s, *, down_to_db=-80.0, step_s=STEP_S):
    """An ideal exponential decay: -60 dB per T, sampled every step_s."""
    count = int(math.ceil(-down_to_db / 60.0 * reverberation_s / step_s)) + 1
    return -60.0 * np.arange(count) * step_s / reverberation_s


def _codes(band):
    return [f.code for f in band.findings]


def _least_squares_t(level_db, top_db, bottom_db, step_s=STEP_S):
    """T = -60 / slope of the least-squares line from the first point at or below top_db to the first
    at or below bottom_db (both included), the closed-form slope written out here."""
    level_db = np.asarray(level_db)
    first = int(np.flatnonzero(level_db <= top_db)[0])
    last = first + int(np.flatnonzero(level_db[first:] <= bottom_db)[0])
    t = np.arange(first, last + 1) * step_s
    y = level_db[first:last + 1]
    slope = np.sum((t - t.mean()) * (y - y.mean())) / np.sum((t - t.mean()) ** 2)
    return -60.0 / slope


# --- range above the noise: ISO 3382-2 (from memory), bottom of the range >= 10 dB above the noise ----------

@pytest.mark.parametrize(("parameter", "needed_db"), [("EDT", 20.0), ("T20", 35.0), ("T30", 45.0)])
def test_dynamic_range_needed_for_each_parameter(parameter, needed_db):
    level_db = _line(0.6)
    inside = evaluate_curve(_curve(level_db, range_db=needed_db))
    outside = evaluate_curve(_curve(level_db, range_db=needed_db - 0.01))
    assert inside.line(parameter) is not None
    assert inside.line(parameter).reverberation_time_s == pytest.approx(0.6, rel=1e-9)
    assert outside.line(parameter) is None
    messages = [f.message for f in outside.findings if f.code == "decay_range_short"]
    assert len(messages) == 1 and parameter in messages[0].split(" not evaluated")[0]
    if parameter == "T30":       # 45 dB: every parameter evaluated, no range finding at all
        assert "decay_range_short" not in _codes(inside)


# --- evaluation ranges: ISO 3382-1/-2 (EDT 0..-10, T20 -5..-25, T30 -5..-35 dB) -----------------------------

def _broken_line(top_db, bottom_db):
    """Three straight pieces with different slopes: 0 dB to top_db (0.2 dB/ms), top_db to bottom_db
    (0.1 dB/ms, T = 0.6 s), then on (0.02 dB/ms) to -80 dB. Every break lies on a sample."""
    pieces = [np.array([0.0])]
    if top_db < 0.0:
        pieces.append(np.linspace(0.0, top_db, round(-top_db / 0.2) + 1)[1:])
    pieces.append(np.linspace(top_db, bottom_db, round((top_db - bottom_db) / 0.1) + 1)[1:])
    pieces.append(np.linspace(bottom_db, -80.0, round((bottom_db + 80.0) / 0.02) + 1)[1:])
    return np.concatenate(pieces)


@pytest.mark.parametrize(("parameter", "top_db", "bottom_db"), [
    ("EDT", 0.0, -10.0), ("T20", -5.0, -25.0), ("T30", -5.0, -35.0)])
def test_each_parameter_fits_exactly_its_own_range(parameter, top_db, bottom_db):
    # Middle piece exactly over the standard's range: T is that piece's 0.6 s and the line starts
    # and stops exactly at the range's ends (both included).
    exact = evaluate_curve(_curve(_broken_line(top_db, bottom_db))).line(parameter)
    assert exact.reverberation_time_s == pytest.approx(0.6, rel=1e-9)
    assert (exact.top_db, exact.bottom_db) == (top_db, bottom_db)
    # Middle piece 0.5 dB wider at each end: the range lies inside it, T stays 0.6 s.
    wider = evaluate_curve(_curve(_broken_line(min(top_db + 0.5, 0.0), bottom_db - 0.5))).line(parameter)
    assert wider.reverberation_time_s == pytest.approx(0.6, rel=1e-9)
    # Middle piece 0.5 dB narrower at each end: the range now takes in points of the other
    # slopes, so T moves away from 0.6 s (by the amount the same fit written here predicts).
    # (EDT: nothing lies above 0 dB, so only its bottom moves.)
    narrow_level = _broken_line(min(top_db - 0.5, 0.0) if top_db < 0.0 else 0.0, bottom_db + 0.5)
    narrow = evaluate_curve(_curve(narrow_level)).line(parameter)
    assert abs(narrow.reverberation_time_s - 0.6) > 0.001
    assert narrow.reverberation_time_s == pytest.approx(_least_squares_t(narrow_level, top_db, bottom_db), rel=1e-9)


# --- non-linearity ξ: ISO 3382-2 Annex B (from memory), ξ > 10 ‰ is suspicious ------------------------------

# Zero-mean pattern orthogonal to both a constant and a linear ramp over every block of 8 points
# (Σ g = 0 and Σ i g = 1 - 2 - 5 + 6 = 0), zero at both ends of a block.
_PATTERN = np.array([0.0, 1.0, -1.0, 0.0, 0.0, -1.0, 1.0, 0.0])


def _wavy_t20_curve(xi_permille):
    """A T20 range (-5 to -25 dB, 40 points) holding a straight line plus eps·g, g orthogonal to the
    line, so that 1 - r² = eps² Σg² / (a² Σ(t - t̄)² + eps² Σg²) = ξ/1000 exactly (analytic)."""
    count = 40
    line = np.linspace(-5.0, -25.0, count)
    g = np.tile(_PATTERN, count // 8)
    sum_tt = np.sum((line - line.mean()) ** 2)          # a² Σ(t - t̄)², in dB²
    fraction = xi_permille / 1000.0
    eps = math.sqrt(fraction * sum_tt / (np.sum(g ** 2) * (1.0 - fraction)))
    step_db = 20.0 / (count - 1)
    before = np.arange(0.0, -5.0, -step_db)             # clean line from 0 dB, stays above -5 dB
    after = -25.0 - step_db * np.arange(1, 500)         # clean line below -25 dB
    return np.concatenate([before, line + eps * g, after]), eps, step_db


@pytest.mark.parametrize(("xi_permille", "fires"), [(9.9, False), (10.1, True)])
def test_nonlinearity_limit(xi_permille, fires):
    level_db, eps, step_db = _wavy_t20_curve(xi_permille)
    # The perturbation must not move the range's ends: the point before the last is still above -25 dB.
    assert 2 * step_db > eps
    band = evaluate_curve(_curve(level_db, range_db=40.0, kind="interrupted_noise"))
    assert band.t20.nonlinearity_permille == pytest.approx(xi_permille, rel=1e-6)
    assert ("decay_nonlinear" in _codes(band)) is fires


# --- curvature C: ISO 3382-2 Annex B (from memory), C = 100 (T30/T20 - 1) > 10 % is suspicious --------------

def _double_slope(late_slope_db_per_step):
    """0.125 dB per 1 ms down to -25 dB (T20 = 0.48 s exactly, -25 dB on a sample), then steeper or
    shallower down to -80 dB."""
    early = -0.125 * np.arange(201)                     # exact in binary: -25.0 at index 200
    late = -25.0 - late_slope_db_per_step * np.arange(1, int(55.0 / late_slope_db_per_step) + 2)
    return np.concatenate([early, late])


def _curvature_percent(late_slope):
    level_db = _double_slope(late_slope)
    return 100.0 * (_least_squares_t(level_db, -5.0, -35.0) / _least_squares_t(level_db, -5.0, -25.0) - 1.0)


@pytest.mark.parametrize(("curvature_percent", "fires"), [(9.9, False), (10.1, True)])
def test_curvature_limit(curvature_percent, fires):
    late_slope = brentq(lambda s: _curvature_percent(s) - curvature_percent, 0.01, 0.125, xtol=1e-14)
    band = evaluate_curve(_curve(_double_slope(late_slope)))
    assert band.t20_s == pytest.approx(0.48, rel=1e-9)
    assert band.curvature_percent == pytest.approx(curvature_percent, abs=1e-6)
    assert ("decay_curved" in _codes(band)) is fires


# --- B·T: ISO 3382-2 (from memory), > 4 time-reversed (integrated impulse response), > 16 forward -------------

def _bandwidth_hz(nominal_hz):
    # IEC 61260-1:2014 base-ten one-third octaves: exact mid-band 1000·10^(x/10) Hz, edges at
    # mid·10^(±1/20). 100 Hz nominal is x = -10, exactly 100 Hz: B = 100 (10^0.05 - 10^-0.05) = 23.08 Hz.
    x = round(10 * math.log10(nominal_hz / 1000.0))
    mid_hz = 1000.0 * 10 ** (x / 10)
    return mid_hz * (10 ** 0.05 - 10 ** -0.05)


@pytest.mark.parametrize(("kind", "limit"), [("integrated_impulse_response", 4.0), ("interrupted_noise", 16.0)])
@pytest.mark.parametrize(("factor", "fires"), [(1.002, False), (0.998, True)])
def test_bandwidth_times_reverberation_time(kind, limit, factor, fires):
    assert _bandwidth_hz(100.0) == pytest.approx(23.077, abs=0.001)
    reverberation_s = factor * limit / _bandwidth_hz(100.0)
    band = evaluate_curve(_curve(_line(reverberation_s, step_s=0.0002), kind=kind, nominal_hz=100.0, step_s=0.0002))
    assert band.bt_limit == limit
    assert band.bt_product == pytest.approx(factor * limit, rel=1e-6)
    assert ("bt_too_small" in _codes(band)) is fires


def test_least_squares_line_matches_an_exact_line_and_scipy_linregress():
    from scipy.stats import linregress

    from fieldtl.analysis.lundeby import least_squares_line

    time_s = np.arange(200) * STEP_S
    slope, intercept, r = least_squares_line(time_s, -5.0 - 120.0 * time_s)    # T = 60/120 = 0.5 s exactly
    assert (slope, intercept, r) == pytest.approx((-120.0, -5.0, -1.0), abs=1e-9)
    level_db = -5.0 - 120.0 * time_s + np.random.default_rng(3).normal(0.0, 0.5, time_s.size)
    reference = linregress(time_s, level_db)
    assert least_squares_line(time_s, level_db) == pytest.approx(
        (reference.slope, reference.intercept, reference.rvalue), rel=1e-9)
    assert math.isnan(least_squares_line(time_s, np.full(time_s.size, -5.0))[2])   # flat: r undefined
