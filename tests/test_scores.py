"""Scores and signals (roundscore.stats.scores) against ISO 13528 definitions and scipy."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from roundscore.stats.scores import (
    difference, en_score, percent_difference, possible_unit_slip, signal, z_prime_score, z_score, zeta_score,
)


def test_score_formulas_by_hand():
    # ISO 13528 §9.4–9.7 definitions, evaluated by hand: x = 12, x_pt = 10, σ_pt = 1, u(x_pt) = 0.75,
    # u(x) = 1, U(x) = 2, U(x_pt) = 1.5.
    assert z_score(12, 10, 1) == 2.0
    assert z_prime_score(12, 10, 1, 0.75) == pytest.approx(2 / 1.25)
    assert zeta_score(12, 10, 1, 0.75) == pytest.approx(2 / 1.25)
    assert en_score(12, 10, 2, 1.5) == pytest.approx(2 / 2.5)
    assert difference(12, 10) == 2.0
    assert percent_difference(12, 10) == pytest.approx(20.0)
    assert np.isnan(percent_difference(1.0, 0.0))


@pytest.mark.parametrize("z, expected", [
    # ISO 13528 §9.4.1: |z| ≤ 2 acceptable, 2 < |z| < 3 warning signal, |z| ≥ 3 action signal.
    (0.0, "acceptable"), (2.0, "acceptable"), (-2.0, "acceptable"), (2.0001, "warning"), (-2.9999, "warning"),
    (3.0, "action"), (-3.0, "action"), (float("nan"), "not-scored"),
])
def test_z_signals(z, expected):
    assert signal(np.array([z]))[0] == expected


@pytest.mark.parametrize("en, expected", [
    # ISO 13528 §9.7.3: |En| ≤ 1 acceptable, > 1 action signal (no warning band).
    (1.0, "acceptable"), (-0.5, "acceptable"), (1.0001, "action"), (-2.5, "action"), (np.nan, "not-scored"),
])
def test_en_signals(en, expected):
    assert signal(np.array([en]), "en")[0] == expected


def test_unit_slip_detection():
    # Common practice: results off by a power of ten near 10^±1 or 10^±3 suggest a unit or decimal slip.
    x = np.array([1000.0, 10.5, 0.001, 0.1, 2.0, -1000.0])
    assert possible_unit_slip(x, 1.0).tolist() == [True, True, True, True, False, False]


def test_student_t_critical_value():
    # Common practice (any t table): two-sided 95 % critical value for 5 degrees of freedom is 2.571.
    assert stats.t.ppf(0.975, 5) == pytest.approx(2.571, abs=5e-4)
