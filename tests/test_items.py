"""Tests of roundscore.stats.items: homogeneity and stability of test items.

Reference values come from ISO 13528:2015 Table B.1 (recalled from memory,
marked so), ISO 5725-2:1994 Table 4 (Cochran, from memory), the NIST StRD
one-way ANOVA files (tests/data/nist_strd_anova, read by tests/refdata.py), and scipy/statsmodels as reference
libraries. The duplicate sets are invented for these tests; their expected
figures are worked out by hand from the ISO 13528 B.3 formulas in comments.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats

from roundscore.errors import StatisticsError
from roundscore.stats.items import (
    _cochran_critical,
    expanded_criterion_factors,
    homogeneity,
    item_uncertainty,
    stability,
    widened_sigma,
)

from .refdata import NIST_ANOVA_FILES, nist_anova


# ---------------------------------------------------------------------------
# invented duplicate sets
# ---------------------------------------------------------------------------


def duplicates(offsets, diffs, centre=10.0):
    """Items T01.. with pair (centre + offset - diff/2, centre + offset + diff/2).

    By construction item t's mean is centre + offset_t and its pair
    difference is diff_t, so s_x and s_w follow by hand.
    """
    items, values = [], []
    for t, (a, w) in enumerate(zip(offsets, diffs, strict=True)):
        items += [f"T{t + 1:02d}", f"T{t + 1:02d}"]
        values += [centre + a - w / 2, centre + a + w / 2]
    return np.array(items), np.array(values)


# Ten items, means at +-delta (five each), every pair differing by 0.1.
# By hand (ISO 13528 B.3): s_x^2 = 10 delta^2 / 9, s_w^2 = 10 * 0.01 / 20 = 0.005.
SIGNS = [1, -1] * 5


def test_simple_fails_expanded_passes():
    # delta = 0.1: s_x^2 = 0.1/9, s_s^2 = 0.1/9 - 0.005/2 = 0.0086111 (by hand),
    # c = 0.3 * 0.25 = 0.075 < s_s = 0.09280; allowed^2 = F1 c^2 + F2 s_w^2 with
    # F1 = 1.88, F2 = 1.01 (ISO 13528 Table B.1, g = 10, from memory) = 0.01563,
    # allowed = 0.1250 >= s_s.
    items, values = duplicates([0.1 * s for s in SIGNS], [0.1] * 10)
    res = homogeneity(items, values, sigma_pt=0.25)
    assert res.g == 10 and res.m == 2 and res.balanced
    assert res.s_w_method == "duplicate differences"
    assert res.s_x == pytest.approx(math.sqrt(0.1 / 9), rel=1e-10)
    assert res.s_w == pytest.approx(math.sqrt(0.005), rel=1e-10)
    assert res.s_s == pytest.approx(math.sqrt(0.1 / 9 - 0.0025), rel=1e-10)
    assert res.mean == pytest.approx(10.0, abs=1e-12)
    assert res.criterion == pytest.approx(0.075)
    assert res.allowed == pytest.approx(0.1250, abs=5e-4)  # printed-precision F1, F2 above
    assert not res.passed_simple
    assert res.passed_expanded and res.passed
    assert not res.s_s_truncated
    assert res.precision_warning is None
    assert any("expanded one allows" in n for n in res.notes)
    assert any("verdict uses the expanded criterion" in n for n in res.notes)


def test_both_fail():
    # delta = 0.3: s_s^2 = 0.9/9 - 0.0025 = 0.0975, s_s = 0.3122 (by hand) > allowed 0.125.
    items, values = duplicates([0.3 * s for s in SIGNS], [0.1] * 10)
    res = homogeneity(items, values, sigma_pt=0.25)
    assert res.s_s == pytest.approx(math.sqrt(0.0975), rel=1e-10)
    assert not res.passed_simple and not res.passed_expanded and not res.passed


def test_truncated_between_item_sd():
    # delta = 0.01: s_x^2 = 0.001/9 = 1.11e-4 < s_w^2/2 = 0.0025 (by hand): s_s truncated to 0.
    items, values = duplicates([0.01 * s for s in SIGNS], [0.1] * 10)
    res = homogeneity(items, values, sigma_pt=0.25)
    assert res.s_s_truncated
    assert res.s_s == 0.0
    assert res.passed_simple and res.passed_expanded
    assert any("set to 0" in n for n in res.notes)


def test_passes_both_not_truncated():
    # delta = 0.1 with sigma_pt = 0.5: c = 0.15 >= s_s = 0.0928 (by hand).
    items, values = duplicates([0.1 * s for s in SIGNS], [0.1] * 10)
    res = homogeneity(items, values, sigma_pt=0.5)
    assert res.passed_simple and res.passed_expanded and not res.s_s_truncated


@pytest.mark.parametrize(
    ("big", "signal"),
    [
        # C = w_big^2 / (w_big^2 + 9 * 0.01) (by hand); ISO 5725-2 Table 4, p = 10, n = 2
        # (from memory): 5 % 0.602, 1 % 0.718.
        (1.0, "outlier"),  # C = 1 / 1.09 = 0.917
        (0.41, "straggler"),  # C = 0.1681 / 0.2581 = 0.651
        (0.2, "none"),  # C = 0.04 / 0.13 = 0.308
    ],
)
def test_cochran_discordant_pair(big, signal):
    diffs = [0.1] * 10
    diffs[6] = big
    items, values = duplicates([0.1 * s for s in SIGNS], diffs)
    res = homogeneity(items, values, sigma_pt=1.0)
    assert res.cochran_c == pytest.approx(big**2 / (big**2 + 0.09), rel=1e-10)
    assert res.cochran_signal == signal
    assert res.cochran_item == "T07"
    if signal != "none":
        assert any("'T07' (discordant pair)" in n for n in res.notes)


@pytest.mark.parametrize(
    ("p", "n", "c5", "c1"),
    [
        # ISO 5725-2:1994 Table 4, Cochran critical values (from memory), 3 decimals.
        (3, 2, 0.967, 0.993),
        (5, 2, 0.841, 0.928),
        (10, 2, 0.602, 0.718),
        (10, 3, 0.445, 0.536),
    ],
)
def test_cochran_critical_table(p, n, c5, c1):
    assert _cochran_critical(p, n, 0.05) == pytest.approx(c5, abs=6e-4)
    assert _cochran_critical(p, n, 0.01) == pytest.approx(c1, abs=6e-4)


@pytest.mark.parametrize(("p", "n"), [(10, 2), (6, 4)])
def test_cochran_critical_simulated_level(p, n):
    # The Bonferroni form is exact when C_crit > 1/2 (Cochran 1941) and close otherwise:
    # simulated normal groups exceed the 5 % value about 5 % of the time.
    rng = np.random.default_rng(20240611)
    x = rng.standard_normal((40_000, p, n))
    v = x.var(axis=2, ddof=1)
    c = v.max(axis=1) / v.sum(axis=1)
    rate = float(np.mean(c > _cochran_critical(p, n, 0.05)))
    assert rate == pytest.approx(0.05, abs=4 * math.sqrt(0.05 * 0.95 / 40_000))


def test_cochran_critical_bad_arguments():
    with pytest.raises(StatisticsError, match="at least 2 groups"):
        _cochran_critical(1, 2, 0.05)
    with pytest.raises(StatisticsError, match="alpha"):
        _cochran_critical(10, 2, 1.5)


def test_precision_warning():
    # s_w = sqrt(0.005) = 0.0707 > 0.5 * 0.1 (by hand).
    items, values = duplicates([0.1 * s for s in SIGNS], [0.1] * 10)
    res = homogeneity(items, values, sigma_pt=0.1)
    assert not res.precision_adequate
    assert "too imprecise" in res.precision_warning
    assert res.precision_warning in res.notes


def test_few_items_note():
    items, values = duplicates([0.1, -0.1, 0.0], [0.1, 0.2, 0.1])
    res = homogeneity(items, values, sigma_pt=1.0)
    assert any("only 3 items" in n for n in res.notes)


# ---------------------------------------------------------------------------
# ISO 13528 Table B.1 and reference quantiles
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("g", "f1", "f2"),
    [
        # ISO 13528:2015 Table B.1, duplicates (from memory), printed to 2 decimals.
        (7, 2.10, 1.43),
        (10, 1.88, 1.01),
        (20, 1.59, 0.57),
    ],
)
def test_table_b1(g, f1, f2):
    fac = expanded_criterion_factors(g, 2)
    assert round(fac.f1, 2) == pytest.approx(f1, abs=1e-9)
    assert round(fac.f2, 2) == pytest.approx(f2, abs=1e-9)


@pytest.mark.parametrize(("g", "m", "alpha"), [(10, 2, 0.05), (12, 3, 0.05), (8, 4, 0.01)])
def test_factors_match_scipy_quantiles(g, m, alpha):
    # Reference library: scipy.stats chi2 and f quantiles, df_within = g(m - 1).
    fac = expanded_criterion_factors(g, m, alpha=alpha)
    assert fac.f1 == pytest.approx(stats.chi2.ppf(1 - alpha, g - 1) / (g - 1), rel=1e-12)
    assert fac.f2 == pytest.approx((stats.f.ppf(1 - alpha, g - 1, g * (m - 1)) - 1) / m, rel=1e-12)
    assert fac.df_within == g * (m - 1)


def test_homogeneity_uses_table_factors():
    items, values = duplicates([0.1 * s for s in SIGNS], [0.1] * 10)
    res = homogeneity(items, values, sigma_pt=0.25)
    assert round(res.f1, 2) == 1.88 and round(res.f2, 2) == 1.01  # ISO 13528 Table B.1, g = 10 (from memory)
    assert res.allowed == pytest.approx(math.sqrt(res.f1 * res.criterion**2 + res.f2 * res.s_w**2))


@pytest.mark.parametrize(("g", "m"), [(1, 2), (10, 1)])
def test_factors_bad_arguments(g, m):
    with pytest.raises(StatisticsError):
        expanded_criterion_factors(g, m)


# ---------------------------------------------------------------------------
# one-way ANOVA identities
# ---------------------------------------------------------------------------


def _statsmodels_anova(items, values):
    """Between and within mean squares from statsmodels' OLS ANOVA (reference library)."""
    import pandas as pd
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    frame = pd.DataFrame({"item": items, "y": values})
    table = anova_lm(smf.ols("y ~ C(item)", data=frame).fit())
    return float(table["mean_sq"].iloc[0]), float(table["mean_sq"].iloc[1])


