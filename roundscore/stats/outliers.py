"""Outlier screens of ISO 5725-2: Cochran's C and Grubbs' single and double tests.

Critical values are computed, not looked up: Cochran's from the F
distribution, single Grubbs' from Student's t, double Grubbs' by a seeded
Monte Carlo simulation (no closed form exists; :mod:`roundscore.stats.grubbs_double`,
re-exported here).  Levels follow ISO 5725-2:
a statistic beyond its 5 % critical value but not its 1 % value marks a
*straggler*, beyond the 1 % value an *outlier*.  Grubbs' levels are two-sided
(both extremes are examined), as in ISO 5725-2 Table 5.

:func:`screen` runs the ISO 5725-2 §7.3 sequence on one level and records
every test as a :class:`ScreenStep`; :func:`precision_with_screening` then
computes the precision statistics without the excluded labs.  The screens
support, and do not replace, the provider's documented procedures and a
technical look at each flagged lab: ISO 5725-2 §7.3.2 keeps stragglers,
normally excludes outliers, and asks that each flagged lab be investigated
for a technical cause.

References
----------
.. [1] ISO 5725-2:1994 (revised 2019), §7.3.2 (Cochran), §7.3.4
   (Grubbs), Tables 4 and 5.
.. [2] Cochran, W. G. (1941). "The distribution of the largest of a set of
   estimated variances as a fraction of their total". Annals of Eugenics 11, 47-52.
.. [3] Grubbs, F. E. (1950). "Sample criteria for testing outlying
   observations". Annals of Mathematical Statistics 21, 27-58.
.. [4] Grubbs, F. E. and Beck, G. (1972). "Extension of sample sizes and
   percentage points for significance tests of outlying observations".
   Technometrics 14, 847-854.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np

from roundscore.errors import StatisticsError
from roundscore.stats.distributions import f_isf, t_isf
from roundscore.stats.exact import check_choice, fsum, fsum_mean, mean_variance
from roundscore.stats.grubbs_double import (GRUBBS_DOUBLE_SEED, OUTLIER_LEVEL, STRAGGLER_LEVEL, GrubbsDoubleTable,
                                            grubbs_double_critical, grubbs_double_table)
from roundscore.stats.precision import CellStatistics, PrecisionResult, cells_from, precision

__all__ = [
    "GRUBBS_DOUBLE_SEED",
    "OUTLIER_LEVEL",
    "STRAGGLER_LEVEL",
    "CochranResult",
    "DropChoice",
    "GrubbsDoubleTable",
    "GrubbsPair",
    "GrubbsResult",
    "Outcome",
    "ScreenStep",
    "ScreenedPrecision",
    "Screening",
    "Sided",
    "cochran",
    "cochran_critical",
    "grubbs_critical",
    "grubbs_double",
    "grubbs_double_critical",
    "grubbs_double_table",
    "grubbs_single",
    "precision_with_screening",
    "screen",
]

Outcome = Literal["pass", "straggler", "outlier"]
DropChoice = Literal["outlier", "straggler", "none"]
Sided = Literal["two", "one"]


def _outcome_above(stat: float, crit5: float, crit1: float) -> Outcome:
    if stat > crit1:
        return "outlier"
    if stat > crit5:
        return "straggler"
    return "pass"


def _outcome_below(stat: float, crit5: float, crit1: float) -> Outcome:
    if stat < crit1:
        return "outlier"
    if stat < crit5:
        return "straggler"
    return "pass"


# ----------------------------------------------------------------------------- Cochran


@dataclass(frozen=True, slots=True, kw_only=True)
class CochranResult:
    """Cochran's C for the largest within-lab variance.

    Attributes
    ----------
    statistic : float
        ``C = s_max² / Σ s_i²``.
    index : int
        Position of the largest variance in the input.
    p : int
        Number of variances compared.
    n : int
        Replicates per lab used for the critical values.
    critical_5, critical_1 : float
        Upper critical values at 5 % and 1 %.
    outcome : {"pass", "straggler", "outlier"}
    """

    statistic: float
    index: int
    p: int
    n: int
    critical_5: float
    critical_1: float
    outcome: Outcome


@functools.lru_cache(maxsize=4096)
def cochran_critical(p: int, n: int, alpha: float) -> float:
    """Upper critical value of Cochran's C for p variances of n replicates each.

    ``C_crit = 1 / (1 + (p − 1)/F)`` with ``F`` the upper ``alpha/p`` quantile
    of the F distribution with ``n − 1`` and ``(p − 1)(n − 1)`` degrees of freedom.

    Notes
    -----
    Each ratio ``s_j²/Σ s_i²`` follows a beta distribution exactly; the
    ``alpha/p`` split (Bonferroni) is exact whenever the critical value is
    above 1/2, because then at most one lab can exceed it; below 1/2 (many
    labs) it is a slightly conservative bound.

    References
    ----------
    .. [1] Cochran (1941); ISO 5725-2 §7.3.2 and Table 4.
    """
    if p < 2 or n < 2:
        raise StatisticsError(
            f"Cochran's test needs at least 2 groups (labs or items) of 2 replicates; got p={p}, n={n}")
    if not 0.0 < alpha < 1.0:
        raise StatisticsError(f"Cochran's test: alpha must lie strictly between 0 and 1; found {alpha!r}")
    nu = n - 1
    f = f_isf(alpha / p, nu, (p - 1) * nu)
    return 1.0 / (1.0 + (p - 1) / f)


def cochran(sds: Sequence[float] | np.ndarray, n: int) -> CochranResult:
    """Cochran's test on within-lab standard deviations.

    Parameters
    ----------
    sds : array_like of float
        One SD per lab (each from ``n`` replicates).
    n : int
        Replicates per lab; for unequal counts pass the most frequent one
        (ISO 5725-2 §7.3.2 allows this when the counts differ little).

    Returns
    -------
    CochranResult

    Raises
    ------
    StatisticsError
        Fewer than 2 SDs, or all SDs zero (C undefined).
    """
    s = np.asarray(sds, dtype=float)
    if s.size < 2:
        raise StatisticsError("Cochran's test needs at least 2 standard deviations")
    v = s * s
    total = fsum(v)
    if not total > 0:
        raise StatisticsError("Cochran's test: every standard deviation is zero")
    i = int(np.argmax(v))
    c = float(v[i] / total)
    c5 = cochran_critical(s.size, n, STRAGGLER_LEVEL)
    c1 = cochran_critical(s.size, n, OUTLIER_LEVEL)
    return CochranResult(
        statistic=c, index=i, p=s.size, n=int(n), critical_5=c5, critical_1=c1,
        outcome=_outcome_above(c, c5, c1),
    )


_cochran_test = cochran  # ``screen`` has a parameter named ``cochran``


# ----------------------------------------------------------------------------- Grubbs single


@dataclass(frozen=True, slots=True, kw_only=True)
class GrubbsResult:
    """A Grubbs test on one extreme of a set of values.

    Attributes
    ----------
    side : {"high", "low"}
        Which extreme was tested.
    statistic : float
        Single test: ``(x_max − x̄)/s`` or ``(x̄ − x_min)/s`` (large is
        suspicious). Double test: the ratio of sums of squares without and
        with the two extremes (small is suspicious).
    indices : tuple of int
        Positions in the input of the tested value(s).
    p : int
        Number of values.
    critical_5, critical_1 : float
        Critical values at 5 % and 1 % (two-sided, ISO 5725-2 Table 5).
    outcome : {"pass", "straggler", "outlier"}
    """

    side: Literal["high", "low"]
    statistic: float
    indices: tuple[int, ...]
    p: int
    critical_5: float
    critical_1: float
    outcome: Outcome


@dataclass(frozen=True, slots=True, kw_only=True)
class GrubbsPair:
    """The Grubbs test at both extremes of the same values.

    Attributes
    ----------
    high : GrubbsResult
        Test of the largest value(s).
    low : GrubbsResult
        Test of the smallest value(s).
    """

    high: GrubbsResult
    low: GrubbsResult


@functools.lru_cache(maxsize=4096)
def grubbs_critical(n: int, alpha: float, *, sided: Sided = "two") -> float:
    """Critical value of the single Grubbs statistic for n values.

    ``G = (n − 1)/√n · √(t² / (n − 2 + t²))`` with ``t`` the upper
    ``alpha/(2n)`` (two-sided) or ``alpha/n`` (one-sided) quantile of
    Student's t with ``n − 2`` degrees of freedom.  This is exact when the
    critical value exceeds ``(n − 1)/√(2n)`` (then only one value per side can
    exceed it, e.g. n ≤ 14 at 5 %); above that it is a close, slightly
    conservative bound (n = 20, 5 %: 2.7082 against 2.709 in ISO 5725-2 Table 5).

    References
    ----------
    .. [1] Grubbs (1950); ISO 5725-2 Table 5; NIST/SEMATECH e-Handbook of
       Statistical Methods, §1.3.5.17.1.
    """
    check_choice("sided", sided, Sided)
    if n < 3:
        raise StatisticsError(f"Grubbs' test needs at least 3 values, got {n}")
    a = alpha / (2 * n) if sided == "two" else alpha / n
    t = t_isf(a, n - 2)
    return (n - 1) / math.sqrt(n) * math.sqrt(t * t / (n - 2 + t * t))


def grubbs_single(values: Sequence[float] | np.ndarray) -> GrubbsPair:
    """Single Grubbs test on the largest and on the smallest value.

    Parameters
    ----------
    values : array_like of float
        Lab means (at least 3).

    Returns
    -------
    GrubbsPair
        The test of the largest and of the smallest value.

    Raises
    ------
    StatisticsError
        Fewer than 3 values, or no spread.
    """
    x = np.asarray(values, dtype=float)
    p = x.size
    if p < 3:
        raise StatisticsError(f"Grubbs' test needs at least 3 values, got {p}")
    m, var = mean_variance(x)
    s = math.sqrt(var)
    if not s > 0:
        raise StatisticsError("Grubbs' test: the values do not vary")
    c5 = grubbs_critical(p, STRAGGLER_LEVEL)
    c1 = grubbs_critical(p, OUTLIER_LEVEL)
    hi, lo = int(np.argmax(x)), int(np.argmin(x))
    g_hi, g_lo = (x[hi] - m) / s, (m - x[lo]) / s
    return GrubbsPair(
        high=GrubbsResult(side="high", statistic=float(g_hi), indices=(hi,), p=p, critical_5=c5,
                     critical_1=c1, outcome=_outcome_above(g_hi, c5, c1)),
        low=GrubbsResult(side="low", statistic=float(g_lo), indices=(lo,), p=p, critical_5=c5,
                     critical_1=c1, outcome=_outcome_above(g_lo, c5, c1)),
    )


# ----------------------------------------------------------------------------- Grubbs double


def grubbs_double(values: Sequence[float] | np.ndarray) -> GrubbsPair:
    """Double Grubbs test on the two largest and on the two smallest values.

    Parameters
    ----------
    values : array_like of float
        Lab means (at least 4).

    Returns
    -------
    GrubbsPair
        The test of the two largest and of the two smallest values.

    Raises
    ------
    StatisticsError
        Fewer than 4 values, or no spread.
    """
    x = np.asarray(values, dtype=float)
    p = x.size
    if p < 4:
        raise StatisticsError(f"the double Grubbs test needs at least 4 values, got {p}")
    m = fsum_mean(x)
    d = x - m
    ss0 = fsum(d * d)
    if not ss0 > 0:
        raise StatisticsError("Grubbs' test: the values do not vary")
    order = np.argsort(x, kind="stable")
    table = grubbs_double_table(p)

    def ratio(keep: np.ndarray) -> float:
        y = x[keep]
        my = fsum_mean(y)
        e = y - my
        return fsum(e * e) / ss0

    g_hi = ratio(order[:-2])
    g_lo = ratio(order[2:])
    result = functools.partial(GrubbsResult, p=p, critical_5=table.critical_5, critical_1=table.critical_1)
    return GrubbsPair(
        high=result(side="high", statistic=g_hi, indices=(int(order[-1]), int(order[-2])),
                    outcome=_outcome_below(g_hi, table.critical_5, table.critical_1)),
        low=result(side="low", statistic=g_lo, indices=(int(order[0]), int(order[1])),
                   outcome=_outcome_below(g_lo, table.critical_5, table.critical_1)),
    )


# ----------------------------------------------------------------------------- the ISO 5725-2 sequence


@dataclass(frozen=True, slots=True, kw_only=True)
class ScreenStep:
    """One test in the screening sequence.

    Attributes
    ----------
    step : int
        1-based order of the test.
    test : str
        ``"cochran"``, ``"grubbs_high"``, ``"grubbs_low"``,
        ``"grubbs_double_high"`` or ``"grubbs_double_low"``.
    labs : tuple of str
        The lab(s) the statistic points at.
    p : int
        Number of labs taking part in the test.
    statistic : float
    critical_5, critical_1 : float
        Critical values at 5 % and 1 % (upper for Cochran and single Grubbs,
        lower for double Grubbs).
    outcome : {"pass", "straggler", "outlier"}
    excluded : bool
        Whether the lab(s) were removed after this test.
    """

    step: int
    test: str
    labs: tuple[str, ...]
    p: int
    statistic: float
    critical_5: float
    critical_1: float
    outcome: Outcome
    excluded: bool

    def to_dict(self) -> dict[str, object]:
        """JSON-ready mapping."""
        return {name: (list(v) if isinstance(v := getattr(self, name), tuple) else v) for name in self.__slots__}


@dataclass(frozen=True, slots=True, kw_only=True)
class Screening:
    """The outcome of the ISO 5725-2 outlier screens on one level.

    Attributes
    ----------
    steps : tuple of ScreenStep
        Every test applied, in order.
    outliers, stragglers : tuple of str
        Labs flagged (a lab appears once, under its most severe flag).
    excluded : tuple of str
        Labs removed from the precision estimates, in the order removed.
    retained : tuple of str
        Labs kept.
    drop : {"outlier", "straggler", "none"}
        What was removed: outliers only, stragglers and outliers, or nothing.
    notes : tuple of str
        Tests skipped and why.
    """

    steps: tuple[ScreenStep, ...]
    outliers: tuple[str, ...]
    stragglers: tuple[str, ...]
    excluded: tuple[str, ...]
    retained: tuple[str, ...]
    drop: DropChoice
    notes: tuple[str, ...]

    def to_dict(self) -> dict[str, object]:
        """JSON-ready mapping."""
        return {
            "steps": [s.to_dict() for s in self.steps],
            "outliers": list(self.outliers),
            "stragglers": list(self.stragglers),
            "excluded": list(self.excluded),
            "retained": list(self.retained),
            "drop": self.drop,
            "notes": list(self.notes),
        }

    def to_text(self) -> list[str]:
        """Readable lines, one per test."""
        lines = []
        for s in self.steps:
            action = ", excluded" if s.excluded else ""
            lines.append(
                f"{s.step}. {s.test} ({s.p} labs) on {', '.join(s.labs)}: {s.statistic:.4g} "
                f"(5 % {s.critical_5:.4g}, 1 % {s.critical_1:.4g}) -> {s.outcome}{action}"
            )
        lines += [f"note: {n}" for n in self.notes]
        return lines


@dataclass(frozen=True, slots=True, kw_only=True)
class ScreenedPrecision:
    """Precision statistics after the outlier screens.

    Attributes
    ----------
    precision : PrecisionResult
        Computed from the retained labs.
    screening : Screening
        The tests and flags.
    """

    precision: PrecisionResult
    screening: Screening

    @property
    def excluded(self) -> tuple[str, ...]:
        """Labs left out of :attr:`precision`."""
        return self.screening.excluded

    @property
    def steps(self) -> tuple[ScreenStep, ...]:
        """The screening steps."""
        return self.screening.steps


def _modal(n: np.ndarray) -> int:
    values, counts = np.unique(n, return_counts=True)
    return int(values[np.argmax(counts)])


class _Recorder:
    """Book-keeping shared by the screening phases."""

    def __init__(self, drop: DropChoice) -> None:
        self.removable: set[str] = {"outlier"} if drop == "outlier" else (
            {"outlier", "straggler"} if drop == "straggler" else set())
        self.steps: list[ScreenStep] = []
        self.flags: dict[str, Outcome] = {}
        self.excluded: list[str] = []
        self.notes: list[str] = []

    def record(self, test: str, labs: tuple[str, ...], p: int, stat: float, c5: float, c1: float,
               outcome: Outcome) -> bool:
        remove = outcome in self.removable
        self.steps.append(ScreenStep(step=len(self.steps) + 1, test=test, labs=labs, p=p, statistic=float(stat),
                                     critical_5=float(c5), critical_1=float(c1), outcome=outcome,
                                     excluded=remove))
        if outcome != "pass":
            for lab in labs:
                if self.flags.get(lab) != "outlier":
                    self.flags[lab] = outcome
        if remove:
            self.excluded.extend(labs)
        return remove


def screen(
    values: Sequence[float] | np.ndarray | None = None,
    labs: Sequence[str] | np.ndarray | None = None,
    *,
    texts: Sequence[str] | None = None,
    cells: CellStatistics | None = None,
    cochran: bool = True,
    grubbs: bool = True,
    drop: DropChoice = "outlier",
    double_max_p: int | None = None,
) -> Screening:
    """Apply the ISO 5725-2 outlier screens to one level.

    1. Cochran's test on the within-lab variances (labs with ≥ 2 results);
       each time a lab is removed the test is repeated on the remaining labs.
    2. Single Grubbs' test on the lab means, at both extremes.  If a lab is
       removed, the test is repeated once at the *other* extreme on the
       remaining labs and the double test is not applied.  Otherwise the
       double Grubbs' test is applied at both extremes (ISO 5725-2 §7.3.4).

    Parameters
    ----------
    values : array_like of float, optional
        Replicate results.
    labs : array_like of str, optional
        Lab code of each result.
    texts : sequence of str, optional
        Results as text, centred exactly before the sums.
    cells : CellStatistics, optional
        The cell statistics of these results computed before, instead of
        ``values``, ``labs`` and ``texts`` (same screening, no second pass).
    cochran, grubbs : bool
        Which screens to run.
    drop : {"outlier", "straggler", "none"}
        ``"outlier"`` removes outliers and keeps stragglers (the standard's
        default); ``"straggler"`` removes both (and repeats tests after a
        straggler is removed as after an outlier); ``"none"`` flags only.
    double_max_p : int, optional
        Skip the double Grubbs test (with a note) when more labs than this
        remain: its critical values are simulated at a cost that grows with p
        (about 0.7 s at p = 100, 3 s at p = 500 on first use).  None (default)
        applies it at any p.

    Returns
    -------
    Screening

    Notes
    -----
    With unequal replicate counts Cochran's critical values use the most
    frequent count (ties: the smaller).  Ties for the largest variance or
    the extreme mean go to the lab that appears first.
    """
    check_choice("drop", drop, DropChoice)
    cells = cells_from(values, labs, texts, cells)
    rec = _Recorder(drop)
    active = list(range(cells.p))
    codes = cells.labs
    replicated = (cells.n > 1).tolist()
    if cochran:
        while True:
            with_sd = [i for i in active if replicated[i]]
            if len(with_sd) < 2:
                rec.notes.append("Cochran's test skipped: fewer than 2 labs with replicates")
                break
            sds = cells.sds[with_sd]
            if not np.any(sds > 0):
                rec.notes.append("Cochran's test skipped: no lab shows within-lab spread")
                break
            res = _cochran_test(sds, _modal(cells.n[with_sd]))
            lab = with_sd[res.index]
            if not rec.record("cochran", (codes[lab],), res.p, res.statistic, res.critical_5, res.critical_1,
                              res.outcome):
                break
            active.remove(lab)
    if grubbs:
        _grubbs_phase(cells.deviation_means, codes, active, rec, double_max_p)
    flagged = [c for c in codes if c in rec.flags]
    return Screening(
        steps=tuple(rec.steps),
        outliers=tuple(c for c in flagged if rec.flags[c] == "outlier"),
        stragglers=tuple(c for c in flagged if rec.flags[c] == "straggler"),
        excluded=tuple(rec.excluded),
        retained=tuple(codes[i] for i in active),
        drop=drop,
        notes=tuple(rec.notes),
    )


def _grubbs_phase(means: np.ndarray, codes: tuple[str, ...], active: list[int], rec: _Recorder,
                  double_max_p: int | None = None) -> None:
    """Single then double Grubbs on the active labs' means; updates ``active`` in place."""
    if len(active) < 3:
        rec.notes.append("Grubbs' test skipped: fewer than 3 labs")
        return
    x = means[active]
    if not np.ptp(x) > 0:
        rec.notes.append("Grubbs' test skipped: the lab means do not vary")
        return
    single = grubbs_single(x)
    high, low = single.high, single.low
    lab_hi, lab_lo = active[high.indices[0]], active[low.indices[0]]
    # Test the more extreme side first so that, if it is removed, the other side is re-tested.
    pair = [(high, lab_hi), (low, lab_lo)]
    if low.statistic > high.statistic:
        pair.reverse()
    (first, lab_first), (second, lab_second) = pair
    removed = rec.record(f"grubbs_{first.side}", (codes[lab_first],), first.p, first.statistic,
                         first.critical_5, first.critical_1, first.outcome)
    if removed:
        active.remove(lab_first)
        if len(active) < 3:
            rec.notes.append(f"Grubbs' test on the {second.side} side not repeated: fewer than 3 labs left")
            return
        if not np.ptp(means[active]) > 0:
            rec.notes.append(f"Grubbs' test on the {second.side} side not repeated: the remaining means do not vary")
            return
        retest = grubbs_single(means[active])
        again = retest.high if second.side == "high" else retest.low
        lab = active[again.indices[0]]
        if rec.record(f"grubbs_{again.side}", (codes[lab],), again.p, again.statistic, again.critical_5,
                      again.critical_1, again.outcome):
            active.remove(lab)
        rec.notes.append("double Grubbs' test not applied: the single test removed a lab")
        return
    if rec.record(f"grubbs_{second.side}", (codes[lab_second],), second.p, second.statistic,
                  second.critical_5, second.critical_1, second.outcome):
        active.remove(lab_second)
        rec.notes.append("double Grubbs' test not applied: the single test removed a lab")
        return
    if first.outcome == "outlier" or second.outcome == "outlier":
        rec.notes.append("double Grubbs' test not applied: the single test found an outlier")
        return
    if len(active) < 4:
        rec.notes.append("double Grubbs' test skipped: fewer than 4 labs")
        return
    if double_max_p is not None and len(active) > double_max_p:
        rec.notes.append(f"double Grubbs' test skipped: {len(active)} labs, more than {double_max_p} "
                         "(its simulated critical values cost time in proportion to p)")
        return
    double = grubbs_double(means[active])
    to_remove: list[int] = []
    for res in (double.high, double.low):
        idx = [active[i] for i in res.indices]
        if rec.record(f"grubbs_double_{res.side}", tuple(codes[i] for i in idx), res.p, res.statistic,
                      res.critical_5, res.critical_1, res.outcome):
            to_remove += [i for i in idx if i not in to_remove]
    for i in to_remove:
        active.remove(i)


