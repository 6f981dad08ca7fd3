"""Trend rules on a series of scores, combined scores and a bias check: pure functions on arrays.

The rules look at a lab's series of scores for one measurand in one scheme,
in round-date order (:mod:`roundscore.history.rules` applies them to a lab's
history from the archive).  They are applied to the z-like scores (z, z' and zeta),
which share the warning limit 2 and action limit 3 of ISO 13528; a series of
En scores is screened only for action signals, at ``|En| > 1``, since the
other rules assume a standard-normal scale.  Rounds without a score
(``not-scored``) are left out, so "consecutive" means consecutive *scored*
rounds.

Rules
-----
1. An action signal: ``|z| >= 3`` (ISO 13528 [1]_, z-score evaluation).
2. Two of three consecutive scores beyond 2 on the same side (zone-A rule of
   the Western Electric handbook [2]_; ISO 13528 [1]_ discusses control charts
   of z-scores and such run tests in its clause on combining scores over
   rounds, from memory).  Fires at the point that completes the pattern.
3. Nine consecutive scores on the same side of zero (Nelson [3]_, test 2;
   the same run length as test 2 of ISO 7870-2 [4]_, which replaced
   ISO 8258).  A score exactly 0 ends a run.
4. Tabular two-sided CUSUM of the scores (Page [5]_) with reference value
   ``k = 0.5`` and decision interval ``h = 4``, the values Montgomery [6]_
   recommends for detecting a one-sigma shift (from memory: in-control ARL
   about 168, ARL about 8.4 for a one-sigma shift).  h = 4 rather than 5 because
   PT histories are short: a few rounds a year.  After an alarm the sums
   restart at zero, so a persisting shift alarms again.

The rules run over the whole series; a finding is reported when it fires at
one of the last ``window`` scored rounds.  Combined scores and the bias
check use those last ``window`` scores.

This evaluation supports, and does not replace, the provider's documented
procedures, ISO/IEC 17043 and the accreditation body's rules.

References
----------
.. [1] ISO 13528:2022, Statistical methods for use in proficiency testing by
   interlaboratory comparison.
.. [2] Western Electric Co., Statistical Quality Control Handbook, 1956.
.. [3] L. S. Nelson, "The Shewhart control chart - tests for special causes",
   Journal of Quality Technology 16 (1984) 237-239.
.. [4] ISO 7870-2:2013, Control charts - Part 2: Shewhart control charts.
.. [5] E. S. Page, "Continuous inspection schemes", Biometrika 41 (1954) 100-115.
.. [6] D. C. Montgomery, Introduction to Statistical Quality Control, Wiley
   (chapter on the cumulative sum control chart).
.. [7] M. Thompson, S. L. R. Ellison, R. Wood, "The International Harmonized
   Protocol for the proficiency testing of analytical chemistry laboratories",
   Pure Appl. Chem. 78 (2006) 145-196.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np

from roundscore.errors import StatisticsError
from roundscore.stats.limits import above, reaches
from roundscore.stats.scores import EN_ACTION, Z_ACTION, Z_WARNING
from roundscore.support.plain import AsDict

__all__ = [
    "ACTION_LIMIT", "WARNING_LIMIT", "EN_ACTION_LIMIT", "RUN_LENGTH", "CUSUM_K", "CUSUM_H", "COMBINED_CAUTION",
    "CusumResult", "CombinedScores", "BiasCheck", "AsDict", "Side",
    "action_signals", "two_of_three", "same_side_runs", "cusum", "combined_scores", "bias_check", "as_series",
]

#: Action limit for z, z' and zeta: ``|z| >= 3`` (ISO 13528:2022, evaluation of z-scores): the limit of the
#: signals (roundscore.stats.scores), not a second copy of it.
ACTION_LIMIT = Z_ACTION
#: Warning limit: ``|z| > 2`` (ISO 13528:2022; Western Electric zone A starts at 2 sigma).
WARNING_LIMIT = Z_WARNING
#: Action limit for En: ``|En| > 1`` (ISO 13528:2022, En numbers; ``|En| = 1`` is acceptable).
EN_ACTION_LIMIT = EN_ACTION
#: Run length of rule 3 (Nelson 1984 test 2; ISO 7870-2:2013 test 2).
RUN_LENGTH = 9
#: CUSUM reference value k, in units of the score's SD (Montgomery, from memory).
CUSUM_K = 0.5
#: CUSUM decision interval h (Montgomery recommends 4 or 5, from memory; 4 chosen).
CUSUM_H = 4.0
#: Fewest scores for the bias check (common practice: fewer give the t test almost no power).
MIN_BIAS_N = 3
#: Mean of |z| for a standard normal z: sqrt(2/pi) (a property of the normal distribution).
EXPECTED_MEAN_ABS_Z = math.sqrt(2.0 / math.pi)
#: Significance level of the bias check (common practice).
BIAS_ALPHA = 0.05
#: The bias check treats scores as (nearly) all equal when their SD is at most this fraction of
#: max(1, largest |z|): scores are stored to 12 significant digits (scores.csv), so a spread below about
#: 1e-11 of their size is rounding, and a t statistic computed from it (1e16 and more) means nothing.
EQUAL_TOLERANCE = 1e-9

COMBINED_CAUTION = (
    "Combined scores can hide a single bad result behind several good ones, mix different "
    "measurands and methods, and depend on how many rounds are combined; the IUPAC harmonized "
    "protocol (Thompson, Ellison, Wood 2006, Pure Appl. Chem. 78:145) discourages their use "
    "for judging a laboratory. Look at the individual scores first.")

#: The side of zero a rule fired on.
Side = Literal["high", "low"]


def as_series(z: Sequence[float] | np.ndarray, name: str = "z") -> np.ndarray:
    """Scores as a 1-D float array; NaN or infinite values are refused (drop them first)."""
    arr = np.asarray(z, dtype=float)
    if arr.ndim != 1:
        raise StatisticsError(f"{name}: expected a 1-D series of scores, got shape {arr.shape}")
    if not np.all(np.isfinite(arr)):
        bad = np.flatnonzero(~np.isfinite(arr)).tolist()
        raise StatisticsError(f"{name}: missing or infinite scores at positions {bad}; "
                              "leave unscored rounds out of the series")
    return arr


# --------------------------------------------------------------------------- rules on arrays

def action_signals(z: Sequence[float] | np.ndarray, *, limit: float = ACTION_LIMIT,
                   strict: bool = False) -> np.ndarray:
    """Rule 1: positions where ``|z| >= limit`` (``|z| > limit`` when ``strict``).

    Parameters
    ----------
    z : array_like
        Scores in round order.
    limit : float
        3 for z, z' and zeta; :data:`EN_ACTION_LIMIT` (1) for En (ISO 13528:2022).
    strict : bool
        True for En, whose action signal is ``|En| > 1`` (ISO 13528:2022); the
        z-like action signal includes the limit (``|z| >= 3``).

    Returns
    -------
    numpy.ndarray of int
    """
    size = np.abs(as_series(z))
    return np.flatnonzero(above(size, limit) if strict else reaches(size, limit))


def two_of_three(z: Sequence[float] | np.ndarray, *,
                 limit: float = WARNING_LIMIT) -> list[tuple[int, Side]]:
    """Rule 2: two of three consecutive scores beyond ``limit`` on the same side.

    Returns each position ``i`` where ``z[i]`` is beyond the limit and at least
    one of ``z[i-2], z[i-1]`` is beyond it on the same side (the point that
    completes the pattern).  At the start of a series the window is shorter,
    so two of the first two also fire.  "Beyond" is strict (``> 2``), as zone A
    of the Western Electric handbook begins at two sigma.

    The reading: the rule is about any three consecutive points, and it is
    known to hold at the point that completes it, which is therefore itself
    beyond the limit ([2.5, 2.5, 0] fires at the second score, not the third);
    two of the first two fire because every window of three that will contain
    them already holds the pattern (the earliest signal, as a lab manager
    wants it).  A score within :data:`roundscore.stats.limits.LIMIT_RTOL` of
    the limit is on it, not beyond.

    References
    ----------
    Western Electric Co., Statistical Quality Control Handbook (1956).
    """
    arr = as_series(z)
    found: list[tuple[int, Side]] = []
    for i in range(1, arr.size):
        window = arr[max(0, i - 2):i]
        if above(arr[i], limit) and np.any(above(window, limit)):
            found.append((i, "high"))
        elif above(-arr[i], limit) and np.any(above(-window, limit)):
            found.append((i, "low"))
    return found


def same_side_runs(z: Sequence[float] | np.ndarray, *,
                   length: int = RUN_LENGTH) -> list[tuple[int, int, Side]]:
    """Rule 3: runs of at least ``length`` consecutive scores of the same sign.

    Returns
    -------
    list of (start, end, side)
        Inclusive positions of each maximal run; the rule first fires at
        ``start + length - 1`` and keeps firing to ``end``.  A score of exactly
        0 is on neither side and ends a run.

    References
    ----------
    L. S. Nelson, J. Qual. Technol. 16 (1984) 237, test 2; ISO 7870-2:2013 test 2.
    """
    if length < 2:
        raise StatisticsError(f"run length must be at least 2, got {length}")
    signs = np.sign(as_series(z))
    runs: list[tuple[int, int, Side]] = []
    start = 0
    for i in range(1, signs.size + 1):
        if i == signs.size or signs[i] != signs[start]:
            if signs[start] != 0 and i - start >= length:
                runs.append((start, i - 1, "high" if signs[start] > 0 else "low"))
            start = i
    return runs


@dataclass(frozen=True, slots=True, kw_only=True)
class CusumResult(AsDict):
    """Tabular two-sided CUSUM of a score series.

    Attributes
    ----------
    upper, lower : numpy.ndarray
        ``C+_i = max(0, C+_{i-1} + z_i - k)`` and ``C-_i = max(0, C-_{i-1} - z_i - k)``
        after each point (before any restart).
    alarms : tuple of (int, str)
        Positions where ``C+ > h`` ("high") or ``C- > h`` ("low"); both sums
        restart at 0 after an alarm when ``restart`` is true.
    k, h : float
        Reference value and decision interval, in units of the score.
    restart : bool
        Whether the sums restart after an alarm.
    """

    upper: np.ndarray
    lower: np.ndarray
    alarms: tuple[tuple[int, Side], ...]
    k: float
    h: float
    restart: bool


def cusum(z: Sequence[float] | np.ndarray, *, k: float = CUSUM_K, h: float = CUSUM_H,
          restart: bool = True) -> CusumResult:
    """Rule 4: tabular two-sided CUSUM (Page 1954) of scores with target 0 and SD 1.

    z-scores are by construction on a scale where the target is 0 and the SD
    is about 1 when sigma_pt matches the lab's performance; ``k`` and ``h`` are
    therefore used as they are, without rescaling.

    References
    ----------
    E. S. Page, Biometrika 41 (1954) 100-115; D. C. Montgomery, Introduction to
    Statistical Quality Control (tabular CUSUM, k = 0.5, h = 4 or 5; from memory).
    """
    arr = as_series(z)
    if not (k >= 0 and h > 0):
        raise StatisticsError(f"CUSUM needs k >= 0 and h > 0, got k = {k}, h = {h}")
    upper = np.zeros(arr.size)
    lower = np.zeros(arr.size)
    alarms: list[tuple[int, Side]] = []
    hi = lo = 0.0
    for i, value in enumerate(arr):
        hi = max(0.0, hi + value - k)
        lo = max(0.0, lo - value - k)
        upper[i], lower[i] = hi, lo
        if hi > h or lo > h:
            alarms.append((i, "high" if hi > h else "low"))
            if restart:
                hi = lo = 0.0
    return CusumResult(upper=upper, lower=lower, alarms=tuple(alarms), k=k, h=h, restart=restart)


# --------------------------------------------------------------------------- combined, bias

@dataclass(frozen=True, slots=True, kw_only=True)
class CombinedScores(AsDict):
    """Combined scores over a window of z-like scores.

    Attributes
    ----------
    n : int
        Number of scores combined.
    rsz : float
        Rescaled sum of z, ``sum(z) / sqrt(n)``; standard normal when the z are.
    rsz_p_value : float
        Two-sided normal p-value of ``rsz``.
    ssz : float
        Sum of squared z; chi-squared with ``n`` degrees of freedom when the z
        are independent standard normal.
    ssz_p_value : float
        Upper-tail p-value ``P(chi2_n >= ssz)``.
    ssz_critical_5, ssz_critical_1 : float
        Upper 5 % and 1 % points of chi-squared with ``n`` degrees of freedom.
    mean_abs_z : float
        Mean of ``|z|``; about 0.80 (``sqrt(2/pi)``) for standard normal z.
    caution : str
        Why combined scores must not be used alone (:data:`COMBINED_CAUTION`).
    """

    n: int
    rsz: float
    rsz_p_value: float
    ssz: float
    ssz_p_value: float
    ssz_critical_5: float
    ssz_critical_1: float
    mean_abs_z: float
    caution: str = COMBINED_CAUTION


def combined_scores(z: Sequence[float] | np.ndarray) -> CombinedScores:
    """RSZ, SSZ (against chi-squared with n df) and mean |z| of a set of z-scores.

    Assumes the scores are independent and, for a lab performing as sigma_pt
    expects, standard normal; neither holds exactly (sigma_pt is a fitness for
    purpose value, and scores of one round share the assigned value).

    References
    ----------
    M. Thompson, S. L. R. Ellison, R. Wood, Pure Appl. Chem. 78 (2006) 145-196
    (harmonized protocol; combined scores and their cautions).
    """
    arr = as_series(z)
    if arr.size == 0:
        raise StatisticsError("combined scores need at least one score")
    n = int(arr.size)
    scale = _scale(arr)
    a = arr / scale  # exact: a power of two; sums of huge scores then stay finite (SSZ may still be inf)
    rsz = float(np.sum(a) / math.sqrt(n)) * scale
    ssz = float(np.sum(a * a)) * scale * scale  # Python floats: inf, never a warning, past 1.8e308
    from scipy import stats  # here, not at import: scipy.stats takes about a second to load
    chi2 = stats.chi2(n)
    return CombinedScores(
        n=n, rsz=rsz, rsz_p_value=float(2.0 * stats.norm.sf(abs(rsz))), ssz=ssz,
        ssz_p_value=float(chi2.sf(ssz)), ssz_critical_5=float(chi2.isf(0.05)),
        ssz_critical_1=float(chi2.isf(0.01)), mean_abs_z=float(np.mean(np.abs(a))) * scale)


def _fixed(v: float, spec: str) -> str:
    """``v`` in the fixed format ``spec``, or in 3 significant digits when that would run to many digits."""
    return format(v, spec) if abs(v) < 1e6 else format(v, spec.replace(".2f", ".3g"))


def _scale(arr: np.ndarray) -> float:
    """1, or the power of two just above max |z|: dividing by it is exact and keeps squares finite."""
    top = float(np.max(np.abs(arr))) if arr.size else 0.0
    return 1.0 if top <= 1.0 else math.ldexp(1.0, math.frexp(top)[1])


@dataclass(frozen=True, slots=True, kw_only=True)
class BiasCheck(AsDict):
    """One-sample t test of a lab's z-scores against 0.

    Attributes
    ----------
    n, df : int
        Number of scores and degrees of freedom ``n - 1``.
    mean_z, sd_z : float
        Mean and sample standard deviation of the scores.
    t, p_value : float
        t statistic and two-sided p-value.
    ci_low, ci_high : float
        Two-sided ``1 - alpha`` confidence interval of the mean z.
    alpha : float
        Significance level of the conclusion.
    biased : bool
        ``p_value < alpha``.
    conclusion : str
        The result in words.
    """

    n: int
    df: int
    mean_z: float
    sd_z: float
    t: float
    p_value: float
    ci_low: float
    ci_high: float
    alpha: float
    biased: bool
    conclusion: str


def bias_check(z: Sequence[float] | np.ndarray, *, alpha: float = BIAS_ALPHA) -> BiasCheck:
    """Does the lab's mean z differ from 0?  One-sample t test (scipy.stats.ttest_1samp).

    Assumes independent, roughly normal scores with a common spread; a
    persistent mean z away from 0 points to a bias of about ``mean_z``
    times sigma_pt.

    Raises
    ------
    StatisticsError
        Fewer than :data:`MIN_BIAS_N` scores, or scores (nearly) all equal: an SD of at most
        :data:`EQUAL_TOLERANCE` · max(1, largest |z|).
    """
    arr = as_series(z)
    if arr.size < MIN_BIAS_N:
        raise StatisticsError(f"the bias check needs at least {MIN_BIAS_N} scores, got {arr.size}")
    if not 0 < alpha < 1:
        raise StatisticsError(f"alpha must be between 0 and 1, got {alpha}")
    scale = _scale(arr)
    a = arr / scale  # exact (a power of two); t is the same, and no square overflows
    mean = float(np.mean(a)) * scale
    sd = float(np.std(a - np.mean(a), ddof=1)) * scale
    tol = EQUAL_TOLERANCE * max(1.0, float(np.max(np.abs(arr))))
    if sd <= tol:
        raise StatisticsError(
            f"the scores are (nearly) all equal (their SD, {sd:.3g}, is at most {EQUAL_TOLERANCE:g} × "
            f"max(1, largest |z|) = {tol:.3g}); the test is not meaningful")
    from scipy import stats  # here, not at import: scipy.stats takes about a second to load
    res = stats.ttest_1samp(a, 0.0)
    ci = res.confidence_interval(1.0 - alpha)
    ci_low, ci_high = float(ci.low) * scale, float(ci.high) * scale
    p, t, df = float(res.pvalue), float(res.statistic), int(arr.size - 1)
    biased = p < alpha
    numbers = f"t = {_fixed(t, '.2f')}, df = {df}, p = {p:.3g}"
    shown = _fixed(mean, "+.2f")
    if biased:
        text = (f"the mean z ({shown}) differs from 0 ({numbers}): a persistent bias of "
                f"about {shown} σ_pt is likely; look for its cause")
    else:
        text = (f"no evidence at the {alpha:.0%} level that the mean z ({shown}) differs "
                f"from 0 ({numbers})")
    return BiasCheck(n=int(arr.size), df=df, mean_z=mean, sd_z=sd, t=t, p_value=p,
                     ci_low=ci_low, ci_high=ci_high, alpha=alpha, biased=biased,
                     conclusion=text)
