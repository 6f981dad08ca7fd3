"""How a worksheet prints: paper, orientation, one page wide, repeated head rows, print area, page header and
footer, and page breaks that keep each chart on one page.

One mechanism for every workbook roundscore writes (xlsxwriter worksheets): the
circulated workbooks call it through :func:`roundscore.outputs.workbook_base.print_setup`,
the blank submission forms (:mod:`roundscore.intake.forms`, a lower layer) directly.
It holds no domain knowledge: the caller gives the header texts.

A sheet without charts is printed "fit to one page wide, any number tall"
(the spreadsheet program scales it). A spreadsheet program ignores manual page
breaks on such a sheet, so a sheet with charts gets an explicit print scale
instead, computed here from its column widths (the same fit, one page wide),
and a page break before each chart that would otherwise cross the foot of a
page.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal
from collections.abc import Iterable, Mapping, Sequence

__all__ = ["PAPER_CODE", "PAGE_POINTS", "MARGINS", "Chart", "print_layout", "column_points", "scale_for",
           "chart_breaks", "header_text"]

Paper = Literal["a4", "letter"]
#: xlsxwriter's ``set_paper`` codes (the OOXML paperSize: 9 = A4, 1 = US Letter).
PAPER_CODE: Mapping[str, int] = {"a4": 9, "letter": 1}
#: Page sizes in points, portrait (width, height): A4 210 × 297 mm, Letter 8.5 × 11 in.
PAGE_POINTS: Mapping[str, tuple[float, float]] = {"a4": (595.3, 841.9), "letter": (612.0, 792.0)}
#: Margins in inches (left, right, top, bottom) and the header / footer distance from the edge.
MARGINS = (0.5, 0.5, 0.6, 0.6)
HEADER_MARGIN = 0.3
#: Default row height (points) of a sheet written by xlsxwriter.
ROW_POINTS = 15.0
#: Share of the page a computed scale or break leaves free (the spreadsheet program's fonts differ a little).
SAFETY = 0.94


@dataclass(frozen=True, slots=True)
class Chart:
    """A chart inserted at ``row`` (0-based) that is ``height`` pixels tall and ``width`` pixels wide."""

    row: int
    height: float
    width: float = 0.0


def column_points(widths: Iterable[float]) -> float:
    """The printed width (points) of columns of these widths (characters): 7 px per character and 5 px
    padding each, at 0.75 pt per px (the default font's metrics, as xlsxwriter sizes columns)."""
    return sum((int(w * 7 + 0.5) + 5) * 0.75 for w in widths)


def _printable(paper: Paper, landscape: bool) -> tuple[float, float]:
    w, h = PAGE_POINTS[paper]
    if landscape:
        w, h = h, w
    left, right, top, bottom = MARGINS
    return w - 72 * (left + right), h - 72 * (top + bottom)


def scale_for(width_points: float, paper: Paper, landscape: bool) -> int:
    """The print scale (percent, 10..100) at which ``width_points`` fit one page wide.

    >>> scale_for(480, "a4", False), scale_for(1540, "a4", True)
    (100, 46)
    """
    width, _ = _printable(paper, landscape)
    return max(10, min(100, int(100 * SAFETY * width / max(width_points, 1.0))))


def chart_breaks(charts: Sequence[Chart], *, first_row: int, scale: int, paper: Paper, landscape: bool,
                 row_points: Mapping[int, float] | None = None, repeat_points: float = 0.0) -> list[int]:
    """Rows before which a page break keeps every chart whole on one page.

    Pages are filled from ``first_row`` down (rows ``row_points`` high, else
    :data:`ROW_POINTS`); a chart that would cross the foot of its page starts
    the next one. Later pages lose ``repeat_points`` to the repeated head rows.
    Approximate (the program lays pages out itself): SAFETY leaves room.

    >>> chart_breaks([Chart(0, 280), Chart(15, 280), Chart(30, 280)], first_row=0, scale=100, paper="a4",
    ...              landscape=True)
    [30]
    """
    heights = dict(row_points or {})

    def y(row: int) -> float:
        return sum(heights.get(r, ROW_POINTS) for r in range(first_row, row))

    _, page = _printable(paper, landscape)
    page = page * SAFETY * 100 / scale
    breaks: list[int] = []
    start, capacity = 0.0, page
    tallest = max([ROW_POINTS, *heights.values()])
    for chart in sorted(charts, key=lambda c: c.row):
        top, bottom = y(chart.row), y(chart.row) + chart.height * 0.75
        while top - start >= capacity:  # the chart starts on a later page: pages break by themselves, at a row
            start, capacity = start + capacity - tallest, page - repeat_points  # boundary: up to a row earlier
        if bottom - start > capacity and top > start:
            breaks.append(chart.row)
            start, capacity = top, page - repeat_points
    return breaks


def header_text(left: str = "", centre: str = "", right: str = "") -> str:
    """A page header or footer of three parts; "&" in the texts is doubled (a literal & there)."""
    def part(code: str, text: str) -> str:
        return f"&{code}{text.replace('&', '&&')[:80]}" if text else ""
    return part("L", left) + part("C", centre) + part("R", right)


def print_layout(ws, *, paper: Paper = "a4", header: tuple[str, str, str] = ("", "", ""),
                 footer: tuple[str, str] = ("", ""), head_rows: tuple[int, int] | None = None,
                 area: tuple[int, int, int, int] | None = None, widths: Iterable[float] = (),
                 charts: Sequence[Chart] = (), landscape: bool | None = None,
                 row_points: Mapping[int, float] | None = None) -> None:
    """Set how ``ws`` prints.

    ``header`` is (left, centre, right) text, ``footer`` (left, right): its
    centre is "Page N of M". ``head_rows`` (first, last, 0-based)
    print on every page; ``area`` is (first row, first column, last row, last
    column). ``widths`` are the printed columns' widths (characters): the
    sheet is landscape when they (or a chart) are wider than a portrait page,
    unless ``landscape`` says. With ``charts`` the sheet gets the explicit
    scale and the page breaks of :func:`chart_breaks`, else it is fitted to
    one page wide by the program.
    """
    widths = list(widths)
    for j, w in enumerate(widths):  # explicit widths: a program's default column width differs (LibreOffice's is wider)
        ws.set_column(j, j, w)
    width = max([column_points(widths), *(c.width * 0.75 for c in charts)])
    if landscape is None:
        landscape = width > _printable(paper, False)[0]
    if landscape:
        ws.set_landscape()
    else:
        ws.set_portrait()
    ws.set_paper(PAPER_CODE[paper])
    ws.set_margins(*MARGINS)
    ws.set_header(header_text(*header), {"margin": HEADER_MARGIN})
    left, right = (header_text(left=footer[0]), header_text(right=footer[1]))
    ws.set_footer(f"{left}&CPage &P of &N{right}", {"margin": HEADER_MARGIN})
    if head_rows is not None:
        ws.repeat_rows(*head_rows)
    if area is not None:
        ws.print_area(*area)
    if charts:
        scale = scale_for(width, paper, landscape)
        ws.set_print_scale(scale)
        repeat = 0.0
        if head_rows is not None:
            repeat = sum((row_points or {}).get(r, ROW_POINTS) for r in range(head_rows[0], head_rows[1] + 1))
        breaks = chart_breaks(charts, first_row=area[0] if area else 0, scale=scale, paper=paper,
                              landscape=landscape, row_points=row_points, repeat_points=repeat)
        if breaks:
            ws.set_h_pagebreaks(breaks)
    else:
        ws.fit_to_pages(1, 0)
