"""One lab's confidential score sheet (``labs/LAB.xlsx``), written from a typed :class:`LabPayload`.

Sheets: ``Scores`` (the lab's results, scores and signals, beside each score
what the lab needs to read it and where it stands among all labs, with a
native chart of its scores per score family), ``How to read`` (what the scores
compare, the signal limits and what a signal asks of the lab:
:mod:`roundscore.outputs.guidance`), ``Chart data``, ``History`` (the
lab's earlier rounds of the scheme, when an archive is given, with a line
chart per score family), a sheet per per-lab stage table that does not fold
into the Scores sheet, and, hidden and last, the machine-readable ``data`` and ``round`` sheets
(the history commands read them back: their layout is a contract, see
:data:`~roundscore.model.evaluation.SCORE_COLUMNS`). The ``data`` sheet holds
its numbers to 12 significant digits and a digest of each row (column
``row_digest``), the ``round`` sheet a digest of the whole (key ``digest``), so
``history add`` refuses a row edited after it was written
(:mod:`roundscore.history.checks`). The score columns, their heads, the
families charted and their limits are the score registry's
(:mod:`roundscore.model.scores`).
"""

from __future__ import annotations

import math
from pathlib import Path
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd
import xlsxwriter

from roundscore.evaluation.uncertainty import LAB_EXPLANATION as UNCERTAINTY_EXPLANATION
from roundscore.model.digest import DIGEST_KEY, ROW_DIGEST_COLUMN, row_digest, sheet_digest, sheet_value
from roundscore.model.evaluation import SCORE_COLUMNS, STATE_SIDE
from roundscore.model.qualitative import QUALITATIVE_COLUMNS, QUALITATIVE_COUNT_KEY, QUALITATIVE_SHEET
from roundscore.model.scores import SCORE_FAMILIES, SCORE_FIELD, ScoreFamily, family_of, score_symbol
from roundscore.outputs.guidance import GUIDANCE_TITLE, how_to_read
from roundscore.outputs.look import CAUTION, LIMIT_LINE, PALETTE
from roundscore.outputs.payloads import LabPayload, lab_payload
from roundscore.outputs.workbook_base import (CHART_HEIGHT, CHART_ROWS, FIXED_TIME, OPTIONS, SCORE_DECIMALS,
                                              VALUE_COLUMNS, Chart, Formats, axis_limit, clip_to, columns_of,
                                              fit_widths, print_setup, score_chart, score_table_columns, set_widths,
                                              stage_sheet, value_axis, wrap_words, write_table, write_value)
from roundscore.support.sheetprint import ROW_POINTS

__all__ = ["write_lab_workbook", "lab_payload", "LabPayload", "LAB_FORMAT", "LAB_FORMAT_QUALITATIVE", "LAB_FOLD",
           "QUALITATIVE_SHEET", "SUMMARY_POINTER"]

#: Version of the layout of the ``data`` and ``round`` sheets (read back by ``history add``).
LAB_FORMAT = 1
#: The layout when the lab has qualitative results: format 1 and a hidden ``qualitative_data`` sheet (the
#: ``qualitative.csv`` columns and a digest per row, counted by key ``qualitative_rows`` of the ``round`` sheet), so a
#: roundscore that reads only format 1 refuses the file instead of storing half of it.
LAB_FORMAT_QUALITATIVE = 2

SUMMARY_POINTER = ("The round's statistics for every measurand (assigned value and how it was set, robust mean "
                   "and SD, median, MADe, nIQR, labs used) are in the summary workbook round-summary.xlsx, "
                   "sheet Statistics, circulated with this score sheet.")


