"""Proportions, intervals, median and mode categories and tests of independence (roundscore.stats.qualitative)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from roundscore.stats import qualitative as sq


@pytest.mark.parametrize(("k", "n", "low", "high"), [
    # Newcombe, Stat. Med. 17 (1998) 857-872, Table II, method 3 (Wilson score interval), 95 % (from memory)
    (81, 263, 0.2553, 0.3662),
    (15, 148, 0.0624, 0.1605),
    (0, 20, 0.0, 0.1611),
    (1, 29, 0.0061, 0.1718),
])
def test_wilson_interval_against_published_values(k, n, low, high):
    p = sq.proportion(k, n, 0.95)
    assert (p.ci_low, p.ci_high) == (pytest.approx(low, abs=6e-5), pytest.approx(high, abs=6e-5))
    assert p.proportion == k / n and p.method == "wilson"


@pytest.mark.parametrize(("k", "n", "conf"), [(18, 20, 0.95), (3, 4, 0.9), (7, 7, 0.99), (0, 1, 0.95)])
def test_proportion_is_scipy_binomtest_wilson(k, n, conf):
    ci = stats.binomtest(k, n).proportion_ci(confidence_level=conf, method="wilson")  # the reference library
    p = sq.proportion(k, n, conf)
    assert (p.ci_low, p.ci_high) == (pytest.approx(ci.low, rel=1e-12), pytest.approx(ci.high, rel=1e-12))
    # Wilson's closed form (Wilson 1927): centre (p + z²/2n)/(1 + z²/n), half-width z√(p(1−p)/n + z²/4n²)/(1 + z²/n)
    z = stats.norm.ppf(0.5 + conf / 2)
    ph = k / n
    centre = (ph + z * z / (2 * n)) / (1 + z * z / n)
    half = z * math.sqrt(ph * (1 - ph) / n + z * z / (4 * n * n)) / (1 + z * z / n)
    assert p.ci_low == pytest.approx(max(0.0, centre - half), abs=1e-12)
    assert p.ci_high == pytest.approx(min(1.0, centre + half), abs=1e-12)


def test_no_results_no_proportion():
    p = sq.proportion(0, 0)
    assert math.isnan(p.proportion) and math.isnan(p.ci_low)


def test_fisher_exact_tea_tasting():
    # Fisher's lady tasting tea, 3 of 4 right: two-sided p = 34/70 = 0.4857 (Fisher, The Design of Experiments,
    # 1935, ch. II; the hypergeometric sum (1 + 16 + 16 + 1)/70)
    got = sq.independence(np.array([[3, 1], [1, 3]]))
    assert got is not None and got.test == "fisher-exact"
    assert got.p_value == pytest.approx(34 / 70, rel=1e-12)
    assert got.statistic == pytest.approx(9.0)  # sample odds ratio 3·3/(1·1)


@pytest.mark.parametrize("table", [[[8, 2], [1, 5]], [[10, 0], [4, 6]], [[0, 5], [5, 0]]])
def test_fisher_matches_scipy(table):
    ref = stats.fisher_exact(table)  # the reference library
    got = sq.independence(np.array(table))
    assert got is not None
    assert got.p_value == pytest.approx(ref.pvalue, rel=1e-12)


def test_chi_squared_for_more_groups():
    table = np.array([[12, 3], [6, 9], [10, 5]])
    ref = stats.chi2_contingency(table, correction=False)
    got = sq.independence(table)
    assert got is not None and got.test == "chi-squared" and got.df == 2
    # Pearson's X² by hand: Σ (O − E)²/E with E = row total × column total / N
    e = np.outer(table.sum(1), table.sum(0)) / table.sum()
    assert got.statistic == pytest.approx(((table - e) ** 2 / e).sum(), rel=1e-12)
    assert got.p_value == pytest.approx(ref.pvalue, rel=1e-12)


def test_independence_needs_two_groups_and_two_outcomes():
    assert sq.independence(np.array([[3, 0], [4, 0]])) is None  # everyone agreed: nothing to test
    assert sq.independence(np.array([[3, 2]])) is None


def test_median_and_mode():
    assert sq.median_rank([2, 0, 1]) == 1
    assert sq.median_rank([0, 0, 2, 2]) == 0  # the lower median (the module's stated assumption)
    assert sq.median_rank([]) is None
    assert sq.mode_rank([0, 2, 2, 1]) == (2, 2)
    assert sq.mode_rank([0, 0, 1, 1]) == (None, 2)  # a tie: no mode


def test_ordinal_signals_rule():
    got = sq.ordinal_signals(np.array([0, 1, -1, 2, -3, np.nan]), warning=1, action=2)
    assert list(got) == ["acceptable", "warning", "warning", "action", "action", "not-scored"]
    assert list(sq.ordinal_signals(np.array([1, 2]), warning=2, action=3)) == ["acceptable", "warning"]
