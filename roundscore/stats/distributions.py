"""Student's t and Fisher's F tail areas and quantiles, as ``scipy.stats`` gives them, without its per-call checks.

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
``f.cdf(x, m, n) = fdtr(m, n, x)``; a quantile is then scaled by 1 and
shifted by 0, which only turns −0 into 0.
"""

from __future__ import annotations

import math

from scipy import special
from scipy import stats as sps

__all__ = ["t_isf", "t_sf", "f_isf", "f_ppf", "f_sf", "f_cdf"]


def _df_ok(*dfs: float) -> bool:
    return all(math.isfinite(d) and d > 0 for d in dfs)


def t_isf(q: float, df: float) -> float:
    """``scipy.stats.t.isf(q, df)``: the upper-tail quantile of Student's t."""
    if 0.0 < q < 1.0 and _df_ok(df):
        return float(-special.stdtrit(df, q) + 0.0)
    return float(sps.t.isf(q, df))


def t_sf(x: float, df: float) -> float:
    """``scipy.stats.t.sf(x, df)``: the upper-tail area of Student's t beyond x."""
    if math.isfinite(x) and _df_ok(df):
        return float(special.stdtr(df, -x))
    return float(sps.t.sf(x, df))


def f_isf(q: float, dfn: float, dfd: float) -> float:
    """``scipy.stats.f.isf(q, dfn, dfd)``: the upper-tail quantile of F."""
    if 0.0 < q < 1.0 and _df_ok(dfn, dfd):
        return float(special.fdtri(dfn, dfd, 1.0 - q) + 0.0)
    return float(sps.f.isf(q, dfn, dfd))


def f_ppf(q: float, dfn: float, dfd: float) -> float:
    """``scipy.stats.f.ppf(q, dfn, dfd)``: the lower-tail quantile of F."""
    if 0.0 < q < 1.0 and _df_ok(dfn, dfd):
        return float(special.fdtri(dfn, dfd, q) + 0.0)
    return float(sps.f.ppf(q, dfn, dfd))


def f_sf(x: float, dfn: float, dfd: float) -> float:
    """``scipy.stats.f.sf(x, dfn, dfd)``: the upper-tail area of F beyond x."""
    if 0.0 < x < math.inf and _df_ok(dfn, dfd):
        return float(special.fdtrc(dfn, dfd, x))
    return float(sps.f.sf(x, dfn, dfd))


def f_cdf(x: float, dfn: float, dfd: float) -> float:
    """``scipy.stats.f.cdf(x, dfn, dfd)``: the lower-tail area of F up to x."""
    if 0.0 < x < math.inf and _df_ok(dfn, dfd):
        return float(special.fdtr(dfn, dfd, x))
    return float(sps.f.cdf(x, dfn, dfd))
