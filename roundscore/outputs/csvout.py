"""Deterministic CSV tables, safe to open in a spreadsheet program.

Numbers are written with up to 12 significant digits and a fixed layout, so
the same round gives byte-identical files. Text that may have come from a
participant is neutralised against formula injection: a cell starting with
``=``, ``+``, ``-``, ``@``, tab or carriage return gets a leading ``'``
(OWASP, "CSV Injection", common guidance).
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path
from typing import Any

import pandas as pd

__all__ = ["write_csv", "neutralise", "FLOAT_FORMAT"]

FLOAT_FORMAT = "{:.12g}"
_DANGEROUS = ("=", "+", "-", "@", "\t", "\r")


def neutralise(text: str) -> str:
    """Prefix text that a spreadsheet would read as a formula with ``'``."""
    return "'" + text if text.startswith(_DANGEROUS) else text


def _cell(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        if math.isnan(v):
            return ""
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return FLOAT_FORMAT.format(v)
    if isinstance(v, int):
        return str(v)
    try:
        if pd.isna(v):
            return ""
    except (TypeError, ValueError):
        pass
    if hasattr(v, "item"):  # numpy scalars
        return _cell(v.item())
    return neutralise(str(v))


def write_csv(frame: pd.DataFrame, path: Path, columns: tuple[str, ...] | list[str] | None = None) -> None:
    """Write ``frame`` (the given columns, in order) as UTF-8 CSV with ``\\n`` line ends."""
    cols = list(columns) if columns is not None else list(frame.columns)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(cols)
    data = [frame[c].tolist() if c in frame else [None] * len(frame) for c in cols]
    for row in zip(*data):
        w.writerow([_cell(v) for v in row])
    Path(path).write_text(buf.getvalue(), encoding="utf-8")
