"""Comparisons of means: two method groups, one group against a reference, many groups.

Inputs are lab means (one value per lab).  Two groups are compared with a
two-sided F test of the variances first; if it does not reject at the chosen
level the pooled-SD t test is used (df = n₁ + n₂ − 2), otherwise Welch's t
test with the Welch–Satterthwaite df.  The choice and its reason are
recorded.  Three or more groups get a one-way ANOVA and pairwise tests with
Holm's correction.  Groups with fewer than 2 labs are listed, not tested.

A preliminary variance test is a convention of many laboratory texts, but it
changes the error rate of the following t test slightly; pass
``method="welch"`` to use Welch's test throughout.

References
----------
.. [1] ISO 2854:1976, Statistical interpretation of data - Techniques of
   estimation and tests relating to means and variances.
.. [2] Welch, B. L. (1947). "The generalization of 'Student's' problem when
   several different population variances are involved". Biometrika 34, 28-35.
.. [3] Satterthwaite, F. E. (1946). Biometrics Bulletin 2, 110-114.
.. [4] Holm, S. (1979). "A simple sequentially rejective multiple test
   procedure". Scandinavian Journal of Statistics 6, 65-70.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from roundscore.errors import StatisticsError
from roundscore.stats.distributions import f_cdf, f_isf, f_ppf, f_sf, t_isf, t_sf
from roundscore.ranges import (MAX_MAGNITUDE, MIN_MAGNITUDE, confidence_problem, magnitude_problem,
                               spread_problem)
from roundscore.stats.exact import check_choice, mean_variance
from roundscore.stats.precision import AnovaTable, anova_oneway
from roundscore.support.plain import plain_fields

__all__ = [
    "DEFAULT_CONFIDENCE",
    "MIN_GROUP_SIZE",
    "DISCLAIMER",
    "Method",
    "VarianceTest",
    "TwoSampleComparison",
    "OneSampleComparison",
    "PairwiseComparison",
    "GroupComparison",
    "compare_two",
    "compare_one",
    "compare_groups",
    "holm",
]

#: Default confidence level of tests and intervals (common practice).
DEFAULT_CONFIDENCE = 0.95
#: Smallest group that can be tested (an SD needs two values).
MIN_GROUP_SIZE = 2
#: Shown with every comparison (ISO/IEC 17043 leaves decisions to the provider).
DISCLAIMER = (
    "This evaluation supports, and does not replace, the provider's documented procedures, "
    "ISO/IEC 17043 and the accreditation body's rules."
)

Method = Literal["auto", "pooled", "welch"]


def _fmt(x: float) -> str:
    return f"{x:.4g}"


def _pct(confidence: float) -> str:
    return f"{100 * confidence:g} %"


def _check_confidence(confidence: float) -> float:
    why = confidence_problem(confidence)
    if why is not None:
        raise StatisticsError(f"confidence must be {why}, got {confidence!r}")
    return float(confidence)


def _sample(values: Sequence[float] | np.ndarray, label: str) -> np.ndarray:
    x = np.asarray(values, dtype=float).ravel()
    if x.size < MIN_GROUP_SIZE:
        raise StatisticsError(f"group {label}: need at least {MIN_GROUP_SIZE} values, got {x.size}")
    if not np.all(np.isfinite(x)):
        raise StatisticsError(f"group {label}: a value is not a finite number")
    size = np.abs(x)
    if np.any((size > MAX_MAGNITUDE) | ((size > 0) & (size < MIN_MAGNITUDE))):  # then name the first
        for v in x:  # roundscore.ranges: beyond these the sums of squares overflow or underflow
            why = magnitude_problem(v)
            if why is not None:
                raise StatisticsError(f"group {label}: the value {v:g} is {why}")
    return x


def _spread(sd: float, values: np.ndarray, label: str) -> None:
    """Refuse a t test whose spread is rounding (roundscore.ranges.spread_problem)."""
    why = spread_problem(sd, float(np.max(np.abs(values))), f"the values of {label}")
    if why is not None:
        raise StatisticsError(f"{why}; the t test is not meaningful")


@dataclass(frozen=True, slots=True, kw_only=True)
class VarianceTest:
    """Two-sided F test of the ratio of two variances.

    Attributes
    ----------
    f : float
        ``s_a² / s_b²``.
    df_a, df_b : int
        Degrees of freedom ``n_a − 1`` and ``n_b − 1``.
    p_value : float
        Two-sided p-value, ``2·min(P(F ≤ f), P(F ≥ f))``.
    critical_low, critical_high : float
        F quantiles at ``α/2`` and ``1 − α/2``.
    alpha : float
        Level used, ``1 − confidence``.
    reject : bool
        True when ``p_value < alpha`` (variances differ).
    """

    f: float
    df_a: int
    df_b: int
    p_value: float
    critical_low: float
    critical_high: float
    alpha: float
    reject: bool

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready mapping."""
        return plain_fields(self)