#: Per-lab extras tables folded into a lab's Scores sheet as a few columns (when the lab has at most one row
#: per measurand): table → ((column, header, decimals), ...) and the line that explains them; a column
#: without fixed decimals that is a value column (workbook_base.VALUE_COLUMNS: u, u_min ...) is shown to the
#: measurand's decimals as it is everywhere.  Other tables with a ``lab`` column get a sheet of the lab's rows.
LAB_FOLD: dict[str, tuple[tuple[tuple[str, str, int | None], ...], str]] = {
    "mandel": ((("h", "Mandel h", 2), ("k", "Mandel k", 2), ("flag", "Mandel h, k against the indicator lines", None)),
               "Mandel h and k (ISO 5725-2 §7.3): how your mean and your spread of replicates compare with the "
               "labs used, before the outlier screens; beyond an indicator line (5 % or 1 %) asks for a look at "
               "your results. The indicator values of each measurand are on sheet Mandel of round-summary.xlsx."),
    "uncertainties": ((("u", "Your u (standard uncertainty)", None), ("u_min", "Lowest plausible u", None),
                       ("u_max", "Highest plausible u", None), ("reading", "Your u: reading", None),
                       ("joint", "z and ζ read together", None)),
                      UNCERTAINTY_EXPLANATION),
}


def _mandel_check(h: Any, k: Any, flag: Any) -> str | None:
    """The indicator lines passed or not: the table's flag, or "within" (None when neither h nor k exists)."""
    if isinstance(flag, str) and flag:
        return flag
    have = [n for n, v in (("h", h), ("k", k)) if isinstance(v, float) and math.isfinite(v)]
    return "within" if len(have) == 2 else (f"{have[0]} within" if have else None)


def _fold_extras(extras: Mapping[str, pd.DataFrame], measurands: list[str]
                 ) -> tuple[list[tuple[str, str, int | None, list]], list[str], dict[str, pd.DataFrame]]:
    """Split a lab's extras rows into Scores-sheet columns (:data:`LAB_FOLD`) and tables kept as sheets.

    Returns the folded columns as (key, header, decimals, values in the order
    of ``measurands``), their explaining lines, and the tables left as sheets.
    """
    folded, notes, sheets = [], [], {}
    for name, frame in extras.items():
        spec = LAB_FOLD.get(name)
        if not len(frame):
            continue
        if spec is not None and "measurand" in frame.columns:
            columns, note = spec
            values, _ = columns_of(frame, ["measurand", *(c for c, _, _ in columns)])
        if spec is None or "measurand" not in frame.columns or len(set(values["measurand"])) < len(frame):
            sheets[name] = frame  # not one row per measurand: the lab's rows as a sheet of their own
            continue
        at = {m: i for i, m in enumerate(values["measurand"])}
        where = [at.get(m) for m in measurands]
        if name == "mandel":  # the flag in words, "within" when no indicator line is crossed
            values["flag"] = [_mandel_check(h, k, f) for h, k, f in zip(values["h"], values["k"], values["flag"])]
        for c, head, d in columns:
            folded.append((f"{name}:{c}", head, d, [values[c][i] if i is not None else None for i in where]))
        notes.append(note)
    return folded, notes, sheets


def _data_rows(table: dict[str, list]) -> tuple[dict[str, list], list[str]]:
    """The machine-readable ``data`` sheet: the score columns with numbers rounded to 12 significant
    digits (what a spreadsheet program keeps on saving again), and each row's digest
    (roundscore.history.checks), so ``history add`` can tell an edited row from a re-saved file."""
    rows = {c: [sheet_value(v) for v in table.get(c, ())] for c in SCORE_COLUMNS}
    n = len(rows[SCORE_COLUMNS[0]])
    for c in SCORE_COLUMNS:
        rows[c] = rows[c] or [None] * n
    digests = [row_digest([rows[c][i] for c in SCORE_COLUMNS]) for i in range(n)]
    rows[ROW_DIGEST_COLUMN] = list(digests)
    return rows, digests


