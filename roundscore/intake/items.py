"""Reading a round's homogeneity and stability tables: the layout, the cells, the design.

A measurand's ``[measurand.NAME]`` table may name a homogeneity table and a
stability table (see :mod:`roundscore.evaluation.items` for the checks and
the consequences). :func:`read_item_tables` reads every table a round names,
before the evaluation runs; :func:`read_item_values` reads one. The cells
follow the rules of the results import (:mod:`roundscore.intake.cells`).

Table layouts (CSV or workbook, first non-empty row is the header, column
names ignore case):

homogeneity
    ``item, replicate, value`` and optionally ``measurand``, ``unit`` and
    ``comment``: one row per measurement, g items with m ≥ 2 replicates
    each. With a ``measurand`` column one file can serve several
    measurands: each reads only its own rows.
stability
    ``item, replicate, value, set`` and optionally ``measurand``, ``u``,
    ``unit``, ``comment``: ``set`` names one of exactly two groups (for example
    "before"/"after" or "reference"/"transport"); the set that appears first
    in the file is ȳ₁. ``u``, when given, is the standard uncertainty of that
    set's mean (the same number on every row of the set where it is given).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from roundscore.errors import InputError, Problem, cell_ref, is_text_file
from roundscore.intake.cells import CellError, parse_cell
from roundscore.intake.readers import read_item_table
from roundscore.intake.validate import cell_label, summarise_ambiguous
from roundscore.intake.xlsx import SheetRows
from roundscore.model.items import ItemTable, ItemTables, TableKind, check_item_choice
from roundscore.model.round import DecimalMark, MeasurandSettings, Round
from roundscore.model.units import UnitError, factor
from roundscore.ranges import magnitude_problem
from roundscore.text import shown_list, too_long

__all__ = ["read_item_tables", "read_item_values"]

_REQUIRED: dict[str, tuple[str, ...]] = {
    "homogeneity": ("item", "replicate", "value"),
    "stability": ("item", "replicate", "value", "set"),
}
_OPTIONAL: dict[str, tuple[str, ...]] = {
    "homogeneity": ("measurand", "unit", "comment"),
    "stability": ("measurand", "u", "unit", "comment"),
}

#: Why a censored or blank cell cannot be used (said in every such error).
_WHY_CENSORED = ("a censored value cannot be used in an item check: the between-item and within-item "
                 "standard deviations need every measurement as a number (report the measured value, "
                 "even below the limit)")
_WHY_BLANK = ("a blank value: every measurement of an item is needed for the item check "
              "(delete the whole row if the measurement was not made)")


def _whole(v: object) -> int | None:
    """A replicate number ≥ 1, or None."""
    s = cell_label(v)
    try:
        n = int(s) if s is not None else None
    except ValueError:
        return None
    return n if n is not None and n >= 1 else None


def read_item_values(rnd: Round, m: MeasurandSettings, kind: TableKind) -> ItemTable:
    """Read and validate the homogeneity or stability table named for measurand ``m``.

    Parameters
    ----------
    rnd : Round
        The round (for the folder, in messages).
    m : MeasurandSettings
        The measurand; ``m.homogeneity`` or ``m.stability`` names the file.
    kind : {"homogeneity", "stability"}

    Returns
    -------
    ItemTable

    Raises
    ------
    InputError
        Listing every problem with file, sheet, row, column and value:
        missing columns, empty item or set labels, replicate numbers that are
        not whole numbers ≥ 1, duplicate measurements, cells that are not
        numbers (censored and blank values are refused, see below), units
        that cannot be converted, negative values for a measurand that cannot
        be below zero, an item with a single replicate, fewer than two items
        (homogeneity), other than two sets or conflicting ``u`` (stability).

    Notes
    -----
    Censored values ("<0.5", "n.d.") and blank values are errors, not
    exclusions: the checks compare the spread between items with the spread
    within items, and a measurement replaced by a limit or left out would
    bias both. Fully empty rows are skipped.
    """
    check_item_choice("kind", kind, TableKind)
    path = m.homogeneity if kind == "homogeneity" else m.stability
    if path is None:
        raise InputError.single(f"no {kind} table is named for measurand {m.name}", file=str(rnd.path))
    sheet = read_item_table(rnd, Path(path), what=kind)
    return _parse(sheet, m, kind, tuple(rnd.measurands), decimal=rnd.decimal)


def _parse(sheet: SheetRows, m: MeasurandSettings, kind: TableKind,
           rnd_names: tuple[str, ...] = (), *, decimal: DecimalMark | None = None) -> ItemTable:
    table = _TableReader(sheet, m, kind, rnd_names, decimal)
    start = table.header()
    got = [r for i in range(start + 1, len(sheet.rows)) if (r := table.read_row(i)) is not None]
    items, sets, where = [g.item for g in got], [g.set_name for g in got], [g.row for g in got]
    set_names = tuple(dict.fromkeys(sets)) if kind == "stability" else ()
    if not table.problems:
        _check_layout(kind, items, sets, where, set_names, table.bad)
    if table.problems:
        raise InputError(summarise_ambiguous(table.problems),
                         summary=f"the {kind} table for {m.name} cannot be used")
    return ItemTable(
        file=sheet.file, kind=kind, items=tuple(items), replicates=tuple(g.replicate for g in got),
        values=np.asarray([g.value for g in got], dtype=float), sets=tuple(sets) if kind == "stability" else None,
        set_names=set_names, set_u={k: v[0] for k, v in table.set_u.items()}, rows=tuple(where),
        notes=tuple(table.notes) + tuple(sheet.warnings),
    )


@dataclass(frozen=True, slots=True)
class _Measurement:
    """One usable row of an item table."""

    item: str
    replicate: int
    set_name: str  # "" in a homogeneity table
    value: float  # in the measurand's unit
    row: int  # as the person sees it


class _TableReader:
    """An item table read row by row, every problem collected with its cell (:meth:`bad`)."""

    def __init__(self, sheet: SheetRows, m: MeasurandSettings, kind: TableKind, rnd_names: tuple[str, ...],
                 decimal: DecimalMark | None) -> None:
        self.sheet, self.m, self.kind, self.decimal = sheet, m, kind, decimal
        self.rnd_names = rnd_names or (m.name,)
        self.known = {n.lower() for n in self.rnd_names}
        self.problems: list[Problem] = []
        self.notes: list[str] = []
        self.index: dict[str, int] = {}
        self.row_word = "line" if is_text_file(sheet.file, sheet.sheet) else "row"
        self.seen: dict[tuple[str, str, int], int] = {}
        self.set_u: dict[str, tuple[float, int]] = {}

    def bad(self, message: str, row: int | None, column: str | None = None, value: object = None,
            hint: str | None = None) -> None:
        cell = None  # a workbook's cell is named as the person sees it: Sheet1!C4
        if self.sheet.sheet is not None and row is not None and column in self.index:
            cell = cell_ref(row, self.index[column])
        self.problems.append(Problem(message=message, file=self.sheet.file, sheet=self.sheet.sheet, row=row,
                                     column=column, measurand=self.m.name, value=value, cell=cell, hint=hint))

    def header(self) -> int:
        """The header's row index, its columns read into :attr:`index`; InputError when it is unusable."""
        kind, rows = self.kind, self.sheet.rows
        required, optional = _REQUIRED[kind], _OPTIONAL[kind]
        start = next((i for i, r in enumerate(rows) if any(cell_label(c) for c in r)), None)
        if start is None:
            self.bad(f"the {kind} table is empty; the header must hold {', '.join(required)}", None)
            raise InputError(self.problems, summary=f"the {kind} table cannot be read")
        header = [cell_label(c) or "" for c in rows[start]]
        ignored = []
        for j, name in enumerate(header):
            key = name.lower()
            if key in required or key in optional:
                if key in self.index:
                    self.bad(f"column {name!r} appears twice", start + 1, name)
                self.index[key] = j
            elif name:
                ignored.append(name)
        missing = [c for c in required if c not in self.index]
        if missing:
            self.bad(f"missing column(s) {', '.join(missing)}; the header must hold {', '.join(required)} "
                     f"(optional: {', '.join(optional)}); found: {', '.join(h for h in header if h) or 'nothing'}",
                     start + 1)
            raise InputError(self.problems, summary=f"the {kind} table cannot be read")
        if ignored:
            self.notes.append(f"{self.sheet.file}: column(s) {', '.join(ignored)} ignored")
        return start

    def read_row(self, i: int) -> _Measurement | None:
        """Row ``i`` (0-based) as a measurement; None for an empty row, another measurand's or a bad one."""
        r = self.sheet.rows[i]
        if not any(cell_label(c) for c in r):
            return None
        row = self.sheet.row_number(i)
        get = {k: (r[j] if j < len(r) else None) for k, j in self.index.items()}
        if "measurand" in self.index and not self._ours(get, row):
            return None
        keys = self._keys(get, row)
        if keys is None:
            return None
        item, rep, set_name = keys
        value_f = self._value(get, row)
        if value_f is None:
            return None
        value, f = value_f
        if self.kind == "stability" and cell_label(get.get("u")) is not None:
            if not self._set_u(get, row, set_name, f):
                return None
        return _Measurement(item=item, replicate=rep, set_name=set_name, value=value, row=row)

    def _ours(self, get: dict[str, object], row: int) -> bool:
        """Whether the row is of this measurand (a problem when it names none, or one the round lacks)."""
        name = cell_label(get["measurand"])
        if name is None:
            self.bad("the measurand is empty", row, "measurand", get["measurand"])
            return False
        if name.lower() != self.m.name.lower():
            if name.lower() not in self.known:
                self.bad(f"unknown measurand; the round has: {shown_list(self.rnd_names)}", row, "measurand",
                         name)
            return False
        return True

    def _keys(self, get: dict[str, object], row: int) -> tuple[str, int, str] | None:
        """Item, replicate and set of a row, each checked, and checked against the rows before."""
        item = cell_label(get["item"])
        if item is None:
            self.bad("the item label is empty", row, "item", get["item"])
            return None
        why = too_long("item label", item)
        if why:
            self.bad(why, row, "item", get["item"])
            return None
        rep = _whole(get["replicate"])
        if rep is None:
            self.bad("the replicate must be a whole number ≥ 1", row, "replicate", get["replicate"])
            return None
        set_name = ""
        if self.kind == "stability":
            set_name = cell_label(get["set"]) or ""
            if not set_name:
                self.bad("the set is empty; name the group of this measurement (e.g. before / after)", row,
                         "set", get["set"])
                return None
            why = too_long("set", set_name)
            if why:
                self.bad(why, row, "set", get["set"])
                return None
        key = (set_name, item, rep)
        if key in self.seen:
            what = f"set {set_name!r}, " if set_name else ""
            self.bad(f"duplicate measurement for {what}item {item!r}, replicate {rep} "
                     f"(also {self.row_word} {self.seen[key]})", row, "replicate", get["replicate"])
            return None
        self.seen[key] = row
        return item, rep, set_name

    def _value(self, get: dict[str, object], row: int) -> tuple[float, float] | None:
        """The row's value in the measurand's unit, and the unit's factor; None after a problem."""
        m = self.m
        try:
            cell = parse_cell(get["value"], decimal=self.decimal)
        except CellError as exc:
            self.bad(str(exc), row, "value", get["value"], exc.hint)
            return None
        if cell.kind == "censored":
            self.bad(_WHY_CENSORED, row, "value", get["value"])
            return None
        if cell.kind == "blank" or cell.value is None:
            self.bad(_WHY_BLANK, row, "value", get["value"])
            return None
        unit = cell_label(get.get("unit")) or m.unit
        f = 1.0
        if unit != m.unit:
            why = too_long("unit", unit)
            if why:  # before the unit converter sees it
                self.bad(why, row, "unit", get.get("unit"))
                return None
            try:
                f = factor(unit, m.unit)
            except UnitError as exc:
                self.bad(f"{exc} (the round reports {m.name} in {m.unit})", row, "unit", get.get("unit"))
                return None
        value = float(cell.value) * f
        why = magnitude_problem(value)  # roundscore.ranges: too large or small to compute with
        if why is not None:
            self.bad(why, row, "value", get["value"])
            return None
        if value < 0 and not m.allow_negative:
            self.bad(f"a negative value, but {m.name} cannot be below zero "
                     "(set allow_negative = true for this measurand if it can)", row, "value", get["value"])
            return None
        return value, f

    def _set_u(self, get: dict[str, object], row: int, set_name: str, f: float) -> bool:
        """A stability row's u (the uncertainty of its set's mean), kept in :attr:`set_u`; False after a
        problem."""
        try:
            uc = parse_cell(get["u"], decimal=self.decimal)
        except CellError as exc:
            self.bad(f"u: {exc}", row, "u", get["u"], exc.hint)
            return False
        if uc.kind != "value" or uc.value is None or uc.value < 0:
            self.bad("u must be a number ≥ 0: the standard uncertainty of the set's mean", row, "u", get["u"])
            return False
        u = float(uc.value) * f
        why = magnitude_problem(u)
        if why is not None:
            self.bad(f"u: {why}", row, "u", get["u"])
            return False
        set_u = self.set_u
        if set_name in set_u and not math.isclose(set_u[set_name][0], u, rel_tol=1e-12, abs_tol=0.0):
            self.bad(f"u differs within set {set_name!r} (row {set_u[set_name][1]} gives "
                     f"{set_u[set_name][0]:g}): u is the uncertainty of the set's mean, one number per set",
                     row, "u", get["u"])
            return False
        set_u.setdefault(set_name, (u, row))
        return True