@dataclass(frozen=True, slots=True, kw_only=True)
class TwoSampleComparison:
    """Comparison of the means of two groups.

    Attributes
    ----------
    label_a, label_b : str
        Group names.
    n_a, n_b : int
    mean_a, mean_b, sd_a, sd_b : float
    variance_test : VarianceTest
        The preliminary F test (always computed, shown even when the method is forced).
    method : {"pooled", "welch"}
        The t test used.
    method_reason : str
        Why that test was used.
    pooled_sd : float or None
        Pooled SD (pooled test only).
    difference : float
        ``mean_a − mean_b``.
    standard_error : float
        Standard error of the difference.
    t, df : float
        t statistic and its degrees of freedom.
    t_critical : float
        Two-sided critical t at ``confidence``.
    p_value : float
        Two-sided p-value.
    ci_low, ci_high : float
        Confidence interval of the difference.
    confidence : float
    significant : bool
        ``p_value < 1 − confidence``.
    conclusion : str
        One line in words.
    """

    label_a: str
    label_b: str
    n_a: int
    n_b: int
    mean_a: float
    mean_b: float
    sd_a: float
    sd_b: float
    variance_test: VarianceTest
    method: Literal["pooled", "welch"]
    method_reason: str
    pooled_sd: float | None
    difference: float
    standard_error: float
    t: float
    df: float
    t_critical: float
    p_value: float
    ci_low: float
    ci_high: float
    confidence: float
    significant: bool
    conclusion: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready mapping (non-finite numbers become null)."""
        return {"kind": "two-sample", **plain_fields(self), "disclaimer": DISCLAIMER}

    def to_text(self) -> list[str]:
        """Readable lines."""
        v = self.variance_test
        name = "pooled-SD t test" if self.method == "pooled" else "Welch t test"
        lines = [
            f"{self.label_a}: n = {self.n_a}, mean = {_fmt(self.mean_a)}, SD = {_fmt(self.sd_a)}",
            f"{self.label_b}: n = {self.n_b}, mean = {_fmt(self.mean_b)}, SD = {_fmt(self.sd_b)}",
            f"F test of variances: F = {_fmt(v.f)} (df {v.df_a}, {v.df_b}), two-sided p = {_fmt(v.p_value)}, "
            f"acceptance range {_fmt(v.critical_low)} to {_fmt(v.critical_high)}",
            f"test used: {name} ({self.method_reason})",
        ]
        if self.pooled_sd is not None:
            lines.append(f"pooled SD = {_fmt(self.pooled_sd)}")
        lines += [
            f"t = {_fmt(self.t)}, df = {_fmt(self.df)}, critical t = {_fmt(self.t_critical)}, "
            f"p = {_fmt(self.p_value)}",
            f"difference {self.label_a} - {self.label_b} = {_fmt(self.difference)}, "
            f"{_pct(self.confidence)} CI {_fmt(self.ci_low)} to {_fmt(self.ci_high)}",
            self.conclusion,
            DISCLAIMER,
        ]
        return lines


@dataclass(frozen=True, slots=True, kw_only=True)
class OneSampleComparison:
    """Comparison of one group's mean with a reference value.

    Attributes
    ----------
    label : str
    n : int
    mean, sd : float
    reference : float
    difference : float
        ``mean − reference``.
    standard_error : float
        ``sd/√n``.
    t, df : float
    t_critical : float
        Two-sided critical t at ``confidence``.
    p_value : float
        Two-sided.
    ci_low, ci_high : float
        Confidence interval of the mean.
    confidence : float
    significant : bool
    conclusion : str
    """

    label: str
    n: int
    mean: float
    sd: float
    reference: float
    difference: float
    standard_error: float
    t: float
    df: float
    t_critical: float
    p_value: float
    ci_low: float
    ci_high: float
    confidence: float
    significant: bool
    conclusion: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready mapping."""
        return {"kind": "one-sample", **plain_fields(self), "disclaimer": DISCLAIMER}

    def to_text(self) -> list[str]:
        """Readable lines."""
        return [
            f"{self.label}: n = {self.n}, mean = {_fmt(self.mean)}, SD = {_fmt(self.sd)}",
            f"reference value = {_fmt(self.reference)}, difference = {_fmt(self.difference)}",
            f"t = {_fmt(self.t)}, df = {_fmt(self.df)}, critical t = {_fmt(self.t_critical)}, "
            f"p = {_fmt(self.p_value)}",
            f"{_pct(self.confidence)} CI of the mean {_fmt(self.ci_low)} to {_fmt(self.ci_high)}",
            self.conclusion,
            DISCLAIMER,
        ]


