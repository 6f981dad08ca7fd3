"""The Q method and the Hampel estimator (roundscore.stats.hampel) against outside references.

References used here: a plain-loop implementation of ISO 13528:2015 C.5.2 and C.5.3 written in this file
from the published definitions (as recalled: from memory), every pair of results formed; statsmodels'
Hampel norm (statsmodels.robust.norms.Hampel with a = 1.5, b = 3, c = 4.5, the same ψ) with scipy's brentq
for the location equation; the normal distribution's quartile for the consistency of the Q method.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.optimize import brentq
from scipy.stats import norm
from statsmodels.robust.norms import Hampel

from roundscore.errors import StatisticsError
from roundscore.stats.hampel import hampel, hampel_psi, q_hampel, q_method


def plain_q(results: list[list[float]]) -> tuple[float, float]:
    """s* and H1(0) of the Q method, straight from the definition: every pair of results of two labs.

    The results are taken as the decimals they print as (``repr``) and subtracted exactly (Fraction), so
    tied differences are tied as the definition means, not split by a rounding.
    """
    p = len(results)
    pairs: dict = {}  # |difference| (exact) -> summed weight
    for i in range(p):
        for j in range(i + 1, p):
            for a in results[i]:
                for b in results[j]:
                    d = abs(Fraction(repr(float(a))) - Fraction(repr(float(b))))
                    pairs[d] = pairs.get(d, 0.0) + 1.0 / (len(results[i]) * len(results[j]))
    total = p * (p - 1) / 2
    xs = sorted(pairs)
    H = []
    acc = 0.0
    for x in xs:
        acc += pairs[x] / total
        H.append(acc)
    h0 = pairs.get(0, 0.0) / total
    # G1 at the jump points: (0, 0), then ½(H1(x_i) + H1(x_{i-1})) (H1 below the first positive jump is H1(0)).
    nodes, g = [0.0], [0.0]
    prev = h0
    for x, h in zip(xs, H):
        if x == 0:
            continue
        nodes.append(float(x))
        g.append(0.5 * (h + prev))
        prev = h
    target = 0.25 + 0.75 * h0
    for k in range(1, len(g)):
        if g[k - 1] <= target < g[k]:
            q = nodes[k - 1] + (target - g[k - 1]) * (nodes[k] - nodes[k - 1]) / (g[k] - g[k - 1])
            return q / (np.sqrt(2) * norm.ppf(0.625 + 0.375 * h0)), h0
    raise AssertionError("no segment holds the target")


def statsmodels_hampel(means: np.ndarray, s: float) -> float:
    """x* from statsmodels' Hampel ψ: every sign change on a fine grid refined by brentq; nearest the median."""
    psi = Hampel(a=1.5, b=3.0, c=4.5).psi
    total = lambda x: float(np.sum(psi((means - x) / s)))  # noqa: E731
    grid = np.linspace(means.min() - 5 * s, means.max() + 5 * s, 4001)
    vals = psi((means[None, :] - grid[:, None]) / s).sum(axis=1)
    roots = [brentq(total, grid[i], grid[i + 1], xtol=1e-14)
             for i in range(len(grid) - 1) if vals[i] > 0 and vals[i + 1] <= 0]
    med = np.median(means)
    return min(roots, key=lambda r: abs(r - med)) if roots else med


def _flat(results):
    values = np.array([v for r in results for v in r])
    labs = np.array([i for i, r in enumerate(results) for _ in r])
    return values, labs


def test_psi_coincides_with_statsmodels_hampel():
    q = np.linspace(-6, 6, 1201)
    assert np.allclose(hampel_psi(q), Hampel(a=1.5, b=3.0, c=4.5).psi(q), atol=1e-15)


@pytest.mark.parametrize("seed", range(6))
def test_q_method_equals_plain_loop(seed):
    rng = np.random.default_rng(seed)
    p = int(rng.integers(3, 25))
    results = [list(rng.normal(20, 1.5, int(rng.integers(1, 4)))) for _ in range(p)]  # unequal replicates
    results[0] = [35.0]  # an outlier
    s, h0 = q_method(*_flat(results))
    s_ref, h0_ref = plain_q(results)
    assert h0 == pytest.approx(h0_ref, abs=1e-14)
    assert s == pytest.approx(s_ref, rel=1e-10)


@pytest.mark.parametrize("seed", range(4))
def test_q_method_with_ties_equals_plain_loop(seed):
    # Results on a coarse grid (rounded to 0.1 or to 1): many tied differences and identical results.
    rng = np.random.default_rng(100 + seed)
    step = [0.5, 1.0, 0.25, 2.0][seed]
    results = [list(np.round(rng.normal(10, 1.2, 2) / step) * step) for _ in range(int(rng.integers(4, 30)))]
    s, h0 = q_method(*_flat(results))
    s_ref, h0_ref = plain_q(results)
    assert h0 == pytest.approx(h0_ref, abs=1e-12) and h0 > 0
    assert s == pytest.approx(s_ref, rel=1e-10)


