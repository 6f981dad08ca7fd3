"""Homogeneity and stability of proficiency-test items.

Pure functions on numpy arrays: a homogeneity study is a one-way layout
(g items, m replicate measurements on each), a stability study compares two
sets of measurements of the item (for example before and after the round).

The results support, and do not replace, the provider's documented
procedures, ISO/IEC 17043 and the accreditation body's rules: whether items
are fit for a round is the provider's decision.

References
----------
.. [1] ISO 13528:2015, *Statistical methods for use in proficiency testing by
   interlaboratory comparison*, Annex B (homogeneity and stability of
   proficiency test items), Table B.1; clause 7 for the uncertainty of the
   assigned value. Clause numbers quoted in this module are from memory.
.. [2] M. Thompson, S. L. R. Ellison, R. Wood, "The International Harmonized
   Protocol for the proficiency testing of analytical chemistry
   laboratories", Pure Appl. Chem. 78 (2006) 145-196 (IUPAC), Section 3.11
   and Appendix 1 (from memory).
.. [3] ISO 5725-2:1994, *Basic method for the determination of repeatability
   and reproducibility*, 7.3.2 (Cochran's test, stragglers and outliers).
.. [4] W. G. Cochran, "The distribution of the largest of a set of estimated
   variances as a fraction of their total", Ann. Eugen. 11 (1941) 47-52.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike

from roundscore.choices import check_choice
from roundscore.errors import StatisticsError
from roundscore.stats.limits import within
# Cochran's critical value is shared with the ISO 5725-2 screens (one implementation).
from roundscore.stats.outliers import cochran_critical as _cochran_critical

__all__ = [
    "HOMOGENEITY_FACTOR",
    "REPEATABILITY_LIMIT_FACTOR",
    "STABILITY_FACTOR",
    "STABILITY_COVERAGE_FACTOR",
    "RECOMMENDED_MIN_ITEMS",
    "CriterionFactors",
    "HomogeneityResult",
    "StabilityResult",
    "StabilityCriterion",
    "expanded_criterion_factors",
    "homogeneity",
    "stability",
    "item_uncertainty",
    "widened_sigma",
]

#: Between-item SD allowed as a fraction of sigma_pt: s_s <= 0.3 sigma_pt
#: (ISO 13528:2015 B.2; IUPAC harmonized protocol 2006, 3.11).
HOMOGENEITY_FACTOR = 0.3

#: The homogeneity test is not meaningful when the within-item (repeatability)
#: SD of the check method exceeds this fraction of sigma_pt (IUPAC harmonized
#: protocol 2006, Appendix 1: analytical precision below 0.5 sigma_p; from memory).
REPEATABILITY_LIMIT_FACTOR = 0.5

#: Allowed difference between the two stability means as a fraction of
#: sigma_pt: |y1 - y2| <= 0.3 sigma_pt (ISO 13528:2015 B.5).
STABILITY_FACTOR = 0.3

#: Coverage factor on the uncertainty of the difference in the expanded
#: stability criterion (ISO 13528:2015 B.5: 2 * sqrt(u1^2 + u2^2)).
STABILITY_COVERAGE_FACTOR = 2.0

#: ISO 13528:2015 B.2 asks for at least 10 items in a homogeneity check
#: (from memory); fewer are accepted here with a note.
RECOMMENDED_MIN_ITEMS = 10

#: Cochran's test levels (ISO 5725-2:1994 7.3.2): a statistic above the 5 %
#: critical value is a straggler, above the 1 % value an outlier.
COCHRAN_STRAGGLER_ALPHA = 0.05
COCHRAN_OUTLIER_ALPHA = 0.01

StabilityCriterion = Literal["auto", "simple", "expanded"]
CochranSignal = Literal["none", "straggler", "outlier", "not computed"]
WithinMethod = Literal["duplicate differences", "within-item mean square"]


def _number(name: str, value: object, kind: Literal["positive", "nonnegative", "probability"]) -> float:
    """``value`` as a finite float that is > 0, >= 0, or strictly between 0 and 1 (``kind``)."""
    try:
        x = float(value)  # type: ignore[arg-type]  # any value; a non-number raises below
    except (TypeError, ValueError):
        raise StatisticsError(f"{name} must be a number; found {value!r}") from None
    ok = {"positive": x > 0.0, "nonnegative": x >= 0.0, "probability": 0.0 < x < 1.0}[kind]
    rule = {"positive": "be a finite number > 0", "nonnegative": "be a finite number >= 0"}
    if not (math.isfinite(x) and ok):
        what = rule.get(kind, "lie strictly between 0 and 1")
        raise StatisticsError(f"{name} must {what}; found {value!r}")
    return x


def _met(flag: bool) -> str:
    return "met" if flag else "not met"


def _finite_vector(name: str, values: ArrayLike) -> np.ndarray:
    """``values`` as a 1-D float array; every entry must be a finite number."""
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise StatisticsError(f"{name}: every value must be a number") from None
    if arr.ndim != 1:
        raise StatisticsError(f"{name}: expected a 1-D sequence of values; found shape {arr.shape}")
    bad = np.flatnonzero(~np.isfinite(arr))
    if bad.size:
        shown = ", ".join(f"position {i + 1}: {float(arr[i])!r}" for i in bad[:5])
        more = f" and {bad.size - 5} more" if bad.size > 5 else ""
        raise StatisticsError(f"{name}: {bad.size} value(s) not finite ({shown}{more})")
    return arr


@dataclass(frozen=True, slots=True, kw_only=True)
class CriterionFactors:
    """Factors of the expanded homogeneity criterion (ISO 13528:2015 B.2, Table B.1).

    Attributes
    ----------
    g : int
        Number of items.
    m : float
        Replicates per item (the effective number for an unbalanced table).
    df_within : int
        Degrees of freedom of s_w: g(m - 1), or N - g when unbalanced.
    alpha : float
        Level; the quantiles are the 1 - alpha ones (0.95 in ISO 13528).
    f1 : float
        chi^2_{1-alpha, g-1} / (g - 1).
    f2 : float
        (F_{1-alpha, g-1, df_within} - 1) / m.
    """

    g: int
    m: float
    df_within: int
    alpha: float
    f1: float
    f2: float


def expanded_criterion_factors(
    g: int, m: float = 2, *, alpha: float = 0.05, df_within: int | None = None
) -> CriterionFactors:
    """F1 and F2 of the expanded homogeneity criterion.

    s_s^2 <= F1 (0.3 sigma_pt)^2 + F2 s_w^2, with F1 = chi^2_{1-alpha, g-1}/(g-1)
    and F2 = (F_{1-alpha, g-1, g(m-1)} - 1)/m. For duplicates this is ISO 13528's
    F2 = (F_{0.95, g-1, g} - 1)/2.

    Parameters
    ----------
    g : int
        Number of items, at least 2.
    m : float
        Replicates per item, > 1 (may be the non-integer effective number of an
        unbalanced table; then give ``df_within``).
    alpha : float
        1 - alpha is the quantile level; ISO 13528 uses 0.05.
    df_within : int, optional
        Within-item degrees of freedom; default g(m - 1).

    Returns
    -------
    CriterionFactors

    References
    ----------
    .. [1] ISO 13528:2015, B.2 and Table B.1.

    Examples
    --------
    >>> fac = expanded_criterion_factors(10, 2)
    >>> round(fac.f1, 2), round(fac.f2, 2)
    (1.88, 1.01)
    """
    if int(g) != g or g < 2:
        raise StatisticsError(f"the expanded criterion needs at least 2 items; found g={g!r}")
    g = int(g)
    if not math.isfinite(float(m)) or m <= 1:
        raise StatisticsError(f"the expanded criterion needs more than 1 replicate per item; found m={m!r}")
    alpha = _number("alpha", alpha, "probability")
    if df_within is None:
        df_within = round(g * (m - 1))
    if df_within < 1:
        raise StatisticsError(f"within-item degrees of freedom must be >= 1; found {df_within!r}")
    q = 1.0 - alpha
    from scipy import stats  # here, not at import: scipy.stats takes about a second to load
    f1 = float(stats.chi2.ppf(q, g - 1) / (g - 1))
    f2 = float((stats.f.ppf(q, g - 1, df_within) - 1.0) / m)
    return CriterionFactors(g=g, m=m, df_within=int(df_within), alpha=alpha, f1=f1, f2=f2)



@dataclass(frozen=True, slots=True, kw_only=True)
class HomogeneityResult:
    """Outcome of a homogeneity check (ISO 13528:2015 Annex B).

    Attributes
    ----------
    item_labels : tuple of str
        Item labels in order of first appearance.
    item_means : tuple of float
        Mean of each item's replicates, same order.
    replicates : tuple of int
        Number of replicates of each item, same order.
    g : int
        Number of items.
    m : float
        Replicates per item: the common number (an ``int``) when balanced;
        when unbalanced the effective number n0 = (N - sum n_i^2 / N)/(g - 1)
        of the one-way random-effects ANOVA (a ``float``).
    balanced : bool
        True when every item has the same number of replicates.
    n : int
        Number of values N.
    mean, s_x : float
        General mean (mean of the item means) and SD of the item means.
    s_w : float
        Within-item standard deviation; see ``s_w_method``.
    s_w_method : {"duplicate differences", "within-item mean square"}
        "duplicate differences": sqrt(sum w_t^2 / (2g)) with w_t the difference
        of item t's pair (balanced duplicates); otherwise the square root of the
        one-way ANOVA within-item mean square (identical for duplicates).
    s_s : float
        Between-item standard deviation sqrt(max(0, s_x^2 - s_w^2/m)); when
        unbalanced, sqrt(max(0, (MS_between - MS_within)/n0)).
    s_s_truncated : bool
        True when the estimate of s_s^2 was negative and s_s was set to 0.
    ms_between, ms_within : float
        One-way ANOVA mean squares (balanced: m s_x^2 and s_w^2).
    df_between, df_within : int
        Their degrees of freedom, g - 1 and N - g.
    sigma_pt, alpha : float
        sigma_pt used; level of the expanded criterion (quantiles at 1 - alpha).
    criterion, allowed : float
        c = 0.3 sigma_pt; the expanded allowance sqrt(F1 c^2 + F2 s_w^2).
    f1, f2 : float
        Factors of the expanded criterion (ISO 13528 Table B.1).
    passed_simple, passed_expanded : bool
        s_s <= c; s_s <= allowed.
    passed : bool
        The verdict: the expanded criterion (``passed_expanded``), which
        allows for the sampling error of s_s; the simple one is kept beside it.
    precision_adequate : bool
        s_w <= 0.5 sigma_pt; when False the check cannot detect heterogeneity
        of the size that matters and ``precision_warning`` says so.
    precision_warning : str or None
        The warning text, or None.
    cochran_c, cochran_item : float, str or None
        Cochran's C on the within-item variances and the item with the
        largest one (nan and None when every variance is zero).
    cochran_critical_5, cochran_critical_1 : float
        Critical values at 5 % and 1 % (from the F distribution).
    cochran_signal : {"none", "straggler", "outlier", "not computed"}
        ISO 5725-2 wording: straggler above the 5 % value, outlier above 1 %.
    notes : tuple of str
        What was assumed, truncated, decided and warned, in words.
    """

    item_labels: tuple[str, ...]
    item_means: tuple[float, ...]
    replicates: tuple[int, ...]
    g: int
    m: float
    balanced: bool
    n: int
    mean: float
    s_x: float
    s_w: float
    s_w_method: WithinMethod
    s_s: float
    s_s_truncated: bool
    ms_between: float
    ms_within: float
    df_between: int
    df_within: int
    sigma_pt: float
    alpha: float
    criterion: float
    f1: float
    f2: float
    allowed: float
    passed_simple: bool
    passed_expanded: bool
    passed: bool
    precision_adequate: bool
    precision_warning: str | None
    cochran_c: float
    cochran_item: str | None
    cochran_critical_5: float
    cochran_critical_1: float
    cochran_signal: CochranSignal
    notes: tuple[str, ...]


def _group(items: ArrayLike, n_values: int) -> tuple[list[str], np.ndarray]:
    """Item labels (first-appearance order) and each value's item code."""
    labels_in = np.asarray(items, dtype=object)
    if labels_in.ndim != 1:
        raise StatisticsError(f"items: expected a 1-D sequence of labels; found shape {labels_in.shape}")
    if labels_in.size != n_values:
        msg = f"items and values differ in length: {labels_in.size} labels, {n_values} values"
        raise StatisticsError(msg)
    index: dict[str, int] = {}
    codes = np.empty(n_values, dtype=np.intp)
    for pos, label in enumerate(labels_in):
        if label is None or (isinstance(label, float) and math.isnan(label)):
            raise StatisticsError(f"items: missing item label at position {pos + 1}")
        key = str(label).strip()
        if not key:
            raise StatisticsError(f"items: empty item label at position {pos + 1}")
        codes[pos] = index.setdefault(key, len(index))
    return list(index), codes


