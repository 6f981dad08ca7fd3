"""The qualitative stage: nominal and ordinal measurands evaluated against their assigned categories; pure.

For each qualitative measurand × test item (:mod:`roundscore.model.qualitative`):

- the assigned category: as the round file states it, or from the participants not excluded: the median
  category (ordinal; the lower median on a tie) or the most frequent one (no value when two tie), from at
  least :data:`MIN_CONSENSUS` results; the mode and the share agreeing with it are recorded either way;
- each lab's result: agrees, false positive, false negative or disagrees (:data:`~roundscore.model.qualitative.
  AGREEMENTS`; positives and negatives need the measurand's ``negative`` category), for an ordinal property its
  deviation in categories (reported − assigned) and a signal by ``deviation_signals``; for a nominal property
  agreement is acceptable and any wrong result an action signal;
- the proportion of agreeing results with Wilson's interval at ``[round] confidence``; the false positives
  and false negatives; the distribution of the categories reported;
- agreement by method group: Fisher's exact test on a 2×2 table (two methods × agree / not), Pearson's
  chi-squared test on a larger one.

The tables go into the evaluation's extras (``qualitative``, ``qualitative_summary``,
``qualitative_distribution``, ``qualitative_methods``) and every decision into the audit trail.

References
----------
.. [1] ISO 13528:2022 clause 11 (from memory: 11.3 assigned values of qualitative properties, the mode or
   median of the participants or a stated value; 11.4 performance judged by agreement, ordinal deviations).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from roundscore.model.evaluation import lab_order_key
from roundscore.model.qualitative import (DISTRIBUTION_COLUMNS, QUALITATIVE_COLUMNS, QUALITATIVE_METHODS_COLUMNS,
                                          QUALITATIVE_RESULT, QUALITATIVE_SUMMARY_COLUMNS, QualitativeItem,
                                          QualitativeSettings, normalise)
from roundscore.model.round import Round
from roundscore.model.table import ResultTable
from roundscore.stats import qualitative as sq

__all__ = ["qualitative_stage", "QualitativeStage", "MIN_CONSENSUS", "NOMINAL_WRONG_SIGNAL"]

#: Fewest results from which an assigned category is taken from the participants (as a consensus value:
#: roundscore.evaluation.evaluate needs 3 lab means).
MIN_CONSENSUS = 3
#: The signal of a wrong nominal result (a false positive, a false negative, a wrong identification): common
#: practice, each calls for the lab's investigation.
NOMINAL_WRONG_SIGNAL = "action"


@dataclass(frozen=True, slots=True, kw_only=True)
class QualitativeStage:
    """What the stage adds to the evaluation."""

    extras: dict[str, pd.DataFrame] = field(default_factory=dict)
    items: dict[str, tuple[QualitativeItem, ...]] = field(default_factory=dict)
    audit: list[tuple] = field(default_factory=list)
    notes: dict[str, tuple[str, ...]] = field(default_factory=dict)


def _items(q: QualitativeSettings, rows: pd.DataFrame) -> list[str]:
    """The measurand's items: those declared, then any others reported, in natural order."""
    seen = [str(i) for i in rows["item"].unique() if str(i) not in q.items]
    return list(q.items) + sorted(seen, key=lab_order_key) if q.items or seen else [""]


