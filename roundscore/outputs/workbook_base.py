"""What every workbook roundscore writes shares: options, formats, tables written row by row, widths, charts.

The round summary and the lab score sheets (:mod:`roundscore.outputs.workbook`,
:mod:`roundscore.outputs.lab_workbook`) and a lab's history workbook
(:mod:`roundscore.outputs.history_workbook`) are written with these helpers, so
they share one look (:mod:`roundscore.outputs.look`): the same heads, the same
signal cells (symbol and word on the signal's tint), the same chart markers
and limit lines. Every text cell is written as a string, never as a formula,
whatever it starts with; the creation time is fixed so the same content gives
the same workbook bytes.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import xlsxwriter

from roundscore.model.evaluation import STATE_SIDE, STATES
from roundscore.model.scores import SCORES, ScoreFamily, family_of, score_label
from roundscore.model.signals import SCORED_SIGNALS
from roundscore.outputs.axes import AXIS_CAP, AXIS_PERCENTILE, axis_limit
from roundscore.outputs.headings import headings
from roundscore.outputs.look import LIMIT_LINE, SIGNAL_CHART_MARKER, SIGNAL_COLOUR, SIGNAL_WORD, signal_label
from roundscore.support.sheetprint import ROW_POINTS, Chart, print_layout

__all__ = ["FIXED_TIME", "OPTIONS", "Formats", "tint", "write_value", "columns_of", "write_table", "VALUE_COLUMNS",
           "MIN_WIDTH", "MAX_WIDTH", "FIT_ROWS", "fit_widths", "wrap_words", "set_widths", "print_setup", "Chart",
           "CHART_HEIGHT",
           "CHART_ROWS", "score_chart",
           "CHART_POINT_COLOURS", "SCORE_DECIMALS", "score_table_columns", "STAT_DECIMALS", "stage_decimals",
           "stage_sheet", "AXIS_PERCENTILE", "AXIS_CAP",
           "ScoreAxis", "axis_limit", "clip_to", "score_axis", "value_axis"]

FIXED_TIME = dt.datetime(2000, 1, 1)
# in_memory: assemble the package in memory instead of ~20 temporary files per workbook (about 2× faster).
OPTIONS = {"strings_to_formulas": False, "strings_to_urls": False, "strings_to_numbers": False,
            "nan_inf_to_errors": True, "in_memory": True}


class Formats:
    def __init__(self, wb: xlsxwriter.Workbook) -> None:
        self.title = wb.add_format({"bold": True, "font_size": 14})
        self.bold = wb.add_format({"bold": True})
        self.head = wb.add_format({"bold": True, "bg_color": "#DDE6F0", "bottom": 1, "text_wrap": True,
                                   "valign": "top"})
        self.wrap = wb.add_format({"text_wrap": True, "valign": "top"})
        self.caution = wb.add_format({"italic": True, "text_wrap": True, "valign": "top", "font_color": "#333333"})
        self.alert = wb.add_format({"bold": True, "font_color": "#9E3A00"})
        self.num: dict[int, Any] = {}
        self._wraps: dict[int, Any] = {}
        self.wb = wb
        self.signal = {s: wb.add_format({"font_color": "#000000", "bg_color": tint(c)})
                       for s, c in SIGNAL_COLOUR.items()}

    def wrap_like(self, fmt: Any) -> Any:
        """The wrapping text format for a column written with ``fmt`` (None: the default): aligned at the
        bottom, as the row's other cells are, so its last line stands beside them."""
        key = id(fmt)
        if key not in self._wraps:
            props = {"text_wrap": True, "valign": "bottom"}
            if getattr(fmt, "num_format", None):
                props["num_format"] = fmt.num_format
            self._wraps[key] = self.wb.add_format(props)
        return self._wraps[key]

    def decimals(self, d: int | None) -> Any:
        key = -1 if d is None else d
        if key not in self.num:
            self.num[key] = self.wb.add_format({"num_format": "0." + "0" * d if d else ("0" if d == 0 else "General")})
        return self.num[key]