def homogeneity(
    items: ArrayLike, values: ArrayLike, sigma_pt: float, *, alpha: float = 0.05
) -> HomogeneityResult:
    """Check the homogeneity of proficiency-test items.

    The data are a one-way layout: ``values[k]`` is a measurement on item
    ``items[k]``; g items with m >= 2 replicates each (ISO 13528 asks for
    g >= 10 items in duplicate).

    Parameters
    ----------
    items : array_like
        Item label of each value (anything with a string form; labels are
        compared as stripped strings).
    values : array_like of float
        The measurements, finite.
    sigma_pt : float
        Standard deviation for proficiency assessment, > 0.
    alpha : float, default 0.05
        Level of the expanded criterion (chi-square and F quantiles at
        1 - alpha). Cochran's test always uses 5 % and 1 %.

    Returns
    -------
    HomogeneityResult
        ``passed`` is the expanded criterion; both verdicts are kept.

    Raises
    ------
    StatisticsError
        Fewer than 2 items, an item with a single replicate, non-finite
        values, missing labels, or a bad ``sigma_pt``/``alpha``.

    Notes
    -----
    Assumptions, stated:

    - Balanced tables follow ISO 13528 B.3 exactly: s_x is the SD of the item
      means, s_w comes from the pair differences (duplicates) or the within
      mean square (m > 2), s_s^2 = s_x^2 - s_w^2/m.
    - Unbalanced tables (ISO 13528 does not cover them) use the one-way
      random-effects ANOVA: s_w^2 = pooled within-item variance (N - g df),
      s_s^2 = (MS_between - MS_within)/n0 with n0 the effective replicate
      number, F2 with N - g df and divided by n0; Cochran's test uses the most
      frequent replicate number (the smaller on a tie), as ISO 5725-2 allows
      for slight imbalance. s_x is still the plain SD of the item means.
    - Values are centred on their median before any sum.
    - Items flagged by Cochran's test are reported, not removed: the
      provider decides after investigating.

    References
    ----------
    .. [1] ISO 13528:2015, Annex B.2-B.3 and Table B.1.
    .. [2] IUPAC harmonized protocol (2006), 3.11 and Appendix 1.
    .. [3] ISO 5725-2:1994, 7.3.2 (Cochran's test).

    Examples
    --------
    >>> items = ["A", "A", "B", "B", "C", "C"]
    >>> values = [10.1, 10.3, 10.2, 10.2, 9.9, 10.1]
    >>> res = homogeneity(items, values, sigma_pt=0.5)
    >>> res.g, res.m, res.s_w_method
    (3, 2, 'duplicate differences')
    >>> bool(res.passed)
    True
    """
    sigma_pt = _number("sigma_pt", sigma_pt, "positive")
    alpha = _number("alpha", alpha, "probability")
    y = _finite_vector("values", values)
    labels, codes = _group(items, y.size)
    counts = _replicates_per_item(labels, codes)
    g = len(labels)
    notes: list[str] = []
    balanced = bool(np.all(counts == counts[0]))
    a = _one_way(y, codes, counts)
    if balanced:
        m: float = int(counts[0])
        s_x2 = a.s_x * a.s_x
    else:
        m = float((a.n - float(np.dot(counts, counts)) / a.n) / a.df_between)
        s_x2 = a.ms_between / m
        notes.append(
            f"unbalanced table (replicates per item from {counts.min()} to {counts.max()}): "
            f"s_s from the one-way ANOVA mean squares with effective replicate number n0 = {m:.4g}"
        )
    s_w, s_w_method = _within_sd(a, codes, g, duplicates=balanced and m == 2, notes=notes)

    s_s2 = s_x2 - s_w * s_w / m
    s_s_truncated = s_s2 < 0.0
    s_s = math.sqrt(max(0.0, s_s2))
    if s_s_truncated:
        notes.append(
            f"s_x̄² − s_w²/m = {s_s2:.4g} is negative: between-item SD s_s set to 0 "
            "(the between-item spread is below what the within-item spread explains)"
        )

    criterion, factors, allowed, passed_simple, passed_expanded = _criteria(
        sigma_pt, alpha, g=g, m=m, s_s=s_s, s_w=s_w, df_within=a.df_within, notes=notes)
    precision_adequate = bool(within(s_w, REPEATABILITY_LIMIT_FACTOR * sigma_pt))
    precision_warning = None
    if not precision_adequate:
        precision_warning = (
            f"s_w = {s_w:.4g} exceeds 0.5 σ_pt = {REPEATABILITY_LIMIT_FACTOR * sigma_pt:.4g}: "
            "the check method is too imprecise for the homogeneity test to be meaningful"
        )
        notes.append(precision_warning)
    if g < RECOMMENDED_MIN_ITEMS:
        notes.append(f"only {g} items checked; ISO 13528 asks for at least {RECOMMENDED_MIN_ITEMS}")
    cochran = _cochran(a, codes, counts, labels, pairs=balanced and m == 2, notes=notes)
    if not balanced:
        notes.append(f"Cochran's critical values for {cochran.replicates} replicates per item (most frequent)")

    return HomogeneityResult(
        item_labels=tuple(labels), item_means=tuple(float(a.shift + v) for v in a.means_d),
        replicates=tuple(int(c) for c in counts), g=g, m=m, balanced=balanced, n=a.n,
        mean=a.general_mean, s_x=a.s_x, s_w=s_w, s_w_method=s_w_method, s_s=s_s, s_s_truncated=s_s_truncated,
        ms_between=a.ms_between, ms_within=a.ms_within, df_between=a.df_between, df_within=a.df_within,
        sigma_pt=sigma_pt, alpha=alpha, criterion=criterion, f1=factors.f1, f2=factors.f2, allowed=allowed,
        passed_simple=passed_simple, passed_expanded=passed_expanded, passed=passed_expanded,
        precision_adequate=precision_adequate, precision_warning=precision_warning,
        cochran_c=cochran.c, cochran_item=cochran.item, cochran_critical_5=cochran.critical_5,
        cochran_critical_1=cochran.critical_1, cochran_signal=cochran.signal, notes=tuple(notes),
    )


