"""The check of the laboratories' reported uncertainties, and z and ζ read together (extras ``uncertainties``).

Per lab × measurand, on the evaluation's score rows (nothing is recomputed but the check itself,
:mod:`roundscore.stats.uncertainty`):

* **which rows**: a measurand gets rows when at least one laboratory reported an uncertainty for it (u, or
  U with k; u = U/k, k = 2 when not given, as for ζ); then every laboratory with a numeric result has a
  row, "no uncertainty reported" when it gave none. A censored result, a withheld score and a measurand
  nobody gave an uncertainty for have none (there is nothing to say);
* **the check** (ISO 13528:2015 §9.8, from memory): u below the lowest plausible u (u(x_pt), or 0.3 s_R
  when larger and the round's precision rests on at least 8 laboratories, the ISO 5725-1 minimum) is "too
  small", above 1.5 σ_pt "too large"; ``check`` is one of :data:`UncertaintyVerdict`, ``reading`` says it
  in a few plain words naming the limit (for the lab's sheet), ``advice`` in sentences what the laboratory
  is asked to look at (for its page);
* **z and ζ together** (``joint``, ISO 13528:2015 §9.6/§9.8, from memory): the z-like score against σ_pt
  (z′ when the round scores the measurand with z′, else z) read with ζ, where both exist: a few words in
  ``joint``, the sentence added to ``advice``.

The table's columns are :data:`UNCERTAINTY_COLUMNS`; :func:`counts` gives the numbers the summaries print.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np
import pandas as pd

from roundscore.evaluation.precision import MIN_PRECISION_LABS
from roundscore.model.scores import score_symbol
from roundscore.model.signals import SIGNALS
from roundscore.stats.uncertainty import (U_MAX_SIGMA_FACTOR, U_MIN_REPRODUCIBILITY_FACTOR, check_uncertainties,
                                          joint_reading)

if TYPE_CHECKING:
    from roundscore.model.evaluation import MeasurandResult

__all__ = ["UNCERTAINTY_COLUMNS", "UncertaintyVerdict", "UncertaintyCounts", "uncertainty_stage", "counts",
           "MIN_REPRODUCIBILITY_LABS", "CLAUSE", "LAB_EXPLANATION", "RULE", "VERDICT_WORDS", "FLAGGED"]

#: uncertainties.csv: lab, measurand, the reported standard uncertainty, the plausible range, the verdict,
#: the verdict in a few plain words (which limit), the joint reading of z and ζ in a few words ("" when there is
#: none), and what the laboratory is asked to do in sentences ("" when nothing).
UNCERTAINTY_COLUMNS = ("lab", "measurand", "u", "u_min", "u_max", "check", "reading", "joint", "advice")
#: The verdict on a reported u.
UncertaintyVerdict = Literal["plausible", "too-small", "too-large", "not-reported", "not-checked"]
#: s_R bounds the lowest plausible u only when the precision rests on at least this many labs (ISO 5725-1
#: recommends 8, from memory: the precision stage's own minimum).
MIN_REPRODUCIBILITY_LABS = MIN_PRECISION_LABS
#: Where the check comes from, as every output cites it.
CLAUSE = "ISO 13528:2015 §9.8, from memory"

#: The verdicts in words (the tables people read), and the verdicts counted as implausible.
VERDICT_WORDS = {"plausible": "plausible", "too-small": "too small", "too-large": "too large",
                 "not-reported": "not reported", "not-checked": "not checked"}
FLAGGED = ("too-small", "too-large")
#: The rule in words, for the round report and the summary (the README states it with its sources).
RULE = (f"A reported standard uncertainty u ({CLAUSE}) is plausible from the lowest plausible u, the uncertainty "
        f"of the assigned value u(x_pt) or {U_MIN_REPRODUCIBILITY_FACTOR:g} s_R when that is larger (s_R from "
        f"at least {MIN_REPRODUCIBILITY_LABS} laboratories; roundscore's reading of \"far below the round's "
        f"reproducibility\"), up to {U_MAX_SIGMA_FACTOR:g} σ_pt; on a limit counts as within. z and ζ are read "
        "together where both exist: an acceptable z with an action signal for ζ points to an understated "
        "uncertainty, an action signal for z with an acceptable ζ to a result that may not be fit for the purpose "
        "σ_pt expresses (ISO 13528:2015 §9.6 and §9.8, from memory).")
#: What a laboratory's sheet and page say above its uncertainty check.
LAB_EXPLANATION = (f"Your reported standard uncertainty u ({CLAUSE}) is plausible from the lowest plausible u "
                   "(the uncertainty of the assigned value, u(x_pt), or "
                   f"{U_MIN_REPRODUCIBILITY_FACTOR:g} s_R, the spread between laboratories, when larger) up to "
                   f"{U_MAX_SIGMA_FACTOR:g} σ_pt; z and ζ read together are noted where they point to an "
                   "understated uncertainty or to a result that may not be fit for purpose.")

#: Each case of the check: (its verdict, the short words of the lab's sheet, the advice of its page).
_READINGS: dict[str, tuple[UncertaintyVerdict, str, str]] = {
    "zero": ("too-small", "too small: zero", "An uncertainty of zero: every result has an uncertainty; please "
             "report your standard uncertainty."),
    "below-u": ("too-small", "too small: below u(x_pt)", "Smaller than the uncertainty of the assigned value, "
                "u(x_pt): a laboratory can rarely know the value better than the round's assigned value is known. "
                "Please check that your uncertainty includes every significant contribution."),
    "below-sr": ("too-small", f"too small: below {U_MIN_REPRODUCIBILITY_FACTOR:g} s_R",
                 f"Below {U_MIN_REPRODUCIBILITY_FACTOR:g} s_R, far below the spread between laboratories in this "
                 "round: it may leave out effects that make laboratories differ (calibration, recovery, method "
                 "bias). Please check your uncertainty budget."),
    "large": ("too-large", f"too large: above {U_MAX_SIGMA_FACTOR:g} σ_pt",
              f"Above {U_MAX_SIGMA_FACTOR:g} σ_pt: an uncertainty this large is probably not fit for the purpose "
              "σ_pt expresses. Please check it (was an expanded uncertainty U entered as u?)."),
    "plausible": ("plausible", "plausible", ""),
    "none": ("not-reported", "no uncertainty reported", ""),
    "unset": ("not-checked", "not checked: no u(x_pt) or σ_pt", ""),
    "empty": ("not-checked", f"not checked: the lowest plausible u is above {U_MAX_SIGMA_FACTOR:g} σ_pt", ""),
}


def _joint_words(words: str, z: str) -> dict[str, tuple[str, str]]:
    """Each joint reading: (the short words, the advice), with ``z`` the z-like score's symbol."""
    ok, act = SIGNALS["acceptable"].word(words), SIGNALS["action"].word(words)
    return {
        "understated": ("uncertainty probably understated",
                        f"{z} {ok} but ζ {act}: your result is close enough for the purpose σ_pt expresses, but "
                        "your stated uncertainty is probably too small to cover its difference from the assigned "
                        "value."),
        "not-fit": ("result may not be fit for purpose",
                    f"{z} {act} but ζ {ok}: your uncertainty is large enough to cover the deviation, but a result "
                    "this far from the assigned value may not be fit for the purpose σ_pt expresses."),
    }