def test_duplicates_anova_identity():
    # For m = 2, sum w^2/(2g) equals the ANOVA within mean square, and m s_x^2 the between
    # mean square (one-way layout); checked against statsmodels and scipy.stats.f_oneway.
    rng = np.random.default_rng(7)
    offsets = rng.normal(0, 0.2, 12)
    diffs = rng.normal(0, 0.15, 12)
    items, values = duplicates(offsets, diffs, centre=52.3)
    res = homogeneity(items, values, sigma_pt=0.6)
    ms_b, ms_w = _statsmodels_anova(items, values)
    assert res.s_w_method == "duplicate differences"
    assert res.s_w**2 == pytest.approx(ms_w, rel=1e-10)
    assert res.ms_within == pytest.approx(ms_w, rel=1e-10)
    assert 2 * res.s_x**2 == pytest.approx(ms_b, rel=1e-10)
    assert res.ms_between == pytest.approx(ms_b, rel=1e-10)
    groups = [values[items == t] for t in res.item_labels]
    assert res.ms_between / res.ms_within == pytest.approx(stats.f_oneway(*groups).statistic, rel=1e-10)
    assert res.df_between == 11 and res.df_within == 12


def test_unbalanced_uses_anova_with_n0():
    # Unbalanced one-way layout: mean squares against statsmodels; s_s^2 = (MSb - MSw)/n0
    # with n0 = (N - sum n_i^2 / N)/(g - 1) (Searle, Casella & McCulloch, Variance
    # Components, 1992, ch. 3, from memory).
    rng = np.random.default_rng(11)
    counts = [2, 3, 2, 2, 4, 2, 3, 2, 2, 2]
    items = np.repeat([f"I{k}" for k in range(10)], counts)
    values = 7.0 + np.repeat(rng.normal(0, 0.5, 10), counts) + rng.normal(0, 0.1, sum(counts))
    res = homogeneity(items, values, sigma_pt=2.0)
    ms_b, ms_w = _statsmodels_anova(items, values)
    n = sum(counts)
    n0 = (n - sum(c * c for c in counts) / n) / 9
    assert not res.balanced
    assert res.m == pytest.approx(n0, rel=1e-12)
    assert res.s_w_method == "within-item mean square"
    assert res.ms_between == pytest.approx(ms_b, rel=1e-10)
    assert res.ms_within == pytest.approx(ms_w, rel=1e-10)
    assert res.s_s == pytest.approx(math.sqrt((ms_b - ms_w) / n0), rel=1e-10)
    means = [values[items == f"I{k}"].mean() for k in range(10)]
    assert res.s_x == pytest.approx(np.std(means, ddof=1), rel=1e-10)
    assert res.mean == pytest.approx(np.mean(means), rel=1e-12)
    assert res.f2 == pytest.approx((stats.f.ppf(0.95, 9, n - 10) - 1) / n0, rel=1e-12)
    assert res.replicates == tuple(counts)
    assert any("unbalanced" in t for t in res.notes)
    assert any("2 replicates per item (most frequent)" in t for t in res.notes)


