"""A round's settings as plain data: :class:`Round` and its parts, and the keys a round file may hold.

The key tables (:data:`ROUND_KEYS`, :data:`MEASURAND_KEYS`, :data:`LIMIT_KEYS`)
document every key of ``round.toml`` and drive the unknown-key warnings; the
file itself is read and validated by :func:`roundscore.intake.roundfile.load_round`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

from roundscore.choices import options, options_text
from roundscore.model.items import ItemConsequence, StabilityChoice
from roundscore.model.limits import DEFAULT_LIMITS, LIMIT_MAX, ReadLimits
from roundscore.model.qualitative import QualitativeKind, QualitativeMethod, QualitativeSettings
from roundscore.model.scores import SCORE_NAMES, ScoreName
from roundscore.model.signals import Words

__all__ = [
    "Round",
    "Exclusion",
    "MeasurandSettings",
    "SigmaSpec",
    "SCORES",
    "ASSIGNED_METHODS",
    "AssignedMethod",
    "SigmaMethod",
    "OutlierAction",
    "UnknownLabs",
    "DecimalMark", "Paper",
    "ScoreName",
    "ROUND_KEYS",
    "MEASURAND_KEYS",
    "LIMIT_KEYS", "QUALITATIVE_ASSIGNED", "QualitativeSettings",
    "limit_range",
]

#: Most replicate cells a submission form asks for (``[round] replicates``).
MAX_FORM_REPLICATES = 20

# The choices of a round file, each a Literal listing its values once (checked by roundscore.choices; the
# tuples below are those values, for messages and membership tests).
#: ``assigned``: a consensus method (or a number: a reference or formulation value).
AssignedMethod = Literal["algorithm-a", "median", "q-hampel", "kernel-mode"]
#: ``sigma_pt`` given as a word (or a number, or a precision experiment's table): "robust-sd" is Algorithm A's
#: s*, "q-method" the Q method's s* (ISO 13528 C.5.2).
SigmaMethod = Literal["horwitz", "robust-sd", "q-method"]
#: ``[round] outliers`` and ``stragglers``: what the precision estimates do with them.
OutlierAction = Literal["exclude", "keep"]
#: ``[round] unknown_labs``: a result from a lab not in the participants file.
UnknownLabs = Literal["warn", "error"]
#: ``[round] decimal``: the decimal mark of numbers typed as text.
DecimalMark = Literal["comma", "point"]
#: ``[round] paper``: the paper size of printed and PDF outputs.
Paper = Literal["a4", "letter"]

#: The score names (the rows of the score registry, roundscore.model.scores.SCORES).
SCORES: tuple[str, ...] = SCORE_NAMES
ASSIGNED_METHODS: tuple[str, ...] = options(AssignedMethod)
SIGMA_WORDS: tuple[str, ...] = options(SigmaMethod)
OUTLIER_ACTIONS: tuple[str, ...] = options(OutlierAction)

ROUND_KEYS: dict[str, str] = {
    "id": "text (required): the round's identifier",
    "title": "text",
    "scheme": "text: the PT scheme this round belongs to",
    "date": "a date (2026-10-14) or text in that form",
    "provider": "text: the PT provider's name",
    "material": "text: the test material",
    "results": "a CSV or .xlsx file, a folder or a glob of returned forms",
    "results_sheet": "the sheet to read in a results workbook (default: the first)",
    "participants": "a CSV file of lab, name, contact",
    "replicates": "whole number ≥ 1: replicates asked for on the forms (default 2)",
    "confidence": "number strictly between 0 and 1 for method comparisons (default 0.95)",
    "outliers": f"{options_text(OutlierAction, last=' or ')}: ISO 5725-2 outliers in the precision estimates "
                "(default exclude)",
    "stragglers": f"{options_text(OutlierAction, last=' or ')}: ISO 5725-2 stragglers (default keep)",
    "archive": "an archive file to store the round in (may be outside the round folder; ~ is your home folder)",
    "history_rounds": "whole number: past rounds shown on each lab sheet (default 8)",
    "youden": "list of pairs of measurand names for Youden plots",
    "words": "'signals' (acceptable/warning/action) or 'performance' (satisfactory/questionable/unsatisfactory)",
    "decimal": f"{options_text(DecimalMark, last=' or ')}: the decimal mark of numbers typed as text in results "
               "and item tables "
               "(default: not declared; a number whose reading depends on it, such as 1,234, is refused)",
    "paper": f"{options_text(Paper, last=' or ')}: the paper size of PDFs and printed pages and workbooks "
             "(default a4)",
    "return_by": "a date (2026-10-14): the date by which results are due, printed on the forms",
    "unknown_labs": f"{options_text(UnknownLabs, last=' or ')}: a result from a lab not in the participants file "
                    "(default warn)",
}
UNKNOWN_LAB_ACTIONS: tuple[str, ...] = options(UnknownLabs)
#: ``[limits]``: bounds on reading untrusted files (see roundscore.model.limits.ReadLimits):
#: key → (ReadLimits field, the field's unit, smallest allowed value in the key's unit). The largest allowed
#: value is ``LIMIT_MAX[field] / unit``; :func:`limit_range` gives both.
LIMIT_KEYS: dict[str, tuple[str, int, float]] = {
    "max_part_mib": ("max_member_bytes", 1 << 20, 0.001),  # sizes from about 1 kB
    "max_total_mib": ("max_total_bytes", 1 << 20, 0.001),
    "max_parts": ("max_members", 1, 1),
    "timeout_s": ("timeout_s", 1, 1),
    "memory_mib": ("memory_bytes", 1 << 20, 64),  # less leaves a worker too little to start a reader
    "max_text_mib": ("max_text_bytes", 1 << 20, 0.001),
}
MEASURAND_KEYS: dict[str, str] = {
    "unit": "text (required): a unit such as mg/kg, µg/L, g/100 g, % (a mass fraction for sigma_pt = 'horwitz')",
    "label": "text: a longer name shown in reports",
    "assigned": f"{options_text(AssignedMethod)} or a number (reference or formulation value; 0 or |v| 1e-50 to 1e50)"
                ", or { method = …, labs = [\"K03\", …] } or { method = …, labs_file = \"FILE.csv\" } (a "
                "consensus of those labs only)",
    "reference": "{ value = number, u = number ≥ 0 }: an independent reference value and its standard "
                 "uncertainty, compared with the consensus",
    "u_assigned": "number ≥ 0: standard uncertainty of a numeric assigned value (0 or 1e-50 to 1e50)",
    "sigma_pt": f"a number from 1e-50 to 1e50 (and ≥ 1e-12 × |assigned|), {options_text(SigmaMethod)}, "
                "or { s_R = …, s_r = …, replicates = n }",
    "score": options_text(ScoreName, last=" or "),
    "decimals": "whole number 0–10: decimals shown in reports",
    "allow_negative": "true or false: whether results below zero are possible (default false)",
    "homogeneity": "a CSV or .xlsx file of item, replicate, value",
    "stability": "a CSV or .xlsx file of item, replicate, value, set",
    "item_checks": f"{options_text(ItemConsequence, last=' or ')} (default 'uncertainty')",
    "stability_criterion": f"{options_text(StabilityChoice, last=' or ')} (default 'auto': expanded when the "
                           "table gives u)",
    # Qualitative measurands (roundscore.model.qualitative; read by roundscore.intake.qualitative_keys).
    "kind": f"{options_text(QualitativeKind, last=' or ')} for a qualitative measurand (default: quantitative); "
            "such a measurand takes label, categories, assigned, items, aliases, negative, deviation_signals",
    "categories": "list of text (kind nominal or ordinal, required): the categories a result may take, from "
                  "lowest to highest for ordinal",
    "items": "list of text (qualitative): the test items' codes (default: the keys of assigned, else any item)",
    "aliases": "{ \"+\" = \"detected\", \"ND\" = \"not detected\" } (qualitative): other spellings of a "
               "category (case and spaces are ignored)",
    "negative": "a category (qualitative): the one meaning absent, for false positives and negatives (default: "
                "the category 'not detected', 'negative', 'absent' or 'not found' when there is one)",
    "deviation_signals": "{ warning = 1, action = 2 } (ordinal): categories of deviation from which a warning "
                         "and an action signal are given (default 1 and 2)",
}
#: What ``assigned`` holds for a qualitative measurand (MEASURAND_KEYS["assigned"] is the quantitative text).
QUALITATIVE_ASSIGNED = (f"a category, {options_text(QualitativeMethod, last=' or ')} (from the participants; "
                        "median for ordinal only), or { \"ITEM\" = category or method, ... } per test item "
                        "(default: median for ordinal; required for nominal)")


@dataclass(frozen=True, slots=True, kw_only=True)
class SigmaSpec:
    """Where σ_pt comes from.

    ``kind`` is "fixed" (``value``), "horwitz", "robust-sd" or "precision"
    (``s_R``, ``s_r``, ``replicates`` from a precision experiment).
    """

    kind: Literal["fixed", "horwitz", "robust-sd", "q-method", "precision"]
    value: float | None = None
    s_R: float | None = None
    s_r: float | None = None
    replicates: int | None = None

    def fixed(self) -> float:
        """The fixed σ_pt (``kind`` "fixed")."""
        if self.value is None:
            raise ValueError(f"σ_pt of kind {self.kind!r} has no fixed value")
        return float(self.value)

    def experiment(self) -> tuple[float, float, int]:
        """``s_R``, ``s_r`` and the replicates of the precision experiment (``kind`` "precision")."""
        if self.s_R is None or self.s_r is None or self.replicates is None:
            raise ValueError(f"σ_pt of kind {self.kind!r} has no precision experiment")
        return self.s_R, self.s_r, self.replicates

    def describe(self) -> str:
        if self.kind == "fixed":
            return f"fixed value {self.value:g}"
        if self.kind == "horwitz":
            return "Horwitz equation with Thompson's modification"
        if self.kind == "robust-sd":
            return "robust SD of the participants' results (Algorithm A)"
        if self.kind == "q-method":
            return "robust SD of the participants' individual results (Q method, ISO 13528 C.5.2)"
        return (
            f"precision experiment: s_R = {self.s_R:g}, s_r = {self.s_r:g}, "
            f"n = {self.replicates}"
        )


@dataclass(frozen=True, slots=True, kw_only=True)
class MeasurandSettings:
    """The settings of one measurand from its ``[measurand.NAME]`` table."""

    name: str
    unit: str
    label: str
    assigned: AssignedMethod | float
    u_assigned: float | None
    sigma_pt: SigmaSpec
    score: ScoreName
    decimals: int | None
    allow_negative: bool
    homogeneity: Path | None = None
    stability: Path | None = None
    item_checks: ItemConsequence = "uncertainty"
    stability_criterion: StabilityChoice = "auto"
    #: The labs whose results make the consensus (``assigned = { method, labs }``); None: every lab.
    consensus_labs: tuple[str, ...] | None = None
    #: ``reference = { value, u }``: an independent reference value and its standard uncertainty, or None.
    reference: tuple[float, float] | None = None

    def describe_assigned(self, decimals: int | None = None) -> str:
        """The assigned-value setting in words, as the report's settings table shows it (round.toml keeps
        the method names).

        >>> from roundscore.model.round import MeasurandSettings, SigmaSpec
        >>> m = MeasurandSettings(name="lead", unit="mg/kg", label="", assigned="q-hampel", u_assigned=None,
        ...                       sigma_pt=SigmaSpec(kind="robust-sd"), score="z", decimals=2,
        ...                       allow_negative=False, consensus_labs=("K01", "K02", "K03"))
        >>> m.describe_assigned()
        'Hampel estimate with the Q method (ISO 13528 C.5) of 3 named labs'
        """
        if not isinstance(self.assigned, str):
            value = f"{self.assigned:.{decimals}f}" if decimals is not None else f"{self.assigned:g}"
            return f"stated value {value}"
        words = {"algorithm-a": "Algorithm A robust mean (ISO 13528 C.3)", "median": "median of the lab means",
                 "q-hampel": "Hampel estimate with the Q method (ISO 13528 C.5)",
                 "kernel-mode": "kernel-density mode (h = 0.75 σ_pt)"}.get(self.assigned, self.assigned)
        return words if self.consensus_labs is None else f"{words} of {len(self.consensus_labs)} named labs"

    @property
    def is_consensus(self) -> bool:
        """True when the assigned value is computed from the participants' results."""
        return isinstance(self.assigned, str)


