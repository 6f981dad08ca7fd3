"""Precision of a measurement method from a one-way layout (ISO 5725-2).

Each lab reports replicate results on the same item.  From them come the
cell statistics, the one-way analysis of variance, the repeatability and
reproducibility standard deviations ``s_r``, ``s_L``, ``s_R`` with their
limits ``r`` and ``R``, Mandel's consistency statistics ``h`` and ``k`` with
their indicator values, and Algorithm S as a robust pooled within-lab SD.

All sums are taken on exactly centred data (:mod:`roundscore.stats.exact`),
correctly rounded (:func:`math.fsum`, or :func:`~roundscore.stats.exact.grouped_fsum`
for all labs at once, which gives the same bits) and in two passes (mean,
then squared deviations from it), so data with many constant leading digits
lose no precision.  The cell statistics of a level can be computed once and
passed on (``cells=``) to :func:`precision` and to the outlier screens.

References
----------
.. [1] ISO 5725-2:1994 (section numbers of this edition; revised 2019).
   Accuracy (trueness and precision) of measurement methods and results -
   Part 2: Basic method for the determination of repeatability and
   reproducibility of a standard measurement method. §7.3 (h, k), §7.4
   (s_r, s_L, s_R, unbalanced n̄).
.. [2] ISO 5725-6:1994, §4.1.4 (r = 2.8 s_r, R = 2.8 s_R).
.. [3] ISO 13528:2022, Annex C (Algorithm S); ISO 5725-5:1998 §6.2.
.. [4] Mandel, J. (1985). "A new analysis of interlaboratory test results".
   ASQC Quality Congress Transactions, 360-366.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence
from dataclasses import dataclass
from decimal import Decimal

import numpy as np

from roundscore.errors import StatisticsError
from roundscore.stats.distributions import chi2_cdf, chi2_ppf, f_isf, f_sf, t_isf
from roundscore.stats.exact import centred, clipped_square_sums, fsum, fsum_mean, grouped_fsum

__all__ = [
    "LIMIT_FACTOR",
    "ALGORITHM_S_COVERAGE",
    "ALGORITHM_S_TOLERANCE",
    "CellStatistics",
    "AnovaTable",
    "MandelResult",
    "AlgorithmSFactors",
    "AlgorithmSResult",
    "PrecisionResult",
    "cell_statistics",
    "cells_from",
    "anova_oneway",
    "mandel_h_critical",
    "mandel_k_critical",
    "mandel",
    "algorithm_s_factors",
    "algorithm_s",
    "precision",
]

#: Factor from a standard deviation to a 95 % limit on the difference of two
#: results: 1.96·√2 = 2.77 rounded to 2.8 (ISO 5725-6:1994 §4.1.4).
LIMIT_FACTOR = 2.8

#: Algorithm S winsorizes at the 0.9 quantile of the chi-square distribution
#: of the SDs (ISO 13528:2022 Annex C, limit factor η = √(χ²_0.9;ν / ν)).
ALGORITHM_S_COVERAGE = 0.9

#: Relative change below which Algorithm S has converged (project choice,
#: far below the third significant figure ISO 13528 asks for).
ALGORITHM_S_TOLERANCE = 1e-10

#: Safety cap on Algorithm S iterations (it converges geometrically; common practice).
ALGORITHM_S_MAX_ITER = 1000


@dataclass(frozen=True, slots=True, kw_only=True)
class CellStatistics:
    """Per-lab (cell) statistics of the replicates.

    Attributes
    ----------
    labs : tuple of str
        Lab codes in order of first appearance.
    n : numpy.ndarray
        Number of replicates per lab (int).
    means : numpy.ndarray
        Cell means ``ȳ_i``.
    sds : numpy.ndarray
        Cell standard deviations ``s_i`` (divisor ``n_i − 1``); NaN where n_i = 1.
    offset : Decimal
        Exact offset subtracted before the sums (see :func:`~roundscore.stats.exact.centred`).
    deviation_means : numpy.ndarray
        Cell means of the centred data (``means − offset``, full precision).
    ss_cells : numpy.ndarray
        Within-cell sums of squares ``Σ_j (y_ij − ȳ_i)²``.
    """

    labs: tuple[str, ...]
    n: np.ndarray
    means: np.ndarray
    sds: np.ndarray
    offset: Decimal
    deviation_means: np.ndarray
    ss_cells: np.ndarray

    @property
    def p(self) -> int:
        """Number of labs (cells)."""
        return len(self.labs)

    def subset(self, labs: Sequence[str] | np.ndarray) -> CellStatistics:
        """The cells of the given labs, in this object's order (same offset).

        Parameters
        ----------
        labs : sequence of str
            Lab codes to keep; each must be one of :attr:`labs`.

        Returns
        -------
        CellStatistics
            Per-lab values unchanged; ``offset`` is this object's, so the
            deviations stay exact.  Statistics of the subset may differ in the
            last bit from those of :func:`cell_statistics` on the subset's
            rows, which centres on the subset's own median (any common offset
            gives correctly rounded deviations).

        Raises
        ------
        StatisticsError
            A lab code that has no cell here.
        """
        wanted = {str(lab) for lab in (labs.tolist() if isinstance(labs, np.ndarray) else labs)}
        unknown = sorted(wanted.difference(self.labs))
        if unknown:
            raise StatisticsError(f"no results for lab(s) {', '.join(unknown)} in these cell statistics")
        pick = np.array([lab in wanted for lab in self.labs], dtype=bool)
        return CellStatistics(
            labs=tuple(lab for lab, k in zip(self.labs, pick.tolist()) if k), n=self.n[pick],
            means=self.means[pick], sds=self.sds[pick], offset=self.offset,
            deviation_means=self.deviation_means[pick], ss_cells=self.ss_cells[pick],
        )


@dataclass(frozen=True, slots=True, kw_only=True)
class AnovaTable:
    """One-way analysis of variance table.

    Attributes
    ----------
    ss_between, ss_within, ss_total : float
        Sums of squares between groups, within groups, and in total.
    df_between, df_within, df_total : int
        Degrees of freedom ``p − 1``, ``N − p`` and ``N − 1``.
    ms_between, ms_within : float
        Mean squares ``SS/df`` (NaN when the df is 0).
    f : float
        ``ms_between / ms_within`` (inf if only ``ms_within`` is 0, NaN if both).
    p_value : float
        Upper tail probability of ``f`` under F(df_between, df_within).
    r_squared : float
        ``ss_between / ss_total``.
    residual_sd : float
        ``√ms_within`` (the repeatability SD ``s_r`` in a precision study).
    """

    ss_between: float
    ss_within: float
    ss_total: float
    df_between: int
    df_within: int
    df_total: int
    ms_between: float
    ms_within: float
    f: float
    p_value: float
    r_squared: float
    residual_sd: float

    def to_dict(self) -> dict[str, float | int]:
        """JSON-ready mapping of the fields."""
        return {name: getattr(self, name) for name in self.__slots__}


@dataclass(frozen=True, slots=True, kw_only=True)
class MandelResult:
    """Mandel's between-lab ``h`` and within-lab ``k`` statistics.

    Attributes
    ----------
    labs : tuple of str
        Lab codes, in the order of ``h`` and ``k``.
    h : numpy.ndarray
        ``(ȳ_i − mean of ȳ)/SD of ȳ`` (ISO 5725-2 §7.3.1, unweighted).
    k : numpy.ndarray
        ``s_i·√p'/√Σs_j²`` over the p' labs with an SD (ISO 5725-2 §7.3.1);
        NaN for labs with one result.
    h_critical_5, h_critical_1 : float
        Indicator values for ``|h|`` at 5 % and 1 % (p labs).
    k_critical_5, k_critical_1 : float
        Indicator values for ``k`` at 5 % and 1 % (p' labs, ``n_for_k`` replicates).
    n_for_k : int
        Replicate count used for the k indicator values: the common n, or for an
        unbalanced layout the most frequent n among labs with an SD (ties: the
        smaller), following the advice of ISO 5725-2 §7.3.3 for Cochran's test.
    """

    labs: tuple[str, ...]
    h: np.ndarray
    k: np.ndarray
    h_critical_5: float
    h_critical_1: float
    k_critical_5: float
    k_critical_1: float
    n_for_k: int


@dataclass(frozen=True, slots=True, kw_only=True)
class AlgorithmSFactors:
    """Factors of Algorithm S for one number of degrees of freedom.

    Attributes
    ----------
    df : int
        Degrees of freedom ν of each SD.
    eta : float
        Limit factor η: SDs above ``η·w*`` are winsorized.
    xi : float
        Adjustment factor ξ making ``w*`` unbiased for σ at the normal model.
    """

    df: int
    eta: float
    xi: float


@dataclass(frozen=True, slots=True, kw_only=True)
class AlgorithmSResult:
    """Robust pooled standard deviation by Algorithm S.

    Attributes
    ----------
    value : float
        The robust pooled SD ``w*``.
    df : int
        Degrees of freedom of each input SD.
    eta, xi : float
        Limit factor η and adjustment factor ξ for ``df``.
    iterations : int
        Updates performed until convergence.
    converged : bool
        True if the relative change fell to ``ALGORITHM_S_TOLERANCE``.
    """

    value: float
    df: int
    eta: float
    xi: float
    iterations: int
    converged: bool


@dataclass(frozen=True, slots=True, kw_only=True)
class PrecisionResult:
    """Repeatability and reproducibility from one level of a precision study.

    Attributes
    ----------
    cells : CellStatistics
        Per-lab statistics.
    anova : AnovaTable
        One-way ANOVA of the replicates by lab.
    general_mean : float
        ``m = Σ n_i ȳ_i / Σ n_i`` (ISO 5725-2 §7.4.5).
    n_bar : float
        ``(Σn_i − Σn_i²/Σn_i)/(p − 1)``; equals n when balanced.
    balanced : bool
        All labs have the same number of replicates.
    s_r : float
        Repeatability SD, ``√MS_within``.
    s_L : float
        Between-lab SD, ``√max(0, (MS_between − MS_within)/n̄)``.
    s_L_truncated : bool
        True when the estimate of ``s_L²`` was negative and set to 0.
    s_R : float
        Reproducibility SD, ``√(s_r² + s_L²)``.
    r, R : float
        Repeatability and reproducibility limits ``LIMIT_FACTOR·s``.
    mandel : MandelResult or None
        h and k per lab with indicator values (None when not asked for: ``precision(consistency=False)``).
    robust_s_r : AlgorithmSResult or None
        Algorithm S on the cell SDs when every lab has the same n ≥ 2 (and it was asked for), else None.
    """

    cells: CellStatistics
    anova: AnovaTable
    general_mean: float
    n_bar: float
    balanced: bool
    s_r: float
    s_L: float
    s_L_truncated: bool
    s_R: float
    r: float
    R: float
    mandel: MandelResult | None
    robust_s_r: AlgorithmSResult | None

    @property
    def labs(self) -> tuple[str, ...]:
        """Lab codes in the order used throughout."""
        return self.cells.labs

    @property
    def p(self) -> int:
        """Number of labs."""
        return self.cells.p

    def to_dict(self) -> dict[str, object]:
        """JSON-ready summary (per-lab arrays as lists, NaN as None)."""

        def clean(a: np.ndarray) -> list[float | None]:
            return [None if not math.isfinite(v) else float(v) for v in np.asarray(a, float)]

        return {
            "p": self.p,
            "general_mean": self.general_mean,
            "n_bar": self.n_bar,
            "balanced": self.balanced,
            "s_r": self.s_r,
            "s_L": self.s_L,
            "s_L_truncated": self.s_L_truncated,
            "s_R": self.s_R,
            "r": self.r,
            "R": self.R,
            "anova": self.anova.to_dict(),
            "labs": list(self.labs),
            "n": [int(v) for v in self.cells.n],
            "means": clean(self.cells.means),
            "sds": clean(self.cells.sds),
            **({"h": None, "k": None, "h_critical": None, "k_critical": None} if (m := self.mandel) is None else {
                "h": clean(m.h), "k": clean(m.k),
                "h_critical": {"5%": m.h_critical_5, "1%": m.h_critical_1},
                "k_critical": {"5%": m.k_critical_5, "1%": m.k_critical_1}}),
            "robust_s_r": None if self.robust_s_r is None else self.robust_s_r.value,
        }


def _ss(x: np.ndarray, m: float) -> float:
    d = x - m
    return fsum(d * d)


def _groups(lab_arr: np.ndarray) -> tuple[tuple[str, ...], np.ndarray, np.ndarray]:
    """Lab codes in order of first appearance, the row order grouping them (stable), and each row's group."""
    uniq, first, inverse = np.unique(lab_arr, return_index=True, return_inverse=True)
    appearance = np.argsort(first, kind="stable")
    rank = np.empty(appearance.size, dtype=np.intp)
    rank[appearance] = np.arange(appearance.size)
    group = rank[inverse.ravel()]
    return tuple(uniq[appearance].tolist()), np.argsort(group, kind="stable"), group


def cell_statistics(
    values: Sequence[float] | np.ndarray,
    labs: Sequence[str] | np.ndarray,
    *,
    texts: Sequence[str] | None = None,
) -> CellStatistics:
    """Group replicate results by lab and compute cell statistics.

    Parameters
    ----------
    values : array_like of float
        Replicate results, one per row.
    labs : array_like of str
        Lab code of each row.
    texts : sequence of str, optional
        The results as read from the file; when given they are centred in
        exact decimal arithmetic (``values`` is then only used for its length).

    Returns
    -------
    CellStatistics

    Raises
    ------
    StatisticsError
        Empty input, lengths that differ, or a non-finite value (naming the lab).

    Notes
    -----
    All labs are handled at once: the rows are grouped with a stable sort,
    and each lab's sums are correctly rounded sums
    (:func:`~roundscore.stats.exact.grouped_fsum`), so every number is bit for
    bit that of a loop over labs with :func:`math.fsum`: mean ``m = Σx/n``,
    refined ``m + Σ(x − m)/n``, then ``Σ(x − m)²`` on the centred data.
    """
    lab_arr = np.asarray(labs).astype(str)
    if texts is not None:
        if len(texts) != lab_arr.size:
            raise StatisticsError(f"{len(texts)} texts but {lab_arr.size} lab codes")
        c = centred(texts)
    else:
        val = np.asarray(values, dtype=float)
        if val.ndim != 1 or val.size != lab_arr.size:
            raise StatisticsError(f"{val.size} values but {lab_arr.size} lab codes")
        if val.size == 0:
            raise StatisticsError("no results")
        bad = np.flatnonzero(~np.isfinite(val))
        if bad.size:
            i = int(bad[0])
            raise StatisticsError(f"lab {lab_arr[i]}: result {float(val[i])!r} is not a finite number")
        c = centred(val)
    codes, order, group = _groups(lab_arr.ravel())
    n = np.bincount(group, minlength=len(codes)).astype(int)
    starts = np.concatenate(([0], np.cumsum(n)[:-1])).astype(np.intp)
    x = c.deviations[order]
    row_group = group[order]
    dmeans = grouped_fsum(x, starts) / n
    dmeans = dmeans + grouped_fsum(x - dmeans[row_group], starts) / n
    d = x - dmeans[row_group]
    ss = grouped_fsum(d * d, starts)
    with np.errstate(invalid="ignore", divide="ignore"):
        sds = np.where(n > 1, np.sqrt(ss / np.maximum(n - 1, 1)), np.nan)
    means = c.offset_float + dmeans
    return CellStatistics(
        labs=codes, n=n, means=means, sds=sds, offset=c.offset, deviation_means=dmeans, ss_cells=ss
    )


def _anova_from_cells(cells: CellStatistics) -> AnovaTable:
    n = cells.n
    total = int(n.sum())
    p = cells.p
    grand = fsum(n * cells.deviation_means) / total
    d = cells.deviation_means - grand
    grand += fsum(n * d) / total  # refinement pass
    d = cells.deviation_means - grand
    ss_b = fsum(n * d * d)
    ss_w = fsum(cells.ss_cells)
    df_b, df_w = p - 1, total - p
    ms_b = ss_b / df_b if df_b > 0 else math.nan
    ms_w = ss_w / df_w if df_w > 0 else math.nan
    if df_b > 0 and df_w > 0:
        if ms_w > 0:
            f = ms_b / ms_w
        else:
            f = math.inf if ms_b > 0 else math.nan
        p_value = f_sf(f, df_b, df_w) if math.isfinite(f) else (0.0 if f == math.inf else math.nan)
    else:
        f, p_value = math.nan, math.nan
    ss_t = ss_b + ss_w
    return AnovaTable(
        ss_between=ss_b,
        ss_within=ss_w,
        ss_total=ss_t,
        df_between=df_b,
        df_within=df_w,
        df_total=total - 1,
        ms_between=ms_b,
        ms_within=ms_w,
        f=f,
        p_value=p_value,
        r_squared=ss_b / ss_t if ss_t > 0 else math.nan,
        residual_sd=math.sqrt(ms_w) if df_w > 0 else math.nan,
    )


def anova_oneway(
    values: Sequence[float] | np.ndarray,
    groups: Sequence[str] | np.ndarray,
    *,
    texts: Sequence[str] | None = None,
) -> AnovaTable:
    """One-way analysis of variance, computed stably.

    Parameters
    ----------
    values : array_like of float
        Observations.
    groups : array_like of str
        Group (lab) of each observation.
    texts : sequence of str, optional
        Observations as text, centred exactly (see :func:`cell_statistics`).

    Returns
    -------
    AnovaTable

    Notes
    -----
    The data are centred on a common offset (exactly for text input), group
    means are taken with ``math.fsum`` and a refinement pass, and the sums of
    squares are sums of squared deviations from those means, so no
    cancellation of large sums occurs.  The NIST StRD SmLs07-09 sets (13
    constant leading digits) are reproduced to about 15 digits from text.

    References
    ----------
    .. [1] NIST Statistical Reference Datasets, ANOVA,
       https://www.itl.nist.gov/div898/strd/anova/anova.html
    """
    return _anova_from_cells(cell_statistics(values, groups, texts=texts))


@functools.lru_cache(maxsize=4096)
def mandel_h_critical(p: int, alpha: float) -> float:
    """Indicator value for Mandel's |h| with p labs.

    ``h = (p−1)·t / √(p·(t² + p − 2))`` with ``t`` the two-sided ``alpha``
    quantile of Student's t with ``p − 2`` degrees of freedom.

    Parameters
    ----------
    p : int
        Number of labs (≥ 3).
    alpha : float
        Significance level (0.05 or 0.01 in ISO 5725-2 Table 6).

    References
    ----------
    .. [1] ISO 5725-2, §7.3.1 and Table 6.
    """
    if p < 3:
        return math.nan
    t = t_isf(alpha / 2, p - 2)
    return (p - 1) * t / math.sqrt(p * (t * t + p - 2))


@functools.lru_cache(maxsize=4096)
def mandel_k_critical(p: int, n: int, alpha: float) -> float:
    """Indicator value for Mandel's k with p labs of n replicates.

    ``k = √(p / (1 + (p−1)/F))`` with ``F`` the upper ``alpha`` quantile of
    the F distribution with ``n − 1`` and ``(p − 1)(n − 1)`` degrees of freedom.

    References
    ----------
    .. [1] ISO 5725-2, §7.3.1 and Table 6.
    """
    if p < 2 or n < 2:
        return math.nan
    f = f_isf(alpha, n - 1, (p - 1) * (n - 1))
    return math.sqrt(p / (1 + (p - 1) / f))


def _modal_n(n: np.ndarray) -> int:
    values, counts = np.unique(n, return_counts=True)
    return int(values[np.argmax(counts)])  # np.unique sorts, argmax takes the first: ties → smaller n


def mandel(cells: CellStatistics) -> MandelResult:
    """Mandel's h and k for every lab, with 5 % and 1 % indicator values.

    Parameters
    ----------
    cells : CellStatistics

    Returns
    -------
    MandelResult

    Notes
    -----
    h uses the unweighted mean and SD of the cell means (ISO 5725-2 §7.3.1)
    whatever the replicate counts.  k uses only labs with at least two
    results; for an unbalanced layout the indicator values for k take the
    most frequent n (see :class:`MandelResult`), an approximation.
    If the cell means (or SDs) do not vary, h (or k) is NaN.
    """
    dm = cells.deviation_means
    p = cells.p
    centre = fsum_mean(dm)
    sd_means = math.sqrt(_ss(dm, centre) / (p - 1)) if p > 1 else math.nan
    with np.errstate(invalid="ignore", divide="ignore"):
        h = (dm - centre) / sd_means if sd_means > 0 else np.full(p, np.nan)
    has_sd = cells.n > 1
    s = cells.sds[has_sd]
    p_k = int(has_sd.sum())
    sum_s2 = fsum(s * s)
    k = np.full(p, np.nan)
    if p_k >= 1 and sum_s2 > 0:
        k[has_sd] = s * math.sqrt(p_k) / math.sqrt(sum_s2)
    n_k = _modal_n(cells.n[has_sd]) if p_k else 1
    return MandelResult(
        labs=cells.labs,
        h=h,
        k=k,
        h_critical_5=mandel_h_critical(p, 0.05),
        h_critical_1=mandel_h_critical(p, 0.01),
        k_critical_5=mandel_k_critical(p_k, n_k, 0.05),
        k_critical_1=mandel_k_critical(p_k, n_k, 0.01),
        n_for_k=n_k,
    )


@functools.lru_cache(maxsize=256)
def algorithm_s_factors(df: int) -> AlgorithmSFactors:
    """Limit factor η and adjustment factor ξ of Algorithm S for ν = ``df``.

    ``η = √(χ²_{0.9;ν}/ν)`` and ``ξ = 1/√(F_{ν+2}(νη²) + η²·(1 − 0.9))``
    where ``F_{ν+2}`` is the chi-square distribution function with ν + 2
    degrees of freedom: ξ makes ``w*`` unbiased for σ when the SDs follow
    ``σ·√(χ²_ν/ν)`` and are winsorized at ``ηw*``
    (``E[min(X, c)] = ν·F_{ν+2}(c) + c·(1 − F_ν(c))`` for ``X ~ χ²_ν``).

    Parameters
    ----------
    df : int
        Degrees of freedom ν of each SD (n − 1; 1 for a range of duplicates).

    Returns
    -------
    AlgorithmSFactors

    References
    ----------
    .. [1] ISO 13528:2022, Annex C (Algorithm S) and its table of factors.
    """
    if df < 1:
        raise StatisticsError(f"Algorithm S needs at least 1 degree of freedom per SD, got {df}")
    c = chi2_ppf(ALGORITHM_S_COVERAGE, df)
    eta2 = c / df
    xi = 1.0 / math.sqrt(chi2_cdf(c, df + 2) + eta2 * (1.0 - ALGORITHM_S_COVERAGE))
    return AlgorithmSFactors(df=int(df), eta=math.sqrt(eta2), xi=xi)


def algorithm_s(sds: Sequence[float] | np.ndarray, df: int) -> AlgorithmSResult:
    """Robust pooled standard deviation of p standard deviations (Algorithm S).

    Start from ``w* = median(w_i)``; then repeat ``ψ = η·w*``,
    ``w_i* = min(w_i, ψ)``, ``w* = ξ·√(Σ w_i*² / p)`` until the relative change
    of ``w*`` is at most ``ALGORITHM_S_TOLERANCE``.

    Parameters
    ----------
    sds : array_like of float
        Standard deviations (or ranges of duplicates), all with the same
        degrees of freedom; NaN entries are ignored.
    df : int
        Their common degrees of freedom.

    Returns
    -------
    AlgorithmSResult

    Raises
    ------
    StatisticsError
        No finite SD, or a negative one.

    References
    ----------
    .. [1] ISO 13528:2022, Annex C (Algorithm S).
    .. [2] ISO 5725-5:1998, §6.2.
    """
    w = np.asarray(sds, dtype=float)
    w = w[np.isfinite(w)]
    if w.size == 0:
        raise StatisticsError("Algorithm S needs at least one standard deviation")
    if np.any(w < 0):
        raise StatisticsError("Algorithm S: a standard deviation is negative")
    factors = algorithm_s_factors(int(df))
    eta, xi = factors.eta, factors.xi
    current = float(np.median(w))
    iterations = 0
    converged = current == 0.0
    sums = clipped_square_sums(np.sort(w))  # Σ min(w_i, ψ)² exactly as math.fsum gives it, per ψ
    while not converged and iterations < ALGORITHM_S_MAX_ITER:
        psi = eta * current
        if sums is not None:
            square_sum = sums(psi)
        else:
            winsorized = np.minimum(w, psi)
            square_sum = fsum(winsorized * winsorized)
        new = xi * math.sqrt(square_sum / w.size)
        iterations += 1
        converged = abs(new - current) <= ALGORITHM_S_TOLERANCE * abs(current)
        current = new
    return AlgorithmSResult(
        value=current, df=int(df), eta=eta, xi=xi, iterations=iterations, converged=converged
    )


def cells_from(
    values: Sequence[float] | np.ndarray | None,
    labs: Sequence[str] | np.ndarray | None,
    texts: Sequence[str] | None,
    cells: CellStatistics | None,
) -> CellStatistics:
    """The cell statistics given, or computed from the rows; exactly one of the two must be given.

    Raises
    ------
    StatisticsError
        Both or neither of ``cells`` and (``values``, ``labs``).
    """
    if cells is not None:
        if values is not None or labs is not None or texts is not None:
            raise StatisticsError("give either the results (values, labs, texts) or their cell statistics, not both")
        return cells
    if values is None or labs is None:
        raise StatisticsError("give the results (values and labs) or their cell statistics")
    return cell_statistics(values, labs, texts=texts)


def precision(
    values: Sequence[float] | np.ndarray | None = None,
    labs: Sequence[str] | np.ndarray | None = None,
    *,
    texts: Sequence[str] | None = None,
    cells: CellStatistics | None = None,
    consistency: bool = True,
) -> PrecisionResult:
    """Repeatability and reproducibility of one level (ISO 5725-2 §7.4).

    Parameters
    ----------
    values : array_like of float, optional
        Replicate results, one per row.
    labs : array_like of str, optional
        Lab code of each row.
    texts : sequence of str, optional
        The results as read, for exact centring (recommended).
    cells : CellStatistics, optional
        Cell statistics computed before (e.g. ``cells.subset(kept)``), instead
        of ``values``, ``labs`` and ``texts``; the result is then the same as
        from the rows those cells were computed from.
    consistency : bool
        Also Mandel's h and k and Algorithm S (default). False leaves
        ``mandel`` and ``robust_s_r`` None: for the precision of the labs a
        screen kept, whose consistency was judged on all labs.

    Returns
    -------
    PrecisionResult

    Raises
    ------
    StatisticsError
        Fewer than 2 labs, or no lab with replicates ("precision needs replicates").

    Notes
    -----
    ``s_r² = MS_within`` pools all labs with replicates; labs with a single
    result enter only the between-lab mean square.  ``s_L² = (MS_between −
    MS_within)/n̄``; a negative estimate is set to 0 and flagged
    (ISO 5725-2 §7.4.5).  For unbalanced data this is the ANOVA (method of
    moments) estimator with ``n̄`` of ISO 5725-2 §7.4.4.

    Examples
    --------
    >>> res = precision([10.1, 10.3, 10.6, 10.8, 9.9, 10.0], ["A", "A", "B", "B", "C", "C"])
    >>> round(res.s_r, 6), res.s_L_truncated
    (0.122474, False)

    References
    ----------
    .. [1] ISO 5725-2, §7.4.
    """
    cells = cells_from(values, labs, texts, cells)
    if cells.p < 2:
        raise StatisticsError(f"precision needs at least 2 labs, got {cells.p}")
    if not np.any(cells.n > 1):
        raise StatisticsError("precision needs replicates: every lab reported a single result")
    anova = _anova_from_cells(cells)
    n = cells.n.astype(float)
    total = n.sum()
    n_bar = (total - fsum(n * n) / total) / (cells.p - 1)
    s_r2 = anova.ms_within
    s_L2 = (anova.ms_between - s_r2) / n_bar
    truncated = bool(s_L2 < 0)
    s_L2 = max(s_L2, 0.0)
    s_r = math.sqrt(s_r2)
    s_L = math.sqrt(s_L2)
    s_R = math.sqrt(s_r2 + s_L2)
    balanced = bool(np.all(cells.n == cells.n[0]))
    robust = algorithm_s(cells.sds, int(cells.n[0]) - 1) if balanced and consistency else None
    general = float(cells.offset) + fsum(n * cells.deviation_means) / total
    return PrecisionResult(
        cells=cells,
        anova=anova,
        general_mean=general,
        n_bar=n_bar,
        balanced=balanced,
        s_r=s_r,
        s_L=s_L,
        s_L_truncated=truncated,
        s_R=s_R,
        r=LIMIT_FACTOR * s_r,
        R=LIMIT_FACTOR * s_R,
        mandel=mandel(cells) if consistency else None,
        robust_s_r=robust,
    )
