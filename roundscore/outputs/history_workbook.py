"""A lab's history across rounds as files: ``history.xlsx`` (table and native line charts), ``history.png``/``.svg``.

Written by ``roundscore history show --out`` from the archive's rows
(:data:`roundscore.history.store.HISTORY_COLUMNS`), through the helpers every
workbook shares (:mod:`roundscore.outputs.workbook_base`) and in the tool's look
(:mod:`roundscore.outputs.look`): the signal cells show the symbol and word on
the signal's tint, the chart markers and colours are those of every other
output, the limits those of each score's family (:mod:`roundscore.model.scores`).

Sheets: ``history`` (one row per round × measurand: the archive's columns under
their display headings, :mod:`roundscore.outputs.headings`; values to decimals set by
σ_pt's size, :func:`shown_decimals`), ``charts`` (a line chart per scheme × measurand
with the warning and action limits) and ``chart_data``.
"""

from __future__ import annotations

from pathlib import Path
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd
import xlsxwriter

from roundscore.model.scores import SCORE_FAMILIES, ScoreFamily, family_of
from roundscore.model.signals import SCORED_SIGNALS, SIGNALS
from roundscore.outputs.headings import headings
from roundscore.outputs.look import (CAUTION, LIMIT_LINE, SIGNAL_CHART_MARKER, SIGNAL_COLOUR, SIGNAL_MARKER,
                                     SIGNAL_WORD)
from roundscore.outputs.outfolder import atomic_folder
from roundscore.outputs.workbook_base import (CHART_HEIGHT, CHART_ROWS, FIXED_TIME, OPTIONS, Chart, Formats,
                                              fit_widths, print_setup, score_axis, set_widths, value_axis, write_table)

__all__ = ["HISTORY_TABLE_COLUMNS", "HISTORY_FILES", "write_history_outputs", "series_groups", "family_for",
           "shown_decimals"]

#: The columns of the ``history`` sheet (and of the terminal table of ``history show``).
HISTORY_TABLE_COLUMNS = ("round_date", "scheme", "round", "measurand", "unit", "result", "assigned",
                         "sigma_pt", "score", "score_value", "signal", "note")
#: The files written, in order.
HISTORY_FILES = ("history.xlsx", "history.png", "history.svg")
#: Grey of the score line and the limit lines.
_LIMIT_GREY = "#555555"


def write_history_outputs(frame: pd.DataFrame, out: Path, *, lab: str, caution: str = CAUTION,
                          protect: tuple[tuple[Path, str], ...] = (), paper: str = "a4") -> list[Path]:
    """Write ``history.xlsx``, ``history.png`` and ``history.svg`` as the output folder ``out``.

    ``out`` is a roundscore output folder (new, empty, or written by an
    earlier ``history show --out``), replaced whole when all files are
    complete (:func:`roundscore.outputs.outfolder.atomic_folder`); ``protect``
    (the archive) may not lie inside it. ``caution`` is written under the
    table and the charts; ``paper`` ("a4" or "letter") is the workbook's print paper.
    """
    with atomic_folder(out, kind="history", protect=protect) as temp:
        _write_workbook(frame, temp / HISTORY_FILES[0], lab=lab, caution=caution, paper=paper)
        _write_figure(frame, [temp / HISTORY_FILES[1], temp / HISTORY_FILES[2]], lab=lab, caution=caution)
    return [out / n for n in HISTORY_FILES]


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


