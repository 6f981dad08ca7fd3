"""roundscore.stats.distributions against scipy.stats (the reference library), bit for bit.

Each function must return the very float scipy.stats returns for the same arguments: the plain cases (taken
through the special function directly) on a seeded grid of probabilities, points and degrees of freedom as
the screens and comparisons use them, and the edge cases (passed on to scipy.stats).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats as sps

from roundscore.stats import distributions as d


def _same(a: float, b) -> bool:
    return np.float64(a).tobytes() == np.float64(b).tobytes()


def _grid(seed: int = 20271203, n: int = 400):
    rng = np.random.default_rng(seed)
    for _ in range(n):
        q = float(rng.choice([rng.random(), 10 ** -rng.uniform(1, 12), 0.5, 0.025, 0.005]))
        x = float(rng.choice([rng.uniform(-10, 10), 10 ** rng.uniform(-8, 3)]))
        yield q, x, int(rng.integers(1, 5000)), int(rng.integers(1, 50000)), float(rng.uniform(0.5, 3000))


def test_t_functions_equal_scipy():
    for q, x, df, _, dff in _grid():
        for nu in (df, dff):
            assert _same(d.t_isf(q, nu), sps.t.isf(q, nu)), (q, nu)
            assert _same(d.t_sf(x, nu), sps.t.sf(x, nu)), (x, nu)


def test_f_functions_equal_scipy():
    for q, x, m, n, mf in _grid():
        for dfn in (m, mf):
            assert _same(d.f_isf(q, dfn, n), sps.f.isf(q, dfn, n)), (q, dfn, n)
            assert _same(d.f_ppf(q, dfn, n), sps.f.ppf(q, dfn, n)), (q, dfn, n)
            assert _same(d.f_sf(abs(x), dfn, n), sps.f.sf(abs(x), dfn, n)), (x, dfn, n)
            assert _same(d.f_cdf(abs(x), dfn, n), sps.f.cdf(abs(x), dfn, n)), (x, dfn, n)


def test_chi2_and_normal_equal_scipy():
    for q, x, df, _, dff in _grid():
        assert _same(d.norm_ppf(q), sps.norm.ppf(q)), q
        assert _same(d.norm_ppf(1 - q), sps.norm.ppf(1 - q)), q
        for nu in (df, dff):
            assert _same(d.chi2_ppf(q, nu), sps.chi2.ppf(q, nu)), (q, nu)
            assert _same(d.chi2_cdf(abs(x), nu), sps.chi2.cdf(abs(x), nu)), (x, nu)


@pytest.mark.parametrize("q", [0.0, 1.0, -0.1, 1.5, math.nan])
@pytest.mark.parametrize("df", [3, 0, -1, math.inf, math.nan])
def test_edges_are_scipys(q, df):
    assert _same(d.t_isf(q, df), sps.t.isf(q, df))
    assert _same(d.f_isf(q, df, 7), sps.f.isf(q, df, 7))
    assert _same(d.f_ppf(q, 7, df), sps.f.ppf(q, 7, df))
    assert _same(d.chi2_ppf(q, df), sps.chi2.ppf(q, df))
    assert _same(d.norm_ppf(q), sps.norm.ppf(q))


@pytest.mark.parametrize("x", [0.0, -1.0, math.inf, -math.inf, math.nan])
def test_edge_points_are_scipys(x):
    assert _same(d.t_sf(x, 4), sps.t.sf(x, 4))
    assert _same(d.f_sf(x, 3, 9), sps.f.sf(x, 3, 9))
    assert _same(d.f_cdf(x, 3, 9), sps.f.cdf(x, 3, 9))
    assert _same(d.chi2_cdf(x, 2), sps.chi2.cdf(x, 2))


def test_a_median_quantile_is_plus_zero():
    # scipy shifts a quantile by 0, which turns −0 into +0: t.isf(0.5) is 0.0, not −0.0
    assert math.copysign(1.0, d.t_isf(0.5, 5)) == math.copysign(1.0, float(sps.t.isf(0.5, 5))) == 1.0
