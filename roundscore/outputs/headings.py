"""Display headings of the column contracts: the standards' notation and plain words for what people read.

The CSV files keep their fixed column names (``u_assigned``, ``robust_sd``, ``h_crit_5`` ...: a contract with
the programs that read them). Every table a person reads (the HTML pages, the workbooks, the PDFs) heads a
column with :func:`heading` instead, so one column has one heading everywhere: ``u(x_pt)``, ``σ_pt``,
``robust SD``, ``MADe``, ``nIQR``, ``critical value at 5 %``. The score columns take their symbols from the
score registry (:data:`roundscore.model.scores.SCORES`), so a new score needs no line here.

>>> heading("u_assigned"), heading("sigma_pt"), heading("z_prime")
('u(x_pt)', 'σ_pt', 'z′')
>>> heading("h_crit_5")
'h: critical value at 5 %'
>>> heading("some_new_column")  # a column not listed reads as words
'some new column'
>>> heading("flag"), heading("flag", table="consensus")  # a table may head a column its own way
('Indicator', 'Sensitivity flag')
"""

from __future__ import annotations

from types import MappingProxyType
from collections.abc import Iterable, Mapping

from roundscore.model.scores import SCORES

__all__ = ["HEADINGS", "TABLE_HEADINGS", "heading", "headings", "AUDIT_STEPS", "audit_for_people"]

#: Column name (of scores.csv, statistics.csv, audit.csv and the extras tables) → its display heading.
HEADINGS: Mapping[str, str] = MappingProxyType({
    # scores.csv (model/evaluation.py SCORE_COLUMNS)
    "lab": "Lab", "measurand": "Measurand", "unit": "Unit", "n_replicates": "Replicates", "result": "Result",
    "assigned": "Assigned value x_pt", "u_assigned": "u(x_pt)", "sigma_pt": "σ_pt",
    **{s.column: s.symbol for s in SCORES.values()},
    "d": "D (x − x_pt)", "d_percent": "D % (relative to x_pt)", "signal": "Signal", "note": "Note",
    "score": "Score", "state": "State", "scheme": "Scheme", "round": "Round", "round_date": "Round date",
    "rank": "Rank by |score|", "n_scored": "Labs scored", "method": "Method",
    "score_value": "Score value",
    # statistics.csv (STATISTICS_COLUMNS)
    "p": "Labs used (p)", "robust_mean": "Robust mean x*", "robust_sd": "Robust SD s*", "median": "Median",
    "made": "MADe", "niqr": "nIQR", "iterations": "Iterations", "u_check_passed": "u(x_pt) ≤ 0.3 σ_pt",
    # audit.csv (AUDIT_COLUMNS)
    "step": "Step", "action": "Action", "reason": "Reason",
    # items.csv (model/items.py ITEMS_COLUMNS)
    "check": "Check", "g": "Items (g)", "m": "Replicates per item (m)", "mean": "Mean", "s_x": "s_x̄",
    "s_w": "s_w", "s_s": "s_s", "criterion": "Criterion", "allowed": "Allowed", "passed": "Passed",
    # precision.csv (ISO 5725-2 notation)
    "n_bar": "Mean replicates n̄", "s_r": "s_r", "s_L": "s_L", "s_R": "s_R", "r": "Repeatability limit r",
    "R": "Reproducibility limit R", "s_r_robust": "s_r (robust, Algorithm S)", "excluded": "Excluded",
    "labs_screened": "Labs screened", "balanced": "Balanced", "s_L_truncated": "s_L set to 0",
    "general_mean": "General mean", "robust_labs": "Labs (robust)", "outliers": "Outliers",
    "stragglers": "Stragglers",
    # screens.csv
    "test": "Test", "labs": "Labs", "statistic": "Statistic", "critical_5": "Critical value at 5 %",
    "critical_1": "Critical value at 1 %", "outcome": "Outcome",
    # mandel.csv
    "h": "h", "k": "k", "flag": "Indicator", "n": "n", "sd": "SD",
    "h_crit_5": "h: critical value at 5 %", "h_crit_1": "h: critical value at 1 %",
    "k_crit_5": "k: critical value at 5 %", "k_crit_1": "k: critical value at 1 %",
    # methods.csv
    "groups": "Groups", "df": "Degrees of freedom", "df2": "Degrees of freedom (within groups)",
    "p_value": "p-value", "difference": "Difference", "ci_low": "Confidence interval: low",
    "ci_high": "Confidence interval: high", "significant": "Significant", "p_adjusted": "p-value (Holm)",
    "t_critical": "t: critical value", "f_statistic": "F", "f_p_value": "F test: p-value",
    "confidence": "Confidence level", "untested": "Groups too small to test", "conclusion": "Conclusion",
    # consensus.csv (the sensitivity table) and uncertainties.csv
    "chosen": "Chosen", "why": "Why flagged",
    "u_min": "Lowest plausible u", "u_max": "Highest plausible u", "reading": "Reading",
    "joint": "z and ζ read together",
    # a lab's history (history show --out, roundscore.outputs.history_workbook)
    "rules": "Trend rules fired",
})

#: (table, column) → the heading of a column that one extras table means its own way (its name elsewhere
#: means something else: ``flag`` is Mandel's indicator, in consensus.csv the sensitivity flag).
TABLE_HEADINGS: Mapping[tuple[str, str], str] = MappingProxyType({
    ("consensus", "method"): "Estimate", ("consensus", "value"): "Value", ("consensus", "flag"): "Sensitivity flag",
    ("consensus", "robust_sd"): "Robust SD",
    ("uncertainties", "u"): "Reported u", ("uncertainties", "check"): "Verdict",
})


def heading(column: str, table: str | None = None) -> str:
    """The heading people read for a column (of extras ``table`` when given: :data:`TABLE_HEADINGS` first);
    a column not listed reads as words (underscores as spaces)."""
    got = TABLE_HEADINGS.get((table, column)) if table is not None else None
    got = got if got is not None else HEADINGS.get(column)
    return got if got is not None else str(column).replace("_", " ")


def headings(columns: Iterable[str], table: str | None = None) -> list[str]:
    """:func:`heading` of each column, in order."""
    return [heading(c, table) for c in columns]


#: Steps of audit.csv (its ``step`` column keeps these names) whose name is a column's: shown as its heading.
AUDIT_STEPS: Mapping[str, str] = MappingProxyType({"sigma_pt": HEADINGS["sigma_pt"],
                                                   "u_assigned": HEADINGS["u_assigned"]})


def audit_for_people(audit):
    """The audit trail as people read it (the report's and the summary workbook's): a ``step`` named like a
    column (``sigma_pt``) shown in the standards' notation (σ_pt); audit.csv keeps the names.

    >>> import pandas as pd
    >>> audit_for_people(pd.DataFrame({"step": ["sigma_pt", "import"]}))["step"].tolist()
    ['σ_pt', 'import']
    """
    if "step" not in audit.columns or not audit["step"].isin(list(AUDIT_STEPS)).any():
        return audit
    out = audit.copy()
    out["step"] = out["step"].map(lambda s: AUDIT_STEPS.get(s, s))
    return out