# File name and the tolerance on the certified values. The certified values are for the
# decimal data; a double stores 1000000.4 only to about 1e-10 and 1000000000000.4 to about
# 1e-4 (its ulp is 2**-13, about 1e-3 of a 0.1 step), which bounds the agreement possible for the
# "average" (7 constant leading digits) and "higher" (13 digits) difficulty files.
NIST_FILES = [
    ("SiRstv", 1e-12),
    ("AtmWtAg", 1e-12),
    ("SmLs01", 1e-12),
    ("SmLs02", 1e-12),
    ("SmLs03", 1e-12),
    ("SmLs04", 1e-9),
    ("SmLs05", 1e-9),
    ("SmLs06", 1e-9),
    ("SmLs07", 1e-3),
    ("SmLs08", 1e-3),
    ("SmLs09", 1e-3),
]


def _exact_mean_squares(labels, values):
    """Between and within mean squares in exact rational arithmetic on the stored doubles."""
    groups: dict[str, list[Fraction]] = {}
    for label, v in zip(labels, values, strict=True):
        groups.setdefault(str(label), []).append(Fraction(float(v)))
    n = sum(len(g) for g in groups.values())
    k = len(groups)
    means = {key: sum(g) / len(g) for key, g in groups.items()}
    grand = sum(sum(g) for g in groups.values()) / n
    ss_w = sum((x - means[key]) ** 2 for key, g in groups.items() for x in g)
    ss_b = sum(len(g) * (means[key] - grand) ** 2 for key, g in groups.items())
    return float(ss_b / (k - 1)), float(ss_w / (n - k))


