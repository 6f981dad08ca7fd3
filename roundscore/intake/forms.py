"""Blank submission workbooks (one per participant) and reading them back.

A form has two sheets:

``Results``
    A heading block (round, laboratory code, return instructions) and a
    table with one row per measurand: unit, one cell per replicate, the
    standard uncertainty u, or the expanded uncertainty U with its coverage
    factor k, the method and a comment. Only those cells are unlocked; the
    sheet is protected (without a password: protection guards against
    slips, not against intent) and the result cells are validated.
``form-info``
    Key/value pairs the reader relies on: the generator, the form format,
    round id, lab code, the row where the table starts, how many
    replicates the form asks for, the decimal mark the form was written
    with (``[round] decimal``, or blank) and the cell where the lab can
    state its own (``decimal_cell``), and the cells of the optional sample
    fields (``arrived_cell``, ``condition_cell``, ``analysed_cell``).

The heading block also prints ``[round] return_by`` ("Return by") and has three
optional fields beside it: the date the sample arrived, its condition on
arrival and the date of analysis. Read back by :func:`form_receipt` (blank
allowed; a date that is not one is refused, naming the cell); a form written
before these fields existed has no such keys and reads as before.

Nominal and ordinal measurands (:mod:`roundscore.model.qualitative`) get a table of their own below the
instructions, headed "Qualitative results": one row per measurand and test item (the items round.toml
declares; one row with a free item cell when it declares none), the result cell a drop-down list of the
measurand's categories and the item cell one of its items. The lists are held on the hidden form-info sheet
(a spreadsheet's typed list is comma-separated and at most 255 characters). form-info gives the table's
header row and its number of rows (``qualitative_header_row``, ``qualitative_rows``); they read back to the
same records as the long layout's ``item`` and ``value`` columns (:func:`records_from_form`).

The heading block holds that choice in words ("Decimal mark": point or
comma, a drop-down list). It only matters for numbers typed as text (a
spreadsheet stores a typed number as a number, which is never ambiguous);
when filled in, it decides how the form's text cells are read, ahead of
``[round] decimal``; blank, the form-info value or the round's is used.
"""

from __future__ import annotations

import datetime as dt
import os
import re
import tempfile
from dataclasses import dataclass
from pathlib import Path
from collections.abc import Iterable
from typing import Any

import xlsxwriter

from roundscore.intake.cells import is_decimal_mark
from roundscore.errors import Problem, Place, sheet_cell
from roundscore.model.round import MAX_FORM_REPLICATES, DecimalMark, Round
from roundscore.model.table import SampleReceipt
from roundscore.intake.xlsx import SheetRows
from roundscore.support.sheetprint import print_layout

__all__ = ["write_forms", "FormsWritten", "write_form", "records_from_form", "form_decimal", "FormDecimal",
           "form_file_name", "lab_cell", "FORM_FORMAT", "RESULTS_SHEET", "INFO_SHEET", "DECIMAL_CELL", "RECEIPT_FIELDS",
           "form_receipt", "date_text"]

FORM_FORMAT = 1
RESULTS_SHEET = "Results"
INFO_SHEET = "form-info"
HEADER_ROW = 9  # 1-based row of the table header
FIRST_ROW = HEADER_ROW + 1
#: The cell of the heading block where a lab states the decimal mark of its text cells.
DECIMAL_CELL = "B8"
#: The choices offered in that cell (a spreadsheet's list is comma-separated, so no examples in them);
#: the reader takes the first word of what the cell holds.
DECIMAL_CHOICES = {"point": "point", "comma": "comma"}


#: The qualitative results' table (its header row is form-info's ``qualitative_header_row``).
QUALITATIVE_HEADING = "Qualitative results"
QUALITATIVE_FORM_COLUMNS = ("Measurand", "Item", "Result", "Method", "Comment")
#: The first column of form-info holding the drop-down lists (one column per list, the list from row 2).
_LIST_COLUMN = 3


def _columns(replicates: int) -> list[str]:
    return (
        ["Measurand", "Unit"]
        + [f"Result {i}" for i in range(1, replicates + 1)]
        + ["Standard uncertainty u", "Expanded uncertainty U", "Coverage factor k", "Method", "Comment"]
    )


