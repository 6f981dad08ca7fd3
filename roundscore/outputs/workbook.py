"""The circulated workbooks: the round summary and one confidential score sheet per lab.

Written with xlsxwriter (several times faster than openpyxl for writing and
able to add native workbook charts) through the helpers every workbook shares
(:mod:`roundscore.outputs.workbook_base`: one look, text cells never written as
formulas, a fixed creation time so the same round gives the same bytes).

This module writes the summary workbook; a lab's score sheet is written by
:mod:`roundscore.outputs.lab_workbook` (re-exported here:
:func:`write_lab_workbook`, :func:`lab_payload`, :data:`LAB_FORMAT`). A lab's
workbook holds that lab's results, scores and signals, beside each score what
the lab needs to read it (assigned value, u(x_pt), σ_pt, the number of labs the
assigned value used, the lab's Mandel h and k) and where the lab stands among
all labs (its rank; other labs are never named). The round's statistics of
every measurand are not repeated in each lab's file: the Scores sheet says
they are in the summary workbook ``round-summary.xlsx`` circulated with it.
Two sheets, ``data`` and ``round``, are machine-readable (the history commands
read them back): their layout is a contract, see
:data:`~roundscore.model.evaluation.SCORE_COLUMNS`.
"""

from __future__ import annotations

import tempfile
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import xlsxwriter

from roundscore.evaluation.uncertainty import counts as uncertainty_counts
from roundscore.model.evaluation import STATE_SIDE, STATISTICS_COLUMNS, RoundEvaluation
from roundscore.model.scores import SCORE_FIELD, score_label, score_symbol
from roundscore.outputs.lab_workbook import (LAB_FOLD, LAB_FORMAT, SUMMARY_POINTER, lab_payload,
                                             write_lab_workbook)
from roundscore.outputs.headings import audit_for_people, headings
from roundscore.outputs.look import CAUTION
from roundscore.outputs.payloads import LabPayload, RoundFacts
from roundscore.outputs.workbook_base import (CHART_HEIGHT, CHART_ROWS, FIXED_TIME, MAX_WIDTH, MIN_WIDTH, OPTIONS,
                                              SCORE_DECIMALS, Chart, Formats, fit_widths, print_setup, score_chart,
                                              score_table_columns, set_widths, stage_sheet, write_table)
# The shared helpers under their former names here (tests read them from this module).
from roundscore.outputs.workbook_base import (OPTIONS as _OPTIONS, Formats as _Formats,  # noqa: F401
                                              fit_widths as _fit, tint as _tint, write_table as _table)

__all__ = ["write_summary", "write_lab_workbook", "LAB_FORMAT", "FIXED_TIME", "lab_payload", "LabPayload",
           "RoundFacts", "SUMMARY_POINTER", "LAB_FOLD", "SCORE_FIELD", "MIN_WIDTH", "MAX_WIDTH"]


def _heading(ws, fm: Formats, ev: RoundEvaluation, title: str) -> int:
    rnd = ev.round
    ws.write_string(0, 0, title, fm.title)
    r = 1
    for label, value in (("Round", rnd.id), ("Title", rnd.title), ("Scheme", rnd.scheme), ("Date", rnd.date),
                         ("Provider", rnd.provider), ("Material", rnd.material)):
        if value:
            ws.write_string(r, 0, label, fm.bold)
            ws.write_string(r, 1, str(value))
            r += 1
    for line in ev.failed_checks:
        ws.write_string(r, 0, "Check failed: " + line, fm.alert)
        r += 1
    ws.merge_range(r, 0, r, 9, CAUTION, fm.caution)
    ws.set_row(r, 45)
    return r + 2


#: The Scores sheet: the lab's result and the assigned value, every score of the registry, D, D %, the signal.
_SCORE_HEAD = ["Lab", "Measurand", "Unit", "Replicates", "Result", "Assigned value", "u(x_pt)", "σ_pt",
               *score_table_columns()[1], "Signal", "Note"]
_SCORE_COLS = ["lab", "measurand", "unit", "n_replicates", "result", "assigned", "u_assigned", "sigma_pt",
               *score_table_columns()[0], "signal", "note"]


