"""Result cells → the validated :class:`~roundscore.model.table.ResultTable`.

:func:`build_table` turns sheets read from the long layout (``lab, measurand,
replicate, value`` and optional ``unit, u, U, k, method, comment``) or from
returned submission forms into a :class:`~roundscore.model.table.ResultTable`, converting units to the
measurand's unit, and collecting *every* problem before refusing the import.
"""

from __future__ import annotations

import math
from decimal import Decimal
from collections.abc import Iterable, Mapping
from typing import Any

import numpy as np

from roundscore.errors import InputError, Problem, Place, cell_ref, is_text_file, place, sheet_cell, shown_value
from roundscore.intake.cells import HINT_DECLARE, HINT_NUMBER, CellError, parse_cell
from roundscore.intake.qualitative import QualitativeRows
from roundscore.intake.xlsx import SheetRows
from roundscore.model.labcodes import clash_problems, read_lab_code
from roundscore.model.round import DecimalMark, Round
from roundscore.model.table import COLUMNS, Record, ResultTable, SampleReceipt, table_frame
from roundscore.model.units import UnitError, factor
from roundscore.ranges import MAX_MAGNITUDE, MIN_MAGNITUDE, magnitude_problem
from roundscore.text import shown_list, too_long

__all__ = ["build_table", "validate_records", "records_from_long", "cell_label", "lab_places",
           "summarise_ambiguous", "MAX_LISTED_AMBIGUOUS"]

#: Columns of the long layout (required and optional).
REQUIRED = ("lab", "measurand", "replicate", "value")
OPTIONAL = ("unit", "u", "U", "k", "method", "comment", "item")
#: Columns whose name is matched exactly (``u`` and ``U`` differ); the rest ignore case.
_CASE_SENSITIVE = {"u", "U"}
#: Largest replicate number: far more than any round asks for (a precision experiment may have thousands),
#: and well inside the table's 64-bit integer column.
MAX_REPLICATE = 1_000_000


def cell_label(v: object) -> str | None:
    """A cell as a label (lab code, name, unit): None when blank; whole floats (a spreadsheet's 3.0) as "3"."""
    if v is None:
        return None
    if isinstance(v, float):
        if math.isnan(v):
            return None
        if v.is_integer():
            return str(int(v))
    s = str(v).strip()
    return s or None


_WHAT = {"u": "the standard uncertainty u", "U": "the expanded uncertainty U", "k": "the coverage factor k"}
_HINT_UNCERTAINTY = ("give u, or U with its coverage factor k, as numbers in the unit of the result (k is usually "
                     "2), or leave them blank")


def _number(v: object, what: str, rec: Record, problems: list[Problem], decimal: DecimalMark | None,
            *, positive=False) -> float | None:
    try:
        cell = parse_cell(v, decimal=decimal)
    except CellError as exc:
        hint = _HINT_UNCERTAINTY if exc.hint in (None, HINT_NUMBER) else exc.hint
        problems.append(_problem(f"{_WHAT.get(what, what)}: {exc}", rec, what, v, hint))
        return None
    if cell.kind == "blank":
        return None
    if cell.kind != "value" or cell.value is None or cell.value < 0 or (positive and cell.value == 0):
        problems.append(_problem(f"{_WHAT.get(what, what)} must be a number {'> 0' if positive else '≥ 0'}",
                                 rec, what, v, _HINT_UNCERTAINTY))
        return None
    return cell.value


def _out_of_range(v: float) -> bool:
    """True for a finite number outside roundscore.ranges (NaN, a blank, is in range; ±inf is not)."""
    a = abs(v)
    return a > MAX_MAGNITUDE or 0.0 < a < MIN_MAGNITUDE


def _range_problem(v: float) -> str:
    """What is wrong with a number :func:`_out_of_range` refused (roundscore.ranges)."""
    why = magnitude_problem(v)
    assert why is not None, "a number out of range has a problem"
    return why


def _problem(message: str, rec: Record, column: str | None, value: object, hint: str | None = None) -> Problem:
    """A problem at a record's cell: ``Results!D11`` in a workbook, the line and header in a text file."""
    cell = None
    if rec.cols is not None and column in rec.cols:
        index, column = rec.cols[column]
        if rec.sheet is not None:
            cell = cell_ref(rec.row, index)
    return Problem(
        message=message, file=rec.file, sheet=rec.sheet, row=rec.row, column=column, cell=cell,
        lab=cell_label(rec.lab), measurand=cell_label(rec.measurand), value=value, hint=hint,
    )


