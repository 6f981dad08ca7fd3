"""A lab's history across rounds as files: ``history.xlsx`` (table and native line charts), ``history.png``/``.svg``.

Written by ``roundscore history show --out`` from the archive's rows
(:data:`roundscore.history.store.HISTORY_COLUMNS`), through the helpers every
workbook shares (:mod:`roundscore.outputs.workbook_base`) and in the tool's look
(:mod:`roundscore.outputs.look`): the signal cells show the symbol and word on
the signal's tint, the chart markers and colours are those of every other
output, the limits those of each score's family (:mod:`roundscore.model.scores`).

Sheets: ``history`` (a head naming the laboratory, its codes, the schemes and their
round titles, the date produced; then one row per round × measurand: the archive's columns
under their display headings, :mod:`roundscore.outputs.headings`, values to decimals set by
σ_pt's size, :func:`shown_decimals`, and the trend rules firing at the row), ``charts`` (a
line chart per scheme × measurand with the round ids on the axis, the warning and action
limits, and each point where a rule fired ringed and labelled) and ``chart_data``. The
figures draw the same series with :mod:`roundscore.outputs.history_chart`.
"""

from __future__ import annotations

from pathlib import Path
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd
import xlsxwriter

from roundscore.model.scores import SCORE_FAMILIES, ScoreFamily, family_of, score_symbol
from roundscore.model.signals import SCORED_SIGNALS, SIGNALS
from roundscore.outputs.headings import headings
from roundscore.outputs.history_chart import draw_series, legend_handles, rule_tag
from roundscore.outputs.look import CAUTION, LIMIT_LINE, SIGNAL_CHART_MARKER, SIGNAL_COLOUR, SIGNAL_WORD
from roundscore.outputs.outfolder import atomic_folder
from roundscore.outputs.workbook_base import (FIXED_TIME, OPTIONS, Chart, Formats,
                                              fit_widths, print_setup, score_axis, set_widths, value_axis, write_table)

__all__ = ["HISTORY_TABLE_COLUMNS", "HISTORY_FILES", "write_history_outputs", "series_groups", "family_for",
           "shown_decimals", "series_chart", "rules_of", "head_lines"]

#: The columns of the ``history`` sheet (and of the terminal table of ``history show``).
HISTORY_TABLE_COLUMNS = ("round_date", "scheme", "round", "measurand", "unit", "result", "assigned",
                         "sigma_pt", "score", "score_value", "signal", "rules", "note")
#: The files written, in order.
HISTORY_FILES = ("history.xlsx", "history.png", "history.svg")
#: Height (pixels) of a series chart and the rows (of 20 px) from one chart to the next: taller than a score
#: sheet's chart, for the round ids under the axis and the legend.
SERIES_HEIGHT, SERIES_ROWS = 380, 20
#: Grey of the score line and the limit lines.
_LIMIT_GREY = "#555555"


def write_history_outputs(frame: pd.DataFrame, out: Path, *, lab: str, caution: str = CAUTION,
                          protect: tuple[tuple[Path, str], ...] = (), paper: str = "a4",
                          head: Sequence[str] = ()) -> list[Path]:
    """Write ``history.xlsx``, ``history.png`` and ``history.svg`` as the output folder ``out``.

    ``out`` is a roundscore output folder (new, empty, or written by an
    earlier ``history show --out``), replaced whole when all files are
    complete (:func:`roundscore.outputs.outfolder.atomic_folder`); ``protect``
    (the archive) may not lie inside it. ``caution`` is written under the
    table and the charts; ``paper`` ("a4" or "letter") is the workbook's print paper; ``head`` the lines
    heading the workbook and the figure (:func:`head_lines`). The frame's optional ``rules`` column holds the
    trend rules firing at each row ("3, 4"; "" for none).
    """
    frame = frame if "rules" in frame.columns else frame.assign(rules="")
    with atomic_folder(out, kind="history", protect=protect) as temp:
        _write_workbook(frame, temp / HISTORY_FILES[0], lab=lab, caution=caution, paper=paper, head=head)
        _write_figure(frame, [temp / HISTORY_FILES[1], temp / HISTORY_FILES[2]], lab=lab, caution=caution,
                      head=head)
    return [out / n for n in HISTORY_FILES]


