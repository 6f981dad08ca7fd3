"""Simulated critical values of the double Grubbs test (ISO 5725-2 §7.3.4, Table 5).

The statistic for the two largest of p values is the sum of squares of the
p − 2 others about their own mean over the total sum of squares (the two
smallest: the mirror image).  Its distribution has no simple closed form, so
its lower quantiles are found by a seeded Monte Carlo simulation, cached per
p.  The significance levels of every ISO 5725-2 screen live here too so that
:mod:`roundscore.stats.outliers`, which applies the test, can import them
without a cycle (they are re-exported there).

References
----------
.. [1] ISO 5725-2:1994 (revised 2019), §7.3.2 (levels), §7.3.4 and Table 5.
.. [2] Grubbs, F. E. (1950). "Sample criteria for testing outlying
   observations". Annals of Mathematical Statistics 21, 27-58.
.. [3] Grubbs, F. E. and Beck, G. (1972). "Extension of sample sizes and
   percentage points for significance tests of outlying observations".
   Technometrics 14, 847-854.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from roundscore.errors import StatisticsError

__all__ = [
    "GRUBBS_DOUBLE_BUDGET",
    "GRUBBS_DOUBLE_MAX_DRAWS",
    "GRUBBS_DOUBLE_MIN_DRAWS",
    "GRUBBS_DOUBLE_SEED",
    "OUTLIER_LEVEL",
    "STRAGGLER_LEVEL",
    "GrubbsDoubleTable",
    "grubbs_double_critical",
    "grubbs_double_table",
]

#: Significance level marking a straggler (ISO 5725-2 §7.3.2).
STRAGGLER_LEVEL = 0.05
#: Significance level marking an outlier (ISO 5725-2 §7.3.2).
OUTLIER_LEVEL = 0.01

#: Seed of the double-Grubbs simulation (fixed so results are reproducible).
GRUBBS_DOUBLE_SEED = 5725
#: Largest number of simulated samples per p; the measured standard error of
#: the critical value is then about 2e-4 (p = 10, 1 % and 5 %).
GRUBBS_DOUBLE_MAX_DRAWS = 1 << 21
#: Smallest number of simulated samples (used for large p).
GRUBBS_DOUBLE_MIN_DRAWS = 1 << 18
#: Budget of normal deviates per p; draws = budget // p within the bounds above.
GRUBBS_DOUBLE_BUDGET = 1 << 25
#: Samples simulated at once, and the most normal deviates in one chunk (2**22 deviates are 32 MiB):
#: for p ≤ 64 every chunk holds 2**16 samples (the original stream), for larger p fewer.
_CHUNK = 1 << 16
_CHUNK_DEVIATES = 1 << 22



@dataclass(frozen=True, slots=True, kw_only=True)
class GrubbsDoubleTable:
    """Simulated critical values of the double Grubbs statistic for one p.

    Attributes
    ----------
    p : int
        Number of values.
    draws : int
        Simulated normal samples (each gives one high and one low statistic,
        pooled: the two have the same distribution by symmetry).
    seed : int
        Seed of the generator (``numpy.random.default_rng([seed, p])``).
    critical_5, critical_1 : float
        Lower critical values at 5 % and 1 % two-sided, i.e. the 2.5 % and
        0.5 % quantiles of the statistic for one side.
    se_5, se_1 : float
        Monte Carlo standard errors of the two critical values (from the
        distribution-free confidence interval of a sample quantile).
    """

    p: int
    draws: int
    seed: int
    critical_5: float
    critical_1: float
    se_5: float
    se_1: float


def _double_stats(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Double Grubbs statistics (high, low) for each *column* of ``x`` (shape (p, m), p ≥ 4).

    The two largest and two smallest values of each column are tracked with
    element-wise maxima/minima over the p rows (cheaper than sorting each
    sample); for standard normal data the one-pass sums of squares lose
    nothing that matters at the simulation's precision.
    """
    p = x.shape[0]
    a1, a2 = np.maximum(x[0], x[1]), np.minimum(x[0], x[1])  # largest, second largest
    b1, b2 = a2.copy(), a1.copy()  # smallest, second smallest
    for row in x[2:]:
        a2 = np.maximum(a2, np.minimum(a1, row))
        a1 = np.maximum(a1, row)
        b2 = np.minimum(b2, np.maximum(b1, row))
        b1 = np.minimum(b1, row)
    s = x.sum(axis=0)
    q = np.einsum("ij,ij->j", x, x)
    ss0 = q - s * s / p
    top, top2 = a1 + a2, a1 * a1 + a2 * a2
    bot, bot2 = b1 + b2, b1 * b1 + b2 * b2
    hi = (q - top2 - (s - top) ** 2 / (p - 2)) / ss0
    lo = (q - bot2 - (s - bot) ** 2 / (p - 2)) / ss0
    return hi, lo