#: The optional sample fields: (form-info key, label, kind), in the rows 2-4 beside the heading block (the
#: Method and Comment columns, wide enough for a date and a few words).
RECEIPT_FIELDS = (("arrived", "Date the sample arrived", "date"), ("condition", "Condition on arrival", "text"),
                  ("analysed", "Date of analysis", "date"))


def write_form(rnd: Round, lab: str, path: Path, *, name: str | None = None,
               deadline: str = "") -> None:
    """Write the blank form of one participant to ``path`` (``deadline``: else ``[round] return_by``)."""
    deadline = deadline or rnd.return_by
    reps = rnd.replicates
    wb = xlsxwriter.Workbook(str(path), {"strings_to_formulas": False, "strings_to_urls": False})
    wb.set_properties({"title": f"Submission form {rnd.id} {lab}", "author": rnd.provider or "roundscore",
                       "created": _fixed_time()})
    bold = wb.add_format({"bold": True})
    title = wb.add_format({"bold": True, "font_size": 14})
    head = wb.add_format({"bold": True, "bg_color": "#DDE6F0", "border": 1, "text_wrap": True, "valign": "top"})
    locked = wb.add_format({"border": 1, "bg_color": "#F2F2F2"})
    entry = wb.add_format({"locked": False, "border": 1, "bg_color": "#FFFFFF"})
    note = wb.add_format({"italic": True, "font_color": "#444444"})
    ws = wb.add_worksheet(RESULTS_SHEET)
    ws.write(0, 0, f"{rnd.provider + ' — ' if rnd.provider else ''}proficiency test submission form", title)
    for r, (label, value) in enumerate(
        [("Round", rnd.id), ("Title", rnd.title), ("Material", rnd.material),
         ("Laboratory code", lab), ("Laboratory", name or ""), ("Return by", deadline)], start=1):
        ws.write(r, 0, label, bold)
        ws.write_string(r, 1, str(value))
    drow, dcol = _cell_index(DECIMAL_CELL)
    ws.write(drow, 0, "Decimal mark", bold)
    choice = wb.add_format({"locked": False, "border": 1, "bg_color": "#FFFFFF"})
    if rnd.decimal:
        ws.write_string(drow, dcol, DECIMAL_CHOICES[rnd.decimal], choice)
    else:
        ws.write_blank(drow, dcol, None, choice)
    ws.data_validation(drow, dcol, drow, dcol, {
        "validate": "list", "source": list(DECIMAL_CHOICES.values()),
        "input_title": "Decimal mark",
        "input_message": "Only for results typed as text (such as <0,05): is the decimal mark a point or a comma?",
        "error_message": "Choose point or comma, or leave the cell blank."})
    ws.write(drow, dcol + 1, "point: 12.5, comma: 12,5 (only needed for numbers typed as text, such as <0,05)",
             note)
    n_first_u = 2 + reps
    receipt_cells = _write_receipt_fields(wb, ws, bold, n_first_u + 3)
    cols = _columns(reps)
    for j, c in enumerate(cols):
        ws.write(HEADER_ROW - 1, j, c, head)
    ws.set_row(HEADER_ROW - 1, 30)  # the wrapped heads
    for i, m in enumerate(rnd.measurands.values()):
        r = FIRST_ROW - 1 + i
        ws.write_string(r, 0, m.name, locked)
        ws.write_string(r, 1, m.unit, locked)
        for j in range(2, len(cols)):
            ws.write_blank(r, j, None, entry)
        for j in range(2, 2 + reps):
            cell = xlsxwriter.utility.xl_rowcol_to_cell(r, j)
            ws.data_validation(r, j, r, j, {
                "validate": "custom",
                "value": f'=OR(ISNUMBER({cell}),LEFT({cell},1)="<",{cell}="")',
                "error_title": "Result",
                "error_message": "Enter a number, or <limit for a result below your limit (e.g. <0.5).",
            })
        ws.data_validation(r, n_first_u, r, n_first_u + 1, {
            "validate": "decimal", "criteria": ">=", "value": 0,
            "error_message": "Uncertainties are numbers ≥ 0, in the unit of the result."})
        ws.data_validation(r, n_first_u + 2, r, n_first_u + 2, {
            "validate": "decimal", "criteria": "between", "minimum": 1, "maximum": 10,
            "error_message": "The coverage factor k is usually 2."})
        ws.data_validation(r, n_first_u + 3, r, n_first_u + 4, {
            "validate": "length", "criteria": "<=", "value": 200,
            "error_message": "At most 200 characters."})
    end = FIRST_ROW + len(rnd.measurands)
    notes = [
        "Enter each replicate result in the unit shown. Use <limit (e.g. <0.5) for a result below your limit "
        "of quantification; leave a cell blank if you did not measure it.",
        "Give either the standard uncertainty u, or the expanded uncertainty U with its coverage factor k.",
        "Do not rename sheets or move rows: the form is read back automatically.",
    ]
    for i, t in enumerate(notes):
        ws.write(end + i, 0, t, note)
    info = wb.add_worksheet(INFO_SHEET)
    qual_head, qual_rows = _qualitative_table(rnd, ws, info, end + len(notes) + 1,
                                              {"head": head, "locked": locked, "entry": entry, "bold": bold})
    last = qual_head - 1 + qual_rows if qual_rows else end + len(notes) - 1  # the printed area's last row
    widths = [22, 10] + [12] * reps + [14] * 3 + [28] * 2
    # printed one page wide on the round's paper, the table head on every page (support/sheetprint.py)
    print_layout(ws, paper=rnd.paper, header=(rnd.id, f"Laboratory {lab}", "Submission form"),
                 head_rows=(HEADER_ROW - 1, HEADER_ROW - 1), area=(0, 0, last, len(widths) - 1),
                 widths=widths)
    ws.freeze_panes(HEADER_ROW, 1)
    ws.protect("", {"select_locked_cells": True, "select_unlocked_cells": True,
                    "format_columns": True})
    info.write_row(0, 0, ["key", "value"], bold)
    pairs = [("generator", "roundscore"), ("format", FORM_FORMAT), ("round", rnd.id), ("lab", lab),
             ("replicates", reps), ("header_row", HEADER_ROW), ("measurands", len(rnd.measurands)),
             ("decimal", rnd.decimal or ""), ("decimal_cell", DECIMAL_CELL),
             *((f"{key}_cell", cell) for key, cell in receipt_cells.items()),
             *((("qualitative_header_row", qual_head), ("qualitative_rows", qual_rows)) if qual_rows else ())]
    for r, (k, v) in enumerate(pairs, start=1):
        info.write(r, 0, k)
        info.write(r, 1, v)
    info.protect("")
    info.hide()  # read by the tool, never printed
    wb.close()


