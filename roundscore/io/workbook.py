"""The circulated workbooks: the round summary and one confidential score sheet per lab.

Written with xlsxwriter (several times faster than openpyxl for writing and
able to add native workbook charts). Every text cell is written as a string,
never as a formula, whatever it starts with. The creation time is fixed so
the same round gives the same workbook bytes.

A lab's sheet holds that lab's results, scores and signals, the round's
statistics and where the lab stands among all labs (by rank, with other labs
shown only as anonymous codes in the shared statistics, never their names).
Two sheets, ``data`` and ``round``, are machine-readable (the history
commands read them back): their layout is a contract, see
:data:`~roundscore.evaluate.SCORE_COLUMNS`.
"""

from __future__ import annotations

import datetime as dt
import math
from pathlib import Path
from typing import Any, Iterable

import numpy as np
import pandas as pd
import xlsxwriter
from xlsxwriter.utility import xl_rowcol_to_cell

from ..evaluate import SCORE_COLUMNS, STATISTICS_COLUMNS, RoundEvaluation
from ..look import CAUTION, SIGNAL_COLOUR, SIGNAL_WORD, signal_label

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
    if v is None or (isinstance(v, float) and math.isnan(v)):
        ws.write_blank(r, c, None, fmt)
    elif isinstance(v, (bool, np.bool_)):
        ws.write_boolean(r, c, bool(v), fmt)
    elif isinstance(v, (int, float, np.integer, np.floating)):
        ws.write_number(r, c, float(v), fmt)
    else:
        ws.write_string(r, c, str(v), fmt)


def _table(ws, fm: _Formats, top: int, frame: pd.DataFrame, columns: Iterable[str],
           headers: Iterable[str] | None = None, decimals: dict[str, int | None] | None = None,
           signal_col: str | None = None, words: str = "signals",
           row_decimals: dict[str, int | None] | None = None) -> int:
    """Write a header row and the frame's columns; returns the row after the table.

    ``decimals`` fixes a column's decimals; ``row_decimals`` maps measurand
    → decimals, applied row by row (by the row's ``measurand``) to the value
    columns of :data:`VALUE_COLUMNS` (with one more decimal for
    uncertainties and σ_pt).
    """
    cols = list(columns)
    for j, h in enumerate(headers or cols):
        ws.write_string(top, j, h, fm.head)
    data = {c: (frame[c].tolist() if c in frame else [None] * len(frame)) for c in cols}
    meas = frame["measurand"].tolist() if row_decimals and "measurand" in frame else None
    for i in range(len(frame)):
        d_row = row_decimals.get(meas[i]) if meas is not None else None
        for j, c in enumerate(cols):
            v = data[c][i]
            fmt = None
            if decimals and c in decimals:
                fmt = fm.decimals(decimals[c])
            elif meas is not None and c in VALUE_COLUMNS and d_row is not None:
                fmt = fm.decimals(d_row + VALUE_COLUMNS[c])
            if c == signal_col and isinstance(v, str):
                _write(ws, top + 1 + i, j, signal_label(v, words), fm.signal.get(v))
                continue
            _write(ws, top + 1 + i, j, v, fmt)
    return top + 1 + len(frame)


#: Value columns shown with the measurand's decimals (+0) or one more (+1: uncertainties, σ_pt, robust SDs).
VALUE_COLUMNS = {"result": 0, "assigned": 0, "d": 0, "robust_mean": 0, "median": 0, "u_assigned": 1,
                 "sigma_pt": 1, "robust_sd": 1, "made": 1, "niqr": 1}
#: Widths (characters) a fitted column may take (common practice: readable without wrapping, notes capped).
MIN_WIDTH, MAX_WIDTH = 6, 60
#: Rows looked at to fit a column's width (enough to see the longest codes and notes; keeps big rounds fast).
FIT_ROWS = 500


