"""The scores, in one frozen table: name, CSV column, symbol, label, family (limits) and formula.

Round validation (the allowed ``score`` values), the evaluation (which formula
gives which column, which signals apply), every writer (the score columns of
``scores.csv``, the workbooks, figures, strips and the report; their names and
limits), the archive (the score columns stored) and the trend rules read this
table and nothing else. A family groups the scores read against the same
limits: the z-like scores (z, z′, ζ: warning beyond 2, action from 3, and the
trend rules that assume a standard-normal score) and En (action beyond 1).

Adding a score is a row in :data:`SCORES` (and its name in :data:`ScoreName`)
with its formula in :mod:`roundscore.stats.scores`; the archive also needs a
migration adding the column (:mod:`roundscore.history.store`).

>>> SCORES["z-prime"].column, SCORES["z-prime"].symbol, SCORES["z-prime"].family
('z_prime', 'z′', 'z-like')
>>> SCORE_FAMILIES["en"].limits()
((1.0, 'action'),)

References
----------
.. [1] ISO 13528:2022 §9.4 (z), §9.5 (z′), §9.6 (ζ), §9.7 (En).
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from collections.abc import Callable, Mapping
from typing import Literal

import numpy as np

from roundscore.choices import options
from roundscore.stats import scores as sc

__all__ = ["ScoreName", "FamilyName", "ScoreInputs", "ScoreFamily", "ScoreKind", "SCORES", "SCORE_FAMILIES",
           "SCORE_NAMES", "SCORE_VALUE_COLUMNS", "SCORE_FIELD", "CENSORED_ACTION", "score_kind", "score_label",
           "score_symbol", "family_of"]

#: The score names a round file may choose (``[measurand.NAME] score``); one per row of :data:`SCORES`.
ScoreName = Literal["z", "z-prime", "zeta", "en"]
#: The score families (scores read against the same limits).
FamilyName = Literal["z-like", "en"]


@dataclass(frozen=True, slots=True, kw_only=True)
class ScoreInputs:
    """What a score's formula may use: one entry per lab, and the measurand's values.

    Attributes
    ----------
    x : numpy.ndarray
        The labs' results (means of their replicates).
    x_pt, u_x_pt, sigma_pt : float
        Assigned value, its standard uncertainty, σ_pt.
    u_x : numpy.ndarray
        The labs' standard uncertainties (NaN where not reported).
    U_x : numpy.ndarray
        The labs' expanded uncertainties (U, else k·u with k = 2).
    U_x_pt : float
        Expanded uncertainty of the assigned value, 2 u(x_pt).
    """

    x: np.ndarray
    x_pt: float
    u_x_pt: float
    sigma_pt: float
    u_x: np.ndarray
    U_x: np.ndarray
    U_x_pt: float


@dataclass(frozen=True, slots=True, kw_only=True)
class ScoreFamily:
    """Scores read against the same limits.

    Attributes
    ----------
    name : {"z-like", "en"}
    warning : float or None
        |score| beyond it is a warning signal (None: the family has none).
    action : float
        The action limit: |score| ≥ action is an action signal, or |score| > action when ``strict``.
    strict : bool
    symbol : str
        The family's score in a formula: "|z| ≥ 3", "|En| > 1".
    title : str
        Its scores in words ("z-like scores", "En numbers").
    trend_rules : bool
        Whether the history's rules 2-4, combined scores and bias check apply
        (they assume a standard-normal score).
    """

    name: FamilyName
    warning: float | None
    action: float
    strict: bool
    symbol: str
    title: str
    trend_rules: bool

    def signals(self, values) -> np.ndarray:
        """The signal of each score (NaN: "not-scored")."""
        return sc.signals(values, warning=self.warning, action=self.action, strict=self.strict)

    def limits(self) -> tuple[tuple[float, str], ...]:
        """(limit, signal) pairs from the warning limit (when there is one) to the action limit."""
        action = ((self.action, "action"),)
        return action if self.warning is None else ((self.warning, "warning"), *action)

    @property
    def members(self) -> tuple[ScoreKind, ...]:
        """The scores of this family, in the table's order."""
        return tuple(s for s in SCORES.values() if s.family == self.name)

    @property
    def symbols(self) -> str:
        """Its scores' symbols: "z, z′, ζ"."""
        return ", ".join(s.symbol for s in self.members)

    @property
    def heading(self) -> str:
        """Its scores in words with their symbols: "z-like scores (z, z′, ζ)" ("En numbers" for one score)."""
        return self.title if len(self.members) == 1 else f"{self.title} ({self.symbols})"

    @property
    def action_text(self) -> str:
        """The action limit as a condition: "|z| >= 3", "|En| > 1"."""
        return f"|{self.symbol}| {'>' if self.strict else '>='} {self.action:g}"


