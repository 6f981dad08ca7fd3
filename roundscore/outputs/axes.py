"""Axis limits that matplotlib can draw for any finite numbers.

A round's numbers are limited (roundscore.ranges) so that x_pt ± k·σ_pt is finite and wider than the rounding of
x_pt; these guards keep the figures drawable for a library caller's numbers too (1e308, 1e-320), without an
overflow, a singular transformation or a library warning.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import numpy as np

from roundscore.model.scores import ScoreFamily
from roundscore.ranges import SIGMA_MIN_RELATIVE

__all__ = ["drawable", "span", "data_span", "AXIS_MAX", "axis_limit", "AXIS_PERCENTILE", "AXIS_CAP"]

#: Largest axis limit: matplotlib subtracts limits and scales them to pixels, which must stay finite.
AXIS_MAX = 1e300


def drawable(centre: float, sigma: float, reach: float) -> bool:
    """Whether x_pt and σ_pt can be drawn: finite, σ_pt > 0, x_pt ± reach·σ_pt finite, and σ_pt not below the
    rounding of x_pt (SIGMA_MIN_RELATIVE)."""
    c, s = float(centre), float(sigma)
    return bool(math.isfinite(c) and math.isfinite(s) and s > 0 and abs(c) + reach * s <= AXIS_MAX
                and s >= SIGMA_MIN_RELATIVE * abs(c))


def span(lo: float, hi: float) -> tuple[float, float]:
    """``(lo, hi)`` clipped to ±AXIS_MAX, or widened around its centre when it is empty or below rounding."""
    lo, hi = (min(max(float(v), -AXIS_MAX), AXIS_MAX) if not math.isnan(v) else 0.0 for v in (lo, hi))
    if hi > lo and hi - lo > 1e-9 * max(abs(lo), abs(hi)):
        return lo, hi
    mid = lo / 2 + hi / 2
    half = max(abs(mid) * 0.05, 1e-30)
    return mid - half, mid + half


def data_span(v: np.ndarray) -> tuple[float, float]:
    """Limits around finite values with 5 % margins (matplotlib's autoscaling, computed without overflow)."""
    if not len(v):
        return 0.0, 1.0
    lo, hi = float(np.min(v)), float(np.max(v))
    pad = 0.1 * (hi / 2 - lo / 2)
    return span(lo - pad, hi + pad)


#: The value axis of a score chart (common practice, chosen here; the workbooks' charts and the ranked figure of
#: the report and lab pages): ±(action limit + 1), z-like ±4 and En ±2, widened to the :data:`AXIS_PERCENTILE`
#: th percentile of |score| (the order statistic at or below it, so one gross error among a lab's five scores
#: does not count as the bulk) rounded up when the bulk of the scores needs more, never past :data:`AXIS_CAP`
#: times the base (z-like ±8, En ±4). A score beyond the axis is drawn at its edge and labelled with its true
#: value, so one gross error (a decimal slip, z ≈ 6504) does not flatten every other bar.
AXIS_PERCENTILE = 95
AXIS_CAP = 2


def axis_limit(values: Iterable[float | None], family: ScoreFamily) -> float:
    """The half-range of the value axis of a chart of ``family``'s scores (the rule is at :data:`AXIS_PERCENTILE`).

    >>> from roundscore.model.scores import SCORE_FAMILIES
    >>> z, en = SCORE_FAMILIES["z-like"], SCORE_FAMILIES["en"]
    >>> axis_limit([0.5, -1.2] * 10 + [6504.1], z), axis_limit([0.3] * 9 + [5.2] * 3, z), axis_limit([90.0] * 5, z)
    (4.0, 6.0, 8.0)
    >>> axis_limit([0.4, 1.6, -2.5], en), axis_limit([0.6, 6504.1, -0.8, 1.4, 0.9], z)
    (2.0, 4.0)
    """
    base = family.action + 1.0
    finite = np.array([abs(v) for v in values if v is not None and math.isfinite(v)], dtype=float)
    if not finite.size:
        return base
    bulk = math.ceil(float(np.percentile(finite, AXIS_PERCENTILE, method="lower")))
    return float(min(max(base, bulk), AXIS_CAP * base))
