"""Performance scores (z, z′, ζ, En, D, D%) and their signals (ISO 13528 §9).

All functions are vectorised over numpy arrays; NaN in gives NaN out.

References
----------
.. [1] ISO 13528:2022 §9.4 (z), §9.5 (z′), §9.6 (ζ), §9.7 (En), §9.3 (D, D%).
.. [2] ISO/IEC 17043:2023 (performance evaluation in proficiency testing).
"""

from __future__ import annotations

from typing import Literal

import numpy as np

from roundscore.stats.limits import above, reaches

__all__ = [
    "z_score",
    "z_prime_score",
    "zeta_score",
    "en_score",
    "difference",
    "percent_difference",
    "signal",
    "signals",
    "possible_unit_slip",
    "Signal",
    "Z_WARNING",
    "Z_ACTION",
    "EN_ACTION",
    "SIGNALS",
]

Signal = Literal["acceptable", "warning", "action", "not-scored"]
SIGNALS: tuple[str, ...] = ("acceptable", "warning", "action", "not-scored")
#: |z| > 2 is a warning signal, |z| ≥ 3 an action signal (ISO 13528 §9.4.1); z′ and ζ are read the same way.
#: The score registry (roundscore.model.scores) takes its limits from here; writers read the registry.
Z_WARNING = 2.0
Z_ACTION = 3.0
#: |En| > 1 is an action signal, |En| ≤ 1 acceptable; En has no warning signal (ISO 13528 §9.7.3).
EN_ACTION = 1.0
#: Powers of ten checked for a unit or decimal slip, and how near (in log10) counts.
SLIP_POWERS = (-3, -1, 1, 3)
SLIP_TOLERANCE = 0.15


def _a(x) -> np.ndarray:
    return np.asarray(x, dtype=float)


def z_score(x, x_pt, sigma_pt):
    """z = (x − x_pt)/σ_pt."""
    return (_a(x) - _a(x_pt)) / _a(sigma_pt)


def z_prime_score(x, x_pt, sigma_pt, u_x_pt):
    """z′ = (x − x_pt)/√(σ_pt² + u²(x_pt)), for when u(x_pt) is not negligible."""
    return (_a(x) - _a(x_pt)) / np.hypot(_a(sigma_pt), _a(u_x_pt))


def zeta_score(x, x_pt, u_x, u_x_pt):
    """ζ = (x − x_pt)/√(u²(x) + u²(x_pt)) with the lab's standard uncertainty u(x)."""
    return (_a(x) - _a(x_pt)) / np.hypot(_a(u_x), _a(u_x_pt))


def en_score(x, x_pt, U_x, U_x_pt):
    """En = (x − x_pt)/√(U²(x) + U²(x_pt)) with expanded uncertainties."""
    return (_a(x) - _a(x_pt)) / np.hypot(_a(U_x), _a(U_x_pt))


def difference(x, x_pt):
    """D = x − x_pt."""
    return _a(x) - _a(x_pt)


def percent_difference(x, x_pt):
    """D% = 100 (x − x_pt)/x_pt (NaN when x_pt is 0)."""
    x_pt = _a(x_pt)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(x_pt != 0, 100.0 * (_a(x) - x_pt) / x_pt, np.nan)


def signals(score, *, warning: float | None, action: float, strict: bool = False) -> np.ndarray:
    """Signals for scores with the given limits; NaN scores give "not-scored".

    ``|s| >= action`` is an action signal (``|s| > action`` when ``strict``),
    else ``|s| > warning`` a warning signal (none when ``warning`` is None),
    else acceptable.

    >>> signals([0.5, 2.5, -3.0, float("nan")], warning=Z_WARNING, action=Z_ACTION).tolist()
    ['acceptable', 'warning', 'action', 'not-scored']
    >>> signals([1.0, -1.01], warning=None, action=EN_ACTION, strict=True).tolist()
    ['acceptable', 'action']
    """
    s = np.abs(_a(score))
    out = np.full(s.shape, "not-scored", dtype=object)
    ok = ~np.isnan(s)
    v = s[ok]
    # On the limit within roundscore.stats.limits.LIMIT_RTOL counts as on it: |z| = 2.0000000000000004 is 2.
    acted = above(v, action) if strict else reaches(v, action)
    warned = np.zeros(v.shape, dtype=bool) if warning is None else above(v, warning)
    out[ok] = np.where(acted, "action", np.where(warned, "warning", "acceptable"))
    return out


def signal(score, kind: str = "z") -> np.ndarray:
    """Signals for scores: ``kind`` "en" uses |En| ≤ 1; the others |s| ≤ 2 / < 3 / ≥ 3.

    NaN scores give "not-scored".
    """
    if kind == "en":
        return signals(score, warning=None, action=EN_ACTION, strict=True)
    return signals(score, warning=Z_WARNING, action=Z_ACTION)


def possible_unit_slip(x, x_pt) -> np.ndarray:
    """True where x/x_pt is near 10^±1 or 10^±3 (a unit or decimal slip; common practice)."""
    x, x_pt = _a(x), _a(x_pt)
    with np.errstate(all="ignore"):  # x_pt = 0 or NaN: no ratio, so no slip
        r = np.log10(np.abs(x / x_pt))
    near = np.zeros(np.shape(r), dtype=bool)
    for k in SLIP_POWERS:
        near |= np.abs(r - k) <= SLIP_TOLERANCE
    return near & (np.sign(x) * np.sign(x_pt) > 0)  # signs, not the product: that can overflow
