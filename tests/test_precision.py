"""Tests of roundscore.stats.precision (and roundscore.stats.exact, which it relies on)."""

from __future__ import annotations

import math
import warnings
from decimal import Decimal

import numpy as np
import pytest

from roundscore.errors import InputError, StatisticsError
from roundscore.stats import exact
from roundscore.stats.exact import _integer_centred, centred, clipped_square_sums, grouped_fsum
from roundscore.stats.precision import (
    LIMIT_FACTOR,
    CellStatistics,
    algorithm_s,
    algorithm_s_factors,
    anova_oneway,
    cell_statistics,
    mandel_h_critical,
    mandel_k_critical,
    precision,
)

from .refdata import NIST_ANOVA_FILES, nist_anova

# Relative tolerance reached on every certified value of every file (measured: ≤ 3.2e-15);
# the certified values are given to 15 significant digits.
NIST_RTOL = 1e-13


# ----------------------------------------------------------------------------- exact centring


def test_centred_text_is_exact() -> None:
    # Values from NIST StRD SmLs07 (13 constant leading digits); expected deviations by hand.
    c = centred(["1000000000000.4", "1000000000000.3", "1000000000000.5"], offset="first")
    assert c.exact and c.offset == Decimal("1000000000000.4")
    assert c.deviations.tolist() == [0.0, -0.1, 0.1]


def test_centred_median_offset_and_floats() -> None:
    c = centred(["3.5", "1.25", "2.0", "10"])
    assert c.offset == Decimal("2.0")  # lower median of 1.25, 2.0, 3.5, 10
    # Plain floats: centred in float, so the representation error of 1e12 + 0.4 stays.
    f = centred([1000000000000.4, 1000000000000.3], offset="first")
    assert not f.exact
    assert f.deviations[1] != -0.1
    # With floats="shortest_repr" the typed decimals are recovered and centring is exact.
    s = centred([1000000000000.4, 1000000000000.3], offset="first", floats="shortest_repr")
    assert s.exact and s.deviations.tolist() == [0.0, -0.1]