def _qualitative_table(rnd: Round, ws, info, top: int, fm: dict) -> tuple[int, int]:
    """The qualitative results' table from 0-based row ``top`` (heading, header, rows); its drop-down lists on
    ``info``. Returns the 1-based header row and the number of rows (0, 0 without qualitative measurands)."""
    if not rnd.qualitative:
        return 0, 0
    ws.write(top, 0, QUALITATIVE_HEADING, fm["bold"])
    ws.write(top, 1, "choose the result from the list; one row per test item", None)
    head = top + 1
    for j, c in enumerate(QUALITATIVE_FORM_COLUMNS):
        ws.write(head, j, c, fm["head"])
    lists: dict[tuple[str, ...], str] = {}

    def source(values: tuple[str, ...]) -> str:
        """The form-info range holding ``values`` (one column per distinct list)."""
        if values not in lists:
            col = _LIST_COLUMN + len(lists)
            info.write_column(1, col, list(values))
            first = xlsxwriter.utility.xl_rowcol_to_cell(1, col, row_abs=True, col_abs=True)
            last = xlsxwriter.utility.xl_rowcol_to_cell(len(values), col, row_abs=True, col_abs=True)
            lists[values] = f"='{INFO_SHEET}'!{first}:{last}"
        return lists[values]

    r = head + 1
    for q in rnd.qualitative.values():
        for item in q.items or ("",):
            ws.write_string(r, 0, q.name, fm["locked"])
            if item:
                ws.write_string(r, 1, item, fm["entry"])
            else:
                ws.write_blank(r, 1, None, fm["entry"])
            for j in range(2, len(QUALITATIVE_FORM_COLUMNS)):
                ws.write_blank(r, j, None, fm["entry"])
            if q.items:
                ws.data_validation(r, 1, r, 1, {"validate": "list", "source": source(q.items),
                                                "error_title": "Item",
                                                "error_message": f"Choose one of the test items of {q.name}."})
            order = " (lowest first)" if q.kind == "ordinal" else ""
            ws.data_validation(r, 2, r, 2, {"validate": "list", "source": source(q.categories),
                                            "input_title": _input_title(q.label or q.name),
                                            "input_message": f"One of: {', '.join(q.categories)}{order}"[:255],
                                            "error_title": "Result",
                                            "error_message": f"Choose one of the categories of {q.name}."[:255]})
            ws.data_validation(r, 3, r, 4, {"validate": "length", "criteria": "<=", "value": 200,
                                            "error_message": "At most 200 characters."})
            r += 1
    return head + 1, r - head - 1