def _ranks(m: int, prob: float) -> tuple[int, int, int, int]:
    """Ranks for the quantile (linear interpolation) and its ±1 SE order-statistic interval."""
    pos = (m - 1) * prob
    half = math.sqrt(m * prob * (1 - prob))  # binomial SD of the rank
    return (math.floor(pos), min(math.floor(pos) + 1, m - 1),
            max(math.floor(pos - half), 0), min(math.ceil(pos + half), m - 1))


def _quantile_with_se(partitioned: np.ndarray, prob: float) -> tuple[float, float]:
    """Quantile (numpy's default 'linear' rule) and its standard error from a partitioned sample."""
    lo, hi, se_lo, se_hi = _ranks(partitioned.size, prob)
    frac = (partitioned.size - 1) * prob - lo
    value = float(partitioned[lo] + frac * (partitioned[hi] - partitioned[lo]))
    return value, float(partitioned[se_hi] - partitioned[se_lo]) / 2.0


@lru_cache(maxsize=256)
def grubbs_double_table(p: int, *, draws: int | None = None, seed: int = GRUBBS_DOUBLE_SEED) -> GrubbsDoubleTable:
    """Critical values of the double Grubbs test for p values, by simulation.

    The statistic for the two largest values is ``S²_{p−1,p}/S²_0`` (sum of
    squares of the p − 2 smallest about their own mean over the total sum of
    squares); for the two smallest, the mirror image.  Its distribution has
    no simple closed form (Grubbs 1950 gives it as a repeated integral), so
    ``draws`` samples of p standard normal deviates are simulated with a
    fixed seed.  Results are cached per (p, draws, seed).

    Parameters
    ----------
    p : int
        Number of values (≥ 4).
    draws : int, optional
        Number of simulated samples; default ``GRUBBS_DOUBLE_BUDGET // p``
        bounded to [2**18, 2**21].
    seed : int
        Generator seed.

    Returns
    -------
    GrubbsDoubleTable

    Notes
    -----
    For p = 4 ... 40 (the range of ISO 5725-2 Table 5) and the default
    ``draws`` and ``seed``, the values come from
    :mod:`roundscore.stats.grubbs_double_values`, tabulated once by
    ``scripts/tabulate_grubbs_double.py`` from 2**25 samples per p (standard
    errors 0.3e-6 to 8e-5). Beyond p = 40 (or with ``draws`` or ``seed``
    given), the simulation runs here: with 2**21 samples the standard error
    is about 2e-4 (p = 10); the first call for a given p takes about a second.

    References
    ----------
    .. [1] Grubbs (1950); Grubbs and Beck (1972); ISO 5725-2 Table 5.
    """
    if p < 4:
        raise StatisticsError(f"the double Grubbs test needs at least 4 values, got {p}")
    if draws is None and seed == GRUBBS_DOUBLE_SEED:
        from roundscore.stats.grubbs_double_values import DRAWS, TABLE

        if p in TABLE:
            c5, c1, se5, se1 = TABLE[p]
            return GrubbsDoubleTable(p=p, draws=DRAWS, seed=seed, critical_5=c5, critical_1=c1, se_5=se5, se_1=se1)
    if draws is None:
        draws = min(max(GRUBBS_DOUBLE_BUDGET // p, GRUBBS_DOUBLE_MIN_DRAWS), GRUBBS_DOUBLE_MAX_DRAWS)
    rng = np.random.default_rng([seed, p])
    pooled = np.empty(2 * draws)
    k = 0
    chunk = min(_CHUNK, max(_CHUNK_DEVIATES // p, 1))  # bounded memory for large p
    for start in range(0, draws, chunk):
        m = min(chunk, draws - start)
        hi, lo = _double_stats(rng.standard_normal((p, m)))
        pooled[k : k + m] = hi
        pooled[k + m : k + 2 * m] = lo
        k += 2 * m
    # Only order statistics near the two quantiles are needed: partition, not sort.
    ranks = sorted({r for prob in (STRAGGLER_LEVEL / 2, OUTLIER_LEVEL / 2) for r in _ranks(pooled.size, prob)})
    pooled.partition(ranks)
    c5, se5 = _quantile_with_se(pooled, STRAGGLER_LEVEL / 2)
    c1, se1 = _quantile_with_se(pooled, OUTLIER_LEVEL / 2)
    return GrubbsDoubleTable(p=p, draws=draws, seed=seed, critical_5=c5, critical_1=c1, se_5=se5, se_1=se1)


def grubbs_double_critical(p: int, alpha: float) -> float:
    """Lower critical value of the double Grubbs statistic (alpha = 0.05 or 0.01).

    See :func:`grubbs_double_table`.
    """
    table = grubbs_double_table(int(p))
    if alpha == STRAGGLER_LEVEL:
        return table.critical_5
    if alpha == OUTLIER_LEVEL:
        return table.critical_1
    raise StatisticsError(f"double Grubbs critical values exist for alpha 0.05 and 0.01, not {alpha}")