@dataclass(frozen=True, slots=True, kw_only=True)
class Exclusion:
    """A coordinator's decision to leave a lab's result out of the statistics (``[[exclude]]``).

    ``measurand`` None means every measurand; ``scored`` False also withholds the score.
    """

    lab: str
    measurand: str | None
    reason: str
    scored: bool = True


@dataclass(frozen=True, slots=True, kw_only=True)
class Round:
    """A validated round: settings and where its files are."""

    path: Path
    folder: Path
    id: str
    title: str
    scheme: str
    date: str
    provider: str
    material: str
    results: str
    results_sheet: str | None
    participants: Path | None
    replicates: int
    confidence: float
    outliers: OutlierAction
    stragglers: OutlierAction
    archive: Path | None
    history_rounds: int
    youden: tuple[tuple[str, str], ...]
    words: Words
    measurands: dict[str, MeasurandSettings]
    #: The declared decimal mark of text cells ("comma" or "point"), or None (ambiguous text is refused).
    decimal: DecimalMark | None = None
    unknown_labs: UnknownLabs = "warn"
    #: The paper size of PDFs, printed pages and workbooks' print set-up.
    paper: Paper = "a4"
    #: The date results are due (ISO form), printed on the forms; "" when not given.
    return_by: str = ""
    exclusions: tuple[Exclusion, ...] = field(default=())
    limits: ReadLimits = DEFAULT_LIMITS
    warnings: tuple[str, ...] = field(default=())
    #: The nominal and ordinal measurands (``kind``), by name; not in :attr:`measurands`, which holds the
    #: quantitative ones only, so everything scoring numbers reads those alone.
    qualitative: dict[str, QualitativeSettings] = field(default_factory=dict)

    def settings_dict(self) -> dict[str, Any]:
        """A plain, JSON-ready summary of the settings (for workbooks and the archive)."""
        out: dict[str, Any] = {
            "id": self.id, "title": self.title, "scheme": self.scheme, "date": self.date,
            "provider": self.provider, "material": self.material,
        }
        for m in self.measurands.values():
            out[f"measurand.{m.name}"] = {
                "unit": m.unit, "assigned": m.assigned, "u_assigned": m.u_assigned,
                "sigma_pt": m.sigma_pt.describe(), "score": m.score,
                "homogeneity": m.homogeneity.name if m.homogeneity else None,
                "stability": m.stability.name if m.stability else None,
                "item_checks": m.item_checks, "stability_criterion": m.stability_criterion,
                "consensus_labs": list(m.consensus_labs) if m.consensus_labs is not None else None,
                "reference": list(m.reference) if m.reference is not None else None,
            }
        for q in self.qualitative.values():
            out[f"measurand.{q.name}"] = {"kind": q.kind, "categories": list(q.categories),
                                          "assigned": q.assigned, "assigned_items": dict(q.assigned_items),
                                          "items": list(q.items), "negative": q.negative,
                                          "deviation_signals": [q.warning_steps, q.action_steps]}
        out["exclusions"] = [{"lab": e.lab, "measurand": e.measurand, "reason": e.reason, "scored": e.scored}
                             for e in self.exclusions]
        return out


def limit_range(key: str) -> tuple[float, float]:
    """The allowed range of a ``[limits]`` key, in the key's own unit (MiB, parts, seconds)."""
    field_name, unit, low = LIMIT_KEYS[key]
    return low, LIMIT_MAX[field_name] / unit