def test_q_method_large_round_equals_plain_count_band():
    # Enough results that the bisection (not the first listing) finds the band: checked against the plain loop.
    rng = np.random.default_rng(5)
    results = [list(rng.normal(0, 1, 2)) for _ in range(60)]
    s, _ = q_method(*_flat(results))
    assert s == pytest.approx(plain_q(results)[0], rel=1e-10)


def test_q_method_is_consistent_for_normal_data():
    # For normal results s* estimates σ (the definition's constant √2·Φ⁻¹(0.625)); 4000 labs, σ = 2.
    rng = np.random.default_rng(11)
    s, _ = q_method(rng.normal(5, 2, 4000), np.arange(4000))
    assert s == pytest.approx(2.0, rel=0.04)


def test_q_method_all_identical_and_too_few():
    assert q_method(np.array([3.0, 3.0, 3.0]), np.arange(3)) == (0.0, 1.0)
    with pytest.raises(StatisticsError, match="at least 2 labs"):
        q_method(np.array([1.0, 2.0]), np.array([0, 0]))
    est = q_hampel(np.array([4.0, 4.0, 4.0, 4.0]), np.arange(4))
    assert est.sd == 0 and "s* is zero" in est.note


@pytest.mark.parametrize("seed", range(5))
def test_hampel_equals_statsmodels_norm(seed):
    rng = np.random.default_rng(seed)
    means = np.concatenate([rng.normal(7, 0.5, int(rng.integers(5, 30))), [9.5, 4.0]])
    s = 0.5
    x, sol = hampel(means[None, :], s)
    assert sol[0] >= 1
    assert x[0] == pytest.approx(statsmodels_hampel(means, s), abs=1e-10)
    assert abs(float(np.sum(hampel_psi((means - x[0]) / s)))) < 1e-9  # x* solves the equation


def test_hampel_vectorised_rows_equal_one_at_a_time():
    rng = np.random.default_rng(3)
    y = rng.normal(0, 1, (12, 20))
    y[2, :8] = np.nan
    y[4, 0] = 9.0
    sd = rng.uniform(0.5, 1.5, 12)
    many, _ = hampel(y, sd)
    for i in range(12):
        row = y[i][~np.isnan(y[i])]
        one, _ = hampel(row[None, :], sd[i])
        assert many[i] == pytest.approx(one[0], abs=1e-12)
        assert many[i] == pytest.approx(statsmodels_hampel(row, sd[i]), abs=1e-10)


def test_far_outliers_have_no_influence():
    # ψ is zero beyond 4.5 s*: a result that far away does not move x* at all (redescending).
    base = np.array([10.0, 10.2, 9.9, 10.1, 10.05, 9.95, 10.15])
    x0, _ = hampel(base[None, :], 0.1)
    x1, _ = hampel(np.append(base, 13.0)[None, :], 0.1)
    assert x1[0] == pytest.approx(x0[0], abs=1e-12)


def test_replicates_enter_q_but_not_the_location():
    # The Q method uses each result; Hampel's x* uses the lab means (two labs' replicates swapped: same x*).
    a = [[10.0, 10.4], [9.8, 10.0], [10.3, 10.1], [9.9, 10.5], [10.2, 10.2]]
    b = [[10.0, 10.4], [9.6, 10.2], [10.3, 10.1], [9.9, 10.5], [10.2, 10.2]]
    ea, eb = q_hampel(*_flat(a)), q_hampel(*_flat(b))
    assert ea.sd != eb.sd
    assert ea.sd == pytest.approx(plain_q(a)[0], rel=1e-10)
    means = np.array([np.mean(r) for r in a])
    assert ea.mean == pytest.approx(statsmodels_hampel(means, ea.sd), abs=1e-10)
    assert ea.n == 5 and ea.n_results == 10
    assert ea.u_mean == pytest.approx(1.25 * ea.sd / np.sqrt(5))


# Results as typed: decimals with one decimal place (ties included); a tie is a tie at any shift and scale.
decimals = st.lists(st.integers(-2000, 2000), min_size=4, max_size=25).map(lambda v: [i / 10 for i in v])


@settings(max_examples=30, deadline=None)
@given(decimals, st.floats(-1e4, 1e4), st.floats(0.01, 100))
def test_location_and_scale_equivariance(values, shift, scale):
    x = np.array(values)
    if np.ptp(x) == 0:
        return
    base = q_hampel(x, np.arange(x.size))
    moved = q_hampel(scale * x + shift, np.arange(x.size))
    assert moved.sd == pytest.approx(scale * base.sd, rel=1e-7, abs=1e-9 * scale * np.ptp(x))
    assert moved.mean == pytest.approx(scale * base.mean + shift, abs=1e-7 * scale * (base.sd + np.ptp(x)) + 1e-9)


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 2 ** 31), st.integers(1, 7), st.floats(10, 1e6))
def test_bounded_breakdown(seed, k, far):
    # 20 good labs (N(0, 1)); up to 7 (below a quarter of the labs) replaced by results anywhere: s* and x*
    # stay within a bound set by the good data, however far the bad ones are (the Q method's breakdown
    # point is 25 % for large p, from memory after Müller and Uhlig 2001).
    rng = np.random.default_rng(seed)
    good = rng.normal(0, 1, 20)
    bad = good.copy()
    bad[:k] = far * rng.choice([-1, 1], k) * rng.uniform(1, 2, k)
    est = q_hampel(bad, np.arange(20))
    assert est.sd < 12
    assert abs(est.mean) < 4


