"""The circulated workbooks: the round summary and one confidential score sheet per lab.

Written with xlsxwriter (several times faster than openpyxl for writing and
able to add native workbook charts). Every text cell is written as a string,
never as a formula, whatever it starts with. The creation time is fixed so
the same round gives the same workbook bytes.

A lab's workbook holds that lab's results, scores and signals, beside each
score what the lab needs to read it (assigned value, u(x_pt), σ_pt, the
number of labs the assigned value used, the lab's Mandel h and k) and where
the lab stands among all labs (its rank; other labs are never named).  The
round's statistics of every measurand are not repeated in each lab's file:
the Scores sheet says they are in the summary workbook ``round-summary.xlsx``
circulated with it.  Two sheets, ``data`` and ``round``, are
machine-readable (the history commands read them back): their layout is a
contract, see :data:`~roundscore.model.evaluation.SCORE_COLUMNS`.  The ``data`` sheet
holds its numbers to 12 significant digits and a digest of each row (column
``row_digest``), the ``round`` sheet a digest of the whole (key ``digest``),
so ``history add`` refuses a row edited after it was written
(:mod:`roundscore.history.checks`).
"""

from __future__ import annotations

import datetime as dt
import math
import tempfile
from pathlib import Path
from typing import Any, Iterable

import numpy as np
import pandas as pd
import xlsxwriter

from roundscore.model.digest import DIGEST_KEY, ROW_DIGEST_COLUMN, row_digest, sheet_digest, sheet_value
from roundscore.model.evaluation import SCORE_COLUMNS, STATISTICS_COLUMNS, RoundEvaluation
from roundscore.outputs.look import CAUTION, SIGNAL_COLOUR, SIGNAL_WORD, signal_label

__all__ = ["write_summary", "write_lab_workbook", "LAB_FORMAT", "FIXED_TIME", "lab_payload"]

LAB_FORMAT = 1
FIXED_TIME = dt.datetime(2000, 1, 1)
# in_memory: assemble the package in memory instead of ~20 temporary files per workbook (about 2× faster).
_OPTIONS = {"strings_to_formulas": False, "strings_to_urls": False, "strings_to_numbers": False,
            "nan_inf_to_errors": True, "in_memory": True}


class _Formats:
    def __init__(self, wb: xlsxwriter.Workbook) -> None:
        self.title = wb.add_format({"bold": True, "font_size": 14})
        self.bold = wb.add_format({"bold": True})
        self.head = wb.add_format({"bold": True, "bg_color": "#DDE6F0", "bottom": 1, "text_wrap": True,
                                   "valign": "top"})
        self.wrap = wb.add_format({"text_wrap": True, "valign": "top"})
        self.caution = wb.add_format({"italic": True, "text_wrap": True, "valign": "top", "font_color": "#333333"})
        self.alert = wb.add_format({"bold": True, "font_color": "#9E3A00"})
        self.num = {}
        self.wb = wb
        self.signal = {s: wb.add_format({"font_color": "#000000", "bg_color": _tint(c)})
                       for s, c in SIGNAL_COLOUR.items()}

    def decimals(self, d: int | None) -> Any:
        key = -1 if d is None else d
        if key not in self.num:
            self.num[key] = self.wb.add_format({"num_format": "0." + "0" * d if d else ("0" if d == 0 else "General")})
        return self.num[key]