def test_every_nist_file_has_a_tolerance():
    assert sorted(name for name, _ in NIST_FILES) == sorted(NIST_ANOVA_FILES)


@pytest.mark.parametrize(("name", "rel"), NIST_FILES)
def test_nist_strd_anova(name, rel):
    # Certified mean squares of the NIST StRD one-way ANOVA data sets (tests/data/nist_strd_anova).
    # A homogeneity study is a one-way layout: MS_within = s_w^2, MS_between = m s_x^2.
    data = nist_anova(name)
    labels, values, cert = data.labels, data.values, data.certified
    res = homogeneity(labels, values, sigma_pt=1.0)
    df_b, ms_b = cert["df_between"], cert["ms_between"]
    df_w, ms_w = cert["df_within"], cert["ms_within"]
    assert res.balanced
    assert (res.df_between, res.df_within) == (df_b, df_w)
    assert res.ms_within == pytest.approx(ms_w, rel=rel)
    assert res.s_w**2 == pytest.approx(ms_w, rel=rel)
    assert res.ms_between == pytest.approx(ms_b, rel=rel)
    assert res.m * res.s_x**2 == pytest.approx(ms_b, rel=rel)
    # Against exact arithmetic on the same doubles the centred sums lose nothing.
    exact_b, exact_w = _exact_mean_squares(labels, values)
    assert res.ms_between == pytest.approx(exact_b, rel=1e-12)
    assert res.ms_within == pytest.approx(exact_w, rel=1e-12)
    assert res.m * res.s_x**2 == pytest.approx(exact_b, rel=1e-12)


