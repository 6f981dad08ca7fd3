"""Is a laboratory's reported uncertainty plausible? And what do its z and ζ say read together?

Pure functions on numpy arrays, one entry per lab × measurand.

**The plausible range of a reported standard uncertainty u(x)** (ISO 13528:2015 §9.8, on evaluating the
uncertainties participants report; the clause and the bounds are recalled from memory):

* *lowest plausible u*, ``u_min``: the standard uncertainty of the assigned value, u(x_pt) (a laboratory can
  rarely know the value better than the round's assigned value is known), or
  :data:`U_MIN_REPRODUCIBILITY_FACTOR` × s_R when that is larger, s_R being the reproducibility standard
  deviation this round's results show (ISO 5725-2). The s_R bound is roundscore's reading of "far below the
  round's reproducibility": 0.3 is the factor ISO 13528 §9.2.1 uses for "negligible" (u(x_pt) ≤ 0.3 σ_pt), so
  a u below 0.3 s_R claims that the effects which make laboratories differ are negligible for this
  laboratory. A u of zero is always implausibly small.
* *highest plausible u*, ``u_max`` = :data:`U_MAX_SIGMA_FACTOR` × σ_pt (1.5 σ_pt, the bound the standard
  suggests, from memory): a larger u is probably not fit for the purpose σ_pt expresses (or an expanded
  uncertainty U given as u).

A u is compared with each limit through :mod:`roundscore.stats.limits` (the one comparison of every limit):
on a limit counts as within the range. When the lowest plausible u is above the highest, the range is
empty and nothing is said (``checked`` False).

**z and ζ read together** (ISO 13528:2015 §9.6 and §9.8, on the combined use of z and ζ, from memory):

* an acceptable z with an action signal for ζ: the result is fit for the purpose σ_pt expresses, but the
  stated uncertainty is probably too small to cover the difference from x_pt (understated);
* an action signal for z with an acceptable ζ: the uncertainty is large enough to cover a large deviation,
  but the result may not be fit for the purpose σ_pt expresses.

Only where both scores exist; other combinations say nothing here.

>>> c = check_uncertainties([0.005, 0.02, 0.5, 0.0], u_x_pt=0.01, sigma_pt=0.1)
>>> c.small.tolist(), c.large.tolist()
([True, False, False, True], [False, False, True, False])
>>> joint_reading([1.0, 3.5, 1.0], [3.2, 1.0, 1.0]).tolist()
['understated', 'not-fit', '']

References
----------
.. [1] ISO 13528:2015 *Statistical methods for use in proficiency testing by interlaboratory comparison*,
   §9.2.1 (u(x_pt) negligible below 0.3 σ_pt), §9.6 (ζ), §9.8 (evaluating participants' uncertainties);
   §9.6 and §9.8 recalled from memory.
.. [2] ISO 5725-2:1994, the reproducibility standard deviation s_R.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike

from roundscore.stats.limits import above, reaches
from roundscore.stats.scores import signal

__all__ = ["U_MAX_SIGMA_FACTOR", "U_MIN_REPRODUCIBILITY_FACTOR", "UncertaintyCheck", "JointReading",
           "check_uncertainties", "joint_reading"]

#: A reported u above 1.5 σ_pt is implausibly large (ISO 13528:2015 §9.8, from memory).
U_MAX_SIGMA_FACTOR = 1.5
#: A reported u below 0.3 s_R is far below the round's reproducibility (roundscore's rule, after the
#: "negligible" factor 0.3 of ISO 13528 §9.2.1).
U_MIN_REPRODUCIBILITY_FACTOR = 0.3
#: What z and ζ say read together: the uncertainty is probably understated, the result may not be fit
#: for purpose, or nothing ("").
JointReading = Literal["understated", "not-fit", ""]


@dataclass(frozen=True, slots=True, kw_only=True)
class UncertaintyCheck:
    """The plausible range of each reported u and where u lies (arrays of one entry per lab × measurand).

    Attributes
    ----------
    u_min, u_max : numpy.ndarray
        The lowest and highest plausible u (NaN where the inputs do not set it).
    from_reproducibility : numpy.ndarray of bool
        Whether ``u_min`` is the 0.3 s_R bound (it is larger than u(x_pt)).
    below_u_x_pt : numpy.ndarray of bool
        Of the ``small``: u below u(x_pt) itself (not only below 0.3 s_R).
    small, large : numpy.ndarray of bool
        u below ``u_min`` (or zero), u above ``u_max``; False where u is not reported or not ``checked``.
    checked : numpy.ndarray of bool
        u is reported (finite) and compared with at least one limit, and the range is not empty.
    empty : numpy.ndarray of bool
        The range is empty (``u_min`` above ``u_max``): nothing is said of u.
    """

    u_min: np.ndarray
    u_max: np.ndarray
    from_reproducibility: np.ndarray
    below_u_x_pt: np.ndarray
    small: np.ndarray
    large: np.ndarray
    checked: np.ndarray
    empty: np.ndarray


def check_uncertainties(u: ArrayLike, *, u_x_pt: ArrayLike, sigma_pt: ArrayLike,
                        s_R: ArrayLike = np.nan) -> UncertaintyCheck:
    """The plausible range of each reported standard uncertainty ``u`` and whether u lies in it.

    Parameters
    ----------
    u : array_like
        The laboratories' standard uncertainties (NaN: not reported).
    u_x_pt, sigma_pt, s_R : array_like
        u(x_pt), σ_pt and the round's reproducibility SD, broadcast against ``u`` (NaN: not known; a
        missing s_R leaves u(x_pt) as the lowest plausible u).

    Returns
    -------
    UncertaintyCheck
    """
    u = np.asarray(u, dtype=float)
    shape = u.shape
    u_x_pt = np.broadcast_to(np.asarray(u_x_pt, dtype=float), shape)
    sigma_pt = np.broadcast_to(np.asarray(sigma_pt, dtype=float), shape)
    s_R = np.broadcast_to(np.asarray(s_R, dtype=float), shape)
    from_sr = U_MIN_REPRODUCIBILITY_FACTOR * s_R
    with np.errstate(invalid="ignore"):
        by_sr = np.isfinite(from_sr) & ~(from_sr <= u_x_pt)  # NaN u(x_pt) leaves s_R as the bound
        u_min = np.where(by_sr, from_sr, u_x_pt)
        u_max = U_MAX_SIGMA_FACTOR * sigma_pt
        has_min, has_max = np.isfinite(u_min), np.isfinite(u_max)
        reported = np.isfinite(u)
        empty = has_min & has_max & above(u_min, u_max)
        checked = reported & (has_min | has_max) & ~empty
        small = checked & ((u <= 0) | (has_min & ~reaches(u, u_min)))
        large = checked & ~small & has_max & above(u, u_max)
        below = small & np.isfinite(u_x_pt) & ~reaches(u, u_x_pt)
    return UncertaintyCheck(u_min=u_min, u_max=u_max, from_reproducibility=by_sr & has_min, below_u_x_pt=below,
                            small=small, large=large, checked=checked, empty=empty & reported)


def joint_reading(z: ArrayLike, zeta: ArrayLike) -> np.ndarray:
    """What a z-like score read against σ_pt and ζ say together (:data:`JointReading`, one per entry).

    ``"understated"``: z acceptable and ζ an action signal; ``"not-fit"``: z an action signal and ζ
    acceptable; ``""`` otherwise, and where either score is missing. The signals are those of
    :func:`roundscore.stats.scores.signal` (|score| ≤ 2 acceptable, ≥ 3 action).
    """
    sz, szeta = signal(z), signal(zeta)
    out = np.full(sz.shape, "", dtype=object)
    out[(sz == "acceptable") & (szeta == "action")] = "understated"
    out[(sz == "action") & (szeta == "acceptable")] = "not-fit"
    return out
