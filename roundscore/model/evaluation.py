"""The evaluation of a round as plain data: computed once by :mod:`roundscore.evaluation`, read by every writer.

:class:`RoundEvaluation` holds, per measurand (:class:`MeasurandResult`), the
lab means, the robust statistics, the assigned value and its uncertainty,
σ_pt, every lab's scores and signals, and an audit trail of every decision.
The column tuples fix the contract of ``scores.csv``, ``statistics.csv`` and
``audit.csv``. Writers never recompute a statistic.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Literal
from collections.abc import Mapping

import numpy as np
import pandas as pd

from roundscore.model.inputs import Participant
from roundscore.model.items import ItemOutcome
from roundscore.model.round import MeasurandSettings, Round
from roundscore.model.scores import SCORE_FIELD, SCORE_VALUE_COLUMNS, score_symbol
from roundscore.model.table import ResultTable
from roundscore.stats.robust import RobustEstimate

__all__ = ["RoundEvaluation", "MeasurandResult", "SCORE_COLUMNS", "STATISTICS_COLUMNS", "AUDIT_COLUMNS",
           "SCORE_FIELD", "ROUND_COLUMNS", "SCORE_ROW_COLUMNS", "SCORE_FLOAT_COLUMNS", "lab_order_key",
           "ScoreState", "STATES", "STATE_SIDE"]

#: The round's columns that end every row of scores.csv, so a file stands alone.
ROUND_COLUMNS = ("scheme", "round", "round_date")
#: scores.csv columns (fixed by contract): the lab's result and the assigned value, one column per score of
#: the registry (roundscore.model.scores.SCORES, in its order), D and D%, the signal, then the round columns.
SCORE_COLUMNS: tuple[str, ...] = (
    "lab", "measurand", "unit", "n_replicates", "result", "assigned", "u_assigned", "sigma_pt",
    *SCORE_VALUE_COLUMNS, "d", "d_percent", "signal", "note",
    "score", *ROUND_COLUMNS,
)
#: The columns of one score row without the round's (what the archive stores per row).
SCORE_ROW_COLUMNS: tuple[str, ...] = tuple(c for c in SCORE_COLUMNS if c not in ROUND_COLUMNS)
#: The columns of a score row holding numbers (a censored ``result`` is text: "<0.5").
SCORE_FLOAT_COLUMNS: tuple[str, ...] = ("result", "assigned", "u_assigned", "sigma_pt", *SCORE_VALUE_COLUMNS,
                                        "d", "d_percent")
#: The one state of a lab × measurand, decided once by the evaluation (the ``state`` column of
#: :attr:`RoundEvaluation.scores`, after the scores.csv columns; every writer draws it, none decides it):
#: ``scored`` (a score and its signal), ``false-negative`` / ``false-positive`` (a censored result whose
#: limit lies beyond x_pt ∓ 3σ_pt: no score value, an action signal), ``withheld`` (an ``[[exclude]]`` with
#: ``scored = false``: no score value in any output, the note gives the reason), ``not-scored`` (the note
#: says why: no assigned value or σ_pt, a censored result that cannot be judged, no uncertainty for ζ/En...),
#: ``not-reported``. scores.csv keeps its columns: there the state reads from ``signal`` and ``note``.
ScoreState = Literal["scored", "false-negative", "false-positive", "withheld", "not-scored", "not-reported"]
#: Each state in words, as a person reads it beside the signal (the signal's own word for ``scored``).
STATES: Mapping[str, str] = MappingProxyType({
    "scored": "scored", "false-negative": "false negative (censored result)",
    "false-positive": "false positive (censored result)", "withheld": "not scored: withheld",
    "not-scored": "not scored", "not-reported": "not reported",
})
#: Where a state without a score value sits on a score axis: a false negative below its low end, a false
#: positive above its high end (−1, +1); the others are not drawn on an axis.
STATE_SIDE: Mapping[str, int] = MappingProxyType({"false-negative": -1, "false-positive": 1})
STATISTICS_COLUMNS = (
    "measurand", "unit", "p", "assigned", "u_assigned", "sigma_pt", "robust_mean", "robust_sd",
    "median", "made", "niqr", "iterations", "u_check_passed", "score",
)
AUDIT_COLUMNS = ("measurand", "lab", "step", "action", "reason")


@dataclass(frozen=True, slots=True, kw_only=True)
class MeasurandResult:
    """Everything computed for one measurand.

    Attributes
    ----------
    settings : MeasurandSettings
    labs : pandas.DataFrame
        One row per lab: lab, n_replicates, mean, sd, status ("value",
        "censored", "not-reported"), relation, limit, u, U, k, method,
        used (in the consensus), reason (why not used).
    p : int
        Number of lab means used for the statistics.
    robust : RobustEstimate or None
        Algorithm A on the lab means used (None with fewer than 3).
    median, made, niqr : float
    assigned, u_assigned, sigma_pt : float
        x_pt, u(x_pt) and σ_pt (NaN when they could not be set; see notes).
    assigned_source, sigma_source : str
        In words, where x_pt and σ_pt came from.
    u_check_passed : bool or None
        u(x_pt) ≤ 0.3 σ_pt (None when not computable).
    notes : tuple of str
        Things the reader of the report must know about this measurand.
    findings : tuple of str
        Headlines of findings that head the summary and every lab sheet with the failed checks (a consensus
        whose spread is zero, say).
    """

    settings: MeasurandSettings
    labs: pd.DataFrame
    p: int
    robust: RobustEstimate | None
    median: float
    made: float
    niqr: float
    assigned: float
    u_assigned: float
    sigma_pt: float
    assigned_source: str
    sigma_source: str
    u_check_passed: bool | None
    notes: tuple[str, ...] = ()
    item_checks: ItemOutcome | None = None
    findings: tuple[str, ...] = ()

    @property
    def name(self) -> str:
        return self.settings.name

    @property
    def scored(self) -> bool:
        return bool(np.isfinite(self.assigned) and np.isfinite(self.sigma_pt) and self.sigma_pt > 0)


@dataclass(frozen=True, slots=True, kw_only=True)
class RoundEvaluation:
    """The whole evaluation of a round; every writer reads this and nothing else.

    Attributes
    ----------
    round : Round
    table : ResultTable
    participants : dict of str to Participant
        Confidential; only a lab's own sheet shows its entry.
    measurands : dict of str to MeasurandResult
    scores : pandas.DataFrame
        One row per lab × measurand, :data:`SCORE_COLUMNS` plus ``rank``
        and ``n_scored`` (where the lab stands among all scored labs, by |score|),
        ``method`` and ``state`` (:data:`ScoreState`).
    statistics : pandas.DataFrame
        One row per measurand, :data:`STATISTICS_COLUMNS`.
    audit : pandas.DataFrame
        :data:`AUDIT_COLUMNS`: every exclusion and decision with its reason.
    extras : dict of str to DataFrame
        Tables added by the stages (precision, screens, mandel, methods,
        items), by name; each is also written as NAME.csv.
    stage_notes : dict of str to tuple of str
        Notes by measurand from the stages (e.g. "method groups differ").
    details : dict
        Result objects of the stages kept for figures (by stage name).
    warnings : tuple of str
    """

    round: Round
    table: ResultTable
    participants: dict[str, Participant]
    measurands: dict[str, MeasurandResult]
    scores: pd.DataFrame
    statistics: pd.DataFrame
    audit: pd.DataFrame
    extras: dict[str, pd.DataFrame] = field(default_factory=dict)
    stage_notes: dict[str, tuple[str, ...]] = field(default_factory=dict)
    details: dict[str, Any] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    # Not an __init__ argument: dataclasses.replace() then starts a fresh cache instead of sharing the
    # original's (whose per-lab splits would belong to other tables).
    _cache: dict[str | tuple[str, str], Any] = field(default_factory=dict, init=False, repr=False, compare=False)

    @property
    def labs(self) -> list[str]:
        """Every lab code in natural order (L2 before L10); sorted once, then kept."""
        if "labs" not in self._cache:
            self._cache["labs"] = sorted(self.scores["lab"].unique(), key=lab_order_key)
        return list(self._cache["labs"])

    def lab_scores(self, lab: str) -> pd.DataFrame:
        """This lab's rows of :attr:`scores` (grouped once, then looked up)."""
        return self.lab_rows("scores", lab)

    @property
    def lab_tables(self) -> list[str]:
        """The tables kept by lab: ``"scores"`` and every extras table with a ``lab`` column."""
        return ["scores"] + [k for k, v in self.extras.items()
                             if isinstance(v, pd.DataFrame) and "lab" in v.columns]

    def lab_rows(self, table: str, lab: str) -> pd.DataFrame:
        """This lab's rows of ``scores`` or of an extras table with a ``lab`` column.

        The table is split by lab on first use and the pieces are kept, so
        writing thousands of lab sheets does not filter the whole table each time.
        """
        got = self._lab_groups(table).get(lab)
        return got if got is not None else (self.scores if table == "scores" else self.extras[table]).iloc[0:0]

    def split_by_lab(self) -> None:
        """Split every table of :attr:`lab_tables` now: before worker processes fork, so they inherit the pieces."""
        for table in self.lab_tables:
            self._lab_groups(table)

    def _lab_groups(self, table: str) -> dict[str, pd.DataFrame]:
        groups = self._cache.get(table)
        if groups is None:
            frame = self.scores if table == "scores" else self.extras[table]
            groups = self._cache[table] = {k: g for k, g in frame.groupby("lab", sort=False)}
        return groups

    def measurand_rows(self, table: str, name: str) -> pd.DataFrame:
        """This measurand's rows of ``scores`` or of an extras table with a ``measurand`` column.

        Split by measurand on first use and kept, as :meth:`lab_rows` does by lab:
        a writer going through thousands of measurands must not filter the
        whole table for each (that made per-measurand cost grow with the
        number of measurands).
        """
        key = ("measurand", table)
        groups = self._cache.get(key)
        frame = self.scores if table == "scores" else self.extras[table]
        if groups is None:
            groups = self._cache[key] = ({str(k): g for k, g in frame.groupby("measurand", sort=False)}
                                         if len(frame) else {})
        got = groups.get(name)
        return got if got is not None else frame.iloc[0:0]

    @property
    def failed_checks(self) -> list[str]:
        """Headlines of failed checks that must head the summary and every lab sheet."""
        if "failed_checks" not in self._cache:
            self._cache["failed_checks"] = self._failed_checks()
        return list(self._cache["failed_checks"])

    @property
    def lab_notices(self) -> list[str]:
        """What the failed checks mean for a lab's score, in plain words (the lab's page, sheet and PDF).

        The technical findings (:attr:`failed_checks`) stay in the summary workbook and the round report.
        """
        if "lab_notices" not in self._cache:
            self._cache["lab_notices"] = self._lab_notices()
        return list(self._cache["lab_notices"])

    def _lab_notices(self) -> list[str]:
        out = []
        for m in self.measurands.values():
            if m.u_check_passed is False:
                score = m.settings.score
                if score == "z":
                    out.append(f"{m.name}: the uncertainty of the assigned value is large compared with σ_pt, "
                               "and the z-score does not allow for it: treat your z-score as indicative.")
                else:
                    out.append(f"{m.name}: the uncertainty of the assigned value is large compared with σ_pt; "
                               f"the {score_symbol(score)} score used allows for it.")
        items = self.extras.get("items")
        if items is not None and len(items):
            for _, r in items[~items["passed"].astype(bool)].iterrows():
                what = "homogeneous" if r["check"] == "homogeneity" else "stable"
                if str(r.get("note", "")).startswith("not evaluated"):
                    out.append(f"{r['measurand']}: whether the test items were {what} enough could not be "
                               "checked: treat your score as indicative.")
                else:
                    out.append(f"{r['measurand']}: the test items may not have been {what} enough; the "
                               "provider allowed for it as the round file says: treat your score with care.")
        return out

    def _failed_checks(self) -> list[str]:
        out = []
        for m in self.measurands.values():
            if m.u_check_passed is False:
                out.append(f"{m.name}: u(x_pt) exceeds 0.3 σ_pt")
            out.extend(f"{m.name}: {f}" for f in m.findings)
        ref = self.extras.get("reference")  # roundscore.evaluation.consensus: consensus against a reference value
        if ref is not None:
            out += [f"{r.measurand}: the consensus disagrees with the reference value (ratio {r.ratio:.2f})"
                    for r in ref.itertuples() if r.agrees is False]
        items = self.extras.get("items")
        if items is not None and len(items):
            for _, r in items[~items["passed"].astype(bool)].iterrows():
                not_evaluated = str(r.get("note", "")).startswith("not evaluated")
                out.append(f"{r['measurand']}: {r['check']} check "
                           + ("not evaluated" if not_evaluated else "failed"))
        return out


def lab_order_key(code: str) -> list:
    """The key that sorts lab codes in natural order: L2 before L10."""
    return [int(t) if t.isdigit() else t for t in re.split(r"(\d+)", str(code))]