def _qualitative_records(rnd: Round, results: SheetRows, kv: dict, lab: str, decimal):
    """The records of the qualitative table (none on a form without one); a blank result is no record."""
    from roundscore.model.table import Record

    try:
        head, n = int(kv.get("qualitative_header_row") or 0), int(kv.get("qualitative_rows") or 0)
    except (TypeError, ValueError, OverflowError):
        return [], [Problem(message="the form-info sheet is damaged (qualitative_header_row, qualitative_rows)",
                            file=results.file, sheet=INFO_SHEET)]
    if not n:
        return [], []
    rows = results.rows
    header = [str(c).strip() if c is not None else "" for c in (rows[head - 1] if 0 < head <= len(rows) else [])]
    if tuple(header[:len(QUALITATIVE_FORM_COLUMNS)]) != QUALITATIVE_FORM_COLUMNS:
        return [], [Problem(message="the qualitative results' header was changed; expected: "
                                    + ", ".join(QUALITATIVE_FORM_COLUMNS), file=results.file, sheet=results.sheet,
                            row=head, hint="return the form with its tables as they were sent")]
    cols = QUALITATIVE_FORM_COLUMNS
    places = {"measurand": (0, cols[0]), "item": (1, cols[1]), "value": (2, cols[2]), "method": (3, cols[3]),
              "comment": (4, cols[4])}
    records = []
    for i in range(head, min(head + n, len(rows))):
        r = list(rows[i]) + [None] * (len(cols) - len(rows[i]))
        if r[0] is None or str(r[0]).strip() == "":
            continue
        records.append(Record(lab=lab, measurand=r[0], replicate=1, value=r[2], item=r[1], method=r[3],
                              comment=r[4], file=results.file, sheet=results.sheet, row=i + 1, decimal=decimal,
                              cols=places))
    return records, []


def _write_receipt_fields(wb, ws, bold, col: int) -> dict[str, str]:
    """The optional sample fields: labels in column ``col`` (Method), entry cells beside them (Comment), rows
    2-4; their cells by form-info key."""
    entry = wb.add_format({"locked": False, "border": 1, "bg_color": "#FFFFFF", "align": "left"})
    date = wb.add_format({"locked": False, "border": 1, "bg_color": "#FFFFFF", "align": "left",
                          "num_format": "yyyy-mm-dd"})
    cells = {}
    for row, (key, label, kind) in enumerate(RECEIPT_FIELDS, start=1):
        ws.write_string(row, col, label, bold)
        ws.write_blank(row, col + 1, None, date if kind == "date" else entry)
        if kind == "date":
            ws.data_validation(row, col + 1, row, col + 1, {
                "validate": "date", "criteria": "between", "minimum": dt.date(2000, 1, 1),
                "maximum": dt.date(2100, 12, 31), "input_title": label,
                "input_message": "Optional: a date, such as 2026-10-14.",
                "error_message": "Enter a date, such as 2026-10-14, or leave the cell blank."})
        else:
            ws.data_validation(row, col + 1, row, col + 1, {
                "validate": "length", "criteria": "<=", "value": 200, "input_title": label,
                "input_message": "Optional: for example intact, cool, leaking, thawed.",
                "error_message": "At most 200 characters."})
        cells[key] = xlsxwriter.utility.xl_rowcol_to_cell(row, col + 1)
    return cells