def test_nist_sirstv_residual_sd():
    # NIST StRD SiRstv certified residual standard deviation 1.04076068334656E-01 = s_w.
    data = nist_anova("SiRstv")
    assert data.certified["residual_sd"] == 1.04076068334656e-01  # the file's certified value, as read
    res = homogeneity(data.labels, data.values, sigma_pt=1.0)
    assert res.s_w == pytest.approx(1.04076068334656e-01, rel=1e-12)
    assert res.g == 5 and res.m == 5 and res.s_w_method == "within-item mean square"


# ---------------------------------------------------------------------------
# invariances and input handling
# ---------------------------------------------------------------------------


def test_order_and_offset_invariance():
    # Shuffling rows or adding a large constant must not change the spreads (common practice).
    rng = np.random.default_rng(3)
    items, values = duplicates(rng.normal(0, 0.1, 10), rng.normal(0, 0.1, 10))
    base = homogeneity(items, values, sigma_pt=0.5)
    perm = rng.permutation(values.size)
    shuffled = homogeneity(items[perm], values[perm], sigma_pt=0.5)
    shifted = homogeneity(items, values + 1e9, sigma_pt=0.5)
    assert shuffled.s_w == pytest.approx(base.s_w, rel=1e-12)
    assert shuffled.s_s == pytest.approx(base.s_s, rel=1e-12)
    assert shifted.s_w == pytest.approx(base.s_w, rel=1e-6)
    assert shifted.s_x == pytest.approx(base.s_x, rel=1e-6)
    assert shifted.mean - 1e9 == pytest.approx(base.mean, abs=1e-6)


def test_labels_in_order_of_appearance():
    res = homogeneity([3, 3, 1, 1, 2, 2], [1.0, 1.2, 2.0, 2.1, 3.0, 3.3], sigma_pt=1.0)
    assert res.item_labels == ("3", "1", "2")
    assert res.item_means == pytest.approx((1.1, 2.05, 3.15))


@pytest.mark.parametrize(
    ("items", "values", "sigma", "message"),
    [
        (["A", "A"], [1.0, 1.1], 1.0, "at least 2 items; found 1"),
        (["A", "A", "B"], [1.0, 1.1, 1.2], 1.0, "item(s) have one: 'B'"),
        (["A", "A", "B", "B"], [1.0, np.nan, 1.2, 1.3], 1.0, "position 2: nan"),
        (["A", "A", "B", "B"], [1.0, np.inf, 1.2, 1.3], 1.0, "not finite"),
        (["A", "A", "B"], [1.0, 1.1, 1.2, 1.3], 1.0, "differ in length"),
        (["A", None, "B", "B"], [1.0, 1.1, 1.2, 1.3], 1.0, "missing item label at position 2"),
        (["A", "A", "B", "B"], [1.0, 1.1, 1.2, 1.3], 0.0, "sigma_pt must be a finite number > 0"),
        (["A", "A", "B", "B"], [1.0, 1.1, 1.2, 1.3], float("nan"), "sigma_pt"),
        (["A", "A", "B", "B"], ["1.0", "x", 1.2, 1.3], 1.0, "must be a number"),
    ],
)
def test_homogeneity_bad_input(items, values, sigma, message):
    with pytest.raises(StatisticsError) as info:
        homogeneity(items, values, sigma)
    assert message in str(info.value)


def test_homogeneity_bad_alpha():
    with pytest.raises(StatisticsError, match="alpha must lie strictly between 0 and 1"):
        homogeneity(["A", "A", "B", "B"], [1.0, 1.1, 1.2, 1.3], 1.0, alpha=0.0)


def test_all_pairs_identical():
    res = homogeneity(["A", "A", "B", "B"], [1.0, 1.0, 1.0, 1.0], 1.0)
    assert res.s_w == 0.0 and res.s_s == 0.0 and res.passed
    assert res.cochran_signal == "not computed" and math.isnan(res.cochran_c)


# ---------------------------------------------------------------------------
# stability
# ---------------------------------------------------------------------------