def _tint(hex_colour: str) -> str:
    """A light tint of a palette colour for cell backgrounds (text stays black and readable)."""
    r, g, b = (int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
    return "#{:02X}{:02X}{:02X}".format(*(int(c + (255 - c) * 0.7) for c in (r, g, b)))


def _write(ws, r: int, c: int, v: Any, fmt=None) -> None:
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


def _columns(frame, cols: list[str]) -> tuple[dict[str, list], int]:
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


def _table(ws, fm: _Formats, top: int, frame, columns: Iterable[str],
           headers: Iterable[str] | None = None, decimals: dict[str, int | None] | None = None,
           signal_col: str | None = None, words: str = "signals",
           row_decimals: dict[str, int | None] | None = None) -> int:
    """Write a header row and the table's columns (a frame, or lists by column); returns the row after it.

    ``decimals`` fixes a column's decimals; ``row_decimals`` maps measurand
    → decimals, applied row by row (by the row's ``measurand``) to the value
    columns of :data:`VALUE_COLUMNS` (with one more decimal for
    uncertainties and σ_pt).  Missing values (None, NaN, empty text) leave
    the cell empty.  The format of each column (or each row of a value
    column) is looked up once, and rows are written in order (as
    xlsxwriter's ``constant_memory`` mode needs).
    """
    cols = list(columns)
    for j, h in enumerate(headers or cols):
        ws.write_string(top, j, h, fm.head)
    data, n = _columns(frame, cols)
    by_row: dict[int, list] = {}
    if row_decimals and "measurand" in frame:
        row_d = [row_decimals.get(m) for m in (frame["measurand"].tolist() if isinstance(frame, pd.DataFrame)
                                                else frame["measurand"])]
        for extra in set(VALUE_COLUMNS.values()):
            by_row[extra] = [None if d is None else fm.decimals(d + extra) for d in row_d]
    specs = []  # (column index, values, format, formats by row or None, signal cells or None)
    for j, c in enumerate(cols):
        fmt, fmts, signals = None, None, None
        if decimals and c in decimals:
            fmt = fm.decimals(decimals[c])
        elif by_row and c in VALUE_COLUMNS:
            fmts = by_row[VALUE_COLUMNS[c]]
        if c == signal_col:
            signals = {s: (signal_label(s, words), fm.signal.get(s)) for s in set(data[c]) if isinstance(s, str)}
        specs.append((j, data[c], fmt, fmts, signals))
    number, string = ws.write_number, ws.write_string
    for i in range(n):
        r = top + 1 + i
        for j, values, fmt, fmts, signals in specs:
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
                _write(ws, r, j, v, fmt)  # numpy scalars, booleans, other objects
    return top + 1 + n


#: Value columns shown with the measurand's decimals (+0) or one more (+1: uncertainties, σ_pt, robust SDs).
VALUE_COLUMNS = {"result": 0, "assigned": 0, "d": 0, "robust_mean": 0, "median": 0, "u_assigned": 1,
                 "sigma_pt": 1, "robust_sd": 1, "made": 1, "niqr": 1}
#: Widths (characters) a fitted column may take (common practice: readable without wrapping, notes capped).
MIN_WIDTH, MAX_WIDTH = 6, 60
#: Rows looked at to fit a column's width (enough to see the longest codes and notes; keeps big rounds fast).
FIT_ROWS = 500


def _fit(frame, columns: Iterable[str], headers: Iterable[str] | None = None,
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
    data, _ = _columns(head, [c for c in cols if c in frame])
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


def _widths(ws, widths: list[int]) -> None:
    for j, w in enumerate(widths):
        ws.set_column(j, j, w)


def _print_setup(ws, round_id: str, header_row: int | None = None) -> None:
    """Landscape, fit to one page wide, the round id in the page header, the table head on every page."""
    ws.set_landscape()
    ws.set_paper(9)  # A4
    ws.fit_to_pages(1, 0)
    ws.set_header(f"&L{round_id}&RPage &P of &N")
    if header_row is not None:
        ws.repeat_rows(header_row)


def _heading(ws, fm: _Formats, ev: RoundEvaluation, title: str) -> int:
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


_SCORE_HEAD = ["Lab", "Measurand", "Unit", "Replicates", "Result", "Assigned value", "u(x_pt)", "σ_pt",
               "z", "z′", "ζ", "En", "D", "D %", "Signal", "Note"]
_SCORE_COLS = ["lab", "measurand", "unit", "n_replicates", "result", "assigned", "u_assigned", "sigma_pt",
               "z", "z_prime", "zeta", "en", "d", "d_percent", "signal", "note"]


def _score_decimals(ev: RoundEvaluation) -> dict[str, int | None]:
    return {"z": 2, "z_prime": 2, "zeta": 2, "en": 2, "d_percent": 1}


def _measurand_decimals(ev: RoundEvaluation, name: str) -> int | None:
    return ev.round.measurands[name].decimals


def write_summary(ev: RoundEvaluation, path: Path) -> None:
    """The summary workbook for circulation: settings, statistics, all scores by lab code, charts, audit.

    Written in xlsxwriter's ``constant_memory`` mode: each row goes to a
    temporary file as soon as the next row starts, instead of every cell of
    a large round (millions) staying in memory until the end.  So every
    sheet is written row by row, top to bottom, and the charts carry their
    cached values themselves (see :func:`_score_chart`).  The temporary files
    live in a folder beside ``path`` and are removed when it is written.
    """
    path = Path(path)
    with tempfile.TemporaryDirectory(prefix=f".{path.name}.tmp-", dir=path.parent) as tmp:
        _write_summary(ev, path, {**_OPTIONS, "in_memory": False, "constant_memory": True, "tmpdir": tmp})


def _write_summary(ev: RoundEvaluation, path: Path, options: dict[str, Any]) -> None:
    rnd = ev.round
    wb = xlsxwriter.Workbook(str(path), options)
    wb.set_properties({"title": f"Round summary {rnd.id}", "created": FIXED_TIME, "author": rnd.provider or ""})
    fm = _Formats(wb)
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
                     "f": m.sigma_pt, "g": m.settings.score, "h": m.assigned_source, "i": m.sigma_source,
                     "j": "n/a" if m.u_check_passed is None else ("yes" if m.u_check_passed else "NO"),
                     "k": " ".join(m.notes + ev.stage_notes.get(m.name, ()))})
    dec = {n: m.decimals for n, m in rnd.measurands.items()}
    frame = pd.DataFrame(rows, columns=list("abcdefghijk"))
    frame["measurand"] = frame["a"]
    head_row = r
    ws.set_row(head_row, 30)  # before the row is written (constant_memory writes rows in order)
    r = _table(ws, fm, r, frame.rename(columns={"d": "assigned", "e": "u_assigned", "f": "sigma_pt"}),
               ["a", "b", "c", "assigned", "u_assigned", "sigma_pt", "g", "h", "i", "j", "k"], head,
               row_decimals=dec) + 1
    for w in ev.warnings:
        ws.write_string(r, 0, "Note: " + w)
        r += 1
    _widths(ws, [max(w, 12) for w in _fit(frame, list("abcdefg"), head[:7])] + [40, 40, 16, 60])
    ws.freeze_panes(head_row + 1, 1)
    _print_setup(ws, rnd.id, head_row)
    # Statistics
    ws = wb.add_worksheet("Statistics")
    _table(ws, fm, 0, ev.statistics, STATISTICS_COLUMNS, row_decimals=dec)
    ws.freeze_panes(1, 1)
    _widths(ws, _fit(ev.statistics, STATISTICS_COLUMNS, decimals={c: 4 for c in STATISTICS_COLUMNS}))
    _print_setup(ws, rnd.id, 0)
    # Scores
    ws = wb.add_worksheet("Scores")
    sc = ev.scores
    end = _table(ws, fm, 0, sc, _SCORE_COLS, _SCORE_HEAD, _score_decimals(ev), "signal", rnd.words, row_decimals=dec)
    ws.freeze_panes(1, 2)
    ws.autofilter(0, 0, max(end - 1, 1), len(_SCORE_COLS) - 1)
    _widths(ws, _fit(sc, _SCORE_COLS, _SCORE_HEAD, {**_score_decimals(ev), "result": 4, "assigned": 4,
                                                     "u_assigned": 4, "sigma_pt": 4, "d": 4}, "signal"))
    _print_setup(ws, rnd.id, 0)
    # Charts: one native chart of the official score per measurand, labs ranked by score, with the
    # signal as marker shape and legend word as well as colour, and the limit lines.
    ch = wb.add_worksheet("Charts")
    cd = wb.add_worksheet("Chart data")
    cd.write_string(0, 0, "Data of the charts: each measurand's official scores, ranked", fm.bold)
    row, top = 0, 2
    for name, m in ev.measurands.items():
        g = ev.measurand_rows("scores", name)
        if not len(g) or not m.scored:
            continue
        vals = g[SCORE_FIELD[m.settings.score]].to_numpy(float)
        keep = np.isfinite(vals)
        order = np.argsort(vals[keep], kind="stable")
        if not len(order):
            continue
        c, top = _score_chart(wb, cd, fm, top, g["lab"].to_numpy()[keep][order].tolist(), vals[keep][order].tolist(),
                              g["signal"].to_numpy()[keep][order].tolist(), f"{name} ({m.settings.score})",
                              m.settings.score, rnd.words,
                              f"{name}: {_SCORE_NAME[m.settings.score]} by laboratory (ranked)")
        c.set_size({"width": 900, "height": 320})
        ch.insert_chart(row, 0, c)
        row += 17
    cd.freeze_panes(2, 0)
    _widths(cd, [12, 16, 10, 14, 14, 14, 10, 10, 10, 10])
    _print_setup(ch, rnd.id)
    # Left out / audit
    ws = wb.add_worksheet("Audit")
    _table(ws, fm, 0, ev.audit, list(ev.audit.columns))
    ws.freeze_panes(1, 0)
    _widths(ws, _fit(ev.audit, list(ev.audit.columns)))
    _print_setup(ws, rnd.id, 0)
    for name, frame in ev.extras.items():
        if isinstance(frame, pd.DataFrame) and len(frame.columns):
            ws = wb.add_worksheet(name.capitalize()[:31])
            _table(ws, fm, 0, frame, list(frame.columns))
            ws.freeze_panes(1, 0)
            _widths(ws, _fit(frame, list(frame.columns), decimals={c: 4 for c in frame.columns}))
            _print_setup(ws, rnd.id, 0)
    wb.close()