def _fit(frame: pd.DataFrame, columns: Iterable[str], headers: Iterable[str] | None = None,
         decimals: dict[str, int | None] | None = None, signal_col: str | None = None) -> list[int]:
    """Column widths that fit the header's longest word and the values (first :data:`FIT_ROWS` rows)."""
    cols = list(columns)
    heads = list(headers or cols)
    out = []
    for c, h in zip(cols, heads):
        longest = max((len(w) for w in str(h).split()), default=0)
        if c in frame:
            for v in frame[c].iloc[:FIT_ROWS].tolist():
                if isinstance(v, float):
                    if math.isnan(v):
                        continue
                    d = (decimals or {}).get(c)
                    n = len(f"{v:.{d}f}") if d is not None else len(f"{v:.6g}")
                elif c == signal_col:
                    n = len(str(v)) + 8
                else:
                    n = len(str(v))
                longest = max(longest, n)
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
    """The summary workbook for circulation: settings, statistics, all scores by lab code, charts, audit."""
    rnd = ev.round
    wb = xlsxwriter.Workbook(str(path), _OPTIONS)
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
    r = _table(ws, fm, r, frame.rename(columns={"d": "assigned", "e": "u_assigned", "f": "sigma_pt"}),
               ["a", "b", "c", "assigned", "u_assigned", "sigma_pt", "g", "h", "i", "j", "k"], head,
               row_decimals=dec) + 1
    for w in ev.warnings:
        ws.write_string(r, 0, "Note: " + w)
        r += 1
    _widths(ws, [max(w, 12) for w in _fit(frame, list("abcdefg"), head[:7])] + [40, 40, 16, 60])
    ws.freeze_panes(head_row + 1, 1)
    ws.set_row(head_row, 30)
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
        g = sc[sc["measurand"] == name]
        if not len(g) or not m.scored:
            continue
        vals = g[SCORE_FIELD[m.settings.score]].to_numpy(float)
        keep = np.isfinite(vals)
        order = np.argsort(vals[keep], kind="stable")
        block = pd.DataFrame({"lab": g["lab"].to_numpy()[keep][order], "score": vals[keep][order],
                              "signal": g["signal"].to_numpy()[keep][order]})
        if not len(block):
            continue
        c, top = _score_chart(wb, cd, fm, top, block, f"{name} ({m.settings.score})", m.settings.score,
                              rnd.words, f"{name}: {_SCORE_NAME[m.settings.score]} by laboratory (ranked)")
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
#: Workbook chart marker shapes matching roundscore.look.SIGNAL_MARKER (circle, triangle, square).
_CHART_MARKER = {"acceptable": "circle", "warning": "triangle", "action": "square"}
#: Up to this many bars each data point is coloured by its signal (beyond, the file grows by a point
#: entry per bar per chart; the marker series still carry the signals).
CHART_POINT_COLOURS = 200