def test_stability_simple():
    # Means 5.00 and 4.95 (by hand); |d| = 0.05 <= 0.3 * 0.2 = 0.06.
    res = stability([5.02, 4.98, 5.00], [4.97, 4.93, 4.95], sigma_pt=0.2)
    assert res.mean_first == pytest.approx(5.00) and res.mean_second == pytest.approx(4.95)
    assert res.difference == pytest.approx(0.05)
    assert res.criterion == pytest.approx(0.06)
    assert res.criterion_used == "simple" and res.passed_simple and res.passed
    # u of each mean = SD/sqrt(n) = 0.02/sqrt(3) (by hand).
    assert res.u_first == pytest.approx(0.02 / math.sqrt(3))
    assert res.u_stab == pytest.approx(0.05 / math.sqrt(3))  # ISO 13528 B.6, rectangular


def test_stability_simple_fails_expanded_passes():
    # |d| = 0.10 > 0.06; with u1 = u2 = 0.03: allowed = 0.06 + 2 * sqrt(0.0018) = 0.1449 (by hand).
    res = stability([5.05, 5.05], [4.95, 4.95], sigma_pt=0.2, u_first=0.03, u_second=0.03)
    assert not res.passed_simple
    assert res.allowed_expanded == pytest.approx(0.06 + 2 * math.sqrt(0.0018))
    assert res.passed_expanded is True
    assert res.criterion_used == "expanded" and res.passed
    assert res.u_first_given and res.u_second_given


@pytest.mark.parametrize(("choice", "verdict"), [("simple", False), ("expanded", True), ("auto", False)])
def test_stability_criterion_choice(choice, verdict):
    # |d| = 0.10 > 0.06; SD/sqrt(n) = 0.0707/sqrt(2) = 0.05 each (by hand),
    # allowed = 0.06 + 2 * sqrt(0.05^2 + 0.05^2) = 0.2014.
    res = stability([5.0, 5.1], [4.9, 5.0], sigma_pt=0.2, criterion=choice)
    assert res.u_first == pytest.approx(0.05) and res.u_second == pytest.approx(0.05)
    assert res.allowed_expanded == pytest.approx(0.06 + 2 * math.sqrt(0.005))
    assert res.passed is verdict


def test_stability_single_values():
    res = stability([5.0], [4.99], sigma_pt=0.2)
    assert res.passed_expanded is None and math.isnan(res.u_first)
    assert res.passed and res.criterion_used == "simple"
    with pytest.raises(StatisticsError, match="needs the uncertainty of both means"):
        stability([5.0], [4.99], sigma_pt=0.2, criterion="expanded")


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"first": [], "second": [1.0]}, "at least 1 value"),
        ({"first": [1.0, np.nan], "second": [1.0]}, "position 2"),
        ({"first": [1.0], "second": [1.0], "sigma_pt": -1.0}, "sigma_pt"),
        ({"first": [1.0], "second": [1.0], "u_first": -0.1}, "u_first must be a finite number >= 0"),
        ({"first": [1.0], "second": [1.0], "criterion": "loose"}, "allowed: 'auto', 'simple', 'expanded'"),
    ],
)
def test_stability_bad_input(kwargs, message):
    kwargs.setdefault("sigma_pt", 1.0)
    with pytest.raises(StatisticsError) as info:
        stability(**kwargs)
    assert message in str(info.value)


# ---------------------------------------------------------------------------
# combining
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("u", "expected"),
    [((3.0, 4.0, 0.0), 5.0), ((1.0, 2.0, 2.0), 3.0), ((0.0, 0.0, 0.0), 0.0)],  # Pythagorean triples
)
def test_item_uncertainty(u, expected):
    assert item_uncertainty(*u) == pytest.approx(expected)


@pytest.mark.parametrize(("sigma", "s_s", "expected"), [(3.0, 4.0, 5.0), (0.5, 0.0, 0.5), (5.0, 12.0, 13.0)])
def test_widened_sigma(sigma, s_s, expected):
    assert widened_sigma(sigma, s_s) == pytest.approx(expected)


def test_combining_bad_input():
    with pytest.raises(StatisticsError, match="u_hom must be a finite number >= 0"):
        item_uncertainty(0.1, -0.2, 0.0)
    with pytest.raises(StatisticsError, match="sigma_pt"):
        widened_sigma(0.0, 0.1)
