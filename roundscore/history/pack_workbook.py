"""``pack.xlsx`` of a lab's audit pack: the pack document's tables as sheets, and the native series charts.

The cells are the document's (:func:`roundscore.history.pack.pack_document`), so the workbook, the HTML page and
the PDF show the same numbers; a number column's cell is written as a number with the decimals it shows. The
charts are those of ``history show --out`` (:func:`roundscore.outputs.history_workbook.series_chart`: round ids
on the axis, the limit lines, each signal's marker, trend-rule findings ringed). Every sheet prints on the
pack's paper, one page wide, with its head rows repeated (:mod:`roundscore.support.sheetprint`).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import xlsxwriter

from roundscore.outputs.document import Document, Facts, Paragraph, Section, Table
from roundscore.outputs.history_workbook import SERIES_HEIGHT, SERIES_ROWS, series_chart, series_groups
from roundscore.outputs.workbook_base import FIXED_TIME, OPTIONS, Chart, Formats, print_setup, set_widths

__all__ = ["write_pack_workbook"]


def _tables(doc: Document) -> dict[str, Table]:
    out = {}
    for b in doc.blocks:
        if isinstance(b, Section):
            for inner in b.blocks:
                if isinstance(inner, Table):
                    out[b.heading.anchor] = inner
    return out


def _number(text: str) -> tuple[float, int] | None:
    """A shown number and its decimals ("+3.60" → (3.6, 2)), or None for text."""
    try:
        value = float(text)
    except ValueError:
        return None
    return value, len(text.split(".", 1)[1]) if "." in text else 0


def _sheet(book, fm: Formats, name: str, title: str, lines: list[str], table: Table | None, *, paper: str,
           lab: str) -> None:
    ws = book.add_worksheet(name)
    ncols = len(table.columns) if table is not None else 6
    for i, line in enumerate([title, *lines]):
        if ncols > 1:
            ws.merge_range(i, 0, i, ncols - 1, line, fm.title if i == 0 else fm.wrap)
        else:
            ws.write_string(i, 0, line, fm.title if i == 0 else fm.wrap)
        if i and len(line) > 120:
            ws.set_row(i, 15 * (len(line) // 110 + 1))
    top = len(lines) + 2
    widths = [12] * ncols
    last = top
    if table is not None:
        formats: dict[int, object] = {}
        for j, c in enumerate(table.columns):
            ws.write_string(top, j, c.title, fm.head)
            widths[j] = max(8, min(len(c.title) + 2, 40))
        for i, row in enumerate(table.rows, start=top + 1):
            for j, cell in enumerate(row):
                fmt = fm.signal.get(cell.signal) if cell.signal else None
                num = _number(cell.text) if table.columns[j].numeric else None
                if num is not None:
                    d = num[1]
                    if d not in formats:
                        formats[d] = book.add_format({"num_format": "0" if d == 0 else "0." + "0" * d})
                    ws.write_number(i, j, num[0], formats[d])
                else:
                    ws.write_string(i, j, cell.text, fmt) if fmt is not None else ws.write_string(i, j, cell.text)
                widths[j] = max(widths[j], min(len(cell.text) + 2, 40))
            last = i
        ws.freeze_panes(top + 1, 0)
    set_widths(ws, widths)
    print_setup(ws, "PT history", top if table is not None else None, paper=paper, lab=lab, title=name,
                widths=widths, last_row=last)


def write_pack_workbook(pack: Any, doc: Document, path: Path) -> None:
    """Write ``pack.xlsx`` of a :class:`roundscore.history.pack.LabPack` (typed loosely: that module imports
    this one) and its document: the head and findings, per round, per measurand, the charts and their data."""
    book = xlsxwriter.Workbook(str(path), OPTIONS)
    book.set_properties({"title": doc.title, "created": FIXED_TIME})
    fm = Formats(book)
    head = [f"{k}: {v}" for b in doc.blocks if isinstance(b, Facts) for k, v in b.pairs if v]
    head += [b.text for b in doc.blocks if isinstance(b, Paragraph)]
    tables = _tables(doc)
    where: dict[str, Any] = {"paper": pack.paper, "lab": pack.identity.name or pack.lab}
    _sheet(book, fm, "findings", doc.title, head, tables.get("findings"), **where)
    _sheet(book, fm, "rounds", "Per round", [], tables.get("rounds"), **where)
    caution = [b.text for s in doc.blocks if isinstance(s, Section) and s.heading.anchor == "measurands"
               for b in s.blocks if isinstance(b, Paragraph)]
    _sheet(book, fm, "measurands", "Per measurand over the period", caution, tables.get("measurands"), **where)
    charts = book.add_worksheet("charts")
    data = book.add_worksheet("chart_data")
    charts.merge_range(0, 0, 1, 9, f"{doc.title}: scores by round; a large ring marks a point where a trend rule "
                                   "fired (R1-R4).", fm.wrap)
    top, placed = 0, []
    for k, (label, part) in enumerate(series_groups(pack.frame)):
        chart, top = series_chart(book, data, fm, top, label, part, pack.identity.name or pack.lab)
        charts.insert_chart(2 + SERIES_ROWS * k, 0, chart)
        placed.append(Chart(2 + SERIES_ROWS * k, SERIES_HEIGHT, 720))
    print_setup(charts, "PT history", widths=[10] * 10, last_row=1 + SERIES_ROWS * len(placed), charts=placed,
                title="charts", **where)
    print_setup(data, "PT history", widths=[20, 10, 12, 12, 12, 8, 8, 8, 8, 8], last_row=max(top - 1, 0),
                title="chart_data", **where)
    book.close()