@dataclass(frozen=True, slots=True, kw_only=True)
class PairwiseComparison:
    """One pair of groups within a multi-group comparison.

    Attributes
    ----------
    comparison : TwoSampleComparison
        The unadjusted two-sample test.
    p_adjusted : float
        Holm-adjusted p-value.
    significant : bool
        ``p_adjusted < 1 − confidence``.
    """

    comparison: TwoSampleComparison
    p_adjusted: float
    significant: bool

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready mapping."""
        return plain_fields(self)


@dataclass(frozen=True, slots=True, kw_only=True)
class GroupComparison:
    """Comparison of the means of several groups.

    Attributes
    ----------
    groups : tuple of str
        Groups tested (at least 2 labs each), in order of first appearance.
    sizes : tuple of int
    means, sds : tuple of float
    untested : tuple of str
        Groups with fewer than 2 labs (listed, not tested).
    anova : AnovaTable or None
        One-way ANOVA across the tested groups (None if fewer than 2).
    anova_significant : bool
        ANOVA p-value below ``1 − confidence``.
    pairwise : tuple of PairwiseComparison
        Every pair of tested groups.
    adjustment : str
        Multiple-comparison correction (``"holm"``).
    confidence : float
    conclusion : str
    """

    groups: tuple[str, ...]
    sizes: tuple[int, ...]
    means: tuple[float, ...]
    sds: tuple[float, ...]
    untested: tuple[str, ...]
    anova: AnovaTable | None
    anova_significant: bool
    pairwise: tuple[PairwiseComparison, ...]
    adjustment: str
    confidence: float
    conclusion: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready mapping."""
        return {"kind": "groups", **plain_fields(self), "disclaimer": DISCLAIMER}

    def to_text(self) -> list[str]:
        """Readable lines."""
        lines = [
            f"{g}: n = {n}, mean = {_fmt(m)}, SD = {_fmt(s)}"
            for g, n, m, s in zip(self.groups, self.sizes, self.means, self.sds)
        ]
        if self.untested:
            lines.append("not tested (fewer than 2 labs): " + ", ".join(self.untested))
        if self.anova is not None:
            a = self.anova
            lines.append(
                f"one-way ANOVA: F = {_fmt(a.f)} (df {a.df_between}, {a.df_within}), p = {_fmt(a.p_value)}"
            )
        for pc in self.pairwise:
            c = pc.comparison
            lines.append(
                f"{c.label_a} vs {c.label_b}: difference {_fmt(c.difference)}, {c.method} t = {_fmt(c.t)}, "
                f"p = {_fmt(c.p_value)}, Holm p = {_fmt(pc.p_adjusted)}"
                + (" (significant)" if pc.significant else "")
            )
        lines += [self.conclusion, DISCLAIMER]
        return lines


