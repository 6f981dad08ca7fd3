"""Checks on score rows that come back from files: each row's internal consistency.

A lab's score sheet (``labs/LAB.xlsx``) and a round's ``scores.csv`` travel
through e-mail and spreadsheet programs before ``history add`` reads them
back.  Two checks stop an edited row from being stored as genuine:

* :func:`row_problems`: the numbers of one row must agree with each other,
  as roundscore computed them (ISO 13528:2022 §9): ``d = x − x_pt``,
  ``D% = 100 d / x_pt``, ``z = d / σ_pt``, ``z′ = d / √(σ_pt² + u²(x_pt))``;
  ζ and En also depend on the lab's own uncertainty, which the row does not
  carry, so only their sign and their largest possible size are checked
  (``|ζ| ≤ |d| / u(x_pt)``, ``|En| ≤ |d| / U(x_pt)`` with ``U(x_pt) = 2 u(x_pt)``
  as :mod:`roundscore.evaluation.evaluate` computes it); and the signal must be the
  one the limits give for the round's chosen score.
* the digests of :mod:`roundscore.model.digest`: the lab sheet's ``data``
  sheet carries a digest of each row and the ``round`` sheet one of the
  whole, so an edit that keeps a row consistent is still found, and the row
  is named (checked by :mod:`roundscore.history.sheets`).

References
----------
.. [1] ISO 13528:2022 §9.3 (D, D%), §9.4 (z), §9.5 (z′), §9.6 (ζ), §9.7 (En).
"""

from __future__ import annotations

import math

import numpy as np

from roundscore.errors import Problem, Where
from roundscore.model.scores import CENSORED_ACTION, SCORE_FIELD, family_of
from roundscore.model.signals import SIGNAL_NAMES as SIGNALS
from roundscore.stats.limits import LIMIT_RTOL

__all__ = ["REL_TOL", "row_problems", "EDIT_HINT", "RESUBMIT_HINT"]

#: Relative tolerance of the consistency checks: the numbers carry 12 significant digits
#: (a rounding error up to 5e-13 each); 1e-9 leaves room for the arithmetic (common practice).
REL_TOL = 1e-9
#: U(x_pt) = 2 u(x_pt) in En (roundscore.evaluation.evaluate._score_rows).
_EN_K = 2.0
#: What to do about a row that was changed.
RESUBMIT_HINT = "add the file as the provider sent it, or ask the provider for a new copy"
#: Said with every consistency problem.
EDIT_HINT = ("the row was changed after roundscore computed it (edited by hand?) or is damaged; "
             + RESUBMIT_HINT)


# --------------------------------------------------------------------------- consistency

def _num(value: object) -> float | None:
    return float(value) if isinstance(value, (int, float)) and not isinstance(value, bool) else None


def _close(got: float, want: float, scale: float) -> bool:
    return abs(got - want) <= REL_TOL * (abs(want) + scale) + 1e-300


def _signals(value: float, score: str) -> set[str]:
    """The signals a score may carry (by its family's limits): both sides of a limit when it lies within the
    tolerance."""
    # Beyond the limits' own tolerance (roundscore.stats.limits.LIMIT_RTOL), so that a row decided by an
    # earlier version on the bare floating-point value (2.9999999999999996: a warning) is accepted too.
    spread = 3 * max(REL_TOL, LIMIT_RTOL)
    probe = abs(value) * np.array([1 - spread, 1.0, 1 + spread])
    return set(family_of(score).signals(probe).tolist())