def write_lab_workbook(payload: LabPayload, path: Path) -> None:
    """One lab's confidential score sheet (see the module docstring for its sheets)."""
    rd, lab = payload.round, payload.lab
    wb = xlsxwriter.Workbook(str(path), OPTIONS)
    wb.set_properties({"title": f"Score sheet {rd.id} {lab}", "created": FIXED_TIME, "author": rd.provider or ""})
    fm = Formats(wb)
    ws = wb.add_worksheet("Scores")
    r = _heading(ws, fm, payload)
    # the caution's and the pointer's rows (the table head's is added below)
    tall = {r - 2: 45.0, r - 1: ROW_POINTS * len(wrap_words(SUMMARY_POINTER, HEADING_CHARS))}
    table, folded, notes, sheets = _score_rows(payload)
    for line in notes:  # wrapped across the table's first columns, as the heading's paragraphs
        ws.merge_range(r, 0, r, 9, line, fm.wrap)
        ws.set_row(r, ROW_POINTS * len(wrap_words(line, HEADING_CHARS)))
        tall[r] = ROW_POINTS * len(wrap_words(line, HEADING_CHARS))
        r += 1
    r += 1
    cols, head, fixed, value_columns = _score_sheet_columns(folded)
    top = r
    widths = fit_widths(table, cols, head, {**fixed, "result": 4, "assigned": 4, "u_assigned": 4, "sigma_pt": 4,
                                            "d": 4}, "signal")
    # the first column also holds the heading's labels ("Date the sample arrived")
    label_width = max(len(label) for label in HEADING_LABELS + tuple(label for label, _ in payload.receipt)) + 1
    widths = [max(w, label_width if j == 0 else 7) for j, w in enumerate(widths)]
    end = write_table(ws, fm, r, table, cols, head, fixed, "signal", rd.words, row_decimals=payload.decimals,
                      widths=widths, value_columns=value_columns)
    tall[top] = ROW_POINTS * max(len(wrap_words(h, w)) for h, w in zip(head, widths))
    ws.freeze_panes(top + 1, 1)
    set_widths(ws, widths)
    _guidance_sheet(wb, fm, payload)  # second: what a person reads first after the scores
    charts = _score_charts(wb, ws, fm, payload, table, end + 1)
    _print(ws, payload, top, widths, end + 1 + CHART_ROWS * len(charts), charts=charts, row_points=tall,
           title="Score sheet")
    if payload.history is not None and len(payload.history):
        _history_sheet(wb, fm, payload, table)
    for name, frame in sheets.items():
        if len(frame):
            xs, xwidths, last = stage_sheet(wb, fm, name, frame, payload.decimals)
            _print(xs, payload, 0, xwidths, last, title=name.capitalize())
    _machine_sheets(wb, fm, payload, table)
    wb.close()


def _guidance_sheet(wb, fm: Formats, payload: LabPayload) -> None:
    """The sheet "How to read your scores" (:func:`roundscore.outputs.guidance.how_to_read`, in the round's
    words): a title, each part's title in bold, its text and bullets wrapped in one wide column; portrait."""
    ws = wb.add_worksheet("How to read")
    ws.write_string(0, 0, GUIDANCE_TITLE, fm.title)
    width = 100  # characters: one column, about a portrait page wide

    def para(row: int, text: str, fmt) -> None:  # a wrapped paragraph gets the height of its lines (programs
        ws.set_row(row, 15.0 * max(1, math.ceil(len(text) * 1.1 / width)))  # do not grow rows on opening)
        ws.write_string(row, 0, text, fmt)

    r = 2
    for part in how_to_read(payload.round.words):
        ws.write_string(r, 0, part.title, fm.bold)
        para(r + 1, part.text, fm.wrap)
        r += 2
        for bullet in part.bullets:
            para(r, f"• {bullet}", fm.wrap)
            r += 1
        r += 1
    para(r, CAUTION, fm.caution)
    _print(ws, payload, None, [width], r, landscape=False, title=GUIDANCE_TITLE)


def _print(ws, payload: LabPayload, head_row: int | None, widths: list, last_row: int, **kw) -> None:
    """A lab file's sheet prints on the round's paper, its header naming the round and the lab."""
    print_setup(ws, payload.round.id, head_row, paper=payload.round.paper, lab=payload.lab, widths=widths,
                last_row=last_row, **kw)


