"""Tables of a page's content from the evaluation's frames and records: numbers formatted once, for every rendering.

The round report, the lab pages and their sections in other modules (:mod:`roundscore.outputs.report`,
:mod:`roundscore.outputs.consensus_report`) build their :class:`~roundscore.outputs.document.Table` s here: a
value column to its measurand's ``decimals`` (uncertainties and spreads one more,
:data:`~roundscore.outputs.workbook_base.VALUE_COLUMNS`), other numbers to 6 significant digits, every column
headed by :func:`~roundscore.outputs.headings.heading`.
"""

from __future__ import annotations

import math
from typing import Any
from collections.abc import Sequence

import numpy as np
import pandas as pd

from roundscore.model.scores import score_symbol
from roundscore.outputs.document import Cell, Column, Paragraph, Table
from roundscore.outputs.headings import heading
from roundscore.outputs.look import SIGNAL_SYMBOL, SIGNAL_WORD
from roundscore.outputs.workbook_base import VALUE_COLUMNS

__all__ = ["number_text", "more_places", "signal_text", "frame_table", "records_table"]


def number_text(v: Any, decimals: int | None = None) -> str:
    """A number as shown: ``decimals`` places, else 6 significant digits; text as it is; NaN blank."""
    if v is None or isinstance(v, str):
        return "" if v is None else v
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    try:
        x = float(v)
    except (TypeError, ValueError):
        return str(v)
    if not math.isfinite(x):
        return ""
    if decimals is None:
        return f"{x:.6g}"
    return f"{x:.{decimals}f}"


def more_places(d: int | None) -> int | None:
    return None if d is None else d + 1


def signal_text(signal: str, words: str, text: str = "") -> str:
    """A signal cell's text: its symbol and a number, or its symbol and word."""
    sym = SIGNAL_SYMBOL.get(signal, "")
    return f"{sym} {text}".strip() if text else f"{sym} {SIGNAL_WORD[words].get(signal, signal)}".strip()


def _is_numeric(frame: pd.DataFrame, c: str) -> bool:
    return bool(pd.api.types.is_numeric_dtype(frame[c]) and not pd.api.types.is_bool_dtype(frame[c]))


def frame_table(ev, frame: pd.DataFrame | None, columns: Sequence[str] | None = None, *,
                 decimals: dict[str, int | None] | None = None, signal: str | None = None,
                 caption: str = "", key_columns: int = 1, table: str | None = None) -> Table | Paragraph:
    """A frame's columns as a :class:`Table`, headed by :func:`~roundscore.outputs.headings.heading`.

    A value column (:data:`~roundscore.outputs.workbook_base.VALUE_COLUMNS`) of a row naming its
    measurand is shown to that measurand's ``decimals`` (uncertainties and spreads one more); ``decimals``
    fixes a column's places; other numbers show 6 significant digits. ``table`` names the extras table, for
    the headings it gives its columns (:data:`~roundscore.outputs.headings.TABLE_HEADINGS`).
    """
    if frame is None or not len(frame.columns):
        return Paragraph(text="Not available.", style="note")
    cols = [c for c in (columns or list(frame.columns)) if c in frame.columns]
    decimals = decimals or {}
    words = ev.round.words
    places = {n: m.decimals for n, m in ev.round.measurands.items()}
    meas = frame["measurand"].tolist() if "measurand" in frame.columns else [None] * len(frame)
    numeric = [_is_numeric(frame, c) for c in cols]
    data = [frame[c].tolist() for c in cols]
    rows = []
    for i in range(len(frame)):
        row = []
        for j, c in enumerate(cols):
            v = data[j][i]
            if c == signal and isinstance(v, str):
                row.append(Cell(text=signal_text(v, words), signal=v))
                continue
            if c == "score" and isinstance(v, str):  # a score by its symbol (ζ), as every page shows it
                row.append(Cell(text=score_symbol(v)))
                continue
            if c in decimals:
                d = decimals[c]
            elif c in VALUE_COLUMNS and places.get(meas[i]) is not None:
                d = places[meas[i]] + VALUE_COLUMNS[c]
            else:
                d = None
            row.append(Cell(text=number_text(v, d) if numeric[j] or not isinstance(v, str) else v))
        rows.append(tuple(row))
    return Table(columns=tuple(Column(title=heading(c, table), numeric=numeric[j]) for j, c in enumerate(cols)),
                 rows=tuple(rows), caption=caption, key_columns=min(key_columns, len(cols)))


def records_table(rows: Sequence[dict[str, Any]], decimals: dict[str, int | None] | None = None) -> Table | None:
    """A :class:`Table` of records (the keys of the first as columns), for the few rows of one lab."""
    if not rows:
        return None
    decimals = decimals or {}
    cols = list(rows[0])
    return Table(columns=tuple(Column(title=heading(c)) for c in cols),
                 rows=tuple(tuple(Cell(text=number_text(rec.get(c), decimals.get(c))) for c in cols) for rec in rows))