def uncertainty_stage(results: dict[str, MeasurandResult], scores: pd.DataFrame, precision: pd.DataFrame | None,
                      words: str = "signals") -> pd.DataFrame | None:
    """The ``uncertainties`` table (:data:`UNCERTAINTY_COLUMNS`), or None when no lab reported an uncertainty.

    ``scores`` is the evaluation's score table, whose rows follow each measurand's ``labs`` in the order of
    ``results`` (as :func:`roundscore.evaluation.evaluate.evaluate` builds it); ``precision`` the precision
    table (its ``s_R`` and ``p``), or None.
    """
    if not results or not len(scores):
        return None
    tables = [mr.labs for mr in results.values()]
    lab_codes = np.concatenate([t["lab"].to_numpy(dtype=object) for t in tables])
    if len(lab_codes) != len(scores) or not np.array_equal(lab_codes, scores["lab"].to_numpy(dtype=object)):
        raise AssertionError("the score rows do not follow the measurands' lab tables")  # pragma: no cover
    u = np.concatenate([t["u"].to_numpy(float) for t in tables])
    status = np.concatenate([t["status"].to_numpy(dtype=object) for t in tables])
    meas = scores["measurand"].to_numpy(dtype=object)
    given = pd.Series(np.isfinite(u)).groupby(meas, sort=False).transform("any").to_numpy(bool)
    keep = given & (status == "value") & (scores["state"].to_numpy() != "withheld")
    if not keep.any():
        return None
    # only the columns read below (not a copy of every score column)
    rows = scores.loc[keep, ["lab", "measurand", "u_assigned", "sigma_pt", "score", "z", "z_prime", "zeta"]]
    u = u[keep]
    s_R = np.full(len(rows), np.nan)
    if precision is not None and len(precision) and "s_R" in precision.columns:
        trusted = precision[precision["p"].to_numpy(float) >= MIN_REPRODUCIBILITY_LABS]
        s_R = rows["measurand"].map(dict(zip(trusted["measurand"], trusted["s_R"]))).to_numpy(float)
    chk = check_uncertainties(u, u_x_pt=rows["u_assigned"].to_numpy(float),
                              sigma_pt=rows["sigma_pt"].to_numpy(float), s_R=s_R)
    reported = np.isfinite(u)
    zero = chk.small & (u <= 0)
    cases = list(_READINGS)  # each row's case as an index into the words (one take per column, no text loop)
    case = np.select([~reported, zero, chk.below_u_x_pt, chk.small, chk.large, chk.checked, chk.empty],
                     [cases.index(k) for k in ("none", "zero", "below-u", "below-sr", "large", "plausible",
                                               "empty")], cases.index("unset"))
    prime = rows["score"].to_numpy(dtype=object) == "z-prime"  # z′ when the round scores with it, else z
    z = np.where(prime, rows["z_prime"].to_numpy(float), rows["z"].to_numpy(float))
    code = joint_reading(z, rows["zeta"].to_numpy(float))
    said = (_joint_words(words, score_symbol("z")), _joint_words(words, score_symbol("z-prime")))
    kinds = ["", *said[0]]  # no joint reading, then its kinds
    joint_at = np.select([code == k for k in kinds[1:]], list(range(1, len(kinds))), 0)
    verdict = np.array([_READINGS[k][0] for k in cases], dtype=object)[case]  # a case's verdict (small ⊃ below u)
    reading = np.array([_READINGS[k][1] for k in cases], dtype=object)[case]
    joint = np.array([""] + [w[0] for w in said[0].values()], dtype=object)[joint_at]
    # the advice of every (case, joint reading, z or z′) once, then taken row by row
    combos = np.array([" ".join(t for t in (_READINGS[c][2], said[p][k][1] if k else "") if t)
                       for c in cases for k in kinds for p in (0, 1)], dtype=object)
    advice = combos[(case * len(kinds) + joint_at) * 2 + prime.astype(int)]
    return pd.DataFrame({
        "lab": rows["lab"].to_numpy(dtype=object), "measurand": rows["measurand"].to_numpy(dtype=object),
        "u": u, "u_min": chk.u_min, "u_max": chk.u_max, "check": verdict, "reading": reading, "joint": joint,
        "advice": advice,
    }, columns=list(UNCERTAINTY_COLUMNS))