def _variance_test(va: float, vb: float, dfa: int, dfb: int, alpha: float) -> VarianceTest:
    if vb > 0:
        f = va / vb
    else:
        f = math.inf if va > 0 else math.nan
    if math.isnan(f):
        p = math.nan
    else:
        p = min(1.0, 2 * min(f_cdf(f, dfa, dfb), f_sf(f, dfa, dfb)))
    return VarianceTest(
        f=f, df_a=dfa, df_b=dfb, p_value=p,
        critical_low=f_ppf(alpha / 2, dfa, dfb), critical_high=f_isf(alpha / 2, dfa, dfb),
        alpha=alpha, reject=bool(p < alpha),
    )


def compare_two(
    a: Sequence[float] | np.ndarray,
    b: Sequence[float] | np.ndarray,
    *,
    confidence: float = DEFAULT_CONFIDENCE,
    method: Method = "auto",
    labels: tuple[str, str] = ("A", "B"),
) -> TwoSampleComparison:
    """Compare the means of two groups of lab means.

    Parameters
    ----------
    a, b : array_like of float
        The two groups (at least 2 values each).
    confidence : float
        Confidence level of the interval and of both tests (default 0.95).
    method : {"auto", "pooled", "welch"}
        ``"auto"`` uses the pooled-SD test unless the F test of variances
        rejects equality at level ``1 − confidence``, then Welch's test.
    labels : (str, str)
        Names of the groups for the text.

    Returns
    -------
    TwoSampleComparison

    Raises
    ------
    StatisticsError
        A group with fewer than 2 values, a non-finite value, or no spread in
        either group.

    Examples
    --------
    >>> res = compare_two([12.1, 12.4, 12.2, 12.5], [12.9, 13.1, 12.8, 13.3])
    >>> res.method, round(res.t, 3), res.significant
    ('pooled', -5.048, True)
    """
    check_choice("method", method, Method)
    confidence = _check_confidence(confidence)
    la, lb = labels
    x, y = _sample(a, la), _sample(b, lb)
    alpha = 1 - confidence
    na, nb = x.size, y.size
    ma, va = mean_variance(x)
    mb, vb = mean_variance(y)
    if va == 0 and vb == 0:
        raise StatisticsError(f"groups {la} and {lb}: no spread in either group, the t test is undefined")
    _spread(math.sqrt(max(va, vb)), np.concatenate([x, y]), f"{la} and {lb}")
    ftest = _variance_test(va, vb, na - 1, nb - 1, alpha)
    use: Literal["pooled", "welch"]
    if method == "auto":
        use = "welch" if ftest.reject else "pooled"
        reason = (
            f"the F test rejects equal variances at {_pct(confidence)}, p = {_fmt(ftest.p_value)}"
            if ftest.reject
            else f"the F test does not reject equal variances at {_pct(confidence)}, p = {_fmt(ftest.p_value)}"
        )
    else:
        use = method
        reason = "chosen by the user"
    diff = ma - mb
    pooled_sd = None
    if use == "pooled":
        df = float(na + nb - 2)
        sp2 = ((na - 1) * va + (nb - 1) * vb) / df
        pooled_sd = math.sqrt(sp2)
        se = pooled_sd * math.sqrt(1 / na + 1 / nb)
    else:
        qa, qb = va / na, vb / nb
        se = math.sqrt(qa + qb)
        df = (qa + qb) ** 2 / (qa * qa / (na - 1) + qb * qb / (nb - 1))
    t = diff / se
    tc = t_isf(alpha / 2, df)
    p = float(2 * t_sf(abs(t), df))
    lo, hi = diff - tc * se, diff + tc * se
    significant = bool(p < alpha)
    name = "pooled-SD t" if use == "pooled" else "Welch t"
    body = (
        f"{la} - {lb} = {_fmt(diff)} ({_pct(confidence)} CI {_fmt(lo)} to {_fmt(hi)}), "
        f"{name} = {_fmt(t)} with {_fmt(df)} df, p = {_fmt(p)}"
    )
    conclusion = (
        f"The means of {la} and {lb} differ significantly at the {_pct(confidence)} confidence level: {body}."
        if significant
        else f"No significant difference between the means of {la} and {lb} at the "
        f"{_pct(confidence)} confidence level: {body}."
    )
    return TwoSampleComparison(
        label_a=la, label_b=lb, n_a=na, n_b=nb, mean_a=ma, mean_b=mb, sd_a=math.sqrt(va), sd_b=math.sqrt(vb),
        variance_test=ftest, method=use, method_reason=reason, pooled_sd=pooled_sd, difference=diff,
        standard_error=se, t=t, df=df, t_critical=tc, p_value=p, ci_low=lo, ci_high=hi,
        confidence=confidence, significant=significant, conclusion=conclusion,
    )


