"""Low-level sheet readers: a workbook or CSV file into plain rows of cell values.

Everything above this module sees a :class:`SheetRows` and never the file
format. Workbooks are read with python-calamine (a compiled reader, many times
faster than openpyxl on the many small returned forms of a large round), but
only after :func:`~roundscore.intake.safety.inspect_workbook` has checked the
package (size limits, no DTDs, not encrypted); files from outside are read in
isolated processes by :func:`~roundscore.intake.isolation.read_many`.

Text files are decoded as UTF-8 (with or without a byte-order mark), UTF-16
with a byte-order mark (what spreadsheet programs write as "Unicode text"),
or else Windows-1252 / Latin-1; the delimiter (comma, semicolon or tab) is
taken from the header line, so a semicolon file with decimal commas reads
right.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass, field
from pathlib import Path
from collections.abc import Sequence

from roundscore.errors import InputError, Problem
from roundscore.model.limits import DEFAULT_LIMITS, ReadLimits
from roundscore.intake.safety import inspect_workbook

__all__ = ["SheetRows", "read_rows", "read_csv_rows", "read_workbook_rows", "read_file_sheets",
           "TEXT_SUFFIXES", "WORKBOOK_SUFFIXES"]

TEXT_SUFFIXES = (".csv", ".txt", ".tsv")
WORKBOOK_SUFFIXES = (".xlsx", ".xlsm", ".xls", ".ods")
#: Longest field accepted in a text file (characters); longer is refused, not truncated.
MAX_TEXT_FIELD = 1 << 20


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
        (hidden rows or sheets, merged cells, macros...).
    lines : tuple of int or None
        For a text file whose quoted fields span several lines: the line on
        which each row starts. None when row ``i`` is line ``i + 1``.
    """

    file: str
    sheet: str | None
    rows: list[list[object]]
    warnings: tuple[str, ...] = field(default=())
    lines: tuple[int, ...] | None = None

    def row_number(self, i: int) -> int:
        """The row (workbook) or line (text file) where ``rows[i]`` is, as the person sees it."""
        return self.lines[i] if self.lines is not None else i + 1


def read_rows(path: str | Path, sheet: str | None = None, *, limits: ReadLimits = DEFAULT_LIMITS) -> SheetRows:
    """Read a CSV or workbook file into rows; the format is chosen by the suffix.

    Reads in this process; for files from outside use
    :func:`~roundscore.intake.isolation.read_many`, which isolates the reader.
    """
    return read_file_sheets(path, [sheet], limits=limits)[0]


def read_file_sheets(path: str | Path, sheets: Sequence[str | None], *,
                     limits: ReadLimits = DEFAULT_LIMITS) -> list[SheetRows]:
    """Read several sheets of one file (a text file has one, whatever is asked), checking it once.

    Raises
    ------
    InputError
        File missing, type not supported, or any refusal of
        :func:`read_csv_rows` / :func:`read_workbook_rows`.
    """
    p = Path(path)
    if not p.exists():
        raise InputError.single("file not found", file=str(path))
    if p.is_dir():
        raise InputError.single("a folder, not a results file", file=str(path))
    suffix = p.suffix.lower()
    if suffix in TEXT_SUFFIXES:
        rows = read_csv_rows(path, limits=limits)
        return [rows for _ in sheets]
    if suffix in WORKBOOK_SUFFIXES:
        return _read_workbook(path, list(sheets), limits)
    raise InputError.single(
        f"unsupported file type {suffix!r}; allowed: .csv, .txt, .tsv, .xlsx, .xlsm, .ods", file=str(path)
    )


def _decode(data: bytes) -> str:
    if data.startswith(b"\xef\xbb\xbf"):
        return data[3:].decode("utf-8", errors="replace")
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        return data.decode("utf-16", errors="replace")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        # Latin-1 family: cp1252 is what spreadsheet programs on Windows write.
        try:
            return data.decode("cp1252")
        except UnicodeDecodeError:
            return data.decode("latin-1")


def _delimiter(text: str) -> str:
    """The delimiter of the first non-empty line, counted outside quotes: ``;``, tab or ``,``.

    The header holds names, not numbers, so decimal commas in the data do
    not confuse it (csv.Sniffer can be misled by them). A tie goes to the
    comma.
    """
    for line in text.splitlines():
        if line.strip():
            break
    else:
        return ","
    counts = {",": 0, ";": 0, "\t": 0}
    quoted = False
    for ch in line:
        if ch == '"':
            quoted = not quoted
        elif not quoted and ch in counts:
            counts[ch] += 1
    best = max(counts.values())
    if best == 0 or counts[","] == best:
        return ","
    return ";" if counts[";"] == best else "\t"