@dataclass(frozen=True, slots=True, kw_only=True)
class UncertaintyCounts:
    """How many reported uncertainties each verdict got, and the joint notes; the line the summaries print."""

    too_small: int = 0
    too_large: int = 0
    plausible: int = 0
    not_reported: int = 0
    not_checked: int = 0
    joint: int = 0

    @property
    def flagged(self) -> int:
        """Uncertainties found implausible (too small or too large)."""
        return self.too_small + self.too_large

    def line(self, capital: bool = False, where: str = "uncertainties.csv") -> str:
        """The summary line: "reported uncertainties (ISO 13528:2015 §9.8, from memory): ... (``where``)"
        ("Reported ..." when ``capital``)."""
        checked = self.flagged + self.plausible
        parts = [f"{self.flagged} of {checked} checked look implausible ({self.too_small} too small: below "
                 f"u(x_pt) or {U_MIN_REPRODUCIBILITY_FACTOR:g} s_R; {self.too_large} too large: above "
                 f"{U_MAX_SIGMA_FACTOR:g} σ_pt)"]
        if self.not_reported:
            parts.append(f"{self.not_reported} result{'s' if self.not_reported != 1 else ''} without one")
        if self.not_checked:
            parts.append(f"{self.not_checked} not checked")
        if self.joint:
            parts.append(f"{self.joint} note{'s' if self.joint != 1 else ''} on z and ζ read together")
        return (f"{'R' if capital else 'r'}eported uncertainties ({CLAUSE}): " + "; ".join(parts)
                + f" ({where})")


def counts(table: pd.DataFrame | None) -> UncertaintyCounts | None:
    """The counts of an ``uncertainties`` table (None when the round has none)."""
    if table is None or not len(table):
        return None
    got = table["check"].value_counts()
    return UncertaintyCounts(
        too_small=int(got.get("too-small", 0)), too_large=int(got.get("too-large", 0)),
        plausible=int(got.get("plausible", 0)), not_reported=int(got.get("not-reported", 0)),
        not_checked=int(got.get("not-checked", 0)), joint=int((table["joint"].astype(str) != "").sum()))