def compare_one(
    x: Sequence[float] | np.ndarray,
    reference: float,
    *,
    confidence: float = DEFAULT_CONFIDENCE,
    label: str = "A",
) -> OneSampleComparison:
    """One-sample t test of a group's mean against a reference value.

    Parameters
    ----------
    x : array_like of float
        At least 2 values.
    reference : float
        The reference value (e.g. a certified value).
    confidence : float
        Confidence level (default 0.95).
    label : str
        Name of the group for the text.

    Returns
    -------
    OneSampleComparison

    Raises
    ------
    StatisticsError
        Fewer than 2 values, a non-finite value or reference, or no spread.
    """
    confidence = _check_confidence(confidence)
    v = _sample(x, label)
    ref = float(reference)
    if not math.isfinite(ref):
        raise StatisticsError(f"reference value {reference!r} is not a finite number")
    alpha = 1 - confidence
    m, var = mean_variance(v)
    if var == 0:
        raise StatisticsError(f"group {label}: the values do not vary, the t test is undefined")
    _spread(math.sqrt(var), v, label)
    n = v.size
    sd = math.sqrt(var)
    se = sd / math.sqrt(n)
    df = float(n - 1)
    diff = m - ref
    t = diff / se
    tc = t_isf(alpha / 2, df)
    p = float(2 * t_sf(abs(t), df))
    lo, hi = m - tc * se, m + tc * se
    significant = bool(p < alpha)
    body = (
        f"mean {_fmt(m)} vs reference {_fmt(ref)}, difference {_fmt(diff)}, t = {_fmt(t)} with "
        f"{_fmt(df)} df, p = {_fmt(p)}"
    )
    conclusion = (
        f"The mean of {label} differs significantly from the reference value at the "
        f"{_pct(confidence)} confidence level: {body}."
        if significant
        else f"No significant difference between the mean of {label} and the reference value at the "
        f"{_pct(confidence)} confidence level: {body}."
    )
    return OneSampleComparison(
        label=label, n=n, mean=m, sd=sd, reference=ref, difference=diff, standard_error=se, t=t, df=df,
        t_critical=tc, p_value=p, ci_low=lo, ci_high=hi, confidence=confidence, significant=significant,
        conclusion=conclusion,
    )


def holm(p_values) -> np.ndarray:
    """Holm's step-down adjusted p-values (S. Holm, Scand. J. Statist. 6 (1979) 65).

    The i-th smallest of m p-values is multiplied by (m − i + 1), made
    non-decreasing in that order and capped at 1; a hypothesis is rejected at
    level α when its adjusted p-value is ≤ α. Written out here because
    statsmodels' ``multipletests`` runs a full garbage collection on every
    call, which costs far more than the arithmetic in a large round; the
    tests check it against statsmodels.
    """
    p = np.asarray(p_values, dtype=float)
    m = p.size
    order = np.argsort(p, kind="stable")
    adj = np.minimum(1.0, np.maximum.accumulate((m - np.arange(m)) * p[order]))
    out = np.empty(m)
    out[order] = adj
    return out