def _heading(ws, fm: Formats, payload: LabPayload) -> int:
    """The title, the lab and the round, what failed checks mean for its scores, the caution and where the
    statistics are; the next row."""
    rd, lab = payload.round, payload.lab
    ws.write_string(0, 0, f"Proficiency test round {rd.id}: score sheet for laboratory {lab}", fm.title)
    r = 1
    values = (lab, payload.name, payload.contact, rd.id, rd.title, rd.scheme, rd.date, rd.material)
    for label, value in (*zip(HEADING_LABELS, values), *payload.receipt):  # and what the lab said of its sample
        if value:
            ws.write_string(r, 0, label, fm.bold)
            ws.write_string(r, 1, str(value))
            r += 1
    alert = fm.wb.add_format({"bold": True, "font_color": "#9E3A00", "text_wrap": True, "valign": "top"})
    for line in payload.notices:  # plain words for the lab; the technical findings are in the summary
        ws.merge_range(r, 0, r, 9, line, alert)  # wrapped across the table's first columns: never cut off
        ws.set_row(r, ROW_POINTS * len(wrap_words(line, HEADING_CHARS)))
        r += 1
    ws.merge_range(r, 0, r, 9, "CONFIDENTIAL to the laboratory named above. " + CAUTION, fm.caution)
    ws.set_row(r, 45)
    ws.merge_range(r + 1, 0, r + 1, 9, SUMMARY_POINTER, fm.wrap)
    ws.set_row(r + 1, ROW_POINTS * len(wrap_words(SUMMARY_POINTER, HEADING_CHARS)))
    return r + 2


#: The labels of the Scores sheet's heading (column A), before the lab's sample receipt.
HEADING_LABELS = ("Laboratory code", "Laboratory", "Contact", "Round", "Title", "Scheme", "Date", "Material")
#: Characters a line of the heading's wrapped paragraphs holds (merged over the table's first ten columns, at
#: least about 105 units wide, so some 115 characters of text: a lower count errs on a taller row).
HEADING_CHARS = 105


def _score_rows(payload: LabPayload) -> tuple[dict[str, list], list, list[str], dict[str, pd.DataFrame]]:
    """The Scores sheet's rows as lists by column (the lab's scores converted once, p, the folded stage columns,
    the standing and the official score); the folded columns, their explaining lines and the tables left as sheets."""
    own = payload.scores
    table, _ = columns_of(own, list(own.columns))
    measurands = table["measurand"]
    table["p"] = [payload.p.get(m) for m in measurands]
    folded, notes, sheets = _fold_extras(payload.extras, measurands)
    for key, _, _, values in folded:
        table[key] = values
    table["standing"] = [
        f"{int(k)} of {int(n)}" if isinstance(k, float) and not math.isnan(k) else ""
        for k, n in zip(table["rank"], table["n_scored"])
    ]
    fields = [SCORE_FIELD.get(s) for s in table["score"]]
    table["official"] = [table[f][i] if f else None for i, f in enumerate(fields)]
    table["score_shown"] = [score_symbol(s) if isinstance(s, str) else s for s in table["score"]]
    return table, folded, notes, sheets


def _score_sheet_columns(folded: list) -> tuple[list[str], list[str], dict[str, int | None], dict[str, int]]:
    """(columns, heads, fixed decimals, value columns) of the Scores sheet: every score of the registry, the
    folded columns; the value columns are shown to each row's measurand's decimals (plus the extra places)."""
    score_cols, score_heads = score_table_columns()
    cols = ["measurand", "unit", "n_replicates", "result", "assigned", "u_assigned", "sigma_pt", "p", "score_shown",
            "official", "signal", "standing", *score_cols, "note"]
    head = ["Measurand", "Unit", "Replicates", "Your result", "Assigned value", "u(x_pt)", "σ_pt",
            "Labs used (p)", "Score", "Your score", "Signal", "Rank by |score| (1 = closest)", *score_heads, "Note"]
    cols[-1:-1] = [key for key, _, _, _ in folded]
    head[-1:-1] = [h for _, h, _, _ in folded]
    fixed = {"official": 2, **SCORE_DECIMALS, **{key: d for key, _, d, _ in folded if d is not None}}
    values = {**VALUE_COLUMNS, **{key: VALUE_COLUMNS[c] for key, _, d, _ in folded
                                  if d is None and (c := key.split(":", 1)[1]) in VALUE_COLUMNS}}
    return cols, head, fixed, values