#: Longest title of a cell's input message (UTF-16 code units): Excel's limit; xlsxwriter drops the whole
#: validation, drop-down list included, when a title is longer.
INPUT_TITLE_UNITS = 32


def _input_title(text: str) -> str:
    """``text`` as a data validation's input title: cut with "…" to :data:`INPUT_TITLE_UNITS` UTF-16 units.

    >>> _input_title("Sand and grit (graded by sieving)")
    'Sand and grit (graded by sievin…'
    >>> _input_title("grit")
    'grit'
    """
    def units(s: str) -> int:
        return len(s.encode("utf-16-le")) // 2

    if units(text) <= INPUT_TITLE_UNITS:
        return text
    while units(text) > INPUT_TITLE_UNITS - 1:
        text = text[:-1]
    return text.rstrip() + "…"


def _fixed_time():
    import datetime as dt

    # A fixed creation time keeps workbooks byte-reproducible.
    return dt.datetime(2000, 1, 1)


@dataclass(frozen=True, slots=True, kw_only=True)
class FormsWritten:
    """What :func:`write_forms` did: the forms written, the existing files kept, the old files set aside."""

    written: tuple[Path, ...]
    kept: tuple[Path, ...] = ()
    set_aside: tuple[tuple[Path, Path], ...] = ()  # (form written, where the file it replaced now is)


def form_file_name(round_id: str, lab: str) -> str:
    """A blank form's file name, ``ROUND-LAB.xlsx`` (both parts by :func:`roundscore.support.filenames.file_stem`)."""
    from roundscore.support.filenames import file_stem

    return f"{file_stem(round_id)}-{file_stem(lab)}.xlsx"


def write_forms(rnd: Round, labs: Iterable[tuple[str, str | None]], folder: Path, *,
                replace: bool = False) -> FormsWritten:
    """Write one blank form per (lab code, name) into ``folder``.

    Every code is checked by the lab-code rule (:mod:`roundscore.model.labcodes`)
    first, and codes that would clash are refused, before any form is
    written. An existing file of the same name is never overwritten: it is
    kept and reported, or with ``replace`` renamed to ``NAME.old-N.xlsx``
    (the first unused N) before the new form takes its name. Each form is
    written to a temporary name first and renamed when complete.
    """
    from roundscore.errors import InputError
    from roundscore.model.labcodes import clash_problems, read_lab_code

    labs = list(labs)
    problems: list[Problem] = []
    checked: list[tuple[str, str | None]] = []
    places: dict[str, Place] = {}
    for i, (lab, name) in enumerate(labs, start=1):
        code, why = read_lab_code(lab)
        if code is None:
            problems.append(Problem(message=why or "the lab code is empty", column=f"lab {i}", value=lab))
            continue
        places.setdefault(code, {"column": f"lab {i}"})
        checked.append((code, name))
    problems += clash_problems(places)
    if problems:
        raise InputError(problems, summary="no form was written: lab codes break the rule")
    folder.mkdir(parents=True, exist_ok=True)
    written, kept, aside = [], [], []
    for lab, name in checked:
        p = folder / form_file_name(rnd.id, lab)
        if p.exists() or p.is_symlink():
            if not replace:
                kept.append(p)
                continue
        fd, tmp_name = tempfile.mkstemp(prefix=f".{p.stem}.partial-", suffix=".xlsx", dir=folder)
        os.close(fd)
        tmp = Path(tmp_name)
        try:
            write_form(rnd, lab, tmp, name=name)
            if p.exists() or p.is_symlink():
                n = 1
                while (backup := p.with_name(f"{p.stem}.old-{n}{p.suffix}")).exists() or backup.is_symlink():
                    n += 1
                os.rename(p, backup)  # the old file keeps its content under a new name
                aside.append((p, backup))
            _place(tmp, p)
        except FileExistsError:  # a file of that name appeared while the form was written: it is kept
            tmp.unlink(missing_ok=True)
            kept.append(p)
            continue
        except BaseException:
            tmp.unlink(missing_ok=True)  # our own temporary file
            raise
        written.append(p)
    return FormsWritten(written=tuple(written), kept=tuple(kept), set_aside=tuple(aside))