def compare_groups(
    values: Sequence[float] | np.ndarray,
    groups: Sequence[str] | np.ndarray,
    *,
    confidence: float = DEFAULT_CONFIDENCE,
    method: Method = "auto",
) -> GroupComparison:
    """Compare the means of method groups: one-way ANOVA plus Holm-adjusted pairwise tests.

    Parameters
    ----------
    values : array_like of float
        Lab means.
    groups : array_like of str
        Method group of each lab.
    confidence : float
        Confidence level (default 0.95); the family-wise level of the
        pairwise tests is ``1 − confidence``.
    method : {"auto", "pooled", "welch"}
        As for :func:`compare_two`, applied to each pair.

    Returns
    -------
    GroupComparison

    Notes
    -----
    The ANOVA assumes equal variances across groups; the pairwise tests
    follow ``method``.  Holm's step-down correction controls the
    family-wise error rate without assuming independence.

    References
    ----------
    .. [1] Holm (1979).
    """
    check_choice("method", method, Method)
    confidence = _check_confidence(confidence)
    alpha = 1 - confidence
    x = np.asarray(values, dtype=float).ravel()
    g = np.asarray(groups).astype(str).ravel()
    if x.size != g.size:
        raise StatisticsError(f"{x.size} values but {g.size} group labels")
    if not np.all(np.isfinite(x)):
        raise StatisticsError("a lab mean is not a finite number")
    names = list(dict.fromkeys(g.tolist()))
    members = {name: x[g == name] for name in names}
    tested = [n for n in names if members[n].size >= MIN_GROUP_SIZE]
    untested = tuple(n for n in names if members[n].size < MIN_GROUP_SIZE)
    stats_ = [mean_variance(members[n]) for n in tested]
    anova = None
    anova_sig = False
    if len(tested) >= 2:
        keep = np.isin(g, tested)
        anova = anova_oneway(x[keep], g[keep])
        anova_sig = bool(anova.p_value < alpha)
    pairs = []
    for i in range(len(tested)):
        for j in range(i + 1, len(tested)):
            pairs.append(compare_two(members[tested[i]], members[tested[j]], confidence=confidence,
                                     method=method, labels=(tested[i], tested[j])))
    pairwise: tuple[PairwiseComparison, ...] = ()
    if pairs:
        p_adj = holm([c.p_value for c in pairs])
        reject = p_adj <= alpha
        pairwise = tuple(
            PairwiseComparison(comparison=c, p_adjusted=float(pa), significant=bool(r))
            for c, pa, r in zip(pairs, p_adj, reject)
        )
    if anova is None:  # fewer than two groups tested
        conclusion = "Fewer than two groups have at least 2 labs; no comparison was made."
    else:
        differing = [f"{pc.comparison.label_a} vs {pc.comparison.label_b}" for pc in pairwise if pc.significant]
        head = (
            f"The group means differ significantly at the {_pct(confidence)} confidence level "
            f"(ANOVA p = {_fmt(anova.p_value)})"
            if anova_sig
            else f"No significant difference among the group means at the {_pct(confidence)} confidence level "
            f"(ANOVA p = {_fmt(anova.p_value)})"
        )
        tail = ("; pairs differing after Holm's correction: " + ", ".join(differing)) if differing else (
            "; no pair differs after Holm's correction")
        conclusion = head + tail + "."
    return GroupComparison(
        groups=tuple(tested),
        sizes=tuple(int(members[n].size) for n in tested),
        means=tuple(m for m, _ in stats_),
        sds=tuple(math.sqrt(v) for _, v in stats_),
        untested=untested,
        anova=anova,
        anova_significant=anova_sig,
        pairwise=pairwise,
        adjustment="holm",
        confidence=confidence,
        conclusion=conclusion,
    )