def _criteria(sigma_pt: float, alpha: float, *, g: int, m: float, s_s: float, s_w: float, df_within: int,
              notes: list[str]) -> tuple[float, CriterionFactors, float, bool, bool]:
    """The simple (s_s ≤ 0.3σ_pt) and expanded criterion: c, F1 and F2, the allowance, both verdicts."""
    criterion = HOMOGENEITY_FACTOR * sigma_pt
    factors = expanded_criterion_factors(g, m, alpha=alpha, df_within=df_within)
    allowed = math.sqrt(factors.f1 * criterion**2 + factors.f2 * s_w**2)
    passed_simple = bool(within(s_s, criterion))
    passed_expanded = bool(within(s_s, allowed))
    notes.append(
        f"simple criterion s_s ≤ 0.3 σ_pt = {criterion:.4g}: {_met(passed_simple)} (s_s = {s_s:.4g}); "
        f"expanded criterion s_s ≤ √(F1·c² + F2·s_w²) = {allowed:.4g} (F1 = {factors.f1:.4g}, "
        f"F2 = {factors.f2:.4g}): {_met(passed_expanded)}; the verdict uses the expanded criterion"
    )
    if passed_expanded and not passed_simple:
        notes.append(
            "the simple criterion alone would reject the items; the expanded one allows "
            "for the sampling error of s_s from this check"
        )
    return criterion, factors, allowed, passed_simple, passed_expanded