def _score_charts(wb, ws, fm: Formats, payload: LabPayload, table: dict[str, list], row: int) -> list[Chart]:
    """Native charts of the lab's official score per measurand, one per score family (their limits differ),
    from ``row`` down the Scores sheet; their data on the sheet ``Chart data``."""
    lab, words = payload.lab, payload.round.words
    measurands = table["measurand"]
    chart_rows = []
    for family in SCORE_FAMILIES.values():
        members = {s.name for s in family.members}
        # a scored row, and a censored false negative or positive (no value; drawn at the axis' end)
        part = [i for i, (sc, v, st) in enumerate(zip(table["score"], table["official"], table["state"]))
                if sc in members and (st in STATE_SIDE or (isinstance(v, float) and math.isfinite(v)))]
        if part:
            chart_rows.append((family, [measurands[i] for i in part],
                               [None if table["state"][i] in STATE_SIDE else table["official"][i] for i in part],
                               [table["signal"][i] for i in part], [table["state"][i] for i in part]))
    if not chart_rows:
        return []
    placed = []
    cd = wb.add_worksheet("Chart data")
    cd.write_string(0, 0, f"Data of the charts: laboratory {lab}'s scores by measurand", fm.bold)
    at = 2
    for family, names, values, signals, states in chart_rows:
        name = family.symbols
        # the family's first score names the axis ("z-score", "En number"); the limits are the family's
        c, at = score_chart(wb, cd, fm, at, names, values, signals, name, family.members[0].name, words,
                            f"Laboratory {lab}: {name} by measurand", states=states)
        c.set_x_axis({"name": "measurand", "num_font": {"rotation": -45, "size": 8}, "label_position": "low"})
        c.set_size({"width": 640, "height": CHART_HEIGHT})
        ws.insert_chart(row, 0, c)
        placed.append(Chart(row, CHART_HEIGHT, 640))
        row += CHART_ROWS
    widths = [12, 16, 10, 12, 14, 14, 14, 10, 10, 10, 10]
    set_widths(cd, widths)
    _print(cd, payload, None, widths, at - 2, title="Chart data")
    return placed


#: Colours and marker shapes of the history chart's lines, one pair per measurand: shape and colour both vary,
#: so colour is not the only cue.
HISTORY_COLOURS = tuple(PALETTE[c] for c in ("blue", "orange", "green", "vermillion", "purple", "sky", "black",
                                              "yellow"))
HISTORY_SHAPES = ("circle", "diamond", "triangle", "square", "x", "star", "plus", "dash")
#: Grey of the limit lines of the history charts.
_LIMIT_GREY = "#555555"