@dataclass(frozen=True, slots=True, kw_only=True)
class ScoreKind:
    """One score.

    Attributes
    ----------
    name : str
        As in round.toml (``score = "z-prime"``) and in the ``score`` column.
    column : str
        The scores.csv column holding it (``z_prime``).
    symbol : str
        As printed in a table head: z, z′, ζ, En.
    label : str
        As printed on an axis or in a title: "z′-score", "En number".
    family : {"z-like", "en"}
        Its limits (:data:`SCORE_FAMILIES`).
    formula : callable
        ``formula(inputs: ScoreInputs) -> array``: the score of every lab.
    denominator : callable or None
        For a score divided by the lab's own uncertainty: ``denominator(inputs)``.
        Where it is 0 the score is not defined (left empty, with
        ``undefined_note``); None: the score is always defined.
    undefined_note, missing_note : str
        The note of a lab whose score is not defined, or missing (no uncertainty reported).
    source : str
        The clause defining it.
    """

    name: ScoreName
    column: str
    symbol: str
    label: str
    family: FamilyName
    formula: Callable[[ScoreInputs], np.ndarray]
    denominator: Callable[[ScoreInputs], np.ndarray] | None = None
    undefined_note: str = ""
    missing_note: str = "not scored"
    source: str = ""

    def signals(self, values) -> np.ndarray:
        """The signal of each score, by the limits of its family (NaN: "not-scored")."""
        return SCORE_FAMILIES[self.family].signals(values)

    def compute(self, inputs: ScoreInputs) -> tuple[np.ndarray, np.ndarray]:
        """(scores, undefined): the score of every lab, and where it is not defined.

        A score over an uncertainty the lab and the assigned value both state as
        0 is ±inf or 0/0: it is returned as NaN and marked undefined.
        """
        with np.errstate(all="ignore"):
            values = np.asarray(self.formula(inputs), dtype=float)
            if self.denominator is None:
                return values, np.zeros(values.shape, dtype=bool)
            undefined = np.isinf(values) | (np.isnan(values) & (self.denominator(inputs) == 0))
        return np.where(np.isinf(values), np.nan, values), undefined


def _z(a: ScoreInputs) -> np.ndarray:
    return sc.z_score(a.x, a.x_pt, a.sigma_pt)


def _z_prime(a: ScoreInputs) -> np.ndarray:
    return sc.z_prime_score(a.x, a.x_pt, a.sigma_pt, a.u_x_pt)


def _zeta(a: ScoreInputs) -> np.ndarray:
    return sc.zeta_score(a.x, a.x_pt, a.u_x, a.u_x_pt)


def _zeta_denominator(a: ScoreInputs) -> np.ndarray:
    return np.hypot(a.u_x, a.u_x_pt)


def _en(a: ScoreInputs) -> np.ndarray:
    return sc.en_score(a.x, a.x_pt, a.U_x, a.U_x_pt)


def _en_denominator(a: ScoreInputs) -> np.ndarray:
    return np.hypot(a.U_x, a.U_x_pt)


#: The families, with the limits of :mod:`roundscore.stats.scores` (ISO 13528 §9.4.1, §9.7.3).
SCORE_FAMILIES: Mapping[str, ScoreFamily] = MappingProxyType({f.name: f for f in (
    ScoreFamily(name="z-like", warning=sc.Z_WARNING, action=sc.Z_ACTION, strict=False, symbol="z",
                title="z-like scores", trend_rules=True),
    ScoreFamily(name="en", warning=None, action=sc.EN_ACTION, strict=True, symbol="En", title="En numbers",
                trend_rules=False),
)})

#: The scores, in the order of their columns in scores.csv.
SCORES: Mapping[str, ScoreKind] = MappingProxyType({s.name: s for s in (
    ScoreKind(name="z", column="z", symbol="z", label="z-score", family="z-like", formula=_z,
              source="ISO 13528:2022 §9.4"),
    ScoreKind(name="z-prime", column="z_prime", symbol="z′", label="z′-score", family="z-like",
              formula=_z_prime, source="ISO 13528:2022 §9.5"),
    ScoreKind(name="zeta", column="zeta", symbol="ζ", label="ζ-score", family="z-like", formula=_zeta,
              denominator=_zeta_denominator, undefined_note="ζ is not defined: u(x) and u(x_pt) are both 0",
              missing_note="no uncertainty reported: ζ needs u", source="ISO 13528:2022 §9.6"),
    ScoreKind(name="en", column="en", symbol="En", label="En number", family="en", formula=_en,
              denominator=_en_denominator, undefined_note="En is not defined: U(x) and U(x_pt) are both 0",
              missing_note="no uncertainty reported: En needs U", source="ISO 13528:2022 §9.7"),
)})
SCORE_NAMES: tuple[str, ...] = tuple(SCORES)
#: A censored result whose limit lies beyond x_pt ± 3σ_pt is a false negative ("<") or false positive (">")
#: with an action signal: the z-like action limit, whatever the round's score (common practice).
CENSORED_ACTION = SCORE_FAMILIES["z-like"].action
#: The score columns of scores.csv, in order.
SCORE_VALUE_COLUMNS: tuple[str, ...] = tuple(s.column for s in SCORES.values())
#: Score name → the column of the scores frame holding it.
SCORE_FIELD: Mapping[str, str] = MappingProxyType({s.name: s.column for s in SCORES.values()})

if SCORE_NAMES != options(ScoreName):  # pragma: no cover - a guard for whoever edits the table
    raise AssertionError(f"SCORES {SCORE_NAMES} and ScoreName {options(ScoreName)} must list the same names")


def score_kind(name: str) -> ScoreKind | None:
    """The row of a score name (None for a name that is not a score)."""
    return SCORES.get(name)


def family_of(name: str) -> ScoreFamily:
    """The family of a score name; a name that is not a score is read as z-like (as the signals are)."""
    kind = SCORES.get(name)
    return SCORE_FAMILIES[kind.family if kind is not None else "z-like"]


def score_label(name: str) -> str:
    """The score's name as printed ("z-score", "En number"...); an unknown name as it is."""
    kind = SCORES.get(name)
    return kind.label if kind is not None else name


def score_symbol(name: str) -> str:
    """The score's symbol (z, z′, ζ, En); an unknown name as it is."""
    kind = SCORES.get(name)
    return kind.symbol if kind is not None else name