SCORE_FIELD = {"z": "z", "z-prime": "z_prime", "zeta": "zeta", "en": "en"}
_SCORE_NAME = {"z": "z-score", "z-prime": "z′-score", "zeta": "ζ-score", "en": "En number"}
#: Workbook chart marker shapes matching roundscore.outputs.look.SIGNAL_MARKER (circle, triangle, square).
_CHART_MARKER = {"acceptable": "circle", "warning": "triangle", "action": "square"}
#: Up to this many bars each data point is coloured by its signal (beyond, the file grows by a point
#: entry per bar per chart; the marker series still carry the signals).
CHART_POINT_COLOURS = 200


def _score_chart(wb, sheet, fm: _Formats, top: int, labs: list, scores: list[float], signals: list[str],
                 label: str, score: str, words: str, title: str) -> tuple[Any, int]:
    """Write one chart's data block (the bars' labels, finite scores and signals) at ``top`` on ``sheet``.

    Returns (chart, next free row).

    A column chart of the scores combined with a line chart (no lines) of one
    marker series per signal, named by the signal word (shape and word, not
    colour alone), and the warning / action limits (ISO 13528 §9.4: ±2, ±3;
    En: ±1) as dashed and solid lines.
    """
    from roundscore.stats.scores import EN_ACTION, Z_ACTION, Z_WARNING

    limits = [(EN_ACTION, "action", "solid")] if score == "en" else \
        [(Z_WARNING, "warning", "dash"), (Z_ACTION, "action", "solid")]
    sname = sheet.get_name()
    heads = ["Chart", "Lab", "Score", *(SIGNAL_WORD[words][s] for s in _CHART_MARKER)]
    heads += [f"{sign}{lim:g} {word} limit" for lim, word, _ in limits for sign in "+-"]
    for j, h in enumerate(heads):
        sheet.write_string(top, j, h, fm.head)
    first, last = top + 1, top + len(scores)
    number, string, two = sheet.write_number, sheet.write_string, fm.decimals(2)
    marker_col = {s: j for j, s in enumerate(_CHART_MARKER, start=3)}
    bounds = [(6 + 2 * j, lim) for j, (lim, _, _) in enumerate(limits)]
    for r, lab, v, sig in zip(range(first, last + 1), labs, scores, signals):
        string(r, 0, label)
        string(r, 1, str(lab))
        number(r, 2, v, two)
        if sig in marker_col:
            number(r, marker_col[sig], v, two)
        for j, lim in bounds:
            number(r, j, lim)
            number(r, j + 1, -lim)
    # The charts' cached values are given with each series (xlsxwriter's ``*_data`` series options), the
    # same text as xlsxwriter would read back from the cells: a workbook written in constant_memory mode
    # cannot read them back, and viewers that draw from the cache would show empty charts.
    cats = [sname, first, 1, last, 1]
    cat_data = [str(lab) for lab in labs]
    shown = [f"{v:.16g}" for v in scores]
    col = wb.add_chart({"type": "column"})
    series = {"name": "score", "categories": cats, "values": [sname, first, 2, last, 2],
              "categories_data": cat_data, "values_data": shown,
              "fill": {"color": "#9DB9D3"}, "border": {"color": "#555555"}, "gap": 40}
    if len(scores) <= CHART_POINT_COLOURS:
        tints = {s: _tint(SIGNAL_COLOUR.get(s, SIGNAL_COLOUR["not-scored"])) for s in set(signals)}
        series["points"] = [{"fill": {"color": tints[s]}, "border": {"color": "#555555"}} for s in signals]
    col.add_series(series)
    line = wb.add_chart({"type": "line"})
    present = set(signals)
    for j, s in enumerate(_CHART_MARKER, start=3):
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
            c = 6 + 2 * j + sign
            if sign:
                hidden.append(n_series)
            n_series += 1
            line.add_series({"name": f"{word} limit ±{lim:g}", "categories": cats, "values": [sname, first, c, last, c],
                             "categories_data": cat_data, "values_data": [f"{-lim if sign else lim:.16g}"] * len(scores),
                             "line": {"color": "#444444", "width": 1, "dash_type": dash}, "marker": {"type": "none"}})
    col.combine(line)
    bound = max(limits[-1][0] + 1, 4.0)
    vmax = max(abs(v) for v in scores)
    if vmax <= 2 * bound:
        col.set_y_axis({"name": _SCORE_NAME[score], "min": -max(bound, math.ceil(vmax)),
                        "max": max(bound, math.ceil(vmax)), "major_gridlines": {"visible": True,
                        "line": {"color": "#DDDDDD"}}})
    else:
        col.set_y_axis({"name": _SCORE_NAME[score]})
    col.set_x_axis({"name": "laboratory (ranked by score)", "label_position": "low",
                    "num_font": {"rotation": -90, "size": 8}})
    col.set_title({"name": title, "name_font": {"size": 11}})
    col.set_legend({"position": "bottom", "delete_series": [0, *hidden]})
    return col, last + 2