def _place(tmp: Path, dest: Path) -> None:
    """Give ``tmp`` the name ``dest``, failing with FileExistsError rather than replacing a file there."""
    try:
        os.link(tmp, dest)  # fails if dest exists, unlike rename
    except FileExistsError:
        raise
    except OSError:  # a file system without hard links
        if dest.exists():
            raise FileExistsError(dest) from None
        os.rename(tmp, dest)
        return
    tmp.unlink()


def lab_cell(info: SheetRows) -> dict:
    """Where a form keeps its lab code: the value cell beside the key ``lab`` on the form-info sheet."""
    for i, r in enumerate(info.rows):
        if i and r and r[0] is not None and str(r[0]).strip() == "lab":
            return {"file": info.file if info.file else None, "sheet": INFO_SHEET, "row": i + 1, "column": "B"}
    return {"file": info.file if info.file else None, "sheet": INFO_SHEET}


#: Where the form shows the lab code to the person filling it in (written by :func:`write_form`).
_SHOWN_LAB_ROW, _SHOWN_LAB_LABEL = 5, "Laboratory code"


def _form_lab(kv: dict, info: SheetRows, results: SheetRows) -> tuple[str, list[Problem]]:
    """The form's lab code from its form-info sheet, checked by the lab-code rule and against the Results sheet.

    The code on the hidden form-info sheet is what the reader uses; the
    Results sheet shows the same code to the person filling in the form. A
    form whose two codes differ was edited by hand: which lab's results it
    holds cannot be told, so it is refused, naming both cells.
    """
    from roundscore.model.labcodes import read_lab_code

    place = {**lab_cell(info), "file": results.file}
    raw = kv.get("lab")
    lab, why = read_lab_code(raw)
    if lab is None:
        return "", [Problem(message=why or "the form has no laboratory code", value=raw, **place)]
    rows = results.rows
    shown = rows[_SHOWN_LAB_ROW - 1] if len(rows) >= _SHOWN_LAB_ROW else ()
    if len(shown) >= 2 and shown[0] is not None and str(shown[0]).strip() == _SHOWN_LAB_LABEL:
        visible, _ = read_lab_code(shown[1])
        if visible != lab:
            from roundscore.text import quote

            return "", [Problem(
                message=(f"the lab code on the hidden sheet {INFO_SHEET!r} ({quote(lab)}) differs from the one "
                         f"on sheet {results.sheet or RESULTS_SHEET!r} (cell B{_SHOWN_LAB_ROW}: "
                         f"{quote(shown[1]) if shown[1] is not None else 'empty'}); the form was edited, so "
                         "whose results it holds is not known: send the lab its own form again, or correct "
                         "the code that is wrong"), **place)]
    return lab, []


def _cell_index(ref: str) -> tuple[int, int]:
    """0-based (row, column) of an A1 reference such as ``B8``; ValueError when it is not one."""
    m = re.fullmatch(r"([A-Z]{1,3})([1-9][0-9]{0,6})", ref)
    if not m:
        raise ValueError(ref)
    col = 0
    for ch in m.group(1):
        col = col * 26 + ord(ch) - 64
    return int(m.group(2)) - 1, col - 1


@dataclass(frozen=True, slots=True, kw_only=True)
class FormDecimal:
    """The decimal mark a returned form declares for its text cells, and where it says so."""

    mark: DecimalMark
    source: str


def _info(info: SheetRows) -> tuple[dict[str, Any], dict[str, int]]:
    """form-info's key/value pairs, and the 1-based row of each key."""
    kv: dict[str, Any] = {}
    rows: dict[str, int] = {}
    for i, r in enumerate(info.rows[1:], start=2):
        if r and r[0] is not None:
            key = str(r[0]).strip()
            kv[key] = r[1] if len(r) > 1 else None
            rows.setdefault(key, i)
    return kv, rows