def _history_sheet(wb, fm: Formats, payload: LabPayload, table: dict[str, list]) -> None:
    """History: the lab's earlier rounds of this scheme (archive rows, roundscore.history.store
    HISTORY_COLUMNS), then a native line chart per score family of the score per measurand over those rounds
    and this one, with the family's limits (ISO 13528: z-like 2 and 3; En 1)."""
    rd, lab, hist = payload.round, payload.lab, payload.history
    assert hist is not None
    hs = wb.add_worksheet("History")
    hs.write_string(0, 0, f"Laboratory {lab}: your results in earlier rounds of scheme {rd.scheme}", fm.title)
    hs.write_string(1, 0, f"Archived rounds dated before this round ({rd.date}), the most "
                          "recent per measurand; this round's scores are on the Scores sheet "
                          "and end each line of the charts.")
    end = write_table(hs, fm, 3, hist,
                      ["round_date", "round", "measurand", "unit", "result", "assigned", "sigma_pt",
                       "score", "score_value", "signal", "note"],
                      ["Date", "Round", "Measurand", "Unit", "Your result", "Assigned value", "σ_pt",
                       "Score", "Your score", "Signal", "Note"], {"score_value": 2}, "signal", rd.words,
                      row_decimals=payload.decimals)  # values to the measurand's decimals, σ_pt one more
    order, points = _history_points(payload, table)
    families = {f.symbol: f for f in SCORE_FAMILIES.values()}
    rank = {symbol: i for i, symbol in enumerate(families)}
    series = sorted({(f, m) for _, f, m in points}, key=lambda fm_: (rank[fm_[0]], fm_[1]))
    limits = [(f.symbol, lim, word) for f in families.values() for lim, word in reversed(f.limits())]
    limits = [x for x in limits if any(f == x[0] for f, _ in series)]
    top = end + 2
    hs.write_string(top, 0, "Chart data: your score by round", fm.bold)
    heads = ["Round"] + [f"{m} ({families[f].symbols})" for f, m in series]
    heads += [f"{sign}{lim:g} {word} limit ({f})" for f, lim, word in limits for sign in "+-"]
    for j, h in enumerate(heads):
        hs.write_string(top + 1, j, h, fm.head)
    first, last = top + 2, top + 1 + len(order)
    # each family's axis (workbook_base.axis_limit); a score beyond it is written at the edge, labelled
    limit = {f.symbol: axis_limit([v for (_, s, _m), v in points.items() if s == f.symbol], f)
             for f in families.values()}
    for i, label in enumerate(order):
        hs.write_string(first + i, 0, label)
        for j, (f, m) in enumerate(series, start=1):
            write_value(hs, first + i, j, clip_to([points.get((label, f, m))], limit[f]).drawn[0], fm.decimals(2))
        for j, (_f, lim, _word) in enumerate(limits):
            hs.write_number(first + i, 1 + len(series) + 2 * j, lim)
            hs.write_number(first + i, 2 + len(series) + 2 * j, -lim)
    row, placed = last + 2, []  # the charts below their data, so the sheet prints one table wide
    true = {j: [points.get((label, f, m)) for label in order] for j, (f, m) in enumerate(series, start=1)}
    for family in families.values():
        cols = [j for j, (f, _) in enumerate(series, start=1) if f == family.symbol]
        if not cols:
            continue
        hs.insert_chart(row, 0, _history_chart(wb, family, lab, cols, series, limits, true,
                                               limit[family.symbol], top, first, last))
        placed.append(Chart(row, CHART_HEIGHT, 640))
        row += CHART_ROWS
    hs.freeze_panes(4, 0)
    widths = [24, 14, 14, 9, 11, 12, 10, 8, 10, 18, 40]
    set_widths(hs, widths)
    _print(hs, payload, 3, widths, row, charts=placed, title="History")


def _history_points(payload: LabPayload, table: dict[str, list]
                    ) -> tuple[list[str], dict[tuple[str, str, str], float]]:
    """The rounds in order (this round last) and the scores to chart: (round label, family symbol, measurand)
    → score."""
    rd, hist = payload.round, payload.history
    assert hist is not None
    points: dict[tuple[str, str, str], float] = {}
    order: list[str] = []
    for r in hist.to_dict("records"):
        key = (f"{r['round_date']} {r['round']}", family_of(r["score"]).symbol)
        if key[0] not in order:
            order.append(key[0])
        if r["signal"] != "not-scored" and np.isfinite(r["score_value"]):
            points[(key[0], key[1], r["measurand"])] = float(r["score_value"])
    this = f"{rd.date} {rd.id} (this round)"
    order.append(this)
    for sc, sig, m, v in zip(table["score"], table["signal"], table["measurand"], table["official"]):
        if sig != "not-scored" and isinstance(v, float) and math.isfinite(v):
            points[(this, family_of(sc).symbol, m)] = v
    return order, points