def read_csv_rows(path: str | Path, *, limits: ReadLimits = DEFAULT_LIMITS) -> SheetRows:
    """Read a delimited text file: UTF-8 (with or without BOM), UTF-16 with BOM, or Latin-1.

    Raises
    ------
    InputError
        The file is larger than ``limits.max_text_bytes``, is binary (NUL
        bytes), or its quoting is broken (a field longer than
        :data:`MAX_TEXT_FIELD`, usually an unclosed quote).
    """
    p = Path(path)
    file = str(path)
    try:
        size = p.stat().st_size
        if size > limits.max_text_bytes:
            raise InputError.single(
                f"the text file is {size / (1 << 20):.1f} MiB, more than the limit of "
                f"{limits.max_text_bytes / (1 << 20):g} MiB", file=file)
        with open(p, "rb") as fh:
            data = fh.read(limits.max_text_bytes + 1)
    except OSError as exc:
        raise InputError.single(f"cannot read the file: {exc.strerror or exc}", file=file) from None
    text = _decode(data)
    if "\x00" in text:
        raise InputError.single("the file holds NUL bytes: it is binary, not a text table "
                                "(a workbook saved with a .csv name?)", file=file)
    delimiter = _delimiter(text)
    old = csv.field_size_limit()
    rows: list[list[object]] = []
    starts: list[int] = []
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    try:
        csv.field_size_limit(MAX_TEXT_FIELD)
        for r in reader:
            starts.append(reader.line_num)  # the line a row ends on; where it starts is found below
            rows.append([c if c != "" else None for c in r])
    except csv.Error as exc:
        raise InputError.single(f"the text table cannot be read: {exc} (an unclosed quote?)",
                                file=file, row=reader.line_num or None) from None
    finally:
        csv.field_size_limit(old)
    lines = None
    if starts and starts[-1] != len(starts):  # a quoted field spans lines: number rows by their first line
        lines = tuple([1] + [end + 1 for end in starts[:-1]])
    return SheetRows(file=file, sheet=None, rows=rows, lines=lines)


def read_workbook_rows(path: str | Path, sheet: str | None = None, *,
                       limits: ReadLimits = DEFAULT_LIMITS) -> SheetRows:
    """Read one sheet of a workbook (the first, or the one named), after checking the package."""
    return _read_workbook(path, [sheet], limits)[0]


def _no_value_error(file: str, sheet: str, refs: Sequence[str]) -> InputError:
    import re

    problems = []
    for ref in refs:
        m = re.match(r"[A-Z]+([0-9]+)$", ref)
        problems.append(Problem(
            message="a formula without a saved value: its result cannot be known without recalculating; "
                    "open the file in a spreadsheet program, let it calculate and save it, or type the value",
            file=file, sheet=sheet, row=int(m.group(1)) if m else None, column=ref))
    return InputError(problems, summary=f"formulas without saved values in sheet {sheet!r}")


def _fatal(exc: BaseException) -> bool:
    return isinstance(exc, (KeyboardInterrupt, SystemExit, GeneratorExit))


def _read_workbook(path: str | Path, sheets: list[str | None], limits: ReadLimits) -> list[SheetRows]:
    from python_calamine import CalamineWorkbook

    file = str(path)
    check = inspect_workbook(path, limits)
    try:
        wb = CalamineWorkbook.from_path(file)
        names = list(wb.sheet_names)
    except BaseException as exc:  # calamine raises its own error types; pyo3 panics are BaseException
        if _fatal(exc):
            raise
        raise InputError.single(f"corrupt workbook, cannot be read: {exc}", file=file) from None
    if not names:
        raise InputError.single("the workbook has no sheets", file=file)
    out = []
    for sheet in sheets:
        name = sheet if sheet is not None else names[0]
        if name not in names:
            raise InputError.single(
                f"no sheet named {name!r}; the workbook has: {', '.join(names)}", file=file
            )
        refs = check.formulas_without_value.get(name)
        if refs:
            raise _no_value_error(file, name, refs)
        try:
            data = wb.get_sheet_by_name(name).to_python(skip_empty_area=False)
        except BaseException as exc:
            if _fatal(exc):
                raise
            raise InputError.single(f"corrupt workbook, sheet {name!r} cannot be read: {exc}", file=file) from None
        rows: list[list[object]] = [[None if c == "" else c for c in r] for r in data]
        out.append(SheetRows(file=file, sheet=name, rows=rows, warnings=check.warnings_for(name)))
    return out
