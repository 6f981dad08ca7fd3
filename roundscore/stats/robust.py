"""Robust location and scale: Algorithm A (ISO 13528 Annex C), median, MADe, nIQR.

All functions work along the last axis of an array, so a whole round (one
row per measurand, one column per lab, NaN where a lab gave no result) is
estimated in one vectorised call.

References
----------
.. [1] ISO 13528:2022 Statistical methods for use in proficiency testing by
   interlaboratory comparison, Annex C (robust analysis: Algorithm A).
.. [2] Analytical Methods Committee, "Robust statistics - how not to reject
   outliers. Part 1", Analyst 114 (1989) 1693-1697.
.. [3] P. J. Huber, Robust Statistics, Wiley 1981 (Proposal 2 joint M-estimate,
   of which Algorithm A is a fixed-point iteration with a set scale factor).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from roundscore.errors import StatisticsError

__all__ = [
    "RobustEstimate",
    "algorithm_a",
    "algorithm_a_rows",
    "made",
    "niqr",
    "ALGORITHM_A_WINSOR",
    "ALGORITHM_A_SD_FACTOR",
    "MADE_FACTOR",
    "NIQR_FACTOR",
    "CONSENSUS_U_FACTOR",
]

#: Winsorising limit δ = 1.5 s* (ISO 13528 C.3.1).
ALGORITHM_A_WINSOR = 1.5
#: s* = 1.134 × SD of the winsorised values (ISO 13528 C.3.1); 1.134 ≈ 1/√E[ψ²(Z)] for ψ clipped at 1.5.
ALGORITHM_A_SD_FACTOR = 1.134
#: MADe = 1.483 × median absolute deviation (ISO 13528 C.2.2); 1.483 ≈ 1/Φ⁻¹(3/4).
MADE_FACTOR = 1.483
#: nIQR = 0.7413 × interquartile range (ISO 13528 C.2.3); 0.7413 ≈ 1/(2Φ⁻¹(3/4)).
NIQR_FACTOR = 0.7413
#: u(x_pt) = 1.25 s*/√p for a robust consensus value (ISO 13528 §7.7.3).
CONSENSUS_U_FACTOR = 1.25
#: Convergence: the change of x* and of s* in one step, relative to s*.
ALGORITHM_A_TOL = 1e-10
#: A cap against a loop that never ends, not a stopping rule: the iteration converges linearly, and slowly where
#: the start is far from the solution (more than half the results equal, MADe = 0, so s* starts from the nIQR:
#: one such set of 23 results needs about 3,500 steps to reach the tolerance; tests/test_robust.py).
ALGORITHM_A_MAXITER = 100_000
#: Share of the iterating rows that must have converged before the working arrays are shrunk (copying
#: them every step costs more than computing a few finished rows on).
_COMPACT_SHARE = 0.25


@dataclass(frozen=True, slots=True, kw_only=True)
class RobustEstimate:
    """Result of Algorithm A for one set of results.

    Attributes
    ----------
    mean : float
        Robust mean x*.
    sd : float
        Robust standard deviation s*.
    n : int
        Number of results used (p).
    iterations : int
        Iterations until the change of x* and s* was ≤ 1e-10 × s*.
    start_mean, start_sd : float
        The starting values: median and MADe (or nIQR when MADe is 0).
    note : str
        Empty, or what happened (zero spread, start from nIQR...).
    """

    mean: float
    sd: float
    n: int
    iterations: int
    start_mean: float
    start_sd: float
    note: str = ""

    @property
    def u_mean(self) -> float:
        """Standard uncertainty of x* as an assigned value: 1.25 s*/√p (ISO 13528 §7.7.3)."""
        return CONSENSUS_U_FACTOR * self.sd / np.sqrt(self.n)


def made(x: np.ndarray, axis: int = -1) -> np.ndarray:
    """Scaled median absolute deviation, 1.483·median|x − median(x)|, ignoring NaN."""
    x = np.asarray(x, dtype=float)
    med = np.nanmedian(x, axis=axis, keepdims=True)
    return MADE_FACTOR * np.nanmedian(np.abs(x - med), axis=axis)


def niqr(x: np.ndarray, axis: int = -1) -> np.ndarray:
    """Normalised interquartile range, 0.7413·(Q3 − Q1), ignoring NaN.

    Quartiles by linear interpolation between order statistics (numpy's
    default, Hyndman & Fan type 7); ISO 13528 does not fix a quartile rule.
    """
    x = np.asarray(x, dtype=float)
    q1, q3 = np.nanpercentile(x, [25.0, 75.0], axis=axis)
    return NIQR_FACTOR * (q3 - q1)


def _algorithm_a_2d(
    x: np.ndarray, sd_factor: float, tol: float, maxiter: int
) -> tuple[np.ndarray, ...]:
    """Vectorised Algorithm A over the rows of ``x`` (NaN = no result).

    Each row is shifted by its starting median before iterating, so x* and
    the winsorised values are small numbers near zero; the sum of squares
    about the new mean can then be taken in one pass, Σw² − (Σw)²/p, without
    the cancellation that formula suffers on unshifted data (the "shifted
    data" algorithm: Chan, Golub & LeVeque 1983, Am. Stat. 37, 242). The
    rows still iterating are kept in a compact working array, shrunk only
    when at least :data:`_COMPACT_SHARE` of them have converged (rows that
    converged but are not yet dropped keep being computed, never recorded);
    missing results are held as zeros with a 0/1 mask, so each step is a
    few plain array passes (no NaN-aware reductions, which copy their input).
    """
    missing = np.isnan(x)
    any_missing = bool(missing.any())
    n = x.shape[1] - np.sum(missing, axis=1)
    with np.errstate(all="ignore"):
        med = np.nanmedian if any_missing else np.median
        # A row with no result at all (every lab censored, say) stays NaN without asking numpy for the
        # median of nothing (an "All-NaN slice" warning that would reach the user's terminal).
        start_mean = np.full(len(x), np.nan)
        start_sd = np.full(len(x), np.nan)
        some = n > 0
        if some.any():
            xs = x[some] if not some.all() else x
            start_mean[some] = med(xs, axis=1)
            start_sd[some] = MADE_FACTOR * med(np.abs(xs - start_mean[some][:, None]), axis=1)
        from_niqr = start_sd == 0
        if from_niqr.any():
            start_sd = np.where(from_niqr, niqr(x, axis=1), start_sd)
    mean = start_mean.copy()
    sd = start_sd.copy()
    iterations = np.zeros(len(x), dtype=int)
    rows = np.flatnonzero((sd > 0) & (n >= 2))
    shift = start_mean[rows]
    X = x[rows] - shift[:, None]  # a fresh array: the caller's is never changed
    mask = None
    if any_missing:
        mask = (~missing[rows]).astype(float)
        X[missing[rows]] = 0.0
    N = n[rows].astype(float)
    m, s = np.zeros(rows.size), sd[rows]  # x* − shift and s*
    s0 = s.copy()  # each row's starting s*: a row whose s* falls to tol·s0 is collapsing to s* = 0
    live = np.ones(rows.size, dtype=bool)  # rows of X not yet converged
    W = np.empty_like(X)
    for _ in range(maxiter):
        if not live.any():
            break
        delta = ALGORITHM_A_WINSOR * s
        np.minimum(X, (m + delta)[:, None], out=W)  # two ufunc passes: about twice as fast as np.clip
        np.maximum(W, (m - delta)[:, None], out=W)
        if mask is not None:
            W *= mask
        total = W.sum(axis=1)
        new_m = total / N
        squares = np.einsum("ij,ij->i", W, W) - total * new_m
        new_s = sd_factor * np.sqrt(np.maximum(squares, 0.0) / (N - 1))
        done = (np.abs(new_m - m) <= tol * s) & (np.abs(new_s - s) <= tol * s)
        at = rows[live]
        mean[at], sd[at] = (new_m + shift)[live], new_s[live]
        iterations[at] += 1
        # Most results equal (to the median): s* can shrink by the same ratio every step, towards the
        # solution s* = 0, x* = that value, which no step-size rule relative to s* reaches.
        gone = live & (new_s <= tol * s0)
        if gone.any():
            mean[rows[gone]], sd[rows[gone]] = shift[gone], 0.0
        live &= ~done & (new_s > 0) & ~gone
        m, s = new_m, new_s
        if np.count_nonzero(live) <= (1.0 - _COMPACT_SHARE) * live.size:
            rows, X, N, m, s, shift = rows[live], X[live], N[live], m[live], s[live], shift[live]
            s0 = s0[live]
            mask = mask[live] if mask is not None else None
            live = np.ones(rows.size, dtype=bool)
            W = np.empty_like(X)
    rows = rows[live]
    if rows.size:
        raise StatisticsError(
            f"Algorithm A did not converge in {maxiter} iterations for {rows.size} set(s) of results"
        )
    return mean, sd, n, iterations, start_mean, start_sd, from_niqr


def algorithm_a(
    x: np.ndarray,
    *,
    sd_factor: float = ALGORITHM_A_SD_FACTOR,
    tol: float = ALGORITHM_A_TOL,
    maxiter: int = ALGORITHM_A_MAXITER,
) -> RobustEstimate | list[RobustEstimate]:
    """Robust mean and SD by Algorithm A (ISO 13528 C.3.1), iterated to convergence.

    Starts from x* = median and s* = MADe (nIQR when MADe is 0); each step
    winsorises the results at x* ± 1.5 s*, sets x* to their mean and s* to
    ``sd_factor`` × their SD. Stops when the step changes x* and s* by at most
    ``tol`` × s* (not the standard's "third significant figure" rule, so the
    result is reproducible to the last digit).

    Parameters
    ----------
    x : array_like
        1-D results, or 2-D with one set of results per row (NaN = missing).
    sd_factor : float
        1.134 in ISO 13528. Setting it to 1/√E[ψ²(Z)] turns the iteration into
        Huber's Proposal 2 (used in the tests against statsmodels).

    Returns
    -------
    RobustEstimate, or a list of them for 2-D input.

    Raises
    ------
    StatisticsError
        For 1-D input with fewer than 3 results (say why: the standard's
        robust methods need at least 3; ISO 13528 advises many more).

    Examples
    --------
    >>> est = algorithm_a([10.1, 10.3, 9.8, 10.0, 10.2, 14.0])
    >>> round(est.mean, 4), est.iterations > 0
    (10.1859, True)
    """
    a = np.asarray(x, dtype=float)
    one = a.ndim == 1
    if one:
        a = a[None, :]
    if a.ndim != 2:
        raise StatisticsError(f"algorithm_a takes 1-D or 2-D results, got {a.ndim}-D")
    if np.isinf(a).any():
        raise StatisticsError("results must be finite numbers")
    n_each = np.sum(~np.isnan(a), axis=1)
    if one and n_each[0] < 3:
        raise StatisticsError(
            f"Algorithm A needs at least 3 results, got {int(n_each[0])}: "
            "give the assigned value as a number instead"
        )
    out = _estimates(a, sd_factor, tol, maxiter)
    return out[0] if one else out


def algorithm_a_rows(
    x: np.ndarray,
    *,
    sd_factor: float = ALGORITHM_A_SD_FACTOR,
    tol: float = ALGORITHM_A_TOL,
    maxiter: int = ALGORITHM_A_MAXITER,
) -> list[RobustEstimate]:
    """:func:`algorithm_a` of each row of a 2-D array (NaN: no result there), one estimate per row.

    A row with fewer than 3 results gets an estimate with a note saying so.

    Examples
    --------
    >>> [e.n for e in algorithm_a_rows(np.array([[1.0, 2.0, 3.0, 9.0], [1.0, 2.0, np.nan, np.nan]]))]
    [4, 2]
    """
    a = np.asarray(x, dtype=float)
    if a.ndim != 2:
        raise StatisticsError(f"algorithm_a_rows takes 2-D results, got {a.ndim}-D")
    if np.isinf(a).any():
        raise StatisticsError("results must be finite numbers")
    return _estimates(a, sd_factor, tol, maxiter)


def _estimates(a: np.ndarray, sd_factor: float, tol: float, maxiter: int) -> list[RobustEstimate]:
    mean, sd, n, it, m0, s0, from_niqr = _algorithm_a_2d(a, sd_factor, tol, maxiter)
    out = []
    for i in range(len(a)):
        note = ""
        if n[i] < 3:
            note = f"only {int(n[i])} result(s): Algorithm A needs at least 3"
        elif sd[i] == 0:
            note = ("more than half of the results are identical: the robust SD is zero, "
                    "so it cannot serve as σ_pt")
        elif from_niqr[i]:
            note = "MADe was zero: started from nIQR"
        out.append(
            RobustEstimate(
                mean=float(mean[i]), sd=float(sd[i]), n=int(n[i]), iterations=int(it[i]),
                start_mean=float(m0[i]), start_sd=float(s0[i]), note=note,
            )
        )
    return out