def _decimal_reference(texts: list[str], offset: str) -> tuple[Decimal, list[float]]:
    # Reference: Python's decimal module (exact subtraction at 60 digits, then float() rounds once), the
    # lower median taken from a stable sort of the Decimals (the documented choice of roundscore.stats.exact).
    import decimal

    with decimal.localcontext() as ctx:
        ctx.prec = 60
        ds = [Decimal(t.strip()) for t in texts]
        off = ds[0] if offset == "first" else sorted(ds)[(len(ds) - 1) // 2]
        return off, [float(d - off) for d in ds]


def _bits(values: list[float]) -> list[str]:
    return [float(v).hex() for v in values]  # hex keeps the sign of zero and every bit


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("offset", ["median", "first"])
def test_integer_centring_equals_decimal_bit_for_bit(seed: int, offset: str) -> None:
    rng = np.random.default_rng(seed)
    texts = []
    for _ in range(400):  # mixed magnitudes and fraction digits, ties, trailing zeros, signs (invented)
        digits = int(rng.integers(0, 7))
        scale = 10.0 ** int(rng.integers(-3, 6))
        text = f"{rng.normal(0, 1) * scale:.{digits}f}"
        texts.append(text if float(text) != 0 else "0")  # a negative zero is declined (tested below)
    texts += ["0.1", "0.10", "+0.3", "7", "7.", "12345678.123456", "-0.0001"]
    fast = _integer_centred(texts, offset)  # type: ignore[arg-type]
    assert fast is not None  # the integer path is taken for these plain texts
    off, ref = _decimal_reference(texts, offset)
    assert str(fast.offset) == str(off)  # the same text, not only an equal value
    assert _bits(fast.deviations.tolist()) == _bits(ref)
    assert _bits(centred(texts, offset=offset).deviations.tolist()) == _bits(ref)  # type: ignore[arg-type]


@pytest.mark.parametrize("seed", [4, 5])
def test_clipped_square_sums_equal_math_fsum(seed: int) -> None:
    # Reference: math.fsum (correctly rounded) of the clipped squares, as Algorithm S computed them before.
    rng = np.random.default_rng(seed)
    w = np.sort(np.concatenate([rng.lognormal(0, 2, 300), [0.0, 0.0, 1.5, 1.5, 1e-170]]))
    total = clipped_square_sums(w)
    assert total is not None
    cuts = [0.0, 1.5, 1e-300, 1e300, float(w[-1]), float(w[150]), *rng.lognormal(0, 2, 50).tolist()]
    for c in cuts:
        clipped = np.minimum(w, c)
        assert total(c).hex() == math.fsum(clipped * clipped).hex(), c
    assert clipped_square_sums(np.array([1e-160, 1.0])) is None  # a square (1e-320) below the safe range


@pytest.mark.parametrize(("texts", "why"), [
    (["1e3", "2"], "an exponent"), ([" 1.5", "2"], "a space"), (["-0.0", "0.0", "1"], "a negative zero"),
    (["1." + "1" * 23, "2"], "more than 22 fraction digits"), (["1000000000000000.5", "1"], "beyond 2**49"),
    (["1,5", "2"], "a comma"),
])
def test_integer_centring_declines_what_it_cannot_prove(texts: list[str], why: str) -> None:
    assert _integer_centred(texts, "median") is None, why
    if "," not in texts[0]:  # the Decimal path still centres them exactly (reference: the decimal module)
        off, ref = _decimal_reference(texts, "median")
        c = centred(texts)
        assert c.offset == off and _bits(c.deviations.tolist()) == _bits(ref)


@pytest.mark.parametrize(
    ("texts", "message"),
    [(["1.0", "abc"], "not a number"), (["1.0", "nan"], "not a finite number"), ([1.0, "2.0"], "mixed")],
)
def test_centred_rejects_bad_values(texts: list[object], message: str) -> None:
    with pytest.raises(InputError, match=message) as err:
        centred(texts)
    assert err.value.problems[0].row == 2


def test_centred_rejects_bad_choice() -> None:
    with pytest.raises(InputError, match="offset: found 'mean'; allowed: 'median', 'first'"):
        centred(["1"], offset="mean")  # type: ignore[arg-type]


# ----------------------------------------------------------------------------- NIST StRD


@pytest.mark.parametrize("name", NIST_ANOVA_FILES)
def test_anova_matches_every_nist_certified_value(name: str) -> None:
    # Source: NIST Statistical Reference Datasets, one-way ANOVA, certified values in each file header
    # (tests/data/nist_strd_anova, provenance in its README).
    data = nist_anova(name)
    cert = data.certified
    assert len(cert) == 9, "every file certifies 9 values"
    table = anova_oneway(np.zeros(data.observations), list(data.groups), texts=list(data.texts))
    for key, expected in cert.items():
        got = getattr(table, key)
        if key.startswith("df"):
            assert got == expected, key
        else:
            assert got == pytest.approx(expected, rel=NIST_RTOL), key


def test_nist_residual_sd_is_repeatability_sd() -> None:
    # Source: NIST StRD SmLs09 (18009 observations, 13 constant leading digits), certified residual SD 0.1.
    data = nist_anova("SmLs09")
    res = precision(np.zeros(data.observations), list(data.groups), texts=list(data.texts))
    assert res.s_r == pytest.approx(data.certified["residual_sd"], rel=NIST_RTOL)
    assert res.balanced and res.n_bar == 2001  # 9 treatments x 2001 replicates (file header)


# ----------------------------------------------------------------------------- precision estimates


def _balanced(seed: int, p: int = 12, n: int = 3, s_L: float = 0.4, s_r: float = 0.15) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    labs = np.repeat([f"L{i:02d}" for i in range(p)], n)
    values = 50 + np.repeat(rng.normal(0, s_L, p), n) + rng.normal(0, s_r, p * n)
    return values, labs


def test_variance_components_agree_with_statsmodels_reml() -> None:
    # Reference: statsmodels MixedLM fitted by REML; on balanced data with s_L² > 0 the REML
    # variance components equal the ANOVA estimators (Searle, Casella, McCulloch 1992, §4.7; common practice).
    pd = pytest.importorskip("pandas")
    smf = pytest.importorskip("statsmodels.formula.api")
    values, labs = _balanced(20240611)
    res = precision(values, labs)
    assert not res.s_L_truncated
    frame = pd.DataFrame({"y": values, "lab": labs})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = smf.mixedlm("y ~ 1", frame, groups=frame["lab"]).fit(reml=True)
    assert res.s_r**2 == pytest.approx(fit.scale, rel=1e-5)
    assert res.s_L**2 == pytest.approx(float(fit.cov_re.iloc[0, 0]), rel=1e-4)
    assert res.s_R == pytest.approx(math.sqrt(fit.scale + float(fit.cov_re.iloc[0, 0])), rel=1e-4)
    assert res.r == pytest.approx(LIMIT_FACTOR * res.s_r) and res.R == pytest.approx(2.8 * res.s_R)


def test_small_layout_by_hand() -> None:
    # Hand calculation (invented data): cells A=(10.1, 10.3), B=(10.6, 10.8), C=(9.9, 10.0).
    # Cell SDs² 0.02, 0.02, 0.005 → s_r² = 0.015; cell means 10.2, 10.7, 9.95, SD of means² = 0.145833…
    # s_L² = 0.145833… − 0.015/2 = 0.1383333…
    res = precision([10.1, 10.3, 10.6, 10.8, 9.9, 10.0], ["A", "A", "B", "B", "C", "C"])
    assert res.s_r == pytest.approx(math.sqrt(0.015), rel=1e-12)
    assert res.s_L == pytest.approx(math.sqrt(0.4375 / 3 - 0.0075), rel=1e-12)
    assert res.general_mean == pytest.approx(61.7 / 6, rel=1e-14)
    assert res.anova.df_between == 2 and res.anova.df_within == 3
    assert res.cells.labs == ("A", "B", "C")


def test_unbalanced_n_bar_and_single_result_lab() -> None:
    # n̄ = (Σn − Σn²/Σn)/(p − 1) (ISO 5725-2 §7.4.4): n = 2, 3, 1 → (6 − 14/6)/2 = 11/6.
    values = [5.0, 5.2, 5.9, 6.1, 6.0, 5.5]
    res = precision(values, ["A", "A", "B", "B", "B", "C"])
    assert res.n_bar == pytest.approx(11 / 6, rel=1e-14)
    assert not res.balanced and res.robust_s_r is None
    # s_r pools A (SS 0.02) and B (SS 0.02) over 1 + 2 df; lab C enters only between labs.
    assert res.s_r == pytest.approx(math.sqrt(0.04 / 3), rel=1e-12)
    assert math.isnan(res.cells.sds[2]) and math.isnan(res.mandel.k[2])


def test_negative_between_lab_variance_is_truncated() -> None:
    # Lab means identical, within-lab spread present: MS_between = 0 < MS_within, so s_L² < 0 → 0.
    res = precision([1.0, 2.0, 2.0, 1.0, 1.5, 1.5], ["A", "A", "B", "B", "C", "C"])
    assert res.s_L_truncated and res.s_L == 0.0
    assert res.s_R == pytest.approx(res.s_r)


@pytest.mark.parametrize(
    ("values", "labs", "message"),
    [
        ([1.0, 2.0, 3.0], ["A", "B", "C"], "precision needs replicates"),
        ([1.0, 2.0, 3.0], ["A", "A", "A"], "at least 2 labs"),
        ([1.0, math.nan, 3.0, 4.0], ["A", "A", "B", "B"], "lab A: result nan"),
        ([1.0, 2.0], ["A"], "2 values but 1 lab codes"),
    ],
)
def test_precision_errors(values: list[float], labs: list[str], message: str) -> None:
    with pytest.raises(StatisticsError, match=message):
        precision(values, labs)


def test_text_and_float_input_agree() -> None:
    values, labs = _balanced(7)
    texts = [f"{v:.6f}" for v in values]
    a = precision([float(t) for t in texts], labs)
    b = precision(np.zeros(len(texts)), labs, texts=texts)
    assert a.s_r == pytest.approx(b.s_r, rel=1e-12) and a.s_L == pytest.approx(b.s_L, rel=1e-12)


# ----------------------------------------------------------------------------- Mandel h and k


@pytest.mark.parametrize(
    ("p", "n", "h1", "k1"),
    [
        # ISO 5725-2:1994 Table 6 (from memory): 1 % indicators, p = 10: h 2.18, k (n = 2) 2.32.
        (10, 2, 2.18, 2.32),
    ],
)
def test_mandel_indicators_iso_table(p: int, n: int, h1: float, k1: float) -> None:
    assert mandel_h_critical(p, 0.01) == pytest.approx(h1, abs=0.01)
    assert mandel_k_critical(p, n, 0.01) == pytest.approx(k1, abs=0.01)


def test_mandel_indicators_from_distributions() -> None:
    # h is a rescaled t and k a rescaled F (ISO 5725-2 §7.3.1): check by simulation that the 5 %
    # indicator for h cuts off 5 % of |h| for one lab under normality (independent check, seeded).
    rng = np.random.default_rng(11)
    p = 8
    means = rng.standard_normal((200_000, p))
    h = (means[:, 0] - means.mean(axis=1)) / means.std(axis=1, ddof=1)
    assert np.mean(np.abs(h) > mandel_h_critical(p, 0.05)) == pytest.approx(0.05, abs=0.002)
    sds = np.sqrt(rng.chisquare(2, (200_000, p)) / 2)
    k = sds[:, 0] * math.sqrt(p) / np.sqrt((sds**2).sum(axis=1))
    assert np.mean(k > mandel_k_critical(p, 3, 0.05)) == pytest.approx(0.05, abs=0.002)


def test_mandel_h_and_k_definitions() -> None:
    values, labs = _balanced(3, p=6, n=4)
    res = precision(values, labs)
    means = np.array([values[labs == c].mean() for c in res.labs])
    sds = np.array([values[labs == c].std(ddof=1) for c in res.labs])
    np.testing.assert_allclose(res.mandel.h, (means - means.mean()) / means.std(ddof=1), rtol=1e-9)
    np.testing.assert_allclose(res.mandel.k, sds / np.sqrt(np.mean(sds**2)), rtol=1e-9)
    assert res.mandel.n_for_k == 4


# ----------------------------------------------------------------------------- Algorithm S


@pytest.mark.parametrize(
    ("df", "eta", "xi"),
    [
        # ISO 13528:2015 Table C.2 / ISO 5725-5 Table 19 (from memory): limit factor η, adjustment factor ξ.
        (1, 1.645, 1.097),
        (2, 1.517, 1.054),
        (3, 1.444, 1.039),
        (4, 1.395, 1.032),
        (5, 1.359, 1.027),
        (6, 1.332, 1.024),
        (9, 1.277, 1.018),
    ],
)
def test_algorithm_s_factors(df: int, eta: float, xi: float) -> None:
    f = algorithm_s_factors(df)
    assert f.eta == pytest.approx(eta, abs=0.0006) and f.xi == pytest.approx(xi, abs=0.0006)


def test_algorithm_s_fixed_point_and_robustness() -> None:
    rng = np.random.default_rng(5)
    sds = 0.3 * np.sqrt(rng.chisquare(3, 40) / 3)
    res = algorithm_s(sds, 3)
    assert res.converged and res.iterations > 1
    f = algorithm_s_factors(3)
    again = f.xi * math.sqrt(np.mean(np.minimum(sds, f.eta * res.value) ** 2))
    assert again == pytest.approx(res.value, rel=1e-9)  # the converged value is the fixed point
    wild = sds.copy()
    wild[0] = 100.0
    assert algorithm_s(wild, 3).value < 1.2 * res.value  # one wild SD has bounded influence
    assert algorithm_s(10 * sds, 3).value == pytest.approx(10 * res.value, rel=1e-9)  # scale equivariant


def test_algorithm_s_unbiased_at_the_normal_model() -> None:
    # ξ is defined so that w* estimates σ at the normal model; check with many simulated SDs (seeded).
    rng = np.random.default_rng(17)
    sds = 2.0 * np.sqrt(rng.chisquare(2, 200_000) / 2)
    assert algorithm_s(sds, 2).value == pytest.approx(2.0, rel=0.005)


def test_algorithm_s_errors() -> None:
    with pytest.raises(StatisticsError, match="at least one standard deviation"):
        algorithm_s([math.nan], 2)
    with pytest.raises(StatisticsError, match="at least 1 degree of freedom"):
        algorithm_s([1.0], 0)
    assert algorithm_s([0.0, 0.0, 1.0], 1).value == 0.0


def test_cell_statistics_keep_file_order() -> None:
    cells = cell_statistics([1.0, 2.0, 3.0, 4.0], ["Z9", "A1", "Z9", "A1"])
    assert cells.labs == ("Z9", "A1")
    np.testing.assert_allclose(cells.means, [2.0, 3.0])


# ----------------------------------------------------------------------------- all labs at once


def _loop_cells(devs: list[float], labs: list[str]) -> dict[str, tuple[int, float, float]]:
    """The per-lab loop the vectorised code must equal: fsum mean, one refinement, fsum of squares."""
    rows: dict[str, list[float]] = {}
    for d, lab in zip(devs, labs):
        rows.setdefault(lab, []).append(d)
    out = {}
    for lab, xs in rows.items():
        m = math.fsum(xs) / len(xs)
        m += math.fsum(x - m for x in xs) / len(xs)
        out[lab] = (len(xs), m, math.fsum((x - m) * (x - m) for x in xs))
    return out


def _unbalanced_texts(seed: int, p: int, counts: list[int]) -> tuple[list[str], list[str]]:
    """Invented results with 10 constant leading digits, random replicate counts, rows in shuffled order."""
    rng = np.random.default_rng(seed)
    n = rng.choice(counts, p)
    labs = np.repeat([f"L{i:03d}" for i in range(p)], n)
    lab_effect = np.repeat(rng.normal(0, 0.5, p), n)
    digits = np.round((lab_effect + rng.normal(0, 0.01, labs.size)) * 1e4).astype(np.int64)
    texts = [f"{1234567890 + int(k) // 10_000}.{int(k) % 10_000:04d}" for k in digits]
    order = rng.permutation(labs.size)
    return [texts[i] for i in order], labs[order].tolist()


@pytest.mark.parametrize(
    ("seed", "p", "counts"),
    [(1, 300, [1, 2, 3, 4, 5, 7]), (2, 40, [2, 3]), (3, 500, [1, 2]), (4, 7, [6, 9, 12])],
)
def test_cell_statistics_equal_a_per_lab_fsum_loop(seed: int, p: int, counts: list[int]) -> None:
    # Reference: the loop above on deviations centred here in Decimal on the lower median (the documented
    # offset of roundscore.stats.exact); the vectorised sums must give the same bits, not just close ones.
    texts, labs = _unbalanced_texts(seed, p, counts)
    decimals = [Decimal(t) for t in texts]
    offset = sorted(decimals)[(len(decimals) - 1) // 2]
    devs = [float(d - offset) for d in decimals]
    ref = _loop_cells(devs, labs)
    cells = cell_statistics(np.zeros(len(texts)), labs, texts=texts)
    assert cells.offset == offset
    assert cells.labs == tuple(ref)  # order of first appearance
    assert cells.n.tolist() == [ref[lab][0] for lab in cells.labs]
    assert cells.deviation_means.tolist() == [ref[lab][1] for lab in cells.labs]
    assert cells.ss_cells.tolist() == [ref[lab][2] for lab in cells.labs]
    assert cells.means.tolist() == [float(offset) + ref[lab][1] for lab in cells.labs]
    sds = [math.sqrt(ref[lab][2] / (ref[lab][0] - 1)) if ref[lab][0] > 1 else math.nan for lab in cells.labs]
    np.testing.assert_array_equal(cells.sds, sds)


def test_cell_statistics_of_floats_equal_the_loop() -> None:
    # Float input is centred in float on the lower median (documented in roundscore.stats.exact).
    texts, labs = _unbalanced_texts(5, 200, [1, 2, 3, 4])
    values = np.array([float(t) for t in texts])
    offset = np.sort(values)[(values.size - 1) // 2]
    ref = _loop_cells((values - offset).tolist(), labs)
    cells = cell_statistics(values, labs)
    assert cells.deviation_means.tolist() == [ref[lab][1] for lab in cells.labs]
    assert cells.ss_cells.tolist() == [ref[lab][2] for lab in cells.labs]


@pytest.mark.parametrize(
    ("runs", "why"),
    [
        ([[1e16, 1.0, -1e16], [0.1, 0.2, 0.3, -0.6]], "naive sums give 0.0 and 5.55e-17; fsum 1.0 and 2.77e-17"),
        ([[0.1, 0.7], [3.0], [-2.5, 2.5]], "runs of at most two: one rounding in floating point"),
        ([[1e-300, 1.0, 1e-300], [2.0, 3.0, 4.0]], "exponents too far apart: the fsum fallback"),
        ([[1e300, 1e300, -1e300], [1.0, 2.0, 3.0]], "above 2**960: the fsum fallback"),
        ([[0.0, 0.0, 0.0], [-0.0, -0.0, -0.0], [0.5, -0.25, -0.25]], "exact zeros keep fsum's sign of zero"),
        ([[float(v) for v in np.random.default_rng(9).normal(0, 1, 9) * 1e6] for _ in range(3)], "random"),
    ],
)
def test_grouped_fsum_equals_math_fsum(runs: list[list[float]], why: str) -> None:
    # Reference: math.fsum (correctly rounded, Shewchuk 1997) run by run, compared bit for bit (sign of zero too).
    x = np.array([v for run in runs for v in run])
    starts = np.cumsum([0] + [len(r) for r in runs[:-1]])
    got = grouped_fsum(x, starts)
    ref = np.array([math.fsum(r) for r in runs])
    assert got.tolist() == ref.tolist(), why
    assert np.signbit(got).tolist() == np.signbit(ref).tolist(), why


@pytest.mark.parametrize("runs, size", [(400, 3), (4, 500), (40, 32), (2, 33)])
def test_grouped_fsum_both_ways_equal_math_fsum(runs: int, size: int) -> None:
    # Reference: math.fsum run by run. Many short runs are summed in integers, a few long ones by fsum itself
    # (exact._FSUM_RUN_COST decides); data with cancellation (1e16 scale beside unit values) so a plain sum fails.
    rng = np.random.default_rng(runs * size)
    x = rng.normal(0, 1, runs * size) * np.where(rng.random(runs * size) < 0.1, 1e16, 1.0)
    starts = np.arange(runs) * size
    ref = [math.fsum(x[s:s + size]) for s in starts]
    assert grouped_fsum(x, starts).tolist() == ref
    assert np.add.reduceat(x, starts).tolist() != ref  # the data do tell an exact sum from a plain one


def test_grouped_fsum_nonfinite_and_overflow_as_fsum() -> None:
    # math.fsum's own results for inf and nan, and its error on an intermediate overflow (Python documentation).
    got = grouped_fsum(np.array([1.0, math.inf, 2.0, 1.0, math.nan, 1.0]), np.array([0, 3]))
    assert got[0] == math.inf and math.isnan(got[1])
    with pytest.raises(OverflowError):
        grouped_fsum(np.array([1e308, 1e308, -1e308]), np.array([0]))


def test_fsum_of_an_array_is_math_fsum_of_it() -> None:
    # Reference: math.fsum on the array itself (the Python documentation's correctly rounded sum), bit for bit,
    # with its errors and its results for inf, nan and the sign of zero.
    rng = np.random.default_rng(7)
    for x in (rng.normal(0, 1, 2000) * np.where(rng.random(2000) < 0.1, 1e16, 1.0), np.array([-0.0, -0.0]),
              np.array([5e-324, 1e-310, -1e-310]), np.array([1.0, math.inf]), np.array([math.nan, 1.0]),
              np.arange(12, dtype=np.int64).reshape(3, 4), np.zeros(0)):
        got, ref = exact.fsum(x), math.fsum(x.ravel())
        assert (math.isnan(got) and math.isnan(ref)) or (got == ref and math.copysign(1, got) == math.copysign(1, ref))
    overflow, inf_minus_inf = np.array([1e308, 1e308, -1e308]), np.array([math.inf, -math.inf])
    for bad, error in ((overflow, OverflowError), (inf_minus_inf, ValueError)):
        with pytest.raises(error):
            exact.fsum(bad)
        with pytest.raises(error):
            math.fsum(bad)


@pytest.mark.parametrize("name", ["SmLs07", "SiRstv"])
def test_precision_from_subset_cells_agrees_with_fresh_centring(name: str) -> None:
    # Source data: NIST StRD SmLs07 (13 constant leading digits) and SiRstv; leave out the first group.
    # The subset keeps the offset of all groups, a fresh call centres on the subset's median: both are
    # correctly rounded sums of exact deviations, so they agree to a few ulps (project bound: 1e-13).
    data = nist_anova(name)
    groups, texts = list(data.groups), list(data.texts)
    cells = cell_statistics(np.zeros(len(texts)), groups, texts=texts)
    kept = cells.labs[1:]
    sub = precision(cells=cells.subset(list(reversed(kept))))
    rows = [i for i, g in enumerate(groups) if g in kept]
    fresh = precision(np.zeros(len(rows)), [groups[i] for i in rows], texts=[texts[i] for i in rows])
    assert sub.labs == fresh.labs == kept  # subset keeps the cells' order, not the order asked
    for key in ("s_r", "s_L", "s_R", "general_mean", "n_bar"):
        assert getattr(sub, key) == pytest.approx(getattr(fresh, key), rel=1e-13), key
    np.testing.assert_allclose(sub.cells.means, fresh.cells.means, rtol=1e-15)
    np.testing.assert_allclose(sub.mandel.h, fresh.mandel.h, rtol=1e-11, atol=1e-13)


def test_precision_takes_cells_or_rows_not_both() -> None:
    values, labs = _balanced(7, p=5, n=2)
    cells = cell_statistics(values, labs)
    assert isinstance(cells, CellStatistics)
    assert precision(cells=cells).s_r == precision(values, labs).s_r
    with pytest.raises(StatisticsError, match="not both"):
        precision(values, labs, cells=cells)
    with pytest.raises(StatisticsError, match="values and labs"):
        precision()
    with pytest.raises(StatisticsError, match="lab\\(s\\) ZZ"):
        cells.subset(["L00", "ZZ"])


def test_precision_without_consistency_statistics_gives_the_same_precision() -> None:
    """consistency=False leaves out Mandel's h, k and Algorithm S, and nothing else: every other field is the same
    (self-consistency of the two paths; the kept labs' precision in the evaluation uses it)."""
    rng = np.random.default_rng(7)
    values = rng.normal(50.0, 1.0, 30).round(2)
    labs = np.repeat([f"L{i:02d}" for i in range(10)], 3)
    full = precision(values, labs)
    lean = precision(values, labs, consistency=False)
    assert lean.mandel is None and lean.robust_s_r is None
    assert full.mandel is not None and full.robust_s_r is not None
    for name in ("s_r", "s_L", "s_R", "r", "R", "n_bar", "general_mean", "balanced", "s_L_truncated"):
        assert getattr(lean, name) == getattr(full, name), name
    d = lean.to_dict()
    assert d["h"] is None and d["k_critical"] is None and d["robust_s_r"] is None
    assert d["s_r"] == full.to_dict()["s_r"]