def _history_chart(wb, family: ScoreFamily, lab: str, cols: list[int], series: list[tuple[str, str]],
                   limits: list[tuple[str, float, str]], true: dict[int, list], limit: float, top: int,
                   first: int, last: int) -> Any:
    """The line chart of one score family on the History sheet: a line per measurand, the limit lines; the
    value axis fixed at ±``limit``, a score beyond it drawn at the edge with its true value (``true``: the
    scores of each column) as its label."""
    ch = wb.add_chart({"type": "line"})
    cats = ["History", first, 0, last, 0]
    for k, j in enumerate(cols):  # shape and colour both vary: colour is not the only cue
        c = HISTORY_COLOURS[k % len(HISTORY_COLOURS)]
        spec = {"name": ["History", top + 1, j], "categories": cats,
                "values": ["History", first, j, last, j],
                "line": {"color": c, "width": 1.5},
                "marker": {"type": HISTORY_SHAPES[k % len(HISTORY_SHAPES)], "size": 6,
                           "fill": {"color": c}, "border": {"color": c}}}
        labels = clip_to(true[j], limit).labels(true[j], ("below", "above"))
        if labels is not None:
            spec["data_labels"] = labels
        ch.add_series(spec)
    hidden = []  # legend entries of the "-" limit lines (the "+" line names the pair)
    n_series = len(cols)
    for j, (f, lim, word) in enumerate(limits):
        if f != family.symbol:
            continue
        for sign in (0, 1):
            col = 1 + len(series) + 2 * j + sign
            if sign:
                hidden.append(n_series)
            n_series += 1
            ch.add_series({"name": f"{word} limit ±{lim:g}", "categories": cats,
                           "values": ["History", first, col, last, col],
                           "line": {"color": _LIMIT_GREY, "width": 0.75, "dash_type": LIMIT_LINE[word]["chart"]},
                           "marker": {"type": "none"}})
    ch.set_y_axis(value_axis("score", limit))
    ch.set_title({"name": f"Laboratory {lab}: {family.heading} by round"})
    ch.set_legend({"position": "bottom", "delete_series": hidden})
    ch.show_blanks_as("gap")
    ch.set_size({"width": 640, "height": CHART_HEIGHT})
    return ch


def _machine_sheets(wb, fm: Formats, payload: LabPayload, table: dict[str, list]) -> None:
    """The sheets ``data`` (the score rows with their digests) and ``round`` (the round's keys and the sheet's
    digest), read back by ``history add``: hidden (never printed) and last, so no sheet a person reads comes
    after them."""
    rd = payload.round
    data = wb.add_worksheet("data")
    data.hide()
    rows, digests = _data_rows(table)
    write_table(data, fm, 0, rows, [*SCORE_COLUMNS, ROW_DIGEST_COLUMN])
    qual = payload.extras.get("qualitative")
    qual_digests = _qualitative_sheet(wb, fm, qual) if qual is not None and len(qual) else []
    meta = wb.add_worksheet("round")
    meta.hide()
    pairs: list[tuple[str, Any]] = [("generator", "roundscore"),
                                    ("format", LAB_FORMAT_QUALITATIVE if qual_digests else LAB_FORMAT),
                                    ("scheme", rd.scheme), ("round", rd.id), ("round_date", rd.date),
                                    ("lab", payload.lab), ("title", rd.title)]
    if qual_digests:
        pairs.append((QUALITATIVE_COUNT_KEY, len(qual_digests)))
    pairs.append((DIGEST_KEY, sheet_digest(pairs, digests + qual_digests)))
    meta.write_row(0, 0, ["key", "value"], fm.head)
    for i, (k, v) in enumerate(pairs, start=1):
        meta.write_string(i, 0, k)
        write_value(meta, i, 1, v)


def _qualitative_sheet(wb, fm: Formats, frame: pd.DataFrame) -> list[str]:
    """The hidden ``qualitative_data`` sheet: the lab's rows of ``qualitative.csv`` and each row's digest (the same
    digest as the ``data`` rows'); returns the digests, which enter the whole sheet's digest."""
    ws = wb.add_worksheet(QUALITATIVE_SHEET)
    ws.hide()
    values, n = columns_of(frame, list(QUALITATIVE_COLUMNS))
    values = {c: [None if v == "" else v for v in values[c]] for c in QUALITATIVE_COLUMNS}
    digests = [row_digest([values[c][i] for c in QUALITATIVE_COLUMNS]) for i in range(n)]
    ws.write_row(0, 0, [*QUALITATIVE_COLUMNS, ROW_DIGEST_COLUMN], fm.head)
    for i in range(n):
        for j, c in enumerate(QUALITATIVE_COLUMNS):
            write_value(ws, i + 1, j, values[c][i])
        ws.write_string(i + 1, len(QUALITATIVE_COLUMNS), digests[i])
    return digests
