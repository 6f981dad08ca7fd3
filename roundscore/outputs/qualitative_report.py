"""The qualitative measurands' blocks of the round report and of each lab's page (HTML and PDF alike).

:func:`qualitative_parts` draws each measurand's figure once (:mod:`roundscore.outputs.figures_qualitative`);
:func:`report_section` is the round report's section (summary per item with Wilson's interval, the assigned
category and where it came from, method groups), :func:`lab_section` a lab's own rows and the figures with
its results marked. Everything is read from the evaluation's extras and details; nothing is recomputed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from roundscore.outputs.document import Block, Cell, Column, Figure, Heading, Paragraph, Section, Table
from roundscore.outputs.figures_qualitative import QualitativeFigure, qualitative_figure
from roundscore.outputs.look import SIGNAL_SYMBOL, SIGNAL_WORD

__all__ = ["QualitativeParts", "qualitative_parts", "report_section", "lab_section", "RULES"]

#: How the results are judged, in words (the README states the same rules and their clauses).
RULES = ("Nominal properties: a result agrees with the assigned category or not; a false positive reports a "
         "category where the negative one was assigned, a false negative the negative category where another "
         "was; any wrong result gives an action signal. Ordinal properties: the deviation is the number of "
         "categories between the result and the assigned category, and gives a warning or action signal from "
         "the steps the round file sets. The interval of the proportion agreeing is Wilson's score interval.")


@dataclass(frozen=True, slots=True, kw_only=True)
class QualitativeParts:
    """The figures of the qualitative measurands, drawn once per run (by measurand)."""

    figures: dict[str, QualitativeFigure] = field(default_factory=dict)


def qualitative_parts(ev) -> QualitativeParts:
    """Each qualitative measurand's figure (none when the round has no qualitative measurand)."""
    dist = ev.extras.get("qualitative_distribution")
    if dist is None:
        return QualitativeParts()
    out = {}
    for name, q in ev.round.qualitative.items():
        got = qualitative_figure(name, q.label or name, q.kind, ev.measurand_rows("qualitative_distribution", name),
                                 ev.measurand_rows("qualitative", name))
        if got is not None:
            out[name] = got
    return QualitativeParts(figures=out)


def _num(v: Any, d: int = 3) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return ""
    return f"{v:.{d}f}" if isinstance(v, float) else str(v)


def _steps(v: Any) -> str:
    """A deviation in categories: +1, 0, −2 ("" when there is none)."""
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return ""
    n = int(v)
    return f"+{n}" if n > 0 else ("0" if n == 0 else f"−{-n}")


def _signal(signal: str, words: str) -> Cell:
    return Cell(text=f"{SIGNAL_SYMBOL.get(signal, '')} {SIGNAL_WORD[words].get(signal, signal)}".strip(),
                signal=signal)


_SUMMARY = (Column(title="Item"), Column(title="Assigned category"), Column(title="Assigned from"),
            Column(title="Results", numeric=True), Column(title="Agreeing", numeric=True),
            Column(title="Proportion", numeric=True), Column(title="Interval (Wilson)", numeric=True),
            Column(title="False positives", numeric=True), Column(title="False negatives", numeric=True))
_LAB = (Column(title="Measurand"), Column(title="Item"), Column(title="Your result"),
        Column(title="Assigned category"), Column(title="Agreement"), Column(title="Deviation", numeric=True),
        Column(title="Signal"), Column(title="Note"))
_METHODS = (Column(title="Item"), Column(title="Method groups"), Column(title="Test"),
            Column(title="p-value", numeric=True), Column(title="Note"))


def _describe(q) -> str:
    order = " < ".join(q.categories) if q.kind == "ordinal" else ", ".join(q.categories)
    text = f"{q.kind.capitalize()} property; categories: {order}."
    if q.negative:
        text += f" Negative category (for false positives and negatives): {q.negative}."
    if q.kind == "ordinal":
        text += (f" Signals: a deviation of {q.warning_steps} or more categories is a warning signal, "
                 f"{q.action_steps} or more an action signal.")
    return text