def _replicates_per_item(labels: list[str], codes: np.ndarray) -> np.ndarray:
    """The replicates of each item; StatisticsError for fewer than 2 items or an item measured once."""
    g = len(labels)
    if g < 2:
        raise StatisticsError(f"a homogeneity check needs at least 2 items; found {g}")
    counts = np.bincount(codes, minlength=g)
    single = [labels[i] for i in np.flatnonzero(counts < 2)]
    if single:
        shown = ", ".join(repr(s) for s in single[:10])
        more = f" and {len(single) - 10} more" if len(single) > 10 else ""
        msg = f"every item needs at least 2 replicates; {len(single)} item(s) have one: {shown}{more}"
        raise StatisticsError(msg)
    return counts


@dataclass(frozen=True, slots=True)
class _OneWay:
    """The one-way layout of a homogeneity table, centred on the median of its values."""

    n: int
    shift: float  # the median the values are centred on
    d: np.ndarray  # the centred values
    means_d: np.ndarray  # centred item means
    resid: np.ndarray  # each value less its item mean
    df_between: int
    df_within: int
    ms_between: float
    ms_within: float
    general_mean: float  # mean of the item means
    s_x: float  # SD of the item means


def _one_way(y: np.ndarray, codes: np.ndarray, counts: np.ndarray) -> _OneWay:
    g = counts.size
    n_total = int(y.size)
    # Centre first, then two-pass means with a correction pass.
    shift = float(np.median(y))
    d = y - shift
    means_d = np.bincount(codes, weights=d, minlength=g) / counts
    resid = d - means_d[codes]
    means_d = means_d + np.bincount(codes, weights=resid, minlength=g) / counts
    resid = d - means_d[codes]

    df_between = g - 1
    df_within = n_total - g
    ms_within = float(np.dot(resid, resid)) / df_within
    grand_d = float(np.dot(counts, means_d) / n_total)  # weighted (ANOVA) grand mean
    dev = means_d - grand_d
    ms_between = float(np.dot(counts, dev * dev)) / df_between
    return _OneWay(n=n_total, shift=shift, d=d, means_d=means_d, resid=resid, df_between=df_between,
                   df_within=df_within, ms_between=ms_between, ms_within=ms_within,
                   general_mean=shift + float(np.mean(means_d)), s_x=float(np.std(means_d, ddof=1)))