def head_lines(frame: pd.DataFrame, *, lab: str, name: str = "", produced: str = "", archive: str = "") -> list[str]:
    """What heads a history: the laboratory and its codes, each scheme with its rounds' titles, the period,
    the date produced and the archive."""
    who = f"Laboratory {name} ({lab})" if name else f"Laboratory {lab}"
    lines = [who]
    for scheme, part in frame.groupby("scheme", sort=True):
        codes = ", ".join(sorted(set(part["lab"].astype(str))))
        titles = "; ".join(t for t in dict.fromkeys(part["title"].astype(str)) if t)
        lines.append(f"Scheme {scheme} (code {codes})" + (f": {titles}" if titles else ""))
    if len(frame):
        lines.append(f"Rounds dated {frame['round_date'].min()} to {frame['round_date'].max()}")
    if produced or archive:
        lines.append(" · ".join(x for x in (f"produced {produced}" if produced else "",
                                            f"archive {archive}" if archive else "") if x))
    return lines


def rules_of(text: object) -> list[int]:
    """The rule numbers of a ``rules`` cell ("3, 4" → [3, 4])."""
    return [int(t) for t in str(text or "").replace(",", " ").split() if t.isdigit()]


def series_groups(frame: pd.DataFrame) -> list[tuple[str, pd.DataFrame]]:
    """The history cut into its series, one per scheme × measurand: ("SCHEME / MEASURAND", rows)."""
    groups = []
    for (scheme, measurand), part in frame.groupby(["scheme", "measurand"], sort=True):
        groups.append((f"{scheme} / {measurand}", part.reset_index(drop=True)))
    return groups


def family_for(part: pd.DataFrame) -> ScoreFamily:
    """The limits a series is drawn with: its scores' family (En's when every round is scored by En); the
    z-like ones for a series that mixes families."""
    families = {family_of(str(s)).name for s in part["score"]}
    return SCORE_FAMILIES[families.pop() if len(families) == 1 else "z-like"]


def _write_workbook(frame: pd.DataFrame, path: Path, *, lab: str, caution: str, paper: str,
                    head: Sequence[str]) -> None:
    book = xlsxwriter.Workbook(str(path), OPTIONS)
    book.set_properties({"title": head[0] if head else f"History of lab {lab}", "created": FIXED_TIME})
    fm = Formats(book)
    table = book.add_worksheet("history")
    charts = book.add_worksheet("charts")
    data = book.add_worksheet("chart_data")
    columns = list(HISTORY_TABLE_COLUMNS)
    heads = headings(columns)
    for i, line in enumerate(head):
        table.merge_range(i, 0, i, len(columns) - 1, line, fm.bold if i == 0 else None)
    top = len(head) + 1 if head else 0
    shown = frame.assign(score=[score_symbol(str(s)) for s in frame["score"]])  # ζ, not zeta
    widths = fit_widths(shown, columns, heads, decimals={"score_value": 2}, signal_col="signal")
    widths = [min(w, 40) for w in widths]
    end = write_table(table, fm, top, shown, columns, heads, decimals={"score_value": 2}, signal_col="signal",
                      row_decimals=shown_decimals(frame), widths=widths)
    table.merge_range(end + 1, 0, end + 1, len(columns) - 1, caution, fm.caution)
    table.set_row(end + 1, 45)
    table.freeze_panes(top + 1, 0)
    set_widths(table, widths)
    where: dict[str, Any] = {"paper": paper, "lab": lab}
    print_setup(table, "History", top, widths=widths, last_row=end + 1, title="history", **where)
    markers = ", ".join(f"{SIGNALS[s].shape} {SIGNALS[s].word()}" for s in SCORED_SIGNALS)
    charts.merge_range(0, 0, 1, 9, f"{head[0] if head else 'Lab ' + lab}: scores by round; lines at the warning and "
                       f"action limits. Markers: {markers}; a large ring: a trend rule fired (R1-R4).", fm.wrap)
    top, placed = 0, []
    for k, (label, part) in enumerate(series_groups(frame)):
        chart, top = series_chart(book, data, fm, top, label, part, lab)
        charts.insert_chart(2 + SERIES_ROWS * k, 0, chart)
        placed.append(Chart(2 + SERIES_ROWS * k, SERIES_HEIGHT, 720))
    print_setup(charts, "History", widths=[10] * 10, last_row=1 + SERIES_ROWS * len(placed), charts=placed,
                title="charts", **where)
    print_setup(data, "History", widths=[20, 10, 12, 12, 12, 8, 8, 8, 8], last_row=max(top - 1, 0),
                title="chart_data", **where)
    book.close()