def tint(hex_colour: str) -> str:
    """A light tint of a palette colour for cell backgrounds (text stays black and readable)."""
    r, g, b = (int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
    return "#{:02X}{:02X}{:02X}".format(*(int(c + (255 - c) * 0.7) for c in (r, g, b)))


def write_value(ws, r: int, c: int, v: Any, fmt=None) -> None:
    """Write one value by its kind: nothing for a missing one (a blank only when it has a format)."""
    if v is None or (isinstance(v, float) and math.isnan(v)):
        ws.write_blank(r, c, None, fmt)
    elif isinstance(v, (bool, np.bool_)):
        ws.write_boolean(r, c, bool(v), fmt)
    elif isinstance(v, (int, float, np.integer, np.floating)):
        ws.write_number(r, c, float(v), fmt)
    else:
        ws.write_string(r, c, str(v), fmt)


#: Up to this many rows a frame is converted to lists whole, whatever columns are wanted.
_CONVERT_WHOLE_ROWS = 1000


def columns_of(frame, cols: list[str]) -> tuple[dict[str, list], int]:
    """The wanted columns as Python lists (a missing column is all None) and the number of rows.

    A frame is converted in one step (one object array, then its columns as
    lists): for the small frames of a lab's sheet this costs far less than
    building a Series per column.
    """
    if isinstance(frame, pd.DataFrame):
        n = len(frame)
        present = [c for c in dict.fromkeys(cols) if c in frame.columns]
        # A small frame is converted whole (selecting columns would copy it first); a large one only in part.
        part = frame if n <= _CONVERT_WHOLE_ROWS or present == list(frame.columns) else frame[present]
        lists = dict(zip(part.columns, part.to_numpy(dtype=object).T.tolist())) if n else {}
        lists = {c: lists.get(c, []) for c in present}
        return {c: lists[c] if c in lists else [None] * n for c in cols}, n
    n = len(next(iter(frame.values()))) if frame else 0
    return {c: frame[c] if c in frame else [None] * n for c in cols}, n


def write_table(ws, fm: Formats, top: int, frame, columns: Iterable[str],
           headers: Iterable[str] | None = None, decimals: dict[str, int | None] | None = None,
           signal_col: str | None = None, words: str = "signals",
           row_decimals: Mapping[str, int | None] | None = None,
           value_columns: Mapping[str, int] | None = None, widths: Sequence[int] | None = None) -> int:
    """Write a header row and the table's columns (a frame, or lists by column); returns the row after it.

    ``decimals`` fixes a column's decimals; ``row_decimals`` maps measurand
    → decimals, applied row by row (by the row's ``measurand``) to the value
    columns of :data:`VALUE_COLUMNS` (with one more decimal for
    uncertainties and σ_pt), or of ``value_columns`` when given (the same
    mapping for other column names).  Missing values (None, NaN, empty
    text) leave the cell empty.  The format of each column (or each row of a value
    column) is looked up once, and rows are written in order (as
    xlsxwriter's ``constant_memory`` mode needs).

    With ``widths`` (the columns' widths in characters, as :func:`fit_widths`
    gives them) the header row gets the height of its wrapped headings, and a
    text longer than its column (a note, an audit reason) is wrapped in its cell
    with the row made tall enough for it: a spreadsheet program does not grow
    rows when it opens a file, and a text running past its column is cut off
    at the edge of the printed page.
    """
    cols = list(columns)
    heads = list(headers or cols)
    fits = list(widths) if widths is not None else None
    if fits is not None:
        ws.set_row(top, ROW_POINTS * max([1] + [len(wrap_words(h, w)) for h, w in zip(heads, fits)]))
    for j, h in enumerate(heads):
        ws.write_string(top, j, h, fm.head)
    data, n = columns_of(frame, cols)
    values_by_row = VALUE_COLUMNS if value_columns is None else value_columns
    by_row: dict[int, list] = {}
    if row_decimals and "measurand" in frame:
        row_d = [row_decimals.get(m) for m in (frame["measurand"].tolist() if isinstance(frame, pd.DataFrame)
                                                else frame["measurand"])]
        for extra in set(values_by_row.values()):
            by_row[extra] = [None if d is None else fm.decimals(d + extra) for d in row_d]
    specs = []  # (column index, values, format, formats by row or None, signal cells or None)
    for j, c in enumerate(cols):
        fmt, fmts, signals = None, None, None
        if decimals and c in decimals:
            fmt = fm.decimals(decimals[c])
        elif by_row and c in values_by_row:
            fmts = by_row[values_by_row[c]]
        if c == signal_col:
            signals = {s: (signal_label(s, words), fm.signal.get(s)) for s in set(data[c]) if isinstance(s, str)}
        specs.append((j, data[c], fmt, fmts, signals))
    # text columns whose longest text (in the rows fitted) is wider than the column: wrapped where needed
    wrapping = [(j, values, int(fits[j] * BODY_CHARS)) for j, values, fmt, fmts, signals in specs
                if fits is not None and j < len(fits) and signals is None and fmts is None
                and any(type(v) is str and len(v) > fits[j] * BODY_CHARS - 2 for v in values[:FIT_ROWS])]
    wrap_fmt: dict[int, Any] = {j: fm.wrap_like(fmt) for j, _, fmt, _, _ in specs
                                if any(j == w for w, _, _ in wrapping)}
    number, string = ws.write_number, ws.write_string
    for i in range(n):
        r = top + 1 + i
        wrapped: set[int] = set()
        if wrapping:
            lines = 1
            for j, values, width in wrapping:
                v = values[i]
                if type(v) is str and len(v) > width - 2:
                    wrapped.add(j)
                    lines = max(lines, len(wrap_words(v, width)))
            if wrapped:
                ws.set_row(r, ROW_POINTS * lines)
        for j, values, fmt, fmts, signals in specs:
            if j in wrapped:
                string(r, j, values[i], wrap_fmt[j])
                continue
            v = values[i]
            if fmts is not None:
                fmt = fmts[i]
            t = type(v)
            if t is float:
                if v == v:
                    number(r, j, v, fmt)
            elif t is str:
                if signals is not None:
                    label, sfmt = signals[v]
                    if label:
                        string(r, j, label, sfmt)
                elif v:
                    string(r, j, v, fmt)
            elif t is int:
                number(r, j, float(v), fmt)
            elif v is not None and not (isinstance(v, float) and math.isnan(v)) and v is not pd.NA:
                write_value(ws, r, j, v, fmt)  # numpy scalars, booleans, other objects
    return top + 1 + n


#: Characters of ordinary text a column holds per unit of its width (a width counts the digit "0" of the default
#: font; letters and spaces are narrower on average, common practice for Calibri-like fonts). Bold headings are
#: wrapped at one character a unit.
BODY_CHARS = 1.1


def wrap_words(text: str, width: int) -> list[str]:
    """``text`` as the lines it takes in a wrapped cell holding ``width`` characters a line (words kept whole
    where they fit, a longer word broken).

    >>> wrap_words("Rank by |score| (1 = closest)", 12)
    ['Rank by', '|score| (1 =', 'closest)']
    """
    room = max(1, int(width))
    lines: list[str] = []
    for para in str(text).split("\n"):
        line = ""
        for word in para.split():
            while len(word) > room:
                if line:
                    lines.append(line)
                    line = ""
                lines.append(word[:room])
                word = word[room:]
            if not line:
                line = word
            elif len(line) + 1 + len(word) <= room:
                line += " " + word
            else:
                lines.append(line)
                line = word
        lines.append(line)
    return lines or [""]


#: Value columns shown with the measurand's decimals (+0) or one more (+1: uncertainties, σ_pt, robust SDs).
VALUE_COLUMNS = {"result": 0, "assigned": 0, "d": 0, "robust_mean": 0, "median": 0, "u_assigned": 1,
                 "sigma_pt": 1, "robust_sd": 1, "made": 1, "niqr": 1,
                 # the stage tables' values in the measurand's unit (items, precision, methods, Mandel)
                 "mean": 0, "general_mean": 0, "difference": 0, "ci_low": 0, "ci_high": 0, "sd": 1, "s_x": 1,
                 "s_w": 1, "s_s": 1, "s_r": 1, "s_L": 1, "s_R": 1, "r": 1, "R": 1, "s_r_robust": 1,
                 "criterion": 1, "allowed": 1,
                 # the sensitivity table's estimates, the labs' reported uncertainties and their plausible range
                 "value": 0, "u": 1, "u_min": 1, "u_max": 1}
#: Decimals of the stage tables' dimensionless numbers (common practice: statistics and critical values to
#: 2 or 3 decimals, p-values to 4); other numbers show as the program's General format.
STAT_DECIMALS: dict[str, int] = {"h": 2, "k": 2, "h_crit_5": 2, "h_crit_1": 2, "k_crit_5": 2, "k_crit_1": 2,
                                 "statistic": 3, "critical_5": 3, "critical_1": 3, "f_statistic": 3,
                                 "t_critical": 3, "p_value": 4, "p_adjusted": 4, "f_p_value": 4, "n_bar": 2}


def stage_decimals(frame) -> dict[str, int | None]:
    """The fixed decimals of a stage table's columns (:data:`STAT_DECIMALS`, those it has)."""
    return {c: d for c, d in STAT_DECIMALS.items() if c in frame.columns}


def stage_sheet(wb, fm: Formats, name: str, frame: pd.DataFrame,
                row_decimals: Mapping[str, int | None]) -> tuple[Any, list[int], int]:
    """A stage table (Mandel, screens, items ...) as a sheet of its own: display headings
    (:mod:`roundscore.outputs.headings`), values to the measurand's decimals, statistics to
    :data:`STAT_DECIMALS`. Returns (sheet, column widths, last row)."""
    ws = wb.add_worksheet(name.capitalize()[:31])
    cols, heads = list(frame.columns), headings(frame.columns, name)
    fixed = stage_decimals(frame)
    widths = fit_widths(frame, cols, heads, decimals={**{c: 4 for c in cols}, **fixed})
    end = write_table(ws, fm, 0, frame, cols, heads, decimals=fixed, row_decimals=row_decimals, widths=widths)
    ws.freeze_panes(1, 0)
    set_widths(ws, widths)
    return ws, widths, end - 1
#: Widths (characters) a fitted column may take (common practice: readable without wrapping, notes capped).
MIN_WIDTH, MAX_WIDTH = 6, 60
#: Rows looked at to fit a column's width (enough to see the longest codes and notes; keeps big rounds fast).
FIT_ROWS = 500


def fit_widths(frame, columns: Iterable[str], headers: Iterable[str] | None = None,
         decimals: dict[str, int | None] | None = None, signal_col: str | None = None) -> list[int]:
    """Column widths that fit the header's longest word and the values (first :data:`FIT_ROWS` rows).

    A number is measured as shown with the column's ``decimals`` (else 6
    significant digits); with fixed decimals only the largest and the
    smallest number need formatting (the shown length grows with the
    magnitude on each side of zero).
    """
    cols = list(columns)
    heads = list(headers or cols)
    head = frame.iloc[:FIT_ROWS] if isinstance(frame, pd.DataFrame) else {c: v[:FIT_ROWS] for c, v in frame.items()}
    data, _ = columns_of(head, [c for c in cols if c in frame])
    out = []
    for c, h in zip(cols, heads):
        longest = max((len(w) for w in str(h).split()), default=0)
        values = data.get(c, ())
        floats = [v for v in values if isinstance(v, float)]
        if floats:
            d = (decimals or {}).get(c)
            if d is not None:
                finite = [v for v in floats if v - v == 0]
                shown = [max(finite), min(finite)] if finite else []
                shown += [v for v in floats if v == v and v - v != 0]  # ±inf, each shown
                longest = max([longest] + [len(f"{v:.{d}f}") for v in shown])
            else:
                longest = max([longest] + [len(f"{v:.6g}") for v in floats if v == v])
        others = [v for v in values if not isinstance(v, float)]
        if others:
            extra = 8 if c == signal_col else 0
            longest = max(longest, max(len(str(v)) for v in others) + extra)
        out.append(min(max(longest + 2, MIN_WIDTH), MAX_WIDTH))
    return out


def set_widths(ws, widths: list[int]) -> None:
    for j, w in enumerate(widths):
        ws.set_column(j, j, w)


def print_setup(ws, round_id: str, header_row: int | None = None, *, paper: str = "a4", lab: str = "",
                title: str = "", widths: Iterable[float] = (), last_row: int | None = None,
                charts: Iterable[Chart] = (), landscape: bool | None = None,
                row_points: Mapping[int, float] | None = None) -> None:
    """How a sheet of a circulated workbook prints (:func:`roundscore.support.sheetprint.print_layout`).

    ``paper`` is ``[round] paper``; the page header names the round (left),
    the lab for a lab's file (centre) and ``title`` (right), the footer has the
    page numbers. Rows up to ``header_row`` (the table head) print on every
    page; with ``last_row`` the print area is the sheet's columns of ``widths``
    down to that row. The sheet prints one page wide, landscape when it is wide,
    and each of ``charts`` whole on one page.
    """
    widths = list(widths)
    area = (0, 0, last_row, max(len(widths), 1) - 1) if last_row is not None else None
    print_layout(ws, paper="letter" if paper == "letter" else "a4",
                 header=(round_id, f"Laboratory {lab}" if lab else "", title),
                 head_rows=(header_row, header_row) if header_row is not None else None, area=area,
                 widths=widths, charts=list(charts), landscape=landscape, row_points=row_points)


#: Height (pixels) of a score chart and the rows (of 20 px) from one chart to the next below it.
CHART_HEIGHT, CHART_ROWS = 280, 15


#: Workbook chart marker shapes of the scored signals (roundscore.outputs.look: circle, triangle, square).
_CHART_MARKER = {s: SIGNAL_CHART_MARKER[s] for s in SCORED_SIGNALS}
#: Up to this many bars each data point is coloured by its signal (beyond, the file grows by a point
#: entry per bar per chart; the marker series still carry the signals).
CHART_POINT_COLOURS = 200


@dataclass(frozen=True, slots=True)
class ScoreAxis:
    """A score chart's value axis: ±``limit``, the scores as drawn (clipped to the axis), which are off scale."""

    limit: float
    drawn: list[float | None]
    off_scale: list[bool]

    def labels(self, values: Iterable[float | None], position: tuple[str, str] = ("inside_end", "inside_end"),
               texts: Iterable[str | None] | None = None) -> dict | None:
        """Chart data labels (xlsxwriter's ``data_labels``) giving each off-scale point its true value, or
        None when every point is on the scale. ``position``: where the label of a point at the top and at the
        bottom edge goes. ``texts``: a label of its own for a point (a censored false negative drawn at the
        axis' end: its state in words), given in place of the value."""
        vals = list(values)
        own = list(texts) if texts is not None else [None] * len(vals)
        if not any(self.off_scale) and not any(own):
            return None
        custom: list[dict] = []
        for v, off, text, d in zip(vals, self.off_scale, own, self.drawn):
            if text:
                up = d is not None and d > 0
                custom.append({"value": text, "position": position[0] if up else position[1],
                               "font": {"bold": True, "color": "#000000", "size": 8}})
            elif off and v is not None:
                custom.append({"value": f"{v:.2f}", "position": position[0] if v > 0 else position[1],
                               "font": {"bold": True, "color": "#000000", "size": 8}})
            else:
                custom.append({"delete": True})
        return {"value": True, "custom": custom}


def clip_to(values: Iterable[float | None], limit: float) -> ScoreAxis:
    """The scores as drawn on an axis of ±``limit``: clipped to it, the off-scale ones marked."""
    drawn: list[float | None] = []
    off: list[bool] = []
    for v in values:
        if v is None or not math.isfinite(v):
            drawn.append(None)
            off.append(False)
        else:
            drawn.append(min(max(v, -limit), limit))
            off.append(abs(v) > limit)
    return ScoreAxis(limit=limit, drawn=drawn, off_scale=off)


def score_axis(values: Iterable[float | None], family: ScoreFamily) -> ScoreAxis:
    """The value axis of a chart of ``family``'s scores and the scores as drawn on it."""
    vals = list(values)
    return clip_to(vals, axis_limit(vals, family))


def value_axis(name: str, limit: float) -> dict:
    """xlsxwriter's ``set_y_axis`` options of a score chart: fixed at ±``limit``, light grid lines."""
    return {"name": name, "min": -limit, "max": limit, "major_unit": 1 if limit <= 4 else 2,
            "major_gridlines": {"visible": True, "line": {"color": "#DDDDDD"}}}


def score_chart(wb, sheet, fm: Formats, top: int, labs: list, scores: list[float | None], signals: list[str],
                label: str, score: str, words: str, title: str, states: list[str] | None = None) -> tuple[Any, int]:
    """Write one chart's data block (the bars' labels, finite scores and signals) at ``top`` on ``sheet``.

    Returns (chart, next free row).

    A column chart of the scores combined with a line chart (no lines) of one
    marker series per signal, named by the signal word (shape and word, not
    colour alone), and the warning / action limits of the score's family
    (roundscore.model.scores; ISO 13528 §9.4: ±2, ±3; En: ±1) as dashed and solid lines.
    The value axis is fixed (:func:`score_axis`): a score beyond it is drawn
    at the edge (column "Drawn at") and labelled with its true value.
    ``states`` (the evaluation's, one per bar): a censored false negative or positive has no score
    (None) and is drawn at the axis' low or high end (:data:`~roundscore.model.evaluation.STATE_SIDE`)
    with its signal, labelled with its state in words.
    """
    family = family_of(score)
    limits = [(lim, sig, LIMIT_LINE[sig]["chart"]) for lim, sig in family.limits()]
    axis = score_axis(scores, family)
    sides = [STATE_SIDE.get(st, 0) for st in states] if states is not None else [0] * len(scores)
    drawn = [side * axis.limit if side else d for d, side in zip(axis.drawn, sides)]
    texts = [STATES[st] if side else None for st, side in zip(states or [""] * len(scores), sides)]
    sname = sheet.get_name()
    heads = ["Chart", "Lab", "Score", f"Drawn at (axis ±{axis.limit:g})",
             *(SIGNAL_WORD[words][s] for s in _CHART_MARKER)]
    heads += [f"{sign}{lim:g} {word} limit" for lim, word, _ in limits for sign in "+-"]
    # the wrapped heads' height, in the narrowest width the callers give these columns (10 characters)
    sheet.set_row(top, ROW_POINTS * max(len(wrap_words(h, 10)) for h in heads))
    for j, h in enumerate(heads):
        sheet.write_string(top, j, h, fm.head)
    first, last = top + 1, top + len(scores)
    number, string, two = sheet.write_number, sheet.write_string, fm.decimals(2)
    marker_col = {s: j for j, s in enumerate(_CHART_MARKER, start=4)}
    limit_col = 4 + len(_CHART_MARKER)
    bounds = [(limit_col + 2 * j, lim) for j, (lim, _, _) in enumerate(limits)]
    for r, lab, v, d, sig, text in zip(range(first, last + 1), labs, scores, drawn, signals, texts):
        string(r, 0, label)
        string(r, 1, str(lab))
        if v is None or text:
            string(r, 2, text or "")
        else:
            number(r, 2, v, two)
        if d is not None:
            number(r, 3, d, two)
            if sig in marker_col:
                number(r, marker_col[sig], d, two)
        for j, lim in bounds:
            number(r, j, lim)
            number(r, j + 1, -lim)
    # The charts' cached values are given with each series (xlsxwriter's ``*_data`` series options), the
    # same text as xlsxwriter would read back from the cells: a workbook written in constant_memory mode
    # cannot read them back, and viewers that draw from the cache would show empty charts.
    cats = [sname, first, 1, last, 1]
    cat_data = [str(lab) for lab in labs]
    shown = [f"{v:.16g}" if v is not None else None for v in drawn]
    col = wb.add_chart({"type": "column"})
    series = {"name": "score", "categories": cats, "values": [sname, first, 3, last, 3],
              "categories_data": cat_data, "values_data": shown,
              "fill": {"color": "#9DB9D3"}, "border": {"color": "#555555"}, "gap": 40}
    if len(scores) <= CHART_POINT_COLOURS:
        tints = {s: tint(SIGNAL_COLOUR.get(s, SIGNAL_COLOUR["not-scored"])) for s in set(signals)}
        series["points"] = [{"fill": {"color": tints[s]}, "border": {"color": "#555555"}} for s in signals]
    labels = axis.labels(scores, texts=texts)
    if labels is not None:
        series["data_labels"] = labels
    col.add_series(series)
    line = wb.add_chart({"type": "line"})
    present = set(signals)
    for s, j in marker_col.items():
        if s in present:
            line.add_series({"name": [sname, top, j], "categories": cats, "values": [sname, first, j, last, j],
                             "name_data": [heads[j]], "categories_data": cat_data,
                             "values_data": [v if sig == s else None for v, sig in zip(shown, signals)],
                             "line": {"none": True},
                             "marker": {"type": _CHART_MARKER[s], "size": 6, "fill": {"color": SIGNAL_COLOUR[s]},
                                        "border": {"color": "#000000"}}})
    hidden = []
    n_series = 1 + sum(1 for s in _CHART_MARKER if s in present)
    for j, (lim, word, dash) in enumerate(limits):
        for sign in (0, 1):
            c = limit_col + 2 * j + sign
            if sign:
                hidden.append(n_series)
            n_series += 1
            line.add_series({"name": f"{word} limit ±{lim:g}", "categories": cats, "values": [sname, first, c, last, c],
                             "categories_data": cat_data,
                             "values_data": [f"{-lim if sign else lim:.16g}"] * len(scores),
                             "line": {"color": "#444444", "width": 1, "dash_type": dash}, "marker": {"type": "none"}})
    col.combine(line)
    col.set_y_axis(value_axis(score_label(score), axis.limit))
    col.set_x_axis({"name": "laboratory (ranked by score)", "label_position": "low",
                    "num_font": {"rotation": -90, "size": 8}})
    col.set_title({"name": title, "name_font": {"size": 11}})
    col.set_legend({"position": "bottom", "delete_series": [0, *hidden]})
    return col, last + 2


#: Decimals of the score columns (every score of the registry: 2) and of D % (1).
SCORE_DECIMALS: dict[str, int | None] = {**{s.column: 2 for s in SCORES.values()}, "d_percent": 1}


def score_table_columns() -> tuple[list[str], list[str]]:
    """(columns, heads) of every score of the registry, then D and D %: ``z, z′, ζ, En, D, D %``."""
    return ([s.column for s in SCORES.values()] + ["d", "d_percent"],
            [s.symbol for s in SCORES.values()] + ["D", "D %"])
