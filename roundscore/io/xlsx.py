"""Low-level sheet readers: a workbook or CSV file into plain rows of cell values.

Everything above this module sees a :class:`SheetRows` and never the file
format. Workbooks are read with python-calamine (a compiled reader, many times
faster than openpyxl on the many small returned forms of a large round).
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError

__all__ = ["SheetRows", "read_rows", "read_csv_rows", "read_workbook_rows"]


@dataclass(frozen=True, slots=True, kw_only=True)
class SheetRows:
    """The cells of one sheet (or CSV file) as read, before any interpretation.

    Attributes
    ----------
    file : str
        The path as the user gave it (used in messages).
    sheet : str or None
        Sheet name for a workbook, None for a CSV file.
    rows : list of list
        Cell values row by row: str, float, int, bool, datetime/date/time or None.
        ``rows[0]`` is spreadsheet row 1.
    warnings : tuple of str
        Things worth telling the user that do not stop the import
        (hidden rows or sheets, merged cells...).
    """

    file: str
    sheet: str | None
    rows: list[list[object]]
    warnings: tuple[str, ...] = field(default=())


def read_rows(path: str | Path, sheet: str | None = None) -> SheetRows:
    """Read a CSV or workbook file into rows; the format is chosen by the suffix."""
    p = Path(path)
    if not p.exists():
        raise InputError.single("file not found", file=str(path))
    suffix = p.suffix.lower()
    if suffix in (".csv", ".txt", ".tsv"):
        return read_csv_rows(p)
    if suffix in (".xlsx", ".xlsm", ".xls", ".ods"):
        return read_workbook_rows(p, sheet)
    raise InputError.single(
        f"unsupported file type {suffix!r}; allowed: .csv, .xlsx, .xlsm", file=str(path)
    )


def _decode(data: bytes) -> str:
    if data.startswith(b"\xef\xbb\xbf"):
        return data[3:].decode("utf-8")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        # Latin-1 family: cp1252 is what spreadsheet programs on Windows write.
        try:
            return data.decode("cp1252")
        except UnicodeDecodeError:
            return data.decode("latin-1")


def read_csv_rows(path: str | Path) -> SheetRows:
    """Read a delimited text file: UTF-8 (with or without BOM) or Latin-1; comma, semicolon or tab."""
    p = Path(path)
    text = _decode(p.read_bytes())
    head = text[:4096]
    try:
        dialect = csv.Sniffer().sniff(head, delimiters=",;\t")
        delimiter = dialect.delimiter
    except csv.Error:
        delimiter = ","
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    rows: list[list[object]] = [[c if c != "" else None for c in r] for r in reader]
    return SheetRows(file=str(path), sheet=None, rows=rows)


def read_workbook_rows(path: str | Path, sheet: str | None = None) -> SheetRows:
    """Read one sheet of a workbook (the first, or the one named)."""
    from python_calamine import CalamineWorkbook

    try:
        wb = CalamineWorkbook.from_path(str(path))
    except Exception as exc:  # calamine raises its own error types
        raise InputError.single(f"cannot read the workbook: {exc}", file=str(path)) from None
    names = wb.sheet_names
    if not names:
        raise InputError.single("the workbook has no sheets", file=str(path))
    name = sheet if sheet is not None else names[0]
    if name not in names:
        raise InputError.single(
            f"no sheet named {name!r}; the workbook has: {', '.join(names)}", file=str(path)
        )
    data = wb.get_sheet_by_name(name).to_python(skip_empty_area=False)
    rows = [[None if c == "" else c for c in r] for r in data]
    return SheetRows(file=str(path), sheet=name, rows=rows)
