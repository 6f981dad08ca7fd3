"""Tests of roundscore.stats.outliers: Cochran, Grubbs single and double, the ISO 5725-2 sequence."""

from __future__ import annotations

import numpy as np
import pytest

from roundscore.errors import InputError, StatisticsError
from roundscore.stats.outliers import (
    cochran,
    cochran_critical,
    grubbs_critical,
    grubbs_double,
    grubbs_single,
    precision_with_screening,
    screen,
)
from roundscore.stats.precision import cell_statistics, precision

# NIST/SEMATECH e-Handbook of Statistical Methods §1.3.5.17.1, Grubbs' test example
# (Tietjen and Moore 1972 data).
TIETJEN_MOORE = [199.31, 199.53, 200.19, 200.82, 201.92, 201.95, 202.18, 245.57]

# Invented lab means for p = 10 (nine fixed values plus one at the top).
BASE9 = [-0.9, -0.6, -0.4, -0.2, 0.0, 0.1, 0.3, 0.5, 0.7]
BASE8 = [-0.9, -0.6, -0.4, -0.2, 0.0, 0.1, 0.3, 0.5]


def _layout(means: list[float], half_range: float = 0.05, n: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """Replicates mean ± half_range (same within-lab spread everywhere) for labs L01, L02, ..."""
    offsets = np.linspace(-half_range, half_range, n)
    values = np.concatenate([m + offsets for m in means]) + 20.0
    labs = np.repeat([f"L{i + 1:02d}" for i in range(len(means))], n)
    return values, labs


def _grubbs_g(x: list[float]) -> float:
    a = np.asarray(x)
    return float((a.max() - a.mean()) / a.std(ddof=1))


# ----------------------------------------------------------------------------- critical values


@pytest.mark.parametrize(
    ("p", "n", "expected"),
    [
        # UK NMS Chemical and Biological Metrology, "Cochran test" critical value table (2009), 5 %.
        (10, 2, 0.602),
        (5, 4, 0.598),
    ],
)
def test_cochran_critical_published(p: int, n: int, expected: float) -> None:
    assert cochran_critical(p, n, 0.05) == pytest.approx(expected, abs=0.0006)


def test_cochran_critical_has_its_level_by_simulation() -> None:
    # Independent check (seeded simulation): under normality P(C > C_crit) = alpha when C_crit > 1/2.
    rng = np.random.default_rng(1)
    p, n = 6, 3
    v = rng.chisquare(n - 1, (400_000, p))
    c = v.max(axis=1) / v.sum(axis=1)
    for alpha in (0.05, 0.01):
        crit = cochran_critical(p, n, alpha)
        assert crit > 0.5
        assert np.mean(c > crit) == pytest.approx(alpha, rel=0.05)


@pytest.mark.parametrize(
    ("n", "alpha", "expected"),
    [
        # ISO 5725-2 Table 5, single Grubbs (from memory).
        (10, 0.01, 2.482),
        (10, 0.05, 2.290),
        (20, 0.01, 3.001),
        (20, 0.05, 2.709),
    ],
)
def test_grubbs_critical_iso_table(n: int, alpha: float, expected: float) -> None:
    # Within 0.001: for n = 20 at 5 % the t formula (exact only above (n − 1)/√(2n)) gives 2.7082.
    assert grubbs_critical(n, alpha) == pytest.approx(expected, abs=0.001)


def test_grubbs_nist_example() -> None:
    # NIST/SEMATECH e-Handbook §1.3.5.17.1: G = 2.4687, one-sided 5 % critical value 2.032 (n = 8).
    res = grubbs_single(TIETJEN_MOORE)
    assert res.high.statistic == pytest.approx(2.4687, abs=1e-4)  # the handbook shows 4 decimals
    assert res.high.indices == (7,)
    assert grubbs_critical(8, 0.05, sided="one") == pytest.approx(2.032, abs=0.0006)
    assert res.high.outcome == "outlier"  # also beyond the two-sided 1 % value
    assert res.low.outcome == "pass"


def test_grubbs_double_statistic_by_definition() -> None:
    x = [1.0, 2.0, 3.0, 4.0, 10.0, 11.0, 2.5]
    res = grubbs_double(x)
    a = np.asarray(x)
    ss0 = ((a - a.mean()) ** 2).sum()
    rest = np.array([1.0, 2.0, 3.0, 4.0, 2.5])  # without the two largest
    assert res.high.statistic == pytest.approx(((rest - rest.mean()) ** 2).sum() / ss0, rel=1e-12)
    assert set(res.high.indices) == {4, 5} and set(res.low.indices) == {0, 1}


@pytest.mark.parametrize(
    ("func", "values", "message"),
    [
        (grubbs_single, [1.0, 2.0], "at least 3 values"),
        (grubbs_single, [1.0, 1.0, 1.0], "do not vary"),
        (grubbs_double, [1.0, 2.0, 3.0], "at least 4 values"),
    ],
)
def test_grubbs_errors(func, values: list[float], message: str) -> None:
    with pytest.raises(StatisticsError, match=message):
        func(values)


def test_cochran_errors() -> None:
    with pytest.raises(StatisticsError, match="every standard deviation is zero"):
        cochran([0.0, 0.0, 0.0], 2)
    with pytest.raises(StatisticsError, match="at least 2 standard deviations"):
        cochran([1.0], 2)


# ----------------------------------------------------------------------------- the screening sequence


def test_screen_passes_a_clean_layout() -> None:
    values, labs = _layout(BASE9 + [1.0])
    s = screen(values, labs)
    assert sorted(st.test for st in s.steps) == ["cochran", "grubbs_double_high", "grubbs_double_low",
                                                 "grubbs_high", "grubbs_low"]
    assert all(st.outcome == "pass" for st in s.steps)
    assert s.excluded == () and s.outliers == () and s.stragglers == ()
    assert len(s.retained) == 10


def test_cochran_flags_and_repeats() -> None:
    values, labs = _layout(BASE9 + [1.0], half_range=0.05)
    values[6] -= 0.7  # lab L04: replicates 19.05 and 19.85 (range 0.8 vs 0.1 elsewhere)
    s = screen(values, labs, grubbs=False)
    assert s.steps[0].test == "cochran" and s.steps[0].labs == ("L04",)
    assert s.steps[0].statistic == pytest.approx(0.8**2 / (0.8**2 + 9 * 0.1**2), rel=1e-9)  # C by hand
    assert s.steps[0].outcome == "outlier" and s.steps[0].excluded
    assert s.steps[1].test == "cochran" and s.steps[1].p == 9 and s.steps[1].outcome == "pass"
    assert s.excluded == ("L04",) and s.outliers == ("L04",)


def test_grubbs_single_straggler_is_kept() -> None:
    means = BASE9 + [2.3]
    # G by hand lies between the ISO 5725-2 Table 5 values 2.290 (5 %) and 2.482 (1 %), p = 10 (from memory).
    assert 2.290 < _grubbs_g(means) < 2.482
    s = screen(*_layout(means))
    step = next(st for st in s.steps if st.test == "grubbs_high")
    assert step.outcome == "straggler" and not step.excluded
    assert s.stragglers == ("L10",) and s.excluded == ()
    # drop="straggler" removes it; drop="none" keeps even outliers.
    assert screen(*_layout(means), drop="straggler").excluded == ("L10",)


def test_grubbs_single_outlier_removed_then_other_side_retested() -> None:
    means = BASE9 + [3.0]
    assert _grubbs_g(means) > 2.482  # ISO 5725-2 Table 5, 1 %, p = 10 (from memory)
    s = screen(*_layout(means))
    tests = [(st.test, st.p, st.outcome) for st in s.steps]
    assert tests[1] == ("grubbs_high", 10, "outlier")
    assert tests[2][0] == "grubbs_low" and tests[2][1] == 9  # repeated at the other extreme without L10
    assert not any(t.startswith("grubbs_double") for t, _, _ in tests)
    assert s.excluded == ("L10",)
    kept = screen(*_layout(means), drop="none")
    assert kept.excluded == () and kept.outliers == ("L10",)


def test_grubbs_double_catches_a_masked_pair() -> None:
    means = BASE8 + [3.0, 3.1]
    assert _grubbs_g(means) < 2.290  # the single test is masked (ISO 5725-2 Table 5, 5 %, p = 10)
    s = screen(*_layout(means))
    double = next(st for st in s.steps if st.test == "grubbs_double_high")
    assert double.outcome == "outlier" and set(double.labs) == {"L09", "L10"}
    assert set(s.excluded) == {"L09", "L10"}


def test_precision_with_screening_recomputes_without_excluded() -> None:
    values, labs = _layout(BASE9 + [3.0])
    values = values + np.tile([0.0, 0.013], 10) * np.arange(20) / 20  # some variation in the SDs
    res = precision_with_screening(values, labs)
    assert res.excluded == ("L10",)
    keep = labs != "L10"
    direct = precision(values[keep], labs[keep])
    assert res.precision.s_r == pytest.approx(direct.s_r, rel=1e-14)
    assert res.precision.s_L == pytest.approx(direct.s_L, rel=1e-14)
    assert res.precision.p == 9 and res.steps == res.screening.steps


def test_screen_text_input_and_records() -> None:
    values, labs = _layout(BASE9 + [3.0])
    texts = [f"{v:.3f}" for v in values]
    s = screen(values, labs, texts=texts)
    assert s.excluded == ("L10",)
    d = s.to_dict()
    assert d["excluded"] == ["L10"] and d["steps"][1]["labs"] == ["L10"]
    assert any("L10" in line and "outlier" in line for line in s.to_text())


def test_screen_skips_with_notes() -> None:
    s = screen([1.0, 1.2, 2.0, 2.1], ["A", "A", "B", "B"])
    assert any("fewer than 3 labs" in n for n in s.notes)
    s2 = screen([1.0, 1.0, 2.0, 2.0, 3.0, 3.0], ["A", "A", "B", "B", "C", "C"])
    assert any("no lab shows within-lab spread" in n for n in s2.notes)
    with pytest.raises(InputError, match=r"drop: found .all.; allowed: "):
        screen([1.0, 2.0], ["A", "B"], drop="all")  # type: ignore[arg-type]


def test_screening_leaving_too_few_labs_says_so() -> None:
    # Two labs; B's range (1000) dwarfs A's (0.01): C ≈ 1 − 1e-10, above the 1 % value (≈ 0.99996).
    values = [10.0, 10.01, 0.0, 1000.0]
    labs = ["A", "A", "B", "B"]
    with pytest.raises(StatisticsError, match="after excluding B: precision needs at least 2 labs"):
        precision_with_screening(values, labs)
    kept = precision_with_screening(values, labs, drop="none")
    assert kept.excluded == () and kept.screening.outliers == ("B",)


def test_screen_and_screened_precision_from_precomputed_cells() -> None:
    # Invented layout: L03 has a range of 1.0 (others 0.1): Cochran C = 0.917 > 0.7175, the 1 % value for
    # p = 10, n = 2; then L10's mean gives G = 2.55 > 2.387, the 1 % value for p = 9 (ISO 5725-2 Tables 4, 5).
    values, labs = _layout(BASE9 + [5.0])
    values[4:6] = [20.4 - 0.5, 20.4 + 0.5]  # L03 replicates
    texts = [f"{v:.3f}" for v in values]
    cells = cell_statistics(values, labs, texts=texts)
    direct = screen(values, labs, texts=texts)
    reused = screen(cells=cells)
    assert reused.to_dict() == direct.to_dict()
    assert set(reused.excluded) == {"L03", "L10"}
    a = precision_with_screening(values, labs, texts=texts)
    b = precision_with_screening(cells=cells)
    assert a.precision.to_dict() == b.precision.to_dict() and a.screening == b.screening
    # The kept labs' cells are the same numbers as before the screens (only the excluded ones are gone).
    assert b.precision.labs == tuple(lab for lab in cells.labs if lab not in {"L03", "L10"})
    pick = [cells.labs.index(lab) for lab in b.precision.labs]
    assert b.precision.cells.means.tolist() == cells.means[pick].tolist()
    # Against a fresh centring of the kept rows (another offset): equal to rounding (project bound 1e-13).
    keep = ~np.isin(labs, ["L03", "L10"])
    fresh = precision(values[keep], labs[keep], texts=[t for t, k in zip(texts, keep) if k])
    assert b.precision.s_r == pytest.approx(fresh.s_r, rel=1e-13)
    assert b.precision.s_L == pytest.approx(fresh.s_L, rel=1e-13)
    with pytest.raises(StatisticsError, match="not both"):
        screen(values, labs, cells=cells)