#: The line on a lab's Scores sheet that says where the round's statistics are (not repeated in every lab file).
SUMMARY_POINTER = ("The round's statistics for every measurand (assigned value and how it was set, robust mean "
                   "and SD, median, MADe, nIQR, labs used) are in the summary workbook round-summary.xlsx, "
                   "sheet Statistics, circulated with this score sheet.")


#: Per-lab extras tables folded into a lab's Scores sheet as a few columns (when the lab has at most one row
#: per measurand): table → ((column, header, decimals), ...) and the line that explains them.  Other tables
#: with a ``lab`` column get a sheet of the lab's rows.
LAB_FOLD: dict[str, tuple[tuple[tuple[str, str, int | None], ...], str]] = {
    "mandel": ((("h", "Mandel h", 2), ("k", "Mandel k", 2), ("flag", "Mandel h, k against the indicator lines", None)),
               "Mandel h and k (ISO 5725-2 §7.3): how your mean and your spread of replicates compare with the "
               "labs used, before the outlier screens; beyond an indicator line (5 % or 1 %) asks for a look at "
               "your results. The indicator values of each measurand are on sheet Mandel of round-summary.xlsx."),
}


def _mandel_check(h: Any, k: Any, flag: Any) -> str | None:
    """The indicator lines passed or not: the table's flag, or "within" (None when neither h nor k exists)."""
    if isinstance(flag, str) and flag:
        return flag
    have = [n for n, v in (("h", h), ("k", k)) if isinstance(v, float) and math.isfinite(v)]
    return "within" if len(have) == 2 else (f"{have[0]} within" if have else None)