def shown_decimals(frame: pd.DataFrame) -> dict[str, int]:
    """The decimals each measurand's values are shown with: the archive keeps no ``decimals``, so σ_pt's size
    decides (common practice: σ_pt to 3 significant digits, results and assigned values one decimal fewer).

    >>> shown_decimals(pd.DataFrame({"measurand": ["Cd", "Cd", "I"], "sigma_pt": [0.0301, 0.05, 123.7]}))
    {'Cd': 3, 'I': 0}
    """
    out: dict[str, int] = {}
    for m, part in frame.groupby("measurand", sort=True):
        sigma = part["sigma_pt"].to_numpy(float)
        sigma = sigma[np.isfinite(sigma) & (sigma > 0)]
        if sigma.size:
            out[str(m)] = max(0, 1 - int(np.floor(np.log10(sigma.min()))))
    return out


def series_chart(book, data, fm: Formats, top: int, label: str, part: pd.DataFrame, lab: str,
                 sheet: str = "chart_data"):
    """One series' block on the sheet ``data`` (named ``sheet``) at ``top`` and its line chart; (chart, next row).

    The categories are the round ids (the axis labels sit below the plot, not on the zero line); a point
    where a trend rule fired (``part["rules"]``) is ringed by a series of its own, labelled "R3".
    """
    family = family_for(part)
    limits = [(lim, sig) for lim, sig in reversed(family.limits())]  # the action limit first
    heads = ["round", "score", *SCORED_SIGNALS, "rule"] + [f"{sign}{lim:g}" for lim, _ in limits for sign in "+-"]
    data.write_string(top, 0, label, fm.bold)
    for j, head in enumerate(heads):
        data.write_string(top + 1, j, head, fm.head)
    first = top + 2
    signal_col = {s: j for j, s in enumerate(SCORED_SIGNALS, start=2)}
    rule_col = 2 + len(SCORED_SIGNALS)
    limit_col = rule_col + 1
    true = [float(v) if np.isfinite(v) else None for v in part["score_value"].to_numpy(float)]
    axis = score_axis(true, family)  # a score beyond the fixed axis is written at its edge, and labelled
    rules = [rules_of(r) for r in (part["rules"] if "rules" in part.columns else [""] * len(part))]
    rows = zip(part["round"].astype(str), axis.drawn, part["signal"].astype(str), rules)
    for i, (round_id, value, signal, hit) in enumerate(rows):
        r = first + i
        data.write_string(r, 0, round_id)
        if value is not None:
            data.write_number(r, 1, value)
            col = signal_col.get(signal)
            if col is not None:
                data.write_number(r, col, float(value))
            if hit:
                data.write_number(r, rule_col, float(value))
        for j, bound in enumerate([v for lim, _ in limits for v in (lim, -lim)], start=limit_col):
            data.write_number(r, j, bound)
    last = first + len(part) - 1
    chart = book.add_chart({"type": "line"})
    cats = [sheet, first, 0, last, 0]
    spec = {"name": "score", "categories": cats, "values": [sheet, first, 1, last, 1],
            "line": {"color": _LIMIT_GREY, "width": 1.25}, "marker": {"type": "none"}}
    labels = axis.labels(true, ("below", "above"))
    if labels is not None:
        spec["data_labels"] = labels
    chart.add_series(spec)
    if any(rules):
        tags = [{"value": rule_tag(hit)} if hit else {"delete": True} for hit in rules]
        chart.add_series({"name": "trend rule fired", "categories": cats, "values": [sheet, first, rule_col, last,
                                                                                     rule_col],
                          "line": {"none": True}, "marker": {"type": "circle", "size": 13, "fill": {"none": True},
                                                             "border": {"color": "#000000", "width": 1.25}},
                          "data_labels": {"value": False, "custom": tags, "position": "above",
                                          "font": {"bold": True, "size": 8}}})
    for s, j in signal_col.items():
        chart.add_series({"name": SIGNAL_WORD["signals"][s], "categories": cats,
                          "values": [sheet, first, j, last, j], "line": {"none": True},
                          "marker": {"type": SIGNAL_CHART_MARKER[s], "size": 7, "fill": {"color": SIGNAL_COLOUR[s]},
                                     "border": {"color": "#000000"}}})
    for j, (_lim, sig) in enumerate(limits):
        for sign in (0, 1):
            col = limit_col + 2 * j + sign
            chart.add_series({"name": f"{sig} limit ±{_lim:g}", "categories": cats,
                              "values": [sheet, first, col, last, col],
                              "line": {"color": _LIMIT_GREY, "width": 0.75, "dash_type": LIMIT_LINE[sig]["chart"]},
                              "marker": {"type": "none"}})
    chart.set_title({"name": f"{lab}: {label}", "name_font": {"size": 11}})
    chart.set_y_axis(value_axis("score", axis.limit))
    chart.set_x_axis({"name": "round", "label_position": "low", "num_font": {"rotation": -45 if len(part) > 6 else 0}})
    chart.show_blanks_as("gap")
    n_series = 1 + len(signal_col) + (1 if any(rules) else 0)
    chart.set_legend({"position": "bottom", "delete_series": [0] + [n_series + 2 * j + 1 for j in range(len(limits))]})
    chart.set_size({"width": 720, "height": SERIES_HEIGHT})
    return chart, last + 3


