"""Student's t, F, chi-squared and normal tail areas and quantiles, as ``scipy.stats`` gives them, faster.

The outlier screens, Mandel's indicator values and the method comparisons
ask for a few hundred critical values and p-values in a large round, each
through ``scipy.stats`` (``t.isf``, ``f.sf``...). Each such call spends
about half a millisecond checking and broadcasting its arguments before it
reaches the one special function that computes the number. Here that
function is called directly, with the same arguments in the same form, so
the value is bit for bit the one ``scipy.stats`` returns (``tests/test_distributions.py``
compares them on a grid). Only the plain case is taken this way: a
probability strictly between 0 and 1, a finite x inside the distribution's
open support, finite positive degrees of freedom. Anything else (0, 1, an
infinity, NaN, a degree of freedom ≤ 0) is passed to ``scipy.stats``
itself, so its answer for the edge cases is kept too.

What ``scipy.stats`` does, read from its source (scipy 1.17; the tests
check it for the installed version): ``t.isf(q, df) = −stdtrit(df, q)``,
``t.sf(x, df) = stdtr(df, −x)``, ``f.isf(q, m, n) = fdtri(m, n, 1 − q)``,
``f.ppf(q, m, n) = fdtri(m, n, q)``, ``f.sf(x, m, n) = fdtrc(m, n, x)``,
``f.cdf(x, m, n) = fdtr(m, n, x)``, ``chi2.ppf(q, ν) = 2·gammaincinv(ν/2, q)``,
``chi2.cdf(x, ν) = chdtr(ν, x)``, ``norm.ppf(q) = ndtri(q)``; a quantile is
then scaled by 1 and shifted by 0, which only turns −0 into 0.

Importing ``scipy.stats`` takes about a second (it loads every
distribution); ``scipy.special`` a fraction of that. The edge cases import
``scipy.stats`` when they occur, so a command that needs only these
functions does not pay for it.
"""

from __future__ import annotations

import math

from scipy import special

__all__ = ["t_isf", "t_sf", "f_isf", "f_ppf", "f_sf", "f_cdf", "chi2_ppf", "chi2_cdf", "norm_ppf"]


def _df_ok(*dfs: float) -> bool:
    return all(math.isfinite(d) and d > 0 for d in dfs)


def t_isf(q: float, df: float) -> float:
    """``scipy.stats.t.isf(q, df)``: the upper-tail quantile of Student's t."""
    if 0.0 < q < 1.0 and _df_ok(df):
        return float(-special.stdtrit(df, q) + 0.0)
    from scipy import stats as sps

    return float(sps.t.isf(q, df))


def t_sf(x: float, df: float) -> float:
    """``scipy.stats.t.sf(x, df)``: the upper-tail area of Student's t beyond x."""
    if math.isfinite(x) and _df_ok(df):
        return float(special.stdtr(df, -x))
    from scipy import stats as sps

    return float(sps.t.sf(x, df))


def f_isf(q: float, dfn: float, dfd: float) -> float:
    """``scipy.stats.f.isf(q, dfn, dfd)``: the upper-tail quantile of F."""
    if 0.0 < q < 1.0 and _df_ok(dfn, dfd):
        return float(special.fdtri(dfn, dfd, 1.0 - q) + 0.0)
    from scipy import stats as sps

    return float(sps.f.isf(q, dfn, dfd))


def f_ppf(q: float, dfn: float, dfd: float) -> float:
    """``scipy.stats.f.ppf(q, dfn, dfd)``: the lower-tail quantile of F."""
    if 0.0 < q < 1.0 and _df_ok(dfn, dfd):
        return float(special.fdtri(dfn, dfd, q) + 0.0)
    from scipy import stats as sps

    return float(sps.f.ppf(q, dfn, dfd))


def f_sf(x: float, dfn: float, dfd: float) -> float:
    """``scipy.stats.f.sf(x, dfn, dfd)``: the upper-tail area of F beyond x."""
    if 0.0 < x < math.inf and _df_ok(dfn, dfd):
        return float(special.fdtrc(dfn, dfd, x))
    from scipy import stats as sps

    return float(sps.f.sf(x, dfn, dfd))


def f_cdf(x: float, dfn: float, dfd: float) -> float:
    """``scipy.stats.f.cdf(x, dfn, dfd)``: the lower-tail area of F up to x."""
    if 0.0 < x < math.inf and _df_ok(dfn, dfd):
        return float(special.fdtr(dfn, dfd, x))
    from scipy import stats as sps

    return float(sps.f.cdf(x, dfn, dfd))


def chi2_ppf(q: float, df: float) -> float:
    """``scipy.stats.chi2.ppf(q, df)``: the lower-tail quantile of chi-squared."""
    if 0.0 < q < 1.0 and _df_ok(df):
        return float(2 * special.gammaincinv(df / 2, q) + 0.0)
    from scipy import stats as sps

    return float(sps.chi2.ppf(q, df))


def chi2_cdf(x: float, df: float) -> float:
    """``scipy.stats.chi2.cdf(x, df)``: the lower-tail area of chi-squared up to x."""
    if 0.0 < x < math.inf and _df_ok(df):
        return float(special.chdtr(df, x))
    from scipy import stats as sps

    return float(sps.chi2.cdf(x, df))


def norm_ppf(q: float) -> float:
    """``scipy.stats.norm.ppf(q)``: the standard normal quantile."""
    if 0.0 < q < 1.0:
        return float(special.ndtri(q) + 0.0)
    from scipy import stats as sps

    return float(sps.norm.ppf(q))