def _fold_extras(extras: dict[str, pd.DataFrame], measurands: list[str]
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
            values, _ = _columns(frame, ["measurand", *(c for c, _, _ in columns)])
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
    rows[ROW_DIGEST_COLUMN] = digests
    return rows, digests


def lab_payload(ev: RoundEvaluation, lab: str, history: pd.DataFrame | None = None) -> dict[str, Any]:
    """Everything one lab's sheet shows, as plain data (cheap to send to a worker process)."""
    rnd = ev.round
    p = ev.participants.get(lab)
    own = ev.lab_scores(lab)
    return {
        "round": {"id": rnd.id, "title": rnd.title, "scheme": rnd.scheme, "date": rnd.date,
                  "provider": rnd.provider, "material": rnd.material, "words": rnd.words},
        "lab": lab, "name": p.name if p else "", "contact": p.contact if p else "",
        "failed_checks": ev.failed_checks,
        "scores": own,
        "p": {n: m.p for n, m in ev.measurands.items()},
        "decimals": {n: m.decimals for n, m in rnd.measurands.items()},
        "extras": {k: ev.lab_rows(k, lab) for k in ev.lab_tables if k != "scores"},
        "history": history,
    }


def write_lab_workbook(payload: dict[str, Any], path: Path) -> None:
    """One lab's confidential score sheet (see the module docstring for its sheets)."""
    rd = payload["round"]
    lab = payload["lab"]
    own: pd.DataFrame = payload["scores"]
    wb = xlsxwriter.Workbook(str(path), _OPTIONS)
    wb.set_properties({"title": f"Score sheet {rd['id']} {lab}", "created": FIXED_TIME,
                       "author": rd["provider"] or ""})
    fm = _Formats(wb)
    ws = wb.add_worksheet("Scores")
    ws.write_string(0, 0, f"Proficiency test round {rd['id']}: score sheet for laboratory {lab}", fm.title)
    r = 1
    for label, value in (("Laboratory code", lab), ("Laboratory", payload["name"]), ("Contact", payload["contact"]),
                         ("Round", rd["id"]), ("Title", rd["title"]), ("Scheme", rd["scheme"]),
                         ("Date", rd["date"]), ("Material", rd["material"])):
        if value:
            ws.write_string(r, 0, label, fm.bold)
            ws.write_string(r, 1, str(value))
            r += 1
    for line in payload["failed_checks"]:
        ws.write_string(r, 0, "Check failed: " + line, fm.alert)
        r += 1
    ws.merge_range(r, 0, r, 9, "CONFIDENTIAL to the laboratory named above. " + CAUTION, fm.caution)
    ws.set_row(r, 45)
    ws.write_string(r + 1, 0, SUMMARY_POINTER)
    r += 2
    table, _ = _columns(own, list(own.columns))  # the lab's rows as lists by column, converted once
    measurands = table["measurand"]
    table["p"] = [payload["p"].get(m) for m in measurands]
    folded, notes, sheets = _fold_extras(payload["extras"], measurands)
    for line in notes:
        ws.write_string(r, 0, line)
        r += 1
    r += 1
    for key, _, _, values in folded:
        table[key] = values
    table["standing"] = [
        f"{int(k)} of {int(n)}" if isinstance(k, float) and not math.isnan(k) else ""
        for k, n in zip(table["rank"], table["n_scored"])
    ]
    fields = [SCORE_FIELD.get(s) for s in table["score"]]
    table["official"] = [table[f][i] if f else None for i, f in enumerate(fields)]
    cols = ["measurand", "unit", "n_replicates", "result", "assigned", "u_assigned", "sigma_pt", "p", "score",
            "official", "signal", "standing", "z", "z_prime", "zeta", "en", "d", "d_percent", "note"]
    head = ["Measurand", "Unit", "Replicates", "Your result", "Assigned value", "u(x_pt)", "σ_pt",
            "Labs used (p)", "Score", "Your score", "Signal", "Rank by |score| (1 = closest)", "z", "z′", "ζ",
            "En", "D", "D %", "Note"]
    cols[-1:-1] = [key for key, _, _, _ in folded]
    head[-1:-1] = [h for _, h, _, _ in folded]
    fixed = {"official": 2, "z": 2, "z_prime": 2, "zeta": 2, "en": 2, "d_percent": 1,
             **{key: d for key, _, d, _ in folded if d is not None}}
    top = r
    end = _table(ws, fm, r, table, cols, head, fixed, "signal", rd["words"], row_decimals=payload["decimals"])
    ws.freeze_panes(top + 1, 1)
    ws.set_row(top, 30)  # the wrapped head
    widths = _fit(table, cols, head, {**fixed, "result": 4, "assigned": 4, "u_assigned": 4, "sigma_pt": 4, "d": 4},
                  "signal")
    _widths(ws, [max(w, 16 if j == 0 else 7) for j, w in enumerate(widths)])
    # Native charts of this lab's official score per measurand (z-like scores and En apart: their limits differ).
    chart_rows = []
    for family, members in (("z", ("z", "z-prime", "zeta")), ("en", ("en",))):
        part = [i for i, (sc, v) in enumerate(zip(table["score"], table["official"]))
                if sc in members and isinstance(v, float) and math.isfinite(v)]
        if part:
            chart_rows.append((family, [measurands[i] for i in part], [table["official"][i] for i in part],
                               [table["signal"][i] for i in part]))
    if chart_rows:
        cd = wb.add_worksheet("Chart data")
        cd.write_string(0, 0, f"Data of the charts: laboratory {lab}'s scores by measurand", fm.bold)
        at, row = 2, end + 1
        for family, names, values, signals in chart_rows:
            name = "z, z′, ζ" if family == "z" else "En"
            c, at = _score_chart(wb, cd, fm, at, names, values, signals, name, family, rd["words"],
                                 f"Laboratory {lab}: {name} by measurand")
            c.set_x_axis({"name": "measurand", "num_font": {"rotation": -45, "size": 8}, "label_position": "low"})
            c.set_size({"width": 640, "height": 320})
            ws.insert_chart(row, 0, c)
            row += 17
        _widths(cd, [12, 16, 10, 14, 14, 14, 10, 10, 10, 10])
    _print_setup(ws, rd["id"], top)
    hist = payload.get("history")
    if hist is not None and len(hist):
        # History: the lab's earlier rounds of this scheme (archive rows, roundscore.history.store
        # HISTORY_COLUMNS), then a native line chart of the score per measurand over those
        # rounds and this one, with the limits of ISO 13528 (z-like 2 and 3; En 1).
        from roundscore.stats.trends import ACTION_LIMIT, EN_ACTION_LIMIT, WARNING_LIMIT
        from roundscore.outputs.look import PALETTE

        hs = wb.add_worksheet("History")
        hs.write_string(0, 0, f"Laboratory {lab}: your results in earlier rounds of scheme "
                              f"{rd['scheme']}", fm.title)
        hs.write_string(1, 0, f"Archived rounds dated before this round ({rd['date']}), the most "
                              "recent per measurand; this round's scores are on the Scores sheet "
                              "and end each line of the charts.")
        end = _table(hs, fm, 3, hist,
                     ["round_date", "round", "measurand", "unit", "result", "assigned", "sigma_pt",
                      "score", "score_value", "signal", "note"],
                     ["Date", "Round", "Measurand", "Unit", "Your result", "Assigned value", "σ_pt",
                      "Score", "Your score", "Signal", "Note"], {"score_value": 2}, "signal",
                     rd["words"])
        points = {}  # (round label, family, measurand) -> score
        order = []
        for r in hist.to_dict("records"):
            key = (f"{r['round_date']} {r['round']}", "En" if r["score"] == "en" else "z")
            if key[0] not in order:
                order.append(key[0])
            if r["signal"] != "not-scored" and np.isfinite(r["score_value"]):
                points[(key[0], key[1], r["measurand"])] = float(r["score_value"])
        this = f"{rd['date']} {rd['id']} (this round)"
        order.append(this)
        for sc, sig, m, v in zip(table["score"], table["signal"], measurands, table["official"]):
            if sig != "not-scored" and isinstance(v, float) and math.isfinite(v):
                points[(this, "En" if sc == "en" else "z", m)] = v
        series = sorted({(f, m) for _, f, m in points}, key=lambda fm_: (fm_[0] != "z", fm_[1]))
        limits = [("z", ACTION_LIMIT, "action"), ("z", WARNING_LIMIT, "warning"),
                  ("En", EN_ACTION_LIMIT, "action")]
        limits = [x for x in limits if any(f == x[0] for f, _ in series)]
        top = end + 2
        hs.write_string(top, 0, "Chart data: your score by round", fm.bold)
        heads = ["Round"] + [f"{m} ({'En' if f == 'En' else 'z, z′, ζ'})" for f, m in series]
        heads += [f"{sign}{lim:g} {word} limit ({f})" for f, lim, word in limits for sign in "+-"]
        for j, h in enumerate(heads):
            hs.write_string(top + 1, j, h, fm.head)
        first, last = top + 2, top + 1 + len(order)
        for i, label in enumerate(order):
            hs.write_string(first + i, 0, label)
            for j, (f, m) in enumerate(series, start=1):
                _write(hs, first + i, j, points.get((label, f, m)), fm.decimals(2))
            for j, (f, lim, word) in enumerate(limits):
                hs.write_number(first + i, 1 + len(series) + 2 * j, lim)
                hs.write_number(first + i, 2 + len(series) + 2 * j, -lim)
        colours = [PALETTE[c] for c in ("blue", "orange", "green", "vermillion", "purple", "sky",
                                        "black", "yellow")]
        shapes = ["circle", "diamond", "triangle", "square", "x", "star", "plus", "dash"]
        row = 3
        for family, title in (("z", "z-like scores (z, z′, ζ)"), ("En", "En numbers")):
            cols = [j for j, (f, _) in enumerate(series, start=1) if f == family]
            if not cols:
                continue
            ch = wb.add_chart({"type": "line"})
            cats = ["History", first, 0, last, 0]
            for k, j in enumerate(cols):  # shape and colour both vary: colour is not the only cue
                c = colours[k % len(colours)]
                ch.add_series({"name": ["History", top + 1, j], "categories": cats,
                               "values": ["History", first, j, last, j],
                               "line": {"color": c, "width": 1.5},
                               "marker": {"type": shapes[k % len(shapes)], "size": 6,
                                          "fill": {"color": c}, "border": {"color": c}}})
            hidden = []  # legend entries of the "-" limit lines (the "+" line names the pair)
            n_series = len(cols)
            for j, (f, lim, word) in enumerate(limits):
                if f != family:
                    continue
                for sign in (0, 1):
                    col = 1 + len(series) + 2 * j + sign
                    if sign:
                        hidden.append(n_series)
                    n_series += 1
                    ch.add_series({"name": f"{word} limit ±{lim:g}", "categories": cats,
                                   "values": ["History", first, col, last, col],
                                   "line": {"color": "#555555", "width": 0.75,
                                            "dash_type": "solid" if word == "action" else "dash"},
                                   "marker": {"type": "none"}})
            values = [v for (_, f, _m), v in points.items() if f == family]
            bound = (ACTION_LIMIT if family == "z" else EN_ACTION_LIMIT) + 1
            if max(abs(v) for v in values) <= bound:
                ch.set_y_axis({"min": -bound, "max": bound, "name": "score"})
            else:
                ch.set_y_axis({"name": "score"})
            ch.set_title({"name": f"Laboratory {lab}: {title} by round"})
            ch.set_legend({"position": "bottom", "delete_series": hidden})
            ch.show_blanks_as("gap")
            ch.set_size({"width": 640, "height": 320})
            hs.insert_chart(row, 12, ch)
            row += 17
        hs.freeze_panes(4, 0)
        _widths(hs, [24, 14, 14, 9, 11, 12, 10, 8, 10, 18, 40])
        _print_setup(hs, rd["id"])
    for name, frame in sheets.items():
        if len(frame):
            xs = wb.add_worksheet(name.capitalize()[:31])
            _table(xs, fm, 0, frame, list(frame.columns))
            xs.freeze_panes(1, 0)
            _widths(xs, _fit(frame, list(frame.columns), decimals={c: 4 for c in frame.columns}))
            _print_setup(xs, rd["id"], 0)
    data = wb.add_worksheet("data")
    rows, digests = _data_rows(table)
    _table(data, fm, 0, rows, [*SCORE_COLUMNS, ROW_DIGEST_COLUMN])
    meta = wb.add_worksheet("round")
    pairs = [("generator", "roundscore"), ("format", LAB_FORMAT), ("scheme", rd["scheme"]), ("round", rd["id"]),
             ("round_date", rd["date"]), ("lab", lab), ("title", rd["title"])]
    pairs.append((DIGEST_KEY, sheet_digest(pairs, digests)))
    meta.write_row(0, 0, ["key", "value"], fm.head)
    for i, (k, v) in enumerate(pairs, start=1):
        meta.write_string(i, 0, k)
        _write(meta, i, 1, v)
    wb.close()
