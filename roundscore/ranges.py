"""The range of numbers roundscore computes with, and the checks that keep every number in it.

A number read from a round file or a results table is used in sums of
squares (precision, outlier screens, item checks), in ratios (scores) and in
figures. Double precision holds magnitudes from about 2.2e-308 (smallest
normal number) to 1.8e308, so a value near either end overflows or loses all
its digits a few operations later: a σ_pt of 1e308 makes x_pt ± 3σ_pt
infinite, a σ_pt of 1e-320 makes every z infinite, results of 1e-320 have
squares of 0, so a spread looks like none. Rather than guard every
operation, every number is refused at the edge unless it lies in

    |v| ≤ MAX_MAGNITUDE  and  (v = 0 or |v| ≥ MIN_MAGNITUDE)

which keeps the arithmetic that follows well inside double precision:

* a difference of two values is at most 2·10⁵⁰ and a score (a difference
  over σ_pt ≥ 10⁻⁵⁰) at most 2·10¹⁰⁰, so its square (the sum of squared z of
  ``history check``) is at most 4·10²⁰⁰ and sums of many of them stay finite;
* fourth powers of values and of differences between distinct values (the
  variance of variances in the item checks, Cochran's C) stay between about
  10⁻²⁶⁴ and 10²⁰⁰, that is normal numbers, so no spread is lost to underflow.

The bounds are twenty orders of magnitude beyond the SI prefixes (quecto,
10⁻³⁰, to quetta, 10³⁰, added by the 27th CGPM in 2022, resolution 3; from
memory), so no measurement in any unit is refused by them; a number outside
them is a typing or unit mistake. Double precision limits are those of IEEE
754 binary64 (sys.float_info).

Differences are limited relative to the numbers they are differences of
(:data:`RELATIVE_RESOLUTION`, 10⁻¹²): double precision rounds a number to a
relative 1.1·10⁻¹⁶, so a difference below about 10⁻¹² of the numbers' size is
mostly rounding. Hence a σ_pt below 10⁻¹² · |x_pt| is not used (z would be
resolved no better than about 2·10⁻⁴, and far worse just below), and a t test
on groups whose spread is below 10⁻¹² of their values' size is not computed
(the t statistic, 10¹⁵ and more, would measure rounding).

``confidence`` levels are in the open interval (0, 1), and at most
:data:`CONFIDENCE_MAX`, the largest double for which (1 + c)/2 is still below
1 (so the two-sided critical value is finite).
"""

from __future__ import annotations

import math

__all__ = ["MAX_MAGNITUDE", "MIN_MAGNITUDE", "RELATIVE_RESOLUTION", "SIGMA_MIN_RELATIVE", "MAX_SCORE",
           "RANGE_TEXT", "CONFIDENCE_MAX", "magnitude_problem", "sigma_relative_problem", "confidence_problem",
           "spread_problem"]

#: Largest magnitude of any number read (results, limits, uncertainties, assigned values, σ_pt).
MAX_MAGNITUDE = 1e50
#: Smallest magnitude of a non-zero number read.
MIN_MAGNITUDE = 1e-50
#: Differences below this fraction of the numbers' magnitude are taken as rounding (see the module notes).
RELATIVE_RESOLUTION = 1e-12
#: σ_pt must be at least this fraction of |x_pt|.
SIGMA_MIN_RELATIVE = RELATIVE_RESOLUTION
#: Largest confidence level: (1 + c)/2 < 1 in double precision.
CONFIDENCE_MAX = 1.0 - 2.0**-52
#: Largest |score| that numbers in range can give: (2·MAX_MAGNITUDE)/MIN_MAGNITUDE.
MAX_SCORE = 2 * MAX_MAGNITUDE / MIN_MAGNITUDE
#: The rule in words, for messages.
RANGE_TEXT = f"0, or a magnitude from {MIN_MAGNITUDE:g} to {MAX_MAGNITUDE:g}"


def magnitude_problem(value: float) -> str | None:
    """None when ``value`` is finite and in range, else what is wrong, in words.

    Examples
    --------
    >>> magnitude_problem(12.5) is None, magnitude_problem(0.0) is None
    (True, True)
    >>> magnitude_problem(1e308)
    'too large to compute with: allowed is 0, or a magnitude from 1e-50 to 1e+50 (check the unit or the decimal point)'
    """
    try:
        v = float(value)
    except OverflowError:  # an integer beyond any float
        return f"too large to compute with: allowed is {RANGE_TEXT} (check the unit or the decimal point)"
    if not math.isfinite(v):
        return f"not a finite number: allowed is {RANGE_TEXT}"
    a = abs(v)
    if a > MAX_MAGNITUDE:
        return f"too large to compute with: allowed is {RANGE_TEXT} (check the unit or the decimal point)"
    if 0 < a < MIN_MAGNITUDE:
        return f"too small to compute with: allowed is {RANGE_TEXT} (check the unit or the exponent)"
    return None


def sigma_relative_problem(sigma_pt: float, assigned: float) -> str | None:
    """None when σ_pt ≥ SIGMA_MIN_RELATIVE·|x_pt|, else the reason in words."""
    floor = SIGMA_MIN_RELATIVE * abs(float(assigned))
    if float(sigma_pt) >= floor:
        return None
    return (f"σ_pt = {sigma_pt:.3g} is below {SIGMA_MIN_RELATIVE:g} × |x_pt| = {floor:.3g}: results differ from "
            f"x_pt = {assigned:.6g} by amounts this small only through rounding, so the scores would show "
            "nothing but rounding")


def confidence_problem(confidence: object) -> str | None:
    """None for a confidence level in (0, 1) (at most CONFIDENCE_MAX), else what is allowed, in words."""
    ok = (not isinstance(confidence, bool) and isinstance(confidence, (int, float))
          and 0.0 < confidence <= CONFIDENCE_MAX)
    if ok:
        return None
    near_one = isinstance(confidence, float) and CONFIDENCE_MAX < confidence < 1.0
    return ("a number strictly between 0 and 1, such as 0.95"
            + (" (this one is so close to 1 that the critical value is infinite)" if near_one else ""))


def spread_problem(sd: float, values_magnitude: float, what: str = "the values") -> str | None:
    """None when an SD is more than RELATIVE_RESOLUTION × the values' magnitude, else the reason in words."""
    floor = RELATIVE_RESOLUTION * float(values_magnitude)
    if sd > floor:
        return None
    if sd == 0:
        return f"{what} do not vary"
    return (f"{what} are (nearly) all equal: their SD, {sd:.3g}, is at most {RELATIVE_RESOLUTION:g} × their "
            f"largest magnitude ({floor:.3g}), which is rounding, not spread")
