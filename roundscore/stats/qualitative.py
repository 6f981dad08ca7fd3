"""Statistics of qualitative results: a proportion with its interval, the median and mode category, and a test
of independence between method groups and agreement.

Pure functions on numbers and numpy arrays; the evaluation (:mod:`roundscore.evaluation.qualitative`) calls them.

>>> p = proportion(18, 20, 0.95)
>>> round(p.proportion, 3), round(p.ci_low, 4), round(p.ci_high, 4), p.method
(0.9, 0.699, 0.9721, 'wilson')
>>> median_rank([0, 1, 1, 2]), mode_rank([0, 1, 1, 2])
(1, (1, 2))

References
----------
.. [1] ISO 13528:2022 clause 11 (qualitative schemes; from memory: the assigned value of an ordinal property may
   be the participants' median or mode, and performance is judged by agreement or by the deviation in
   categories).
.. [2] E. B. Wilson, "Probable inference, the law of succession, and statistical inference", J. Am. Stat.
   Assoc. 22 (1927) 209-212 (the score interval; computed by scipy.stats.binomtest(...).proportion_ci).
.. [3] Fisher's exact test (scipy.stats.fisher_exact) for a 2×2 table; Pearson's chi-squared test
   (scipy.stats.chi2_contingency) for larger ones.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from collections.abc import Sequence
from typing import Literal

import numpy as np

__all__ = ["Proportion", "proportion", "median_rank", "mode_rank", "Independence", "independence",
           "INTERVAL_METHOD", "ordinal_signals"]

#: The interval of a proportion: Wilson's score interval (good coverage for the few results of a PT round,
#: never outside [0, 1]; common practice for small n).
INTERVAL_METHOD: Literal["wilson"] = "wilson"


@dataclass(frozen=True, slots=True, kw_only=True)
class Proportion:
    """``k`` of ``n`` results, their proportion and its interval (NaN when n = 0)."""

    k: int
    n: int
    proportion: float
    ci_low: float
    ci_high: float
    confidence: float
    method: str = INTERVAL_METHOD


def proportion(k: int, n: int, confidence: float = 0.95) -> Proportion:
    """The proportion ``k / n`` with Wilson's score interval at ``confidence`` (scipy's binomtest)."""
    if n <= 0:
        return Proportion(k=0, n=0, proportion=math.nan, ci_low=math.nan, ci_high=math.nan, confidence=confidence)
    from scipy import stats  # here, not at import: scipy.stats takes about a second to load
    ci = stats.binomtest(int(k), int(n)).proportion_ci(confidence_level=confidence, method=INTERVAL_METHOD)
    return Proportion(k=int(k), n=int(n), proportion=k / n, ci_low=float(ci.low), ci_high=float(ci.high),
                      confidence=confidence)


def median_rank(ranks: Sequence[int] | np.ndarray) -> int | None:
    """The median of category ranks; with an even count, the lower of the two middle ones (None when empty).

    Assumed: an ordinal median must be a category, so of the two middle results the lower is taken
    (the lower median; ISO 13528:2022 gives no rule for the tie, from memory).
    """
    r = np.sort(np.asarray(ranks, dtype=int))
    if not len(r):
        return None
    return int(r[(len(r) - 1) // 2])


def mode_rank(ranks: Sequence[int] | np.ndarray) -> tuple[int | None, int]:
    """The most frequent rank and how often it occurs; None when two or more are equally frequent (or none)."""
    values, counts = np.unique(np.asarray(ranks, dtype=int), return_counts=True)
    if not len(values):
        return None, 0
    top = counts.max()
    if (counts == top).sum() > 1:
        return None, int(top)
    return int(values[np.argmax(counts)]), int(top)


@dataclass(frozen=True, slots=True, kw_only=True)
class Independence:
    """A test of independence between groups (rows) and outcomes (columns) of a table of counts.

    ``test`` is "fisher-exact" (2×2: ``statistic`` the sample odds ratio, ``df`` 1) or "chi-squared"
    (Pearson, ``df`` (r − 1)(c − 1), no continuity correction); ``min_expected`` the smallest expected count
    (below 5 a chi-squared p-value is approximate: common practice).
    """

    test: Literal["fisher-exact", "chi-squared"]
    statistic: float
    df: int
    p_value: float
    min_expected: float
    rows: int
    columns: int


def independence(counts: np.ndarray) -> Independence | None:
    """Fisher's exact test for a 2×2 table, Pearson's chi-squared test for a larger one (rows and columns that
    are all zero are dropped first); None when fewer than two rows or columns remain."""
    t = np.asarray(counts, dtype=np.int64)
    t = t[t.sum(axis=1) > 0][:, t.sum(axis=0) > 0] if t.size else t
    if t.ndim != 2 or t.shape[0] < 2 or t.shape[1] < 2:
        return None
    from scipy import stats  # here, not at import: scipy.stats takes about a second to load
    expected = np.outer(t.sum(axis=1), t.sum(axis=0)) / t.sum()
    if t.shape == (2, 2):
        res = stats.fisher_exact(t)
        return Independence(test="fisher-exact", statistic=float(res.statistic), df=1, p_value=float(res.pvalue),
                            min_expected=float(expected.min()), rows=2, columns=2)
    chi = stats.chi2_contingency(t, correction=False)
    return Independence(test="chi-squared", statistic=float(chi.statistic), df=int(chi.dof),
                        p_value=float(chi.pvalue), min_expected=float(expected.min()), rows=t.shape[0],
                        columns=t.shape[1])


def ordinal_signals(deviation: np.ndarray, warning: int, action: int) -> np.ndarray:
    """The signal of each deviation in categories: |d| ≥ ``action`` action, ≥ ``warning`` warning, else
    acceptable (NaN: "not-scored")."""
    d = np.abs(np.asarray(deviation, dtype=float))
    out = np.full(d.shape, "not-scored", dtype=object)
    ok = np.isfinite(d)
    out[ok] = np.where(d[ok] >= action, "action", np.where(d[ok] >= warning, "warning", "acceptable"))
    return out