def _write_figure(frame: pd.DataFrame, paths: Sequence[Path], *, lab: str, caution: str,
                  head: Sequence[str] = ()) -> None:
    import matplotlib
    from matplotlib.figure import Figure

    groups = series_groups(frame)
    top = 0.35 + 0.16 * len(head)
    with matplotlib.rc_context({"svg.hashsalt": "roundscore", "font.size": 9}):
        fig = Figure(figsize=(8.0, 1.2 + top + 2.6 * len(groups)), layout="constrained")
        if head:
            fig.suptitle("\n".join(head), x=0.01, ha="left", fontsize=8)
        axes = fig.subplots(len(groups), 1, squeeze=False)[:, 0]
        for ax, (label, part) in zip(axes, groups):
            draw_series(ax, rounds=part["round"].astype(str).tolist(), values=part["score_value"].to_numpy(float),
                        signals=part["signal"].astype(str).tolist(), family=family_for(part),
                        rules=[rules_of(r) for r in part["rules"]])
            ax.set_title(f"{lab}: {label}", loc="left")
        fig.legend(handles=legend_handles(), loc="outside lower center", ncols=6, frameon=False, fontsize=7)
        fig.text(0.01, 0.0, caution, fontsize=6, va="bottom", ha="left", wrap=True)
        for path in paths:
            meta = {"Date": None} if path.suffix == ".svg" else {"Software": None}
            fig.savefig(path, dpi=120, metadata=meta)