def _check_layout(kind, items, sets, where, set_names, bad) -> None:
    """The design problems a row-by-row check cannot see: too few items, lone replicates, sets."""
    if not items:
        bad(f"the {kind} table holds no measurements for this measurand", None)
        return
    if kind == "homogeneity":
        groups: dict[str, list[int]] = {}
        for item, row in zip(items, where):
            groups.setdefault(item, []).append(row)
        if len(groups) < 2:
            bad(f"a homogeneity check needs at least 2 items (ISO 13528 asks for 10); found {len(groups)}", None)
        for item, rws in groups.items():
            if len(rws) < 2:
                bad(f"item {item!r} has a single measurement; every item needs at least 2 replicates",
                    rws[0], "item", item)
        return
    if len(set_names) != 2:
        bad(f"a stability table needs exactly 2 sets (e.g. before / after); found {len(set_names)}: "
            f"{', '.join(repr(s) for s in set_names)}", None, "set")


def read_item_tables(rnd: Round) -> ItemTables:
    """Read every homogeneity and stability table the round names, measurand by measurand.

    Returns
    -------
    dict of str to dict of str to ItemTable
        Measurand → {"homogeneity": table, "stability": table}, for the
        measurands that name a table (only the kinds they name).

    Raises
    ------
    InputError
        For the first measurand (in round-file order) whose tables cannot be
        used, listing the problems of both its tables together (see
        :func:`read_item_values`).
    """
    out: dict[str, dict[str, ItemTable]] = {}
    for m in rnd.measurands.values():
        tables: dict[str, ItemTable] = {}
        problems: list[Problem] = []
        for kind in ("homogeneity", "stability"):
            if getattr(m, kind) is None:
                continue
            try:
                tables[kind] = read_item_values(rnd, m, kind)
            except InputError as exc:
                problems += exc.problems
        if problems:
            raise InputError(problems, summary=f"the item checks for {m.name} cannot be run")
        if tables:
            out[m.name] = tables
    return out