def _within_sd(a: _OneWay, codes: np.ndarray, g: int, *, duplicates: bool,
               notes: list[str]) -> tuple[float, WithinMethod]:
    """s_w: from the pair differences of a table in duplicate, else the within-item mean square."""
    if duplicates:
        pairs = a.d[np.argsort(codes, kind="stable")].reshape(g, 2)  # centred pair of each item
        w = pairs[:, 1] - pairs[:, 0]
        notes.append("s_w from the within-item duplicate differences: √(Σw²/(2g))")
        return math.sqrt(float(np.dot(w, w)) / (2 * g)), "duplicate differences"
    notes.append("s_w from the one-way ANOVA within-item mean square")
    return math.sqrt(a.ms_within), "within-item mean square"


@dataclass(frozen=True, slots=True)
class _Cochran:
    c: float
    item: str | None
    signal: CochranSignal
    critical_5: float
    critical_1: float
    replicates: int  # the replicate number of the critical values


def _cochran(a: _OneWay, codes: np.ndarray, counts: np.ndarray, labels: list[str], *, pairs: bool,
             notes: list[str]) -> _Cochran:
    """Cochran's test on the within-item variances (ISO 5725-2 7.3.2)."""
    g = counts.size
    var_i = np.bincount(codes, weights=a.resid * a.resid, minlength=g) / (counts - 1)
    total = float(var_i.sum())
    freq = Counter(int(c) for c in counts)
    n_cochran = min(freq, key=lambda c: (-freq[c], c))  # most frequent; the smaller on a tie
    crit5 = _cochran_critical(g, n_cochran, COCHRAN_STRAGGLER_ALPHA)
    crit1 = _cochran_critical(g, n_cochran, COCHRAN_OUTLIER_ALPHA)
    if not total > 0.0:
        notes.append("Cochran's test not computed: every within-item variance is zero")
        return _Cochran(c=math.nan, item=None, signal="not computed", critical_5=crit5, critical_1=crit1,
                        replicates=n_cochran)
    worst = int(np.argmax(var_i))
    cochran_c = float(var_i[worst] / total)
    item = labels[worst]
    signal: CochranSignal = "outlier" if cochran_c > crit1 else "straggler" if cochran_c > crit5 else "none"
    if signal != "none":
        what = "discordant pair" if pairs else "largest within-item variance"
        notes.append(
            f"Cochran's test: item {item!r} ({what}) C = {cochran_c:.4g} exceeds the "
            f"{'1 %' if signal == 'outlier' else '5 %'} critical value "
            f"{crit1 if signal == 'outlier' else crit5:.4g} ({signal}); "
            "kept in the calculation, to be investigated"
        )
    return _Cochran(c=cochran_c, item=item, signal=signal, critical_5=crit5, critical_1=crit1,
                    replicates=n_cochran)