# The bracket around the quantile (a fixed sample's guess, secant steps checked by H1, bisection when they
# stall) and the band listed at the end, against the plain loop over all pairs (plain_q above).

def _q_cases():
    rng = np.random.default_rng(2024)
    cases = {}
    # Decimals with one place: tied differences computed as several nearby floats (0.3 as 0.2999…98 and
    # 0.3000…07), one jump of H1 each; equal and unequal replicate counts.
    cases["decimals, 2 replicates"] = [list(np.round(rng.normal(10, 1, 2), 1)) for _ in range(70)]
    cases["decimals, 1-3 replicates"] = [list(np.round(rng.normal(10, 1, int(rng.integers(1, 4))), 1))
                                         for _ in range(60)]
    cases["two decimals, 3 replicates"] = [list(np.round(rng.normal(5, 0.2, 3), 2)) for _ in range(40)]
    # Most results equal: a few labs off the common value (H1(0) large, the quantile on one tie group).
    cases["many equal"] = [[3.0, 3.0] if i % 7 else [3.5, 3.0] for i in range(50)]
    # Two clusters far apart: the differences' distribution has two humps.
    cases["two clusters"] = [list(rng.normal(0 if i % 2 else 40, 1, 2)) for i in range(60)]
    cases["p = 3"] = [[10.1, 10.4], [9.7], [10.0, 10.2, 10.3]]
    cases["unequal replicates with an outlier"] = ([list(rng.normal(20, 1, int(rng.integers(1, 5)))) for _ in range(80)]
                                                   + [[95.0, 96.0]])
    return cases


@pytest.mark.parametrize("name", list(_q_cases()))
def test_q_method_bracket_equals_plain_loop(name):
    results = _q_cases()[name]
    s, h0 = q_method(*_flat(results))
    s_ref, h0_ref = plain_q(results)
    assert h0 == pytest.approx(h0_ref, abs=1e-12)
    assert s == pytest.approx(s_ref, rel=1e-10)


@pytest.mark.parametrize("guess", ["nan", "far below", "far above", "flat"])
def test_q_method_without_a_useful_guess_equals_plain_loop(monkeypatch, guess):
    # The sample's guess is only a start: with no guess, or a wrong one, the search falls back to bisection
    # (and the secant on H1 itself) and still ends on the exact G1⁻¹.
    from roundscore.stats import hampel as module

    bad = {"nan": (np.nan, np.nan, np.nan), "far below": (1e-9, 1e-12, 1e-6), "far above": (1e3, 10.0, 0.5),
           "flat": (0.5, 0.0, 0.1)}[guess]
    monkeypatch.setattr(module, "_sample_guess", lambda pairs, target: bad)
    for results in (_q_cases()["decimals, 1-3 replicates"], _q_cases()["two clusters"]):
        s, _ = q_method(*_flat(results))
        assert s == pytest.approx(plain_q(results)[0], rel=1e-10)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.lists(st.integers(0, 60), min_size=1, max_size=3), min_size=2, max_size=40),
       st.sampled_from([0.1, 0.01, 0.25, 1.0]))
def test_q_method_on_typed_decimals_equals_plain_loop(labs, step):
    # Results on a grid of decimals (ties within and across labs), any replicate counts.
    results = [[round(i * step, 2) for i in lab] for lab in labs]
    values, idx = _flat(results)
    if np.ptp(values) == 0:
        return
    try:
        s_ref, h0_ref = plain_q(results)
    except ZeroDivisionError:
        return  # every between-lab pair tied: the plain loop has no segment (q_method gives s* = 0)
    s, h0 = q_method(values, idx)
    assert h0 == pytest.approx(h0_ref, abs=1e-12)
    assert s == pytest.approx(s_ref, rel=1e-10, abs=1e-12)


@pytest.mark.parametrize("seed", [0, 2, 7, 21, 27, 31])
def test_q_method_decimal_tie_groups_kept_whole(seed):
    # Results typed with one decimal: a difference such as 0.3 is several floats within the tie tolerance,
    # one jump of H1. The band listed at the end must hold each such group whole at both of its ends (an
    # earlier version cut the first group and s* moved by 0.1-1.4 % on these sets); the plain loop decides.
    rng = np.random.default_rng(seed)
    results = [list(np.round(rng.normal(10, 1, 2), 1)) for _ in range(int(rng.integers(20, 120)))]
    s, _ = q_method(*_flat(results))
    assert s == pytest.approx(plain_q(results)[0], rel=1e-10)
