"""Agreement with acoustic-toolbox 0.2.2 (`acoustic_toolbox.building`, test-only oracle) on random spectra.

Known faults of the oracle (found by running acoustic-toolbox 0.2.2 against the rules of ISO 717-1
and ASTM E413) are handled explicitly and counted, never hidden:

* its Rw loop stops at the first position whose sum of unfavourable deviations is >= 32 dB and
  steps back, so a sum of exactly 32.0 dB (allowed by ISO 717-1 4.4) rates 1 dB low;
* its STC ignores the E413 8 dB single-deficiency rule;
* `rw_c` / `rw_ctr` return X_A = Rw + C (unrounded), not C, so C = round(X_A - Rw) is formed here;
* it does not round band values to 0.1 dB, and sums floats: on a 0.1 dB grid a sum that is
  exactly 32.0 may come out as 31.999... or 32.000...1 in its arithmetic.

Spectra are drawn with a seeded numpy generator: a rising trend with random steps, the shape of
real insulation curves, so that the Rw and STC scans of the oracle start below the answer (they
begin at 20 dB and 17 dB at 500 Hz). The counts asserted below belong to these seeds; should a
numpy release change its random stream, re-derive them (every case is still checked one by one).
"""

from __future__ import annotations

import numpy as np
import pytest

from conftest import import_reference  # noqa: E402  (skips locally, fails under CI=true)

acoustic_toolbox_building = import_reference("acoustic_toolbox.building")

from fieldtl.bands import THIRD_OCTAVES_100_3150_HZ, BandSpectrum, nominal_bands_hz  # noqa: E402
from fieldtl.rating import rate_e413, rate_iso717_1  # noqa: E402
from fieldtl.rating.iso717 import round_half_up  # noqa: E402

N_SPECTRA = 1000
E413_CONTOUR = np.array([-16, -13, -10, -7, -4, -1, 0, 1, 2, 3, 4, 4, 4, 4, 4, 4], dtype=float)  # ASTM E413 contour re 500 Hz


def insulation_spectra(seed: int, *, grid_db: float) -> np.ndarray:
    """N_SPECTRA rising 16-band curves (25-100 dB) on a grid of ``grid_db``."""
    rng = np.random.default_rng(seed)
    start_db = rng.uniform(25.0, 45.0, size=(N_SPECTRA, 1))
    steps_db = rng.uniform(-2.0, 5.0, size=(N_SPECTRA, 16))
    steps_db[:, 0] = 0.0
    return np.round((start_db + np.cumsum(steps_db, axis=1)) / grid_db) * grid_db


def rate(levels_db: np.ndarray, bands_hz=THIRD_OCTAVES_100_3150_HZ, quantity="R'") -> BandSpectrum:
    return BandSpectrum(bands_hz, tuple(float(v) for v in levels_db), "dB", quantity)


def test_rw_agrees_except_at_exactly_32_db_on_an_exact_grid():
    # On a 0.5 dB grid every deviation and sum is exact in binary floating point, so the oracle's
    # boundary fault shows up exactly where our sum at the rating is 32.0 dB: there it rates 1 dB low.
    boundary = agree = 0
    for levels_db in insulation_spectra(7171, grid_db=0.5):
        ours = rate_iso717_1(rate(levels_db))
        oracle_db = int(acoustic_toolbox_building.rw(levels_db.copy()))
        if ours.deviation_sum_db == 32.0:
            boundary += 1
            assert oracle_db == ours.single_number_db - 1
        else:
            agree += 1
            assert oracle_db == ours.single_number_db
    # Seeded draw: 45 of the 1000 spectra sit exactly on the boundary, so the fault is exercised.
    assert (boundary, agree) == (45, 955)


def test_rw_and_c_ctr_agree_on_a_tenth_db_grid_away_from_the_boundary():
    # Field data come to 0.1 dB. Cases whose sum at the rating is exactly 32.0 dB are left out: the
    # oracle's float sum decides them by rounding noise (see module docstring). Everything else agrees.
    excluded = 0
    for levels_db in insulation_spectra(16283, grid_db=0.1):
        ours = rate_iso717_1(rate(levels_db))
        if ours.deviation_sum_db == 32.0:
            excluded += 1
            continue
        assert int(acoustic_toolbox_building.rw(levels_db.copy())) == ours.single_number_db
        # rw_c / rw_ctr return X_A (= Rw + C unrounded); C = round(X_A - Rw), half up (common practice;
        # the ISO rule for exact halves was not verified).
        c_db = round_half_up(acoustic_toolbox_building.rw_c(levels_db) - ours.single_number_db)
        ctr_db = round_half_up(acoustic_toolbox_building.rw_ctr(levels_db) - ours.single_number_db)
        assert ours.adaptation_terms_db == {"C": c_db, "Ctr": ctr_db}
    assert excluded == 5           # seeded draw: 5 of 1000 on the boundary, 995 compared


def test_stc_agrees_except_where_the_8_db_rule_binds():
    # The oracle raises the contour while the deficiency sum stays <= 32 dB and ignores the 8 dB rule.
    # Where our rating is lower than the oracle's, the oracle's contour must break the 8 dB rule
    # (ASTM E413) while meeting the sum rule, and ours must be the highest that meets both.
    bands_hz = nominal_bands_hz(125, 4000)
    eight_db_cases = 0
    for levels_db in insulation_spectra(413, grid_db=0.5):
        ours = rate_e413(rate(levels_db, bands_hz, "NR")).single_number_db
        oracle_db = int(acoustic_toolbox_building.stc(levels_db.copy()))
        if oracle_db == ours:
            continue
        eight_db_cases += 1
        oracle_deficiency = np.clip(E413_CONTOUR + oracle_db - levels_db, 0.0, None)
        assert oracle_db > ours
        assert oracle_deficiency.sum() <= 32.0 and oracle_deficiency.max() > 8.0
        assert np.clip(E413_CONTOUR + ours + 1 - levels_db, 0.0, None).max() > 8.0
    assert eight_db_cases == 34    # seeded draw: the 8 dB rule lowers 34 of 1000 ratings
