"""Axis limits that matplotlib can draw for any finite numbers.

A round's numbers are limited (roundscore.ranges) so that x_pt ± k·σ_pt is finite and wider than the rounding of
x_pt; these guards keep the figures drawable for a library caller's numbers too (1e308, 1e-320), without an
overflow, a singular transformation or a library warning.
"""

from __future__ import annotations

import math

import numpy as np

from roundscore.ranges import SIGMA_MIN_RELATIVE

__all__ = ["drawable", "span", "data_span", "AXIS_MAX"]

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