@dataclass(frozen=True, slots=True, kw_only=True)
class StabilityResult:
    """Outcome of a stability check (ISO 13528:2015 B.5-B.6).

    Attributes
    ----------
    n_first, n_second : int
        Number of values in each set.
    mean_first, mean_second, difference : float
        The two means (first: e.g. before the round or reference storage;
        second: after the round or transport conditions) and
        mean_first - mean_second (signed).
    u_first, u_second : float
        Standard uncertainties of the two means: as given, else SD/sqrt(n);
        nan when neither is available (a single value and no uncertainty).
    u_first_given, u_second_given : bool
        Whether each uncertainty was given by the caller.
    sigma_pt, criterion : float
        sigma_pt used and 0.3 sigma_pt, the allowance of the simple criterion.
    allowed_expanded : float
        0.3 sigma_pt + 2 sqrt(u_first^2 + u_second^2); nan when unknown.
    passed_simple, passed_expanded : bool, bool or None
        |difference| <= criterion; |difference| <= allowed_expanded (None when
        the uncertainties are unknown).
    criterion_used, passed : {"simple", "expanded"}, bool
        Which criterion gives the verdict, and the verdict.
    u_stab : float
        |difference| / sqrt(3): uncertainty from instability, the observed
        difference taken as half-width of a rectangular distribution (B.6).
    notes : tuple of str
        What was assumed and decided, in words.
    """

    n_first: int
    n_second: int
    mean_first: float
    mean_second: float
    difference: float
    u_first: float
    u_second: float
    u_first_given: bool
    u_second_given: bool
    sigma_pt: float
    criterion: float
    allowed_expanded: float
    passed_simple: bool
    passed_expanded: bool | None
    criterion_used: Literal["simple", "expanded"]
    passed: bool
    u_stab: float
    notes: tuple[str, ...]