def form_decimal(results: SheetRows, info: SheetRows) -> tuple[FormDecimal | None, list[Problem]]:
    """The decimal mark a form declares: its 'Decimal mark' cell if filled in, else its form-info value.

    Returns ``(None, [])`` when the form declares none (the round's ``[round]
    decimal`` then applies), and a problem naming the cell when the value is
    neither point nor comma.
    """
    kv, where = _info(info)
    file = results.file
    ref = kv.get("decimal_cell")
    if isinstance(ref, str):
        try:
            row, col = _cell_index(ref.strip())
        except ValueError:
            return None, [Problem(message="the form-info sheet is damaged (decimal_cell)", file=file,
                                  sheet=INFO_SHEET, cell=f"B{where['decimal_cell']}", value=ref)]
        v = results.rows[row][col] if row < len(results.rows) and col < len(results.rows[row]) else None
        text = str(v).strip() if v is not None else ""
        if text:
            word = text.split()[0].lower()
            if is_decimal_mark(word):
                return FormDecimal(mark=word, source=sheet_cell(results.sheet or RESULTS_SHEET, ref.strip())), []
            return None, [Problem(message="the decimal mark must be point or comma, or the cell left blank",
                                  file=file, sheet=results.sheet, row=row + 1, cell=ref.strip(),
                                  column="Decimal mark", value=v,
                                  hint="choose point or comma in the form's 'Decimal mark' cell")]
    v = kv.get("decimal")
    text = str(v).strip().lower() if v is not None else ""
    if text:
        if is_decimal_mark(text):
            return FormDecimal(mark=text, source=sheet_cell(INFO_SHEET, f"B{where['decimal']}")), []
        return None, [Problem(message="the form-info sheet is damaged (decimal)", file=file, sheet=INFO_SHEET,
                              cell=f"B{where['decimal']}", value=v)]
    return None, []


def date_text(v) -> str | None:
    """An ISO date from a cell: a date (or date-time at midnight) cell, or text YYYY-MM-DD; None otherwise."""
    if isinstance(v, dt.datetime):
        return v.date().isoformat() if v.time() == dt.time(0) else None
    if isinstance(v, dt.date):
        return v.isoformat()
    if isinstance(v, str):
        try:
            return dt.date.fromisoformat(v.strip()).isoformat() if re.fullmatch(r"\d{4}-\d{2}-\d{2}",
                                                                                 v.strip()) else None
        except ValueError:
            return None
    return None


def form_receipt(results: SheetRows, info: SheetRows) -> tuple[SampleReceipt | None, list[Problem]]:
    """The optional sample fields of a returned form (:data:`RECEIPT_FIELDS`), and problems naming the cell of
    a date that is not one. ``(None, [])`` for a form without the fields (written before they existed) or
    with all of them blank."""
    from roundscore.text import clip

    kv, where = _info(info)
    found: dict[str, str] = {}
    cells: list[str] = []
    problems: list[Problem] = []
    for key, label, kind in RECEIPT_FIELDS:
        ref = kv.get(f"{key}_cell")
        if not isinstance(ref, str):
            continue
        try:
            row, col = _cell_index(ref.strip())
        except ValueError:
            problems.append(Problem(message=f"the form-info sheet is damaged ({key}_cell)", file=results.file,
                                    sheet=INFO_SHEET, cell=f"B{where[f'{key}_cell']}", value=ref))
            continue
        cells.append(ref.strip())
        v = results.rows[row][col] if row < len(results.rows) and col < len(results.rows[row]) else None
        if v is None or (isinstance(v, str) and not v.strip()):
            continue
        if kind == "date":
            text = date_text(v)
            if text is None:
                problems.append(Problem(
                    message=f"{label.lower()} is not a date", file=results.file, sheet=results.sheet,
                    row=row + 1, cell=ref.strip(), column=label, value=v,
                    hint="write the date as YYYY-MM-DD (2026-10-14), or leave the cell blank"))
                continue
            found[key] = text
        else:
            found[key] = clip(" ".join(str(v).split()), 200)
    if problems or not found:
        return None, problems
    source = f"{results.file}, {sheet_cell(results.sheet or RESULTS_SHEET, cells[0])}"
    if len(cells) > 1:
        source += f":{cells[-1]}"
    return SampleReceipt(**found, source=source), []