def _assign(q: QualitativeSettings, item: str, ranks: np.ndarray) -> tuple[str | None, str]:
    spec = q.assigned_for(item)
    n = len(ranks)
    if spec is None:
        return None, "no assigned category stated in the round file"
    if spec in q.categories:
        return spec, "stated in the round file"
    if n < MIN_CONSENSUS:
        return None, f"{spec} category of the participants: only {n} result(s), at least {MIN_CONSENSUS} needed"
    if spec == "median":
        r = sq.median_rank(ranks)
        tie = n % 2 == 0 and np.sort(ranks)[n // 2 - 1] != np.sort(ranks)[n // 2]
        assert r is not None
        return q.categories[r], (f"median category of {n} results" +
                                 (" (the lower of the two middle ones)" if tie else ""))
    got, count = sq.mode_rank(ranks)
    if got is None:
        return None, f"most frequent category of {n} results: two or more categories tie ({count} each)"
    return q.categories[got], f"most frequent category of {n} results ({count} of {n})"


def _judge(q: QualitativeSettings, reported: str, assigned: str) -> tuple[str, int | None, str]:
    """Agreement, deviation (ordinal) and signal of one result."""
    dev = q.rank(reported) - q.rank(assigned) if q.kind == "ordinal" else None
    if reported == assigned:
        agreement = "agrees"
    elif q.negative is not None and assigned == q.negative:
        agreement = "false positive"
    elif q.negative is not None and reported == q.negative:
        agreement = "false negative"
    else:
        agreement = "disagrees"
    if dev is not None:
        signal = str(sq.ordinal_signals(np.array([dev]), q.warning_steps, q.action_steps)[0])
    else:
        signal = "acceptable" if agreement == "agrees" else NOMINAL_WRONG_SIGNAL
    return agreement, dev, signal


def _methods(q: QualitativeSettings, item: str, frame: pd.DataFrame, audit: list[tuple]) -> dict[str, Any] | None:
    """Agreement by method group (``frame``: used, judged rows with ``method`` and ``agreement``)."""
    key = [normalise(m) if isinstance(m, str) else "" for m in frame["method"]]
    named = frame[[k != "" for k in key]]
    keys = pd.Series([k for k in key if k], index=named.index, dtype=object)
    groups = sorted(set(keys))
    if len(groups) < 2:
        return None
    agree = named["agreement"] == "agrees"
    counts = np.array([[int((agree & (keys == g)).sum()), int((~agree & (keys == g)).sum())] for g in groups])
    test = sq.independence(counts)
    shown = "; ".join(f"{g}: {a} of {a + b} agree" for g, (a, b) in zip(groups, counts))
    if test is None:
        note = "no test: every group gave the same outcome"
        row = {"measurand": q.name, "item": item, "groups": shown, "test": "", "statistic": np.nan, "df": np.nan,
               "p_value": np.nan, "note": note}
    else:
        note = ("Fisher's exact test (2 groups × agree / not)" if test.test == "fisher-exact" else
                f"Pearson's chi-squared test ({test.rows} groups × agree / not)"
                + ("; expected counts below 5: the p-value is approximate" if test.min_expected < 5 else ""))
        row = {"measurand": q.name, "item": item, "groups": shown, "test": test.test, "statistic": test.statistic,
               "df": test.df, "p_value": test.p_value, "note": note}
        audit.append((q.name, "", "method groups", f"item {item or '-'}: {test.test}",
                      f"{note}: p = {test.p_value:.4g} ({shown})"))
    return row


def qualitative_stage(rnd: Round, table: ResultTable, labs: list[str]) -> QualitativeStage:
    """Evaluate every nominal and ordinal measurand of the round (``labs``: every lab, in order)."""
    if not rnd.qualitative:
        return QualitativeStage()
    f = table.frame
    rows_all = f[f["status"] == QUALITATIVE_RESULT]
    by_measurand = {str(k): g for k, g in rows_all.groupby("measurand", sort=False)}
    out, summary, dist, methods = [], [], [], []
    audit: list[tuple] = []
    items_out: dict[str, tuple[QualitativeItem, ...]] = {}
    notes: dict[str, tuple[str, ...]] = {}
    for name, q in rnd.qualitative.items():
        rows = by_measurand.get(name, rows_all.iloc[0:0])
        excluded = {e.lab: e for e in rnd.exclusions if e.measurand in (None, name)}
        for e in excluded.values():
            audit.append((name, e.lab, "exclusion", "left out of the statistics", e.reason))
            if not e.scored:
                audit.append((name, e.lab, "exclusion", "not judged: withheld in every output", e.reason))
        typed = {(str(t), str(c)) for t, c in zip(rows["text"], rows["category"])
                 if normalise(str(t)) != normalise(str(c))}  # an alias, not another casing
        for t, c in sorted(typed):
            audit.append((name, "", "import", "category read", f"{t!r} read as {c!r}"))
        m_items, m_notes = [], []
        for item in _items(q, rows):
            got = rows[rows["item"] == item]
            by_lab = dict(zip(got["lab"], got["category"]))
            method = dict(zip(got["lab"], got["method"]))
            used = [lab for lab in labs if lab in by_lab and lab not in excluded]
            ranks = np.array([q.rank(by_lab[lab]) for lab in used], dtype=int)
            assigned, source = _assign(q, item, ranks)
            mode, count = sq.mode_rank(ranks)
            share = count / len(ranks) if len(ranks) else np.nan
            info = QualitativeItem(measurand=name, item=item, assigned=assigned, source=source, n=len(used),
                                   mode=q.categories[mode] if mode is not None else None, mode_agreement=share)
            m_items.append(info)
            where = f"item {item}" if item else "the test item"
            audit.append((name, "", "assigned category", "set" if assigned else "not set",
                          f"{where}: {assigned or 'none'} ({source}); mode "
                          f"{info.mode or 'none (a tie)'}, reported by {count} of {len(ranks)}"))
            if assigned is None:
                m_notes.append(f"{where}: no assigned category ({source}); no signals")
            judged = []
            for lab in labs:
                reported = by_lab.get(lab)
                note, agreement, dev, signal = "", "", None, "not-scored"
                ex = excluded.get(lab)
                if reported is None:
                    note = "not reported"
                elif ex is not None and not ex.scored:
                    note = f"not scored: withheld by the coordinator: {ex.reason}"
                elif assigned is None:
                    note = "not scored: no assigned category"
                else:
                    agreement, dev, signal = _judge(q, reported, assigned)
                    if ex is not None:
                        note = f"excluded by the coordinator: {ex.reason}"
                    if lab in used:
                        judged.append({"method": method.get(lab), "agreement": agreement})
                out.append({"lab": lab, "measurand": name, "item": item, "reported": reported or "",
                            "assigned": assigned or "", "agreement": agreement, "deviation": dev, "signal": signal,
                            "note": note})
            n_judged = len(judged)
            k = sum(1 for j in judged if j["agreement"] == "agrees")
            p = sq.proportion(k, n_judged, rnd.confidence)
            summary.append({"measurand": name, "item": item, "assigned": assigned or "", "n": n_judged,
                            "agreeing": k, "proportion": p.proportion, "ci_low": p.ci_low, "ci_high": p.ci_high,
                            "false_positives": sum(1 for j in judged if j["agreement"] == "false positive"),
                            "false_negatives": sum(1 for j in judged if j["agreement"] == "false negative")})
            if n_judged:
                audit.append((name, "", "agreement", f"item {item or '-'}",
                              f"{k} of {n_judged} agree: {p.proportion:.3f}, {p.confidence:.0%} Wilson interval "
                              f"{p.ci_low:.3f} to {p.ci_high:.3f}"))
            counts = {c: 0 for c in q.categories}
            for lab in used:
                counts[by_lab[lab]] += 1
            for order, c in enumerate(q.categories):
                dist.append({"measurand": name, "item": item, "category": c, "order": order, "count": counts[c],
                             "proportion": counts[c] / len(used) if used else np.nan, "assigned": c == assigned})
            row = _methods(q, item, pd.DataFrame(judged, columns=["method", "agreement"]), audit)
            if row is not None:
                methods.append(row)
        items_out[name] = tuple(m_items)
        if m_notes:
            notes[name] = tuple(m_notes)
    extras = {
        "qualitative": pd.DataFrame(out, columns=list(QUALITATIVE_COLUMNS)).astype({"deviation": object}),
        "qualitative_summary": pd.DataFrame(summary, columns=list(QUALITATIVE_SUMMARY_COLUMNS)),
        "qualitative_distribution": pd.DataFrame(dist, columns=list(DISTRIBUTION_COLUMNS)),
    }
    if methods:
        extras["qualitative_methods"] = pd.DataFrame(methods, columns=list(QUALITATIVE_METHODS_COLUMNS))
    return QualitativeStage(extras=extras, items=items_out, audit=audit, notes=notes)
