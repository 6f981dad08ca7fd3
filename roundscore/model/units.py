"""Units of results, read with pint.

Labs write units in many ways (``mg/kg``, ``µg/g``, ``g/100 g``, ``%``,
``ppm``); :func:`factor` gives the number that converts a result from one
unit to another, and :func:`mass_fraction` the factor to a plain mass
fraction (for the Horwitz function). A few spellings that pint does not read
are rewritten first (``/100 g`` → ``/hg``, ``% (m/m)`` → ``percent``).
"""

from __future__ import annotations

import functools
import re

import pint

__all__ = ["factor", "mass_fraction", "UnitError", "UNIT_FORBIDDEN", "unit_text_problem"]

#: Characters that are part of no unit: markup, statement separators, quotes. pint's parser skips some of them
#: silently ("<b>mg/kg</b>" reads as mg/kg), so they are refused before it sees the text.
UNIT_FORBIDDEN = frozenset('<>&;"\\`{}')


class UnitError(ValueError):
    """A unit that cannot be read, or two units that cannot be converted."""


@functools.cache
def _registry() -> pint.UnitRegistry:
    ureg: pint.UnitRegistry = pint.UnitRegistry()
    ureg.define("ppb = 1e-9 = parts_per_billion")
    ureg.define("ppt = 1e-12 = parts_per_trillion")
    return ureg


_REWRITES = (
    (re.compile(r"\s*\(?\s*[mw]\s*/\s*[mw]\s*\)?\s*$"), ""),  # "% (m/m)", "% w/w"
    (re.compile(r"%"), " percent "),
    (re.compile(r"/\s*100\s*g\b"), "/hg"),
    (re.compile(r"/\s*100\s*mL\b"), "/dL"),
    (re.compile(r"μ"), "µ"),  # Greek mu → micro sign
)


def _clean(unit: str) -> str:
    s = unit.strip()
    for pattern, repl in _REWRITES:
        s = pattern.sub(repl, s)
    return s.strip() or "dimensionless"


def unit_text_problem(unit: str) -> str | None:
    """None for text that can be a unit, else why not (markup or control characters)."""
    if any(ch in UNIT_FORBIDDEN or not ch.isprintable() for ch in unit):
        return f"unit {unit!r} holds markup or control characters (such as < > & ;), which no unit has"
    return None


@functools.cache
def _quantity(unit: str):
    why = unit_text_problem(unit)
    if why is not None:
        raise UnitError(why)
    try:
        return _registry().Quantity(1.0, _clean(unit))
    except Exception as exc:  # pint raises several error types
        raise UnitError(f"unit {unit!r} is not understood ({exc})") from None


@functools.cache
def factor(from_unit: str, to_unit: str) -> float:
    """The factor f such that a value in ``from_unit`` × f is in ``to_unit``.

    Raises
    ------
    UnitError
        When either unit cannot be read or they measure different things.

    Examples
    --------
    >>> factor("µg/g", "mg/kg")
    1.0
    >>> factor("g/100 g", "g/kg")
    10.0
    """
    if from_unit.strip() == to_unit.strip():
        return 1.0
    a, b = _quantity(from_unit), _quantity(to_unit)
    try:
        return float(a.to(b.units).magnitude / b.magnitude)
    except pint.DimensionalityError:
        raise UnitError(f"unit {from_unit!r} cannot be converted to {to_unit!r}") from None


def mass_fraction(unit: str) -> float:
    """The factor from ``unit`` to a dimensionless mass fraction (mg/kg → 1e-6).

    Raises
    ------
    UnitError
        When the unit is not a mass fraction (e.g. mg/L, a mass concentration).
    """
    q = _quantity(unit)
    if not q.dimensionless:
        raise UnitError(
            f"unit {unit!r} is not a mass fraction, so the Horwitz function cannot be applied; "
            "state σ_pt as a number or report in a mass-fraction unit such as mg/kg"
        )
    return float(q.to("dimensionless").magnitude)