def report_section(ev, parts: QualitativeParts | None) -> Section | None:
    """The round report's section on the qualitative measurands (None when the round has none)."""
    if not ev.round.qualitative or "qualitative_summary" not in ev.extras:
        return None
    conf = ev.round.confidence
    blocks: list[Block] = [Paragraph(text=RULES)]
    details = ev.details.get("qualitative", {})
    for name, q in ev.round.qualitative.items():
        blocks += [Heading(text=q.label or name, level=3, anchor=f"q-{name}"), Paragraph(text=_describe(q))]
        source = {i.item: i for i in details.get(name, ())}
        rows = []
        for r in ev.measurand_rows("qualitative_summary", name).itertuples():
            info = source.get(r.item)
            src = info.source if info is not None else ""
            if info is not None and info.mode is not None:
                src += f"; mode {info.mode} ({info.mode_agreement:.0%})"
            rows.append((Cell(text=str(r.item) or "-"), Cell(text=str(r.assigned) or "none"), Cell(text=src),
                         Cell(text=str(r.n)), Cell(text=str(r.agreeing)), Cell(text=_num(r.proportion)),
                         Cell(text=f"{_num(r.ci_low)} to {_num(r.ci_high)}" if r.n else ""),
                         Cell(text=str(r.false_positives)), Cell(text=str(r.false_negatives))))
        blocks.append(Table(columns=_SUMMARY, rows=tuple(rows), caption=f"Agreement with the assigned category; "
                            f"{conf:.0%} Wilson interval of the proportion agreeing."))
        fig = parts.figures.get(name) if parts is not None else None
        if fig is not None:
            blocks.append(Figure(svg=fig.figure.svg, title=fig.figure.title, caption=fig.figure.caption))
        methods = ev.extras.get("qualitative_methods")
        if methods is not None:
            m = methods[methods["measurand"] == name]
            if len(m):
                blocks.append(Table(columns=_METHODS, rows=tuple(
                    (Cell(text=str(r.item) or "-"), Cell(text=str(r.groups)), Cell(text=str(r.test) or "none"),
                     Cell(text=_num(r.p_value, 4)), Cell(text=str(r.note))) for r in m.itertuples()),
                    caption="Agreement by method group: Fisher's exact test for two groups, Pearson's chi-squared "
                            "test for more."))
        for note in ev.stage_notes.get(name, ()):
            blocks.append(Paragraph(text=note, style="note"))
    return Section(heading=Heading(text="Qualitative measurands", level=2, anchor="qualitative"),
                   blocks=tuple(blocks))


def lab_section(ev, parts: QualitativeParts | None, lab: str) -> Section | None:
    """A lab's qualitative results (its rows only) and the figures with its results marked."""
    if "qualitative" not in ev.extras:
        return None
    words = ev.round.words
    mine: pd.DataFrame = ev.lab_rows("qualitative", lab)
    if not len(mine):
        return None
    rows = tuple((Cell(text=str(r.measurand)), Cell(text=str(r.item) or "-"), Cell(text=str(r.reported)),
                  Cell(text=str(r.assigned)), Cell(text=str(r.agreement)), Cell(text=_steps(r.deviation)),
                  _signal(str(r.signal), words), Cell(text=str(r.note))) for r in mine.itertuples())
    blocks: list[Block] = [Paragraph(text=RULES), Table(columns=_LAB, rows=rows, key_columns=2)]
    for fig in (parts.figures.values() if parts is not None else ()):
        blocks.append(Figure(svg=fig.for_lab(lab, words), title=fig.figure.title,
                             caption=fig.figure.caption + " Your results are ringed."))
    return Section(heading=Heading(text="Your qualitative results", level=2, anchor="your-qualitative"),
                   blocks=tuple(blocks))