def records_from_form(rnd: Round, results: SheetRows, info: SheetRows):
    """Long-layout records from a returned form's two sheets.

    Returns ``(records, problems)``; problems name the file and the cell
    (``Results!D11``). Each record carries the decimal mark the form
    declares (:func:`form_decimal`), or None for the round's.
    """
    from roundscore.model.table import Record

    problems: list[Problem] = []
    kv, where = _info(info)
    file = results.file

    def info_cell(key: str) -> str | None:
        return f"B{where[key]}" if key in where else None

    if kv.get("generator") != "roundscore":
        return [], [Problem(message=f"not a roundscore submission form (sheet {INFO_SHEET!r} lacks generator)",
                            file=file)]
    round_id = str(kv.get("round", "")).strip()
    if round_id != rnd.id:
        from roundscore.text import quote

        problems.append(Problem(message=f"this form is for round {quote(round_id)}, not {quote(rnd.id)}",
                                file=file, sheet=INFO_SHEET, cell=info_cell("round"),
                                hint="put this round's returned forms in its results folder, and only those"))
    lab, lab_problems = _form_lab(kv, info, results)
    problems += lab_problems
    try:
        header_row = int(kv.get("header_row", HEADER_ROW))
        reps = int(kv.get("replicates", rnd.replicates))
    except (TypeError, ValueError, OverflowError):
        return [], problems + [Problem(message="the form-info sheet is damaged", file=file, sheet=INFO_SHEET)]
    if not (1 <= reps <= MAX_FORM_REPLICATES and 1 <= header_row <= len(results.rows) + 1):
        return [], problems + [Problem(
            message=f"the form-info sheet is damaged: replicates must be 1 to {MAX_FORM_REPLICATES} and "
                    "header_row a row of the results sheet", file=file, sheet=INFO_SHEET,
            value=kv.get("replicates") if not 1 <= reps <= MAX_FORM_REPLICATES else kv.get("header_row"))]
    declared, found = form_decimal(results, info)
    problems += found
    problems += form_receipt(results, info)[1]
    if problems:
        return [], problems
    decimal = declared.mark if declared is not None else None
    rows = results.rows
    cols = _columns(reps)
    header = [str(c).strip() if c is not None else ""
              for c in (rows[header_row - 1] if len(rows) >= header_row else [])]
    if header[: len(cols)] != cols:
        return [], [Problem(message="the results table header was changed; expected: " + ", ".join(cols),
                            file=file, sheet=results.sheet, row=header_row,
                            hint="return the form with its table as it was sent (copy the results into a "
                                 "fresh form if needed)")]
    records = []
    iu = 2 + reps
    fixed = {"measurand": (0, cols[0]), "unit": (1, cols[1]), "u": (iu, cols[iu]), "U": (iu + 1, cols[iu + 1]),
             "k": (iu + 2, cols[iu + 2]), "method": (iu + 3, cols[iu + 3]), "comment": (iu + 4, cols[iu + 4])}
    places = [dict(fixed, value=(1 + rep, cols[1 + rep]), replicate=(1 + rep, cols[1 + rep]))
              for rep in range(1, reps + 1)]
    for i in range(header_row, len(rows)):
        r = list(rows[i]) + [None] * (len(cols) - len(rows[i]))
        name = r[0]
        if name is None or str(name).strip() == "":
            break
        if str(name).strip() not in rnd.measurands:
            # The instructions below the table, or a measurand row a lab typed in.
            if all(c is None for c in r[1:len(cols)]):
                break
        for rep in range(1, reps + 1):
            v = r[1 + rep]
            records.append(Record(
                lab=lab, measurand=name, replicate=rep, value=v, unit=r[1], u=r[iu], U=r[iu + 1],
                k=r[iu + 2], method=r[iu + 3], comment=r[iu + 4],
                file=file, sheet=results.sheet, row=i + 1, decimal=decimal, cols=places[rep - 1],
            ))
    qual, qual_problems = _qualitative_records(rnd, results, kv, lab, decimal)
    return records + qual, problems + qual_problems