def _score_chart(wb, sheet, fm: _Formats, top: int, block: pd.DataFrame, label: str, score: str, words: str,
                 title: str) -> tuple[Any, int]:
    """Write one chart's data block at ``top`` on ``sheet`` and return (chart, next free row).

    A column chart of the scores combined with a line chart (no lines) of one
    marker series per signal, named by the signal word (shape and word, not
    colour alone), and the warning / action limits (ISO 13528 §9.4: ±2, ±3;
    En: ±1) as dashed and solid lines.
    """
    from ..stats.scores import EN_ACTION, Z_ACTION, Z_WARNING

    limits = [(EN_ACTION, "action", "solid")] if score == "en" else \
        [(Z_WARNING, "warning", "dash"), (Z_ACTION, "action", "solid")]
    sname = sheet.get_name()
    heads = ["Chart", "Lab", "Score", *(SIGNAL_WORD[words][s] for s in _CHART_MARKER)]
    heads += [f"{sign}{lim:g} {word} limit" for lim, word, _ in limits for sign in "+-"]
    for j, h in enumerate(heads):
        sheet.write_string(top, j, h, fm.head)
    first, last = top + 1, top + len(block)
    for i, (lab, v, sig) in enumerate(zip(block["lab"], block["score"], block["signal"])):
        r = first + i
        sheet.write_string(r, 0, label)
        sheet.write_string(r, 1, str(lab))
        sheet.write_number(r, 2, float(v), fm.decimals(2))
        for j, s in enumerate(_CHART_MARKER, start=3):
            if sig == s:
                sheet.write_number(r, j, float(v), fm.decimals(2))
        for j, (lim, _, _) in enumerate(limits):
            sheet.write_number(r, 6 + 2 * j, lim)
            sheet.write_number(r, 7 + 2 * j, -lim)
    cats = [sname, first, 1, last, 1]
    col = wb.add_chart({"type": "column"})
    series = {"name": "score", "categories": cats, "values": [sname, first, 2, last, 2],
              "fill": {"color": "#9DB9D3"}, "border": {"color": "#555555"}, "gap": 40}
    if len(block) <= CHART_POINT_COLOURS:
        series["points"] = [{"fill": {"color": _tint(SIGNAL_COLOUR.get(s, SIGNAL_COLOUR["not-scored"]))},
                             "border": {"color": "#555555"}} for s in block["signal"]]
    col.add_series(series)
    line = wb.add_chart({"type": "line"})
    for j, s in enumerate(_CHART_MARKER, start=3):
        if (block["signal"] == s).any():
            line.add_series({"name": [sname, top, j], "categories": cats, "values": [sname, first, j, last, j],
                             "line": {"none": True},
                             "marker": {"type": _CHART_MARKER[s], "size": 6, "fill": {"color": SIGNAL_COLOUR[s]},
                                        "border": {"color": "#000000"}}})
    hidden = []
    n_series = 1 + sum(1 for s in _CHART_MARKER if (block["signal"] == s).any())
    for j, (lim, word, dash) in enumerate(limits):
        for sign in (0, 1):
            c = 6 + 2 * j + sign
            if sign:
                hidden.append(n_series)
            n_series += 1
            line.add_series({"name": f"{word} limit ±{lim:g}", "categories": cats, "values": [sname, first, c, last, c],
                             "line": {"color": "#444444", "width": 1, "dash_type": dash}, "marker": {"type": "none"}})
    col.combine(line)
    bound = max(limits[-1][0] + 1, 4.0)
    vmax = float(np.nanmax(np.abs(block["score"].to_numpy(float))))
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
        "statistics": ev.statistics,
        "decimals": {n: m.decimals for n, m in rnd.measurands.items()},
        "extras": {k: ev.lab_rows(k, lab) for k, v in ev.extras.items()
                   if isinstance(v, pd.DataFrame) and "lab" in v.columns},
        "items": ev.extras.get("items"),
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
    r += 2
    table = own.copy()
    table["standing"] = [
        f"{int(k)} of {int(n)}" if isinstance(k, float) and not math.isnan(k) else ""
        for k, n in zip(table["rank"], table["n_scored"])
    ]
    table["official"] = [rec[SCORE_FIELD[rec["score"]]] for rec in table.to_dict("records")]
    cols = ["measurand", "unit", "n_replicates", "result", "assigned", "u_assigned", "sigma_pt", "score",
            "official", "signal", "standing", "z", "z_prime", "zeta", "en", "d", "d_percent", "note"]
    head = ["Measurand", "Unit", "Replicates", "Your result", "Assigned value", "u(x_pt)", "σ_pt", "Score",
            "Your score", "Signal", "Rank by |score| (1 = closest)", "z", "z′", "ζ", "En", "D", "D %", "Note"]
    top = r
    end = _table(ws, fm, r, table, cols, head,
                 {"official": 2, "z": 2, "z_prime": 2, "zeta": 2, "en": 2, "d_percent": 1},
                 "signal", rd["words"], row_decimals=payload["decimals"])
    ws.freeze_panes(top + 1, 1)
    ws.set_row(top, 30)  # the wrapped head
    _widths(ws, [max(w, 16 if j == 0 else 7) for j, w in enumerate(_fit(table, cols, head, {"official": 2, "z": 2, "z_prime": 2, "zeta": 2,
                                                              "en": 2, "d_percent": 1, "result": 4,
                                                              "assigned": 4, "u_assigned": 4, "sigma_pt": 4,
                                                              "d": 4}, "signal"))])
    # Native charts of this lab's official score per measurand (z-like scores and En apart: their limits differ).
    chart_rows = []
    for family, members in (("z", ("z", "z-prime", "zeta")), ("en", ("en",))):
        part = table[table["score"].isin(members) & np.isfinite(table["official"].astype(float))]
        if len(part):
            chart_rows.append((family, pd.DataFrame({"lab": part["measurand"].to_numpy(),
                                                     "score": part["official"].astype(float).to_numpy(),
                                                     "signal": part["signal"].to_numpy()})))
    if chart_rows:
        cd = wb.add_worksheet("Chart data")
        cd.write_string(0, 0, f"Data of the charts: laboratory {lab}'s scores by measurand", fm.bold)
        at, row = 2, end + 1
        for family, block in chart_rows:
            name = "z, z′, ζ" if family == "z" else "En"
            c, at = _score_chart(wb, cd, fm, at, block, name, family, rd["words"],
                                 f"Laboratory {lab}: {name} by measurand")
            c.set_x_axis({"name": "measurand", "num_font": {"rotation": -45, "size": 8}, "label_position": "low"})
            c.set_size({"width": 640, "height": 320})
            ws.insert_chart(row, 0, c)
            row += 17
        _widths(cd, [12, 16, 10, 14, 14, 14, 10, 10, 10, 10])
    _print_setup(ws, rd["id"], top)
    hist = payload.get("history")
    if hist is not None and len(hist):
        # History: the lab's earlier rounds of this scheme (archive rows, roundscore.archive
        # HISTORY_COLUMNS), then a native line chart of the score per measurand over those
        # rounds and this one, with the limits of ISO 13528 (z-like 2 and 3; En 1).
        from ..history import ACTION_LIMIT, EN_ACTION_LIMIT, WARNING_LIMIT
        from ..look import PALETTE

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
        field = {"z": "z", "z-prime": "z_prime", "zeta": "zeta", "en": "en"}
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
        for r in own.to_dict("records"):
            v = r.get(field.get(r["score"], ""), math.nan)
            if r["signal"] != "not-scored" and isinstance(v, float) and math.isfinite(v):
                points[(this, "En" if r["score"] == "en" else "z", r["measurand"])] = v
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
    st = wb.add_worksheet("Round statistics")
    _table(st, fm, 0, payload["statistics"], STATISTICS_COLUMNS, row_decimals=payload["decimals"])
    st.freeze_panes(1, 1)
    _widths(st, _fit(payload["statistics"], STATISTICS_COLUMNS, decimals={c: 4 for c in STATISTICS_COLUMNS}))
    _print_setup(st, rd["id"], 0)
    for name, frame in payload["extras"].items():
        if len(frame):
            xs = wb.add_worksheet(name.capitalize()[:31])
            _table(xs, fm, 0, frame, list(frame.columns))
            xs.freeze_panes(1, 0)
            _widths(xs, _fit(frame, list(frame.columns), decimals={c: 4 for c in frame.columns}))
            _print_setup(xs, rd["id"], 0)
    data = wb.add_worksheet("data")
    _table(data, fm, 0, own, SCORE_COLUMNS)
    meta = wb.add_worksheet("round")
    pairs = [("generator", "roundscore"), ("format", LAB_FORMAT), ("scheme", rd["scheme"]), ("round", rd["id"]),
             ("round_date", rd["date"]), ("lab", lab), ("title", rd["title"])]
    meta.write_row(0, 0, ["key", "value"], fm.head)
    for i, (k, v) in enumerate(pairs, start=1):
        meta.write_string(i, 0, k)
        _write(meta, i, 1, v)
    wb.close()