def _symbols(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with its ``score`` column as the scores' symbols (z, z′, ζ, En) for people to read."""
    if "score" not in frame.columns or not len(frame):
        return frame
    return frame.assign(score=frame["score"].map(lambda s: score_symbol(s) if isinstance(s, str) else s))


def write_summary(ev: RoundEvaluation, path: Path) -> None:
    """The summary workbook for circulation: settings, statistics, all scores by lab code, charts, audit.

    Written in xlsxwriter's ``constant_memory`` mode: each row goes to a
    temporary file as soon as the next row starts, instead of every cell of
    a large round (millions) staying in memory until the end.  So every
    sheet is written row by row, top to bottom, and the charts carry their
    cached values themselves (see :func:`score_chart`).  The temporary files
    live in a folder beside ``path`` and are removed when it is written.
    """
    path = Path(path)
    with tempfile.TemporaryDirectory(prefix=f".{path.name}.tmp-", dir=path.parent) as tmp:
        _write_summary(ev, path, {**OPTIONS, "in_memory": False, "constant_memory": True, "tmpdir": tmp})


def _write_summary(ev: RoundEvaluation, path: Path, options: dict[str, Any]) -> None:
    rnd = ev.round
    wb = xlsxwriter.Workbook(str(path), options)
    wb.set_properties({"title": f"Round summary {rnd.id}", "created": FIXED_TIME, "author": rnd.provider or ""})
    fm = Formats(wb)
    # Summary and settings
    ws = wb.add_worksheet("Summary")
    r = _heading(ws, fm, ev, f"Proficiency test round {rnd.id}: summary")
    ws.write_string(r, 0, "Measurand settings and statistics", fm.bold)
    r += 1
    head = ["Measurand", "Unit", "Labs used (p)", "Assigned value", "u(x_pt)", "σ_pt", "Score", "Assigned from",
            "σ_pt from", "u(x_pt) ≤ 0.3σ_pt", "Notes"]
    rows = []
    for m in ev.measurands.values():
        rows.append({"a": m.name, "b": m.settings.unit, "c": m.p, "d": m.assigned, "e": m.u_assigned,
                     "f": m.sigma_pt, "g": score_symbol(m.settings.score), "h": m.assigned_source,
                     "i": m.sigma_source,
                     "j": "n/a" if m.u_check_passed is None else ("yes" if m.u_check_passed else "NO"),
                     "k": " ".join(m.notes + ev.stage_notes.get(m.name, ()))})
    dec = {n: m.decimals for n, m in rnd.measurands.items()}
    frame = pd.DataFrame(rows, columns=list("abcdefghijk"))
    frame["measurand"] = frame["a"]
    head_row = r
    widths = [max(w, 12) for w in fit_widths(frame, list("abcdefg"), head[:7])] + [40, 40, 16, 60]
    r = write_table(ws, fm, r, frame.rename(columns={"d": "assigned", "e": "u_assigned", "f": "sigma_pt"}),
               ["a", "b", "c", "assigned", "u_assigned", "sigma_pt", "g", "h", "i", "j", "k"], head,
               row_decimals=dec, widths=widths) + 1
    got = uncertainty_counts(ev.extras.get("uncertainties"))  # the labs' reported uncertainties, counted
    if got is not None:
        ws.write_string(r, 0, got.line(capital=True, where="sheet Uncertainties"))
        r += 1
    for w in ev.warnings:
        ws.write_string(r, 0, "Note: " + w)
        r += 1
    set_widths(ws, widths)
    ws.freeze_panes(head_row + 1, 1)
    paper: dict[str, Any] = {"paper": rnd.paper, "title": "Round summary"}
    print_setup(ws, rnd.id, head_row, widths=widths, last_row=r - 1, **paper)
    # Statistics
    ws = wb.add_worksheet("Statistics")
    stat_heads = headings(STATISTICS_COLUMNS)
    stats = _symbols(ev.statistics)
    widths = fit_widths(stats, STATISTICS_COLUMNS, stat_heads, decimals={c: 4 for c in STATISTICS_COLUMNS})
    end = write_table(ws, fm, 0, stats, STATISTICS_COLUMNS, stat_heads, row_decimals=dec, widths=widths)
    ws.freeze_panes(1, 1)
    set_widths(ws, widths)
    print_setup(ws, rnd.id, 0, widths=widths, last_row=end - 1, **paper)
    # Scores
    ws = wb.add_worksheet("Scores")
    sc = _symbols(ev.scores)
    widths = fit_widths(sc, _SCORE_COLS, _SCORE_HEAD, {**SCORE_DECIMALS, "result": 4, "assigned": 4,
                                                       "u_assigned": 4, "sigma_pt": 4, "d": 4}, "signal")
    end = write_table(ws, fm, 0, sc, _SCORE_COLS, _SCORE_HEAD, SCORE_DECIMALS, "signal", rnd.words, row_decimals=dec,
                      widths=widths)
    ws.freeze_panes(1, 2)
    ws.autofilter(0, 0, max(end - 1, 1), len(_SCORE_COLS) - 1)
    set_widths(ws, widths)
    print_setup(ws, rnd.id, 0, widths=widths, last_row=end - 1, **paper)
    # Charts: one native chart of the official score per measurand, labs ranked by score, with the
    # signal as marker shape and legend word as well as colour, and the limit lines.
    ch = wb.add_worksheet("Charts")
    cd = wb.add_worksheet("Chart data")
    cd.write_string(0, 0, "Data of the charts: each measurand's official scores, ranked", fm.bold)
    row, top, placed = 0, 2, []
    for name, m in ev.measurands.items():
        g = ev.measurand_rows("scores", name)
        if not len(g) or not m.scored:
            continue
        vals = g[SCORE_FIELD[m.settings.score]].to_numpy(float)
        # the scored labs ranked, a censored false negative first and a false positive last (drawn at the
        # axis' ends: they have no score value, only their signal)
        side = g["state"].map(STATE_SIDE).fillna(0).to_numpy(float)
        keep = np.isfinite(vals) | (side != 0)
        order = np.lexsort((np.where(side[keep] != 0, 0.0, vals[keep]), side[keep]))
        if not len(order):
            continue
        drawn = [None if sd else float(v) for v, sd in zip(vals[keep][order], side[keep][order])]
        c, top = score_chart(wb, cd, fm, top, g["lab"].to_numpy()[keep][order].tolist(), drawn,
                             g["signal"].to_numpy()[keep][order].tolist(),
                             f"{name} ({score_symbol(m.settings.score)})",
                             m.settings.score, rnd.words,
                             f"{name}: {score_label(m.settings.score)} by laboratory (ranked)",
                             states=g["state"].to_numpy()[keep][order].tolist())
        c.set_size({"width": 900, "height": CHART_HEIGHT})
        ch.insert_chart(row, 0, c)
        placed.append(Chart(row, CHART_HEIGHT, 900))
        row += CHART_ROWS
    cd.freeze_panes(2, 0)
    widths = [12, 16, 10, 12, 14, 14, 14, 10, 10, 10, 10]
    set_widths(cd, widths)
    print_setup(ch, rnd.id, charts=placed, last_row=max(row - 1, 0), widths=[10] * 12, **paper)  # 12 columns: 900 px
    print_setup(cd, rnd.id, widths=widths, last_row=max(top - 2, 1), **paper)
    # Left out / audit
    ws = wb.add_worksheet("Audit")
    audit = audit_for_people(ev.audit)
    widths = fit_widths(audit, list(audit.columns), headings(audit.columns))
    end = write_table(ws, fm, 0, audit, list(audit.columns), headings(audit.columns), widths=widths)
    ws.freeze_panes(1, 0)
    set_widths(ws, widths)
    print_setup(ws, rnd.id, 0, widths=widths, last_row=end - 1, **paper)
    for name, frame in ev.extras.items():
        if isinstance(frame, pd.DataFrame) and len(frame.columns):
            ws, widths, last = stage_sheet(wb, fm, name, frame, dec)
            print_setup(ws, rnd.id, 0, widths=widths, last_row=last, **paper)
    wb.close()