def records_from_long(sheet: SheetRows) -> tuple[list[Record], list[Problem]]:
    """Records from a sheet in the long layout; the first non-empty row is the header."""
    problems: list[Problem] = []
    rows = sheet.rows
    start = next((i for i, r in enumerate(rows) if any(c is not None for c in r)), None)
    if start is None:
        return [], [Problem(message="the file is empty", file=sheet.file, sheet=sheet.sheet)]
    header = [cell_label(c) or "" for c in rows[start]]
    index: dict[str, int] = {}
    for j, name in enumerate(header):
        key = name if name in _CASE_SENSITIVE else name.lower()
        if key in REQUIRED or key in OPTIONAL:
            if key in index:
                problems.append(Problem(message=f"column {name!r} appears twice", file=sheet.file,
                                        sheet=sheet.sheet, row=start + 1))
            index[key] = j
    missing = [c for c in REQUIRED if c not in index]
    if missing:
        problems.append(Problem(
            message=f"missing column(s) {', '.join(missing)}; the header must hold "
                    f"{', '.join(REQUIRED)} (optional: {', '.join(OPTIONAL)}); found: "
                    f"{', '.join(h for h in header if h) or 'nothing'}",
            file=sheet.file, sheet=sheet.sheet, row=start + 1))
        return [], problems
    records = []
    cols = {k: (j, header[j]) for k, j in index.items()}
    for i in range(start + 1, len(rows)):
        r = rows[i]
        if not any(c is not None and str(c).strip() for c in r):
            continue
        get: dict[str, Any] = {k: (r[j] if j < len(r) else None) for k, j in index.items()}  # cells as read
        records.append(Record(file=sheet.file, sheet=sheet.sheet, row=sheet.row_number(i), cols=cols, **get))
    return records, problems


def _decimal_scale(text: str | None, f: float) -> str | None:
    if text is None or f == 1.0:
        return text
    return str(Decimal(text) * Decimal(repr(f)))


def build_table(
    rnd: Round,
    records: Iterable[Record],
    *,
    files: Iterable[str] = (),
    warnings: Iterable[str] = (),
    problems: Iterable[Problem] = (),
    readings: Iterable[tuple[str, str]] = (),
    receipts: Mapping[str, SampleReceipt] | None = None,
) -> ResultTable:
    """Validate records against the round and build the :class:`ResultTable`.

    Raises
    ------
    InputError
        Listing every problem: unreadable cells, unknown measurands, duplicate
        lab/measurand/replicate, units that cannot be converted, negative
        results where the measurand allows none, bad uncertainties.
    """
    rows, found = validate_records(rnd, records)
    places = lab_places(rows)
    problems = summarise_ambiguous(list(problems) + found + clash_problems(places))
    if problems:
        raise InputError(problems, summary="the results cannot be imported")
    return ResultTable(frame=table_frame(rows), files=tuple(files), warnings=tuple(warnings),
                       readings=tuple(readings), lab_places=places, receipts=dict(sorted((receipts or {}).items())))

#: Ambiguous numbers of one column listed one by one; more are said in one problem naming all their places.
MAX_LISTED_AMBIGUOUS = 5


def summarise_ambiguous(problems: list[Problem]) -> list[Problem]:
    """Many numbers of one column that can be read two ways (a file typed with 20.310, 19.820 ...) as one problem.

    Up to :data:`MAX_LISTED_AMBIGUOUS` of a column are listed as they are;
    beyond that, one problem gives their number, the first of them and every
    place (lines 2-241, or Results!D2:D241), where the first one was.
    """
    groups: dict[tuple, list[int]] = {}
    for i, p in enumerate(problems):
        if p.hint == HINT_DECLARE:
            groups.setdefault((p.file, p.sheet, p.column), []).append(i)
    replaced: dict[int, Problem | None] = {}
    for (file, sheet, column), idx in groups.items():
        if len(idx) <= MAX_LISTED_AMBIGUOUS:
            continue
        group = [problems[i] for i in idx]
        first = group[0]
        here = (f"line {first.row}" if is_text_file(first.file, first.sheet)
                else place(None, first.sheet, first.row, first.cell))
        replaced.update(dict.fromkeys(idx[1:]))
        replaced[idx[0]] = Problem(
            message=f"{len(group)} numbers typed as text can be read two ways, for example "
                    f"{shown_value(first.value)} ({here}): {first.message}; all at {_places(group)}",
            file=file, sheet=None if first.cell else sheet, column=column, hint=HINT_DECLARE)
    if not replaced:
        return problems
    return [q for i, p in enumerate(problems) if (q := replaced.get(i, p)) is not None]