def precision_with_screening(
    values: Sequence[float] | np.ndarray | None = None,
    labs: Sequence[str] | np.ndarray | None = None,
    *,
    texts: Sequence[str] | None = None,
    cells: CellStatistics | None = None,
    cochran: bool = True,
    grubbs: bool = True,
    drop: DropChoice = "outlier",
) -> ScreenedPrecision:
    """Screen for outliers (:func:`screen`), then compute precision without the excluded labs.

    Parameters
    ----------
    values, labs, texts, cells, cochran, grubbs, drop
        As for :func:`screen`.

    Returns
    -------
    ScreenedPrecision

    Raises
    ------
    StatisticsError
        When the labs left cannot give precision estimates (names the excluded labs).

    Notes
    -----
    The cell statistics are computed once; the precision after the screens
    takes the retained labs' cells (:meth:`CellStatistics.subset`), which keep
    the offset of all labs.  Against centring the retained rows afresh this
    can change the last bit of a result (both are correctly rounded sums of
    exactly centred data).
    """
    cells = cells_from(values, labs, texts, cells)
    screening = screen(cells=cells, cochran=cochran, grubbs=grubbs, drop=drop)
    try:
        result = precision(cells=cells.subset(screening.retained) if screening.excluded else cells)
    except StatisticsError as exc:
        if not screening.excluded:
            raise
        raise StatisticsError(f"after excluding {', '.join(screening.excluded)}: {exc}") from None
    return ScreenedPrecision(precision=result, screening=screening)
