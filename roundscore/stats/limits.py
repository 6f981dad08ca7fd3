"""How a computed value is compared with a limit: one rule for every signal and every check.

A score or a criterion computed in floating point carries rounding noise of a few units in the 16th
significant digit: x_pt = 1.0, σ_pt = 0.3 and a result of 1.6 give z = 2.0000000000000004, which a bare
``>`` reads as beyond 2 (a warning signal) while 0.4 gives exactly −2 (acceptable). A value is therefore
compared with a limit after allowing a relative tolerance :data:`LIMIT_RTOL` of the limit: a value within
it counts as *on* the limit. The tolerance, 1e-9, is far above floating-point noise and far below any
digit a report shows (scores to two decimals, criteria to four significant digits), so it changes no
decision that a reader could see in the printed numbers (common practice: decide on the value as reported).

Every signal (:mod:`roundscore.stats.scores`), item check (:mod:`roundscore.stats.items`), the u(x_pt)
check of the evaluation and the trend rules (:mod:`roundscore.stats.trends`) compare through these
functions. The statistical tests (Cochran, Grubbs, F, t) compare a statistic with a critical value or a p
value with a level and are not changed: their critical values are themselves approximations.

>>> bool(above(2.0000000000000004, 2.0)), bool(above(2.01, 2.0)), bool(reaches(2.9999999999999996, 3.0))
(False, True, True)
>>> within([0.15000000000000013, 0.1501], 0.15).tolist()
[True, False]
"""

from __future__ import annotations

import numpy as np

__all__ = ["LIMIT_RTOL", "above", "reaches", "within"]

#: Relative tolerance of a comparison with a limit (see the module docstring).
LIMIT_RTOL = 1e-9


def _slack(limit) -> np.ndarray:
    return LIMIT_RTOL * np.abs(np.asarray(limit, dtype=float))


def above(value, limit):
    """``value > limit``, a value within :data:`LIMIT_RTOL` of the limit counting as on it (not above)."""
    return np.asarray(value, dtype=float) > np.asarray(limit, dtype=float) + _slack(limit)


def reaches(value, limit):
    """``value >= limit``, a value within :data:`LIMIT_RTOL` of the limit counting as on it (reaching it)."""
    return np.asarray(value, dtype=float) >= np.asarray(limit, dtype=float) - _slack(limit)


def within(value, limit):
    """``value <= limit`` with the same tolerance: the negation of :func:`above` (NaN is not within)."""
    v = np.asarray(value, dtype=float)
    return (v <= np.asarray(limit, dtype=float) + _slack(limit)) & ~np.isnan(v)