def _places(group: list[Problem], most: int = 12) -> str:
    """Rows of one column as ranges: ``lines 2-30, 35`` or ``Results!D2:D30, D35``."""
    rows = sorted({p.row for p in group if p.row is not None})
    spans: list[tuple[int, int]] = []
    for r in rows:
        if spans and r == spans[-1][1] + 1:
            spans[-1] = (spans[-1][0], r)
        else:
            spans.append((r, r))
    first = group[0]
    letters = (first.cell or "").rstrip("0123456789")
    if first.cell and first.sheet:
        parts = [f"{letters}{a}" if a == b else f"{letters}{a}:{letters}{b}" for a, b in spans[:most]]
        parts[0] = sheet_cell(first.sheet, parts[0])
    else:
        parts = [str(a) if a == b else f"{a}-{b}" for a, b in spans[:most]]
        parts[0] = ("lines " if is_text_file(first.file, first.sheet) else "rows ") + parts[0]
    more = f" and {len(spans) - most} more" if len(spans) > most else ""
    return ", ".join(parts) + more



def lab_places(rows: Iterable[tuple]) -> dict[str, Place]:
    """Where each lab code of validated rows (:data:`~roundscore.model.table.COLUMNS` tuples) first appears: file,
    sheet, row, column."""
    out: dict[str, Place] = {}
    i_file, i_sheet, i_row = (COLUMNS.index(c) for c in ("file", "sheet", "row"))
    for r in rows:
        if r[0] not in out:
            out[r[0]] = {"file": r[i_file], "sheet": r[i_sheet], "row": r[i_row], "column": "lab"}
    return out


def _optional_number(v: object, what: str, rec: Record, problems: list[Problem], decimal: DecimalMark | None,
                     *, positive=False) -> float:
    """An uncertainty or coverage factor cell: NaN when blank, the number, or NaN and a problem."""
    if v is None:
        return np.nan
    if type(v) is float and v > 0.0 and v != math.inf:  # the usual case from a workbook
        return v
    got = _number(v, what, rec, problems, decimal, positive=positive)
    return got if got is not None else np.nan


def _record_place(first: Record) -> str:
    """Where an earlier record's result is: ``results.csv, line 3`` or ``form.xlsx, Results!C10``."""
    cell = None
    if first.sheet is not None and first.cols is not None and "value" in first.cols:
        cell = cell_ref(first.row, first.cols["value"][0])
    return place(first.file, first.sheet, first.row, cell)