def row_problems(row: dict[str, object], *, file: str | None, sheet: str | None,
                 row_number: int | None) -> list[Problem]:
    """Every way one score row disagrees with itself (see the module docstring).

    ``row`` maps the score fields (``result``, ``assigned``, ``u_assigned``,
    ``sigma_pt``, ``z``, ``z_prime``, ``zeta``, ``en``, ``d``, ``d_percent``,
    ``signal``, ``note``, ``score``) to values as
    :func:`roundscore.history.sheets.normalise_rows` returns them (floats,
    censored results as text, ``None`` when empty).
    """
    lab, measurand = row.get("lab"), row.get("measurand")
    where: Where = {"file": file, "sheet": sheet, "row": row_number, "lab": None if lab is None else str(lab),
                    "measurand": None if measurand is None else str(measurand)}
    problems: list[Problem] = []

    def bad(column: str, message: str) -> None:
        problems.append(Problem(message=f"{message}: {EDIT_HINT}",
                                **(where | {"column": column, "value": row.get(column)})))

    result = row.get("result")
    x, censored = _num(result), isinstance(result, str)
    a, u, s = _num(row.get("assigned")), _num(row.get("u_assigned")), _num(row.get("sigma_pt"))
    d = None if x is None or a is None else x - a
    spread = 0.0 if x is None or a is None else abs(x) + abs(a)  # scale of the rounding in d
    exact = (("d", lambda: d, 1.0, "result − assigned"),
             ("d_percent", lambda: 100.0 * d / a if d is not None and a else None,
              100.0 / abs(a) if a else 0.0, "100 (result − assigned) / assigned"),
             ("z", lambda: d / s if d is not None and s and s > 0 else None,
              1.0 / s if s and s > 0 else 0.0, "(result − assigned) / σ_pt"),
             ("z_prime", lambda: (d / math.hypot(s, u) if d is not None and s and s > 0
                                  and u is not None and u >= 0 else None),
              1.0 / math.hypot(s, u) if s and s > 0 and u is not None else 0.0,
              "(result − assigned) / √(σ_pt² + u(assigned)²)"))
    for column, want, per, formula in exact:
        got = _num(row.get(column))
        if got is None:
            continue
        expected = want()
        if expected is None:
            bad(column, "a score without the result, assigned value or σ_pt it is computed from")
        elif not _close(got, expected, spread * per):
            bad(column, f"does not agree with the row: {formula} = {expected:.12g}")
    for column, factor, name in (("zeta", 1.0, "u(assigned)"), ("en", _EN_K, "2 u(assigned)")):
        got = _num(row.get(column))
        if got is None:
            continue
        if d is None or u is None:
            bad(column, "a score without the result, assigned value or u(assigned) it is "
                        "computed from")
            continue
        tol = REL_TOL * (abs(got) + (spread / (factor * u) if u > 0 else 0.0)) + 1e-300
        if got * d < 0 and abs(got) > tol:
            bad(column, f"has the opposite sign of result − assigned = {d:.6g}")
        elif u > 0 and abs(got) > abs(d) / (factor * u) + tol:
            bad(column, f"is larger than |result − assigned| / {name} = "
                        f"{abs(d) / (factor * u):.6g}, which no uncertainty of the lab allows")
    _check_signal(row, x, a, s, censored, bad)
    return problems


def _check_signal(row: dict[str, object], x: float | None, a: float | None, s: float | None,
                  censored: bool, bad) -> None:
    """The signal against the chosen score and the limits (ISO 13528 §9.4.1, §9.7.3)."""
    sig = row.get("signal")
    if sig not in SIGNALS:
        return  # reported by normalise_rows
    field = SCORE_FIELD.get(str(row.get("score")))
    value = _num(row.get(field)) if field else None
    kind = str(row.get("score"))
    if value is not None and x is None:
        return  # a score without a result: reported with its column
    if value is not None:
        allowed = _signals(value, kind)
        if sig == "not-scored" and "withheld" in str(row.get("note") or ""):
            return  # the coordinator withheld the score; the score columns still hold it
        if sig not in allowed:
            bad("signal", f"does not agree with {field} = {value:.6g}: the limits give "
                          f"{' or '.join(sorted(allowed))}")
        return
    allowed = {"not-scored"}
    if censored and a is not None and s is not None and s > 0:
        text = str(row.get("result"))
        try:
            limit = float(text[1:].strip())
        except ValueError:
            limit = math.nan
        margin = REL_TOL * (abs(a) + CENSORED_ACTION * s)
        if text.startswith("<") and limit < a - CENSORED_ACTION * s + margin:
            allowed.add("action")  # a false negative (roundscore.evaluation.evaluate)
        if text.startswith(">") and limit > a + CENSORED_ACTION * s - margin:
            allowed.add("action")  # a false positive
    if sig not in allowed:
        what = "a censored result" if censored else "a row without a score"
        bad("signal", f"{what} cannot carry the signal {sig!r}; allowed: "
                      f"{' or '.join(sorted(allowed))}")
