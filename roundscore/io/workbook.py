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
from ..look import CAUTION, SIGNAL_COLOUR, signal_label

__all__ = ["write_summary", "write_lab_workbook", "LAB_FORMAT", "FIXED_TIME", "lab_payload"]

LAB_FORMAT = 1
FIXED_TIME = dt.datetime(2000, 1, 1)
_OPTIONS = {"strings_to_formulas": False, "strings_to_urls": False, "strings_to_numbers": False,
            "nan_inf_to_errors": True}


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
           signal_col: str | None = None, words: str = "signals") -> int:
    cols = list(columns)
    for j, h in enumerate(headers or cols):
        ws.write_string(top, j, h, fm.head)
    data = {c: (frame[c].tolist() if c in frame else [None] * len(frame)) for c in cols}
    for i in range(len(frame)):
        for j, c in enumerate(cols):
            v = data[c][i]
            fmt = None
            if decimals and c in decimals:
                fmt = fm.decimals(decimals[c])
            if c == signal_col and isinstance(v, str):
                _write(ws, top + 1 + i, j, signal_label(v, words), fm.signal.get(v))
                continue
            _write(ws, top + 1 + i, j, v, fmt)
    return top + 1 + len(frame)


def _widths(ws, widths: list[int]) -> None:
    for j, w in enumerate(widths):
        ws.set_column(j, j, w)


def _print_setup(ws, round_id: str) -> None:
    ws.set_landscape()
    ws.fit_to_pages(1, 0)
    ws.set_header(f"&L{round_id}&RPage &P of &N")


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
    r = _table(ws, fm, r, pd.DataFrame(rows), list("abcdefghijk"), head) + 1
    for w in ev.warnings:
        ws.write_string(r, 0, "Note: " + w)
        r += 1
    _widths(ws, [16, 10, 12, 14, 12, 12, 8, 40, 40, 16, 60])
    ws.freeze_panes(0, 1)
    _print_setup(ws, rnd.id)
    # Statistics
    ws = wb.add_worksheet("Statistics")
    _table(ws, fm, 0, ev.statistics, STATISTICS_COLUMNS)
    ws.freeze_panes(1, 1)
    _widths(ws, [16, 10] + [12] * 12)
    _print_setup(ws, rnd.id)
    # Scores
    ws = wb.add_worksheet("Scores")
    sc = ev.scores
    end = _table(ws, fm, 0, sc, _SCORE_COLS, _SCORE_HEAD, _score_decimals(ev), "signal", rnd.words)
    ws.freeze_panes(1, 2)
    ws.autofilter(0, 0, max(end - 1, 1), len(_SCORE_COLS) - 1)
    _widths(ws, [8, 16, 9, 10, 11, 12, 10, 10, 7, 7, 7, 7, 9, 7, 18, 50])
    _print_setup(ws, rnd.id)
    # Charts: one native column chart of the official score per measurand, labs by code.
    ch = wb.add_worksheet("Charts")
    row = 0
    score_col = {"z": 8, "z-prime": 9, "zeta": 10, "en": 11}
    for name, m in ev.measurands.items():
        idx = np.flatnonzero((sc["measurand"] == name).to_numpy())
        if not len(idx) or not m.scored:
            continue
        first, last = int(idx[0]) + 1, int(idx[-1]) + 1
        c = wb.add_chart({"type": "column"})
        col = score_col[m.settings.score]
        c.add_series({"name": f"{name} {m.settings.score}",
                      "categories": ["Scores", first, 0, last, 0],
                      "values": ["Scores", first, col, last, col],
                      "fill": {"color": "#0072B2"}, "gap": 50})
        lim = 1 if m.settings.score == "en" else 2
        c.set_title({"name": f"{name}: {m.settings.score} by lab"})
        c.set_y_axis({"name": m.settings.score, "major_gridlines": {"visible": True},
                      "min": -max(4, lim * 2), "max": max(4, lim * 2)})
        c.set_legend({"none": True})
        c.set_size({"width": 900, "height": 300})
        ch.insert_chart(row, 0, c)
        row += 16
    # Left out / audit
    ws = wb.add_worksheet("Audit")
    _table(ws, fm, 0, ev.audit, list(ev.audit.columns))
    ws.freeze_panes(1, 0)
    _widths(ws, [16, 8, 16, 26, 90])
    _print_setup(ws, rnd.id)
    for name, frame in ev.extras.items():
        if isinstance(frame, pd.DataFrame) and len(frame.columns):
            ws = wb.add_worksheet(name.capitalize()[:31])
            _table(ws, fm, 0, frame, list(frame.columns))
            ws.freeze_panes(1, 0)
            _widths(ws, [16] * len(frame.columns))
            _print_setup(ws, rnd.id)
    wb.close()


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
        "extras": {k: v[v["lab"] == lab] for k, v in ev.extras.items()
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
    table["official"] = [row[{"z": "z", "z-prime": "z_prime", "zeta": "zeta", "en": "en"}[row["score"]]]
                         for _, row in table.iterrows()]
    cols = ["measurand", "unit", "n_replicates", "result", "assigned", "u_assigned", "sigma_pt", "score",
            "official", "signal", "standing", "z", "z_prime", "zeta", "en", "d", "d_percent", "note"]
    head = ["Measurand", "Unit", "Replicates", "Your result", "Assigned value", "u(x_pt)", "σ_pt", "Score",
            "Your score", "Signal", "Rank by |score| (1 = closest)", "z", "z′", "ζ", "En", "D", "D %", "Note"]
    top = r
    end = _table(ws, fm, r, table, cols, head,
                 {"official": 2, "z": 2, "z_prime": 2, "zeta": 2, "en": 2, "d_percent": 1},
                 "signal", rd["words"])
    ws.freeze_panes(top + 1, 1)
    _widths(ws, [16, 9, 10, 11, 12, 10, 10, 8, 10, 18, 14, 7, 7, 7, 7, 9, 7, 50])
    if len(table):
        c = wb.add_chart({"type": "bar"})
        c.add_series({"name": "Your scores", "categories": ["Scores", top + 1, 0, end - 1, 0],
                      "values": ["Scores", top + 1, 8, end - 1, 8], "fill": {"color": "#0072B2"}})
        c.set_title({"name": f"Laboratory {lab}: scores by measurand"})
        c.set_x_axis({"min": -4, "max": 4, "major_unit": 1, "major_gridlines": {"visible": True}})
        c.set_legend({"none": True})
        c.set_size({"width": 620, "height": 60 + 28 * len(table)})
        ws.insert_chart(end + 1, 0, c)
    _print_setup(ws, rd["id"])
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
    _table(st, fm, 0, payload["statistics"], STATISTICS_COLUMNS)
    st.freeze_panes(1, 1)
    _widths(st, [16, 10] + [12] * 12)
    _print_setup(st, rd["id"])
    for name, frame in payload["extras"].items():
        if len(frame):
            xs = wb.add_worksheet(name.capitalize()[:31])
            _table(xs, fm, 0, frame, list(frame.columns))
            _widths(xs, [14] * len(frame.columns))
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