def validate_records(rnd: Round, records: Iterable[Record]) -> tuple[list[tuple], list[Problem]]:
    """Check records against the round: one row tuple (:data:`~roundscore.model.table.COLUMNS`) per valid record,
    and every problem.

    Duplicates are found among these records only (a caller joining several
    files' rows checks across them). Labels seen once are not looked up
    again: a form repeats its lab code and units on every row.
    """
    problems: list[Problem] = []
    out: list[tuple] = []
    seen: dict[tuple[str, str, int], Record] = {}
    round_decimal = rnd.decimal
    known = rnd.measurands
    lower = {k.lower(): k for k in known}
    labels: dict[tuple[type, object], str | None] = {}
    qualitative = QualitativeRows(rnd, problems, _problem)

    def label(v: object) -> str | None:
        key = (type(v), v)
        try:
            return labels[key]
        except KeyError:
            got = labels[key] = cell_label(v)
            return got
        except TypeError:  # an unhashable cell value: never from a reader, but keep the rule
            return cell_label(v)

    codes: dict[tuple[type, object], tuple[str | None, str | None]] = {}
    texts: dict[tuple[str, str], str | None] = {}  # (kind, text) -> why it is refused (None: fine)

    def lab_code(v: object) -> tuple[str | None, str | None]:
        try:
            key = (type(v), v)
            got = codes.get(key)
            if got is None:
                got = codes[key] = read_lab_code(v)
            return got
        except TypeError:
            return read_lab_code(v)

    def bounded(kind: str, v: object, column: str, rec: Record) -> str | None:
        text = label(v)
        if text is None:
            return None
        key = (kind, text)
        why = texts[key] if key in texts else texts.setdefault(key, too_long(kind, text))
        if why:
            problems.append(_problem(why, rec, column, v))
        return text

    for rec in records:
        lab, why = lab_code(rec.lab)
        if lab is None:
            problems.append(_problem(why or "the lab code is empty", rec, "lab", rec.lab))
            continue
        name = label(rec.measurand)
        if name is None:
            problems.append(_problem("the measurand is empty", rec, "measurand", rec.measurand))
            continue
        m = known.get(name)
        if m is None:
            m = known.get(lower.get(name.lower(), ""))
        if m is None and qualitative.add(rec, lab, name, label):  # a nominal or ordinal measurand's result
            continue
        if m is None:
            problems.append(_problem(
                f"unknown measurand; the round has: {shown_list({**known, **rnd.qualitative})}", rec, "measurand",
                rec.measurand,
                "correct the measurand's name, or add it to round.toml ([measurand.NAME])"))
            continue
        rep = rec.replicate
        if type(rep) is int and 1 <= rep <= MAX_REPLICATE:
            replicate = rep
        else:
            rep_text = label(rep)
            try:
                replicate = int(rep_text) if rep_text is not None else -1
            except ValueError:
                replicate = -1
            if not 1 <= replicate <= MAX_REPLICATE:
                problems.append(_problem(f"the replicate must be a whole number from 1 to {MAX_REPLICATE}", rec,
                                         "replicate", rec.replicate))
                continue
        key = (lab, m.name, replicate)
        first = seen.get(key)
        if first is not None:
            problems.append(_problem(
                f"duplicate result for lab {lab}, {m.name}, replicate {replicate} (also at "
                f"{_record_place(first)})", rec, "replicate", rec.replicate,
                "keep one row per lab, measurand and replicate"))
            continue
        seen[key] = rec
        decimal = rec.decimal if rec.decimal is not None else round_decimal
        ok = True
        try:
            cell = parse_cell(rec.value, decimal=decimal)
        except CellError as exc:
            problems.append(_problem(str(exc), rec, "value", rec.value, exc.hint))
            ok = False
        unit = label(rec.unit) or m.unit
        f = 1.0
        if unit != m.unit:
            why = too_long("unit", unit)
            if why:  # refused before the unit parser sees it (a long unit text costs it seconds)
                problems.append(_problem(why, rec, "unit", rec.unit))
                continue
            try:
                f = factor(unit, m.unit)
            except UnitError as exc:
                problems.append(_problem(f"{exc} (the round reports {m.name} in {m.unit})", rec, "unit", rec.unit,
                                         f"give {m.name} in {m.unit} or in a unit that converts to it"))
                ok = False
        if ok:
            value = cell.value * f if cell.value is not None else np.nan
            limit = cell.limit * f if cell.limit is not None else np.nan
            if _out_of_range(value) or _out_of_range(limit):  # roundscore.ranges: too large or small to compute with
                why = _range_problem(value if _out_of_range(value) else limit)
                problems.append(_problem(why + (f" (after converting {unit} to {m.unit})" if f != 1.0 else ""),
                                         rec, "value", rec.value))
                ok = False
            elif cell.kind == "value" and value < 0 and not m.allow_negative:
                problems.append(_problem(
                    f"a negative result, but {m.name} cannot be below zero "
                    "(set allow_negative = true for this measurand if it can)", rec, "value", rec.value))
                ok = False
        # The uncertainty cells are checked even when the result is not, so that every problem is listed.
        u = _optional_number(rec.u, "u", rec, problems, decimal)
        U = _optional_number(rec.U, "U", rec, problems, decimal)
        k = _optional_number(rec.k, "k", rec, problems, decimal, positive=True)
        if not ok:
            continue
        bad = next((n for n, v in (("u", u * f), ("U", U * f), ("k", k)) if _out_of_range(v)), None)
        if bad is not None:
            problems.append(_problem(f"{bad}: " + _range_problem({"u": u * f, "U": U * f, "k": k}[bad]),
                                     rec, bad, getattr(rec, bad)))
            continue
        out.append((
            lab, m.name, replicate, cell.kind, value, _decimal_scale(cell.text, f),
            cell.relation, limit, m.unit, u * f, U * f, k,
            bounded("method", rec.method, "method", rec), bounded("comment", rec.comment, "comment", rec),
            rec.file, rec.sheet, rec.row, unit if unit != m.unit else None, f, None, None,
        ))
    out += qualitative.rows
    problems.sort(key=_reading_order)
    return out, problems


def _reading_order(p: Problem) -> tuple:
    """Problems in the order a person reads the file: by row, then by column (A … Z, AA …)."""
    letters = (p.cell or "").rstrip("0123456789")
    return (p.file or "", p.sheet or "", p.row or 0, len(letters), letters)