def _write_workbook(frame: pd.DataFrame, path: Path, *, lab: str, caution: str, paper: str) -> None:
    book = xlsxwriter.Workbook(str(path), OPTIONS)
    book.set_properties({"title": f"History of lab {lab}", "created": FIXED_TIME})
    fm = Formats(book)
    table = book.add_worksheet("history")
    charts = book.add_worksheet("charts")
    data = book.add_worksheet("chart_data")
    columns = list(HISTORY_TABLE_COLUMNS)
    heads = headings(columns)
    table.set_row(0, 30)  # the wrapped heads
    end = write_table(table, fm, 0, frame, columns, heads, decimals={"score_value": 2}, signal_col="signal",
                      row_decimals=shown_decimals(frame))
    table.merge_range(end + 1, 0, end + 1, 9, caution, fm.caution)
    table.set_row(end + 1, 45)
    table.freeze_panes(1, 0)
    widths = fit_widths(frame, columns, heads, decimals={"score_value": 2}, signal_col="signal")
    set_widths(table, widths)
    where: dict[str, Any] = {"paper": paper, "lab": lab}
    print_setup(table, "History", 0, widths=widths, last_row=end + 1, title="history", **where)
    markers = ", ".join(f"{SIGNALS[s].shape} {SIGNALS[s].word()}" for s in SCORED_SIGNALS)
    charts.write_string(0, 0, f"Scores of lab {lab} by round; lines at the warning and action "
                              f"limits. Markers: {markers}.")
    top, placed = 0, []
    for k, (label, part) in enumerate(series_groups(frame)):
        chart, top = _series_chart(book, data, fm, top, label, part, lab)
        charts.insert_chart(2 + CHART_ROWS * k, 0, chart)
        placed.append(Chart(2 + CHART_ROWS * k, CHART_HEIGHT, 720))
    print_setup(charts, "History", widths=[10] * 10, last_row=1 + CHART_ROWS * len(placed), charts=placed,
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


def _series_chart(book, data, fm: Formats, top: int, label: str, part: pd.DataFrame, lab: str):
    """One series' block on ``chart_data`` at ``top`` and its line chart; (chart, next free row)."""
    family = family_for(part)
    limits = [(lim, sig) for lim, sig in reversed(family.limits())]  # the action limit first
    heads = ["round", "score", *SCORED_SIGNALS] + [f"{sign}{lim:g}" for lim, _ in limits for sign in "+-"]
    data.write_string(top, 0, label, fm.bold)
    for j, head in enumerate(heads):
        data.write_string(top + 1, j, head, fm.head)
    first = top + 2
    signal_col = {s: j for j, s in enumerate(SCORED_SIGNALS, start=2)}
    limit_col = 2 + len(SCORED_SIGNALS)
    true = [float(v) if np.isfinite(v) else None for v in part["score_value"].to_numpy(float)]
    axis = score_axis(true, family)  # a score beyond the fixed axis is written at its edge, and labelled
    rows = zip(part["round_date"].astype(str), part["round"].astype(str), axis.drawn, part["signal"].astype(str))
    for i, (date, round_id, value, signal) in enumerate(rows):
        r = first + i
        data.write_string(r, 0, f"{date} {round_id}")
        if value is not None:
            data.write_number(r, 1, value)
            col = signal_col.get(signal)
            if col is not None:
                data.write_number(r, col, float(value))
        for j, bound in enumerate([v for lim, _ in limits for v in (lim, -lim)], start=limit_col):
            data.write_number(r, j, bound)
    last = first + len(part) - 1
    chart = book.add_chart({"type": "line"})
    cats = ["chart_data", first, 0, last, 0]
    spec = {"name": "score", "categories": cats, "values": ["chart_data", first, 1, last, 1],
            "line": {"color": _LIMIT_GREY, "width": 1.25}, "marker": {"type": "none"}}
    labels = axis.labels(true, ("below", "above"))
    if labels is not None:
        spec["data_labels"] = labels
    chart.add_series(spec)
    for s, j in signal_col.items():
        chart.add_series({"name": SIGNAL_WORD["signals"][s], "categories": cats,
                          "values": ["chart_data", first, j, last, j], "line": {"none": True},
                          "marker": {"type": SIGNAL_CHART_MARKER[s], "size": 7, "fill": {"color": SIGNAL_COLOUR[s]},
                                     "border": {"color": "#000000"}}})
    for j, (_lim, sig) in enumerate(limits):
        for sign in (0, 1):
            col = limit_col + 2 * j + sign
            chart.add_series({"name": heads[col], "categories": cats, "values": ["chart_data", first, col, last, col],
                              "line": {"color": _LIMIT_GREY, "width": 0.75, "dash_type": LIMIT_LINE[sig]["chart"]},
                              "marker": {"type": "none"}})
    chart.set_title({"name": f"{lab}: {label}"})
    chart.set_y_axis(value_axis("score", axis.limit))
    chart.set_x_axis({"name": "round"})
    chart.show_blanks_as("gap")
    chart.set_size({"width": 720, "height": CHART_HEIGHT})
    return chart, last + 3


def _write_figure(frame: pd.DataFrame, paths: Sequence[Path], *, lab: str, caution: str) -> None:
    import matplotlib
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    groups = series_groups(frame)
    with matplotlib.rc_context({"svg.hashsalt": "roundscore", "font.size": 9}):
        fig = Figure(figsize=(8.0, 1.0 + 2.3 * len(groups)), layout="constrained")
        axes = fig.subplots(len(groups), 1, squeeze=False)[:, 0]
        for ax, (label, part) in zip(axes, groups):
            dates = pd.to_datetime(part["round_date"])
            values = part["score_value"].to_numpy(float)
            ok = np.isfinite(values)
            family = family_for(part)
            ax.plot(dates[ok], values[ok], color=_LIMIT_GREY, linewidth=1.0, zorder=1)
            for signal in SIGNALS:
                pick = ok & (part["signal"] == signal).to_numpy()
                if pick.any():
                    ax.scatter(dates[pick], values[pick], marker=SIGNAL_MARKER[signal],
                               color=SIGNAL_COLOUR[signal], edgecolors="black", linewidths=0.4,
                               s=36, zorder=3)
            for lim, sig in family.limits():
                for y in (lim, -lim):
                    ax.axhline(y, color=_LIMIT_GREY, linestyle=LIMIT_LINE[sig]["matplotlib"], linewidth=0.8,
                               zorder=0)
            ax.axhline(0.0, color="#BBBBBB", linewidth=0.6, zorder=0)
            top = max(family.action + 1.0, float(np.nanmax(np.abs(values), initial=0.0)) + 0.5)
            ax.set_ylim(-top, top)
            ax.set_ylabel(family.symbols if len(family.members) == 1 else f"score ({family.symbols})")
            ax.set_title(f"{lab}: {label}", loc="left")
        handles = [Line2D([], [], linestyle="none", marker=SIGNAL_MARKER[s], color=SIGNAL_COLOUR[s],
                          markeredgecolor="black", markeredgewidth=0.4, label=SIGNAL_WORD["signals"][s])
                   for s in SCORED_SIGNALS]
        handles += [Line2D([], [], color=_LIMIT_GREY, linestyle=LIMIT_LINE[sig]["matplotlib"], label=f"{sig} limit")
                    for sig in ("action", "warning")]
        fig.legend(handles=handles, loc="outside lower center", ncols=5, frameon=False)
        fig.text(0.01, 0.0, caution, fontsize=6, va="bottom", ha="left", wrap=True)
        for path in paths:
            meta = {"Date": None} if path.suffix == ".svg" else {"Software": None}
            fig.savefig(path, dpi=120, metadata=meta)