def _mean_and_u(name: str, values: ArrayLike, u_given: float | None) -> tuple[int, float, float]:
    """Size, stable mean and standard uncertainty of the mean of one stability set."""
    arr = _finite_vector(name, values)
    if arr.size == 0:
        raise StatisticsError(f"{name}: a stability check needs at least 1 value in each set; found none")
    shift = float(np.median(arr))
    mean = shift + float(np.mean(arr - shift))
    if u_given is not None:
        u = _number(f"u_{name}", u_given, "nonnegative")
    elif arr.size >= 2:
        u = float(np.std(arr, ddof=1)) / math.sqrt(arr.size)
    else:
        u = math.nan
    return int(arr.size), mean, u


def stability(
    first: ArrayLike,
    second: ArrayLike,
    sigma_pt: float,
    *,
    u_first: float | None = None,
    u_second: float | None = None,
    criterion: StabilityCriterion = "auto",
) -> StabilityResult:
    """Check the stability of proficiency-test items.

    Simple criterion |y1 - y2| <= 0.3 sigma_pt; expanded criterion
    |y1 - y2| <= 0.3 sigma_pt + 2 sqrt(u^2(y1) + u^2(y2)) (ISO 13528 B.5).

    Parameters
    ----------
    first, second : array_like of float
        The two sets of measurements (at least one value each).
    sigma_pt : float
        Standard deviation for proficiency assessment, > 0.
    u_first, u_second : float, optional
        Standard uncertainties of the two means. When not given, SD/sqrt(n)
        of the set (needs at least 2 values).
    criterion : {"auto", "simple", "expanded"}, default "auto"
        Which criterion gives the verdict. "auto" uses the expanded one when
        the caller gave ``u_first`` or ``u_second`` (they describe the
        measurements, e.g. run-to-run effects when the two sets were measured
        apart) and both uncertainties are known, otherwise the simple one.
        Both verdicts are always reported.

    Returns
    -------
    StabilityResult

    Raises
    ------
    StatisticsError
        Empty set, non-finite values, bad ``sigma_pt`` or uncertainty, an
        unknown ``criterion``, or "expanded" asked for when an uncertainty
        cannot be found (a single value and none given).

    Notes
    -----
    Means are computed after centring on the median. ``u_stab`` is
    |y1 - y2|/sqrt(3) whether or not the check passed (see StabilityResult).

    References
    ----------
    .. [1] ISO 13528:2015, B.5 (criteria) and B.6 (uncertainty from instability).

    Examples
    --------
    >>> res = stability([5.02, 4.98, 5.01], [4.97, 4.99, 4.95], sigma_pt=0.2)
    >>> res.criterion_used, bool(res.passed)
    ('simple', True)
    """
    check_choice("criterion", criterion, StabilityCriterion, error=StatisticsError)
    sigma_pt = _number("sigma_pt", sigma_pt, "positive")
    n1, mean1, u1 = _mean_and_u("first", first, u_first)
    n2, mean2, u2 = _mean_and_u("second", second, u_second)
    notes: list[str] = []

    diff = mean1 - mean2
    crit = STABILITY_FACTOR * sigma_pt
    passed_simple = bool(within(abs(diff), crit))
    u_known = math.isfinite(u1) and math.isfinite(u2)
    if u_known:
        allowed = crit + STABILITY_COVERAGE_FACTOR * math.hypot(u1, u2)
        passed_expanded: bool | None = bool(within(abs(diff), allowed))
    else:
        allowed = math.nan
        passed_expanded = None
        notes.append("expanded criterion not computed: a set has a single value and no uncertainty was given")
    for name, given in (("first", u_first is not None), ("second", u_second is not None)):
        if u_known and not given:
            notes.append(f"u of the {name} mean from its SD/√n")

    given_any = u_first is not None or u_second is not None
    auto_choice: Literal["simple", "expanded"] = "expanded" if given_any and u_known else "simple"
    used = auto_choice if criterion == "auto" else criterion
    if used == "expanded" and passed_expanded is None:
        raise StatisticsError(
            "the expanded stability criterion needs the uncertainty of both means: give u_first and "
            "u_second, or at least 2 values in each set"
        )
    passed = passed_simple if used == "simple" else bool(passed_expanded)
    shown = f"|ȳ1 − ȳ2| = {abs(diff):.4g}"
    notes.append(f"{shown}; simple criterion |ȳ1 − ȳ2| ≤ 0.3 σ_pt = {crit:.4g}: {_met(passed_simple)}")
    if passed_expanded is not None:
        notes.append(
            f"expanded criterion |ȳ1 − ȳ2| ≤ 0.3 σ_pt + 2√(u1² + u2²) = {allowed:.4g}: "
            f"{_met(passed_expanded)}"
        )
    notes.append(f"the verdict uses the {used} criterion")
    u_stab = abs(diff) / math.sqrt(3.0)
    notes.append("u_stab = |ȳ1 − ȳ2|/√3: the difference as half-width of a rectangular distribution")

    return StabilityResult(
        n_first=n1, n_second=n2, mean_first=mean1, mean_second=mean2, difference=diff, u_first=u1,
        u_second=u2, u_first_given=u_first is not None, u_second_given=u_second is not None,
        sigma_pt=sigma_pt, criterion=crit, allowed_expanded=allowed, passed_simple=passed_simple,
        passed_expanded=passed_expanded, criterion_used=used, passed=passed, u_stab=u_stab,
        notes=tuple(notes),
    )



def item_uncertainty(u_char: float, u_hom: float, u_stab: float) -> float:
    """Standard uncertainty of an assigned value from characterisation, homogeneity and stability.

    u = sqrt(u_char^2 + u_hom^2 + u_stab^2), the three taken as independent.

    Parameters
    ----------
    u_char : float
        Uncertainty of the characterisation (e.g. of the reference value).
    u_hom : float
        Uncertainty from between-item differences (e.g. s_s of the homogeneity check).
    u_stab : float
        Uncertainty from instability (e.g. ``StabilityResult.u_stab``).

    Returns
    -------
    float

    References
    ----------
    .. [1] ISO 13528:2015, clause 7 (uncertainty of the assigned value; from memory).

    Examples
    --------
    >>> item_uncertainty(0.3, 0.4, 0.0)
    0.5
    """
    a = _number("u_char", u_char, "nonnegative")
    b = _number("u_hom", u_hom, "nonnegative")
    c = _number("u_stab", u_stab, "nonnegative")
    return float(math.hypot(a, b, c))


def widened_sigma(sigma_pt: float, s_s: float) -> float:
    """sigma_pt widened for between-item differences: sqrt(sigma_pt^2 + s_s^2).

    For items that fail the homogeneity criterion but are still used, the
    between-item SD is added to sigma_pt in quadrature.

    Parameters
    ----------
    sigma_pt : float
        Standard deviation for proficiency assessment, > 0.
    s_s : float
        Between-item standard deviation, >= 0.

    Returns
    -------
    float

    References
    ----------
    .. [1] ISO 13528:2015, B.2 (from memory).

    Examples
    --------
    >>> widened_sigma(3.0, 4.0)
    5.0
    """
    s = _number("sigma_pt", sigma_pt, "positive")
    b = _number("s_s", s_s, "nonnegative")
    return float(math.hypot(s, b))
