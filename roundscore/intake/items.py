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
from pathlib import Path

import numpy as np

from roundscore.errors import InputError, Problem, cell_ref, is_text_file
from roundscore.intake.cells import CellError, parse_cell
from roundscore.intake.readers import read_item_table
from roundscore.intake.validate import cell_label, summarise_ambiguous
from roundscore.intake.xlsx import SheetRows
from roundscore.model.items import ItemTable, ItemTables, TableKind, check_item_choice
from roundscore.model.round import MeasurandSettings, Round
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
           rnd_names: tuple[str, ...] = (), *, decimal: str | None = None) -> ItemTable:
    required, optional = _REQUIRED[kind], _OPTIONAL[kind]
    rnd_names = rnd_names or (m.name,)
    known = {n.lower() for n in rnd_names}
    problems: list[Problem] = []
    notes: list[str] = []

    index: dict[str, int] = {}

    def bad(message: str, row: int | None, column: str | None = None, value: object = None,
            hint: str | None = None) -> None:
        cell = None  # a workbook's cell is named as the person sees it: Sheet1!C4
        if sheet.sheet is not None and row is not None and column in index:
            cell = cell_ref(row, index[column])
        problems.append(Problem(message=message, file=sheet.file, sheet=sheet.sheet, row=row, column=column,
                                measurand=m.name, value=value, cell=cell, hint=hint))

    rows = sheet.rows
    _row_word = "line" if is_text_file(sheet.file, sheet.sheet) else "row"
    start = next((i for i, r in enumerate(rows) if any(cell_label(c) for c in r)), None)
    if start is None:
        bad(f"the {kind} table is empty; the header must hold {', '.join(required)}", None)
        raise InputError(problems, summary=f"the {kind} table cannot be read")
    header = [cell_label(c) or "" for c in rows[start]]
    ignored = []
    for j, name in enumerate(header):
        key = name.lower()
        if key in required or key in optional:
            if key in index:
                bad(f"column {name!r} appears twice", start + 1, name)
            index[key] = j
        elif name:
            ignored.append(name)
    missing = [c for c in required if c not in index]
    if missing:
        bad(f"missing column(s) {', '.join(missing)}; the header must hold {', '.join(required)} "
            f"(optional: {', '.join(optional)}); found: {', '.join(h for h in header if h) or 'nothing'}",
            start + 1)
        raise InputError(problems, summary=f"the {kind} table cannot be read")
    if ignored:
        notes.append(f"{sheet.file}: column(s) {', '.join(ignored)} ignored")

    items: list[str] = []
    reps: list[int] = []
    values: list[float] = []
    sets: list[str] = []
    where: list[int] = []
    set_u: dict[str, tuple[float, int]] = {}
    seen: dict[tuple[str, str, int], int] = {}
    for i in range(start + 1, len(rows)):
        r = rows[i]
        if not any(cell_label(c) for c in r):
            continue
        row = sheet.row_number(i)
        get = {k: (r[j] if j < len(r) else None) for k, j in index.items()}
        if "measurand" in index:
            name = cell_label(get["measurand"])
            if name is None:
                bad("the measurand is empty", row, "measurand", get["measurand"])
                continue
            if name.lower() != m.name.lower():
                if name.lower() not in known:
                    bad(f"unknown measurand; the round has: {shown_list(rnd_names)}", row, "measurand", name)
                continue
        item = cell_label(get["item"])
        if item is None:
            bad("the item label is empty", row, "item", get["item"])
            continue
        why = too_long("item label", item)
        if why:
            bad(why, row, "item", get["item"])
            continue
        rep = _whole(get["replicate"])
        if rep is None:
            bad("the replicate must be a whole number ≥ 1", row, "replicate", get["replicate"])
            continue
        set_name = ""
        if kind == "stability":
            set_name = cell_label(get["set"]) or ""
            if not set_name:
                bad("the set is empty; name the group of this measurement (e.g. before / after)", row, "set",
                    get["set"])
                continue
            why = too_long("set", set_name)
            if why:
                bad(why, row, "set", get["set"])
                continue
        key = (set_name, item, rep)
        if key in seen:
            what = f"set {set_name!r}, " if set_name else ""
            bad(f"duplicate measurement for {what}item {item!r}, replicate {rep} (also {_row_word} {seen[key]})",
                row, "replicate", get["replicate"])
            continue
        seen[key] = row
        try:
            cell = parse_cell(get["value"], decimal=decimal)
        except CellError as exc:
            bad(str(exc), row, "value", get["value"], exc.hint)
            continue
        if cell.kind == "censored":
            bad(_WHY_CENSORED, row, "value", get["value"])
            continue
        if cell.kind == "blank":
            bad(_WHY_BLANK, row, "value", get["value"])
            continue
        unit = cell_label(get.get("unit")) or m.unit
        f = 1.0
        if unit != m.unit:
            why = too_long("unit", unit)
            if why:  # before the unit converter sees it
                bad(why, row, "unit", get.get("unit"))
                continue
            try:
                f = factor(unit, m.unit)
            except UnitError as exc:
                bad(f"{exc} (the round reports {m.name} in {m.unit})", row, "unit", get.get("unit"))
                continue
        value = float(cell.value) * f  # type: ignore[arg-type]
        why = magnitude_problem(value)  # roundscore.ranges: too large or small to compute with
        if why is not None:
            bad(why, row, "value", get["value"])
            continue
        if value < 0 and not m.allow_negative:
            bad(f"a negative value, but {m.name} cannot be below zero "
                "(set allow_negative = true for this measurand if it can)", row, "value", get["value"])
            continue
        if kind == "stability" and cell_label(get.get("u")) is not None:
            try:
                uc = parse_cell(get["u"], decimal=decimal)
            except CellError as exc:
                bad(f"u: {exc}", row, "u", get["u"], exc.hint)
                continue
            if uc.kind != "value" or uc.value is None or uc.value < 0:
                bad("u must be a number ≥ 0: the standard uncertainty of the set's mean", row, "u", get["u"])
                continue
            u = float(uc.value) * f
            why = magnitude_problem(u)
            if why is not None:
                bad(f"u: {why}", row, "u", get["u"])
                continue
            if set_name in set_u and not math.isclose(set_u[set_name][0], u, rel_tol=1e-12, abs_tol=0.0):
                bad(f"u differs within set {set_name!r} (row {set_u[set_name][1]} gives "
                    f"{set_u[set_name][0]:g}): u is the uncertainty of the set's mean, one number per set",
                    row, "u", get["u"])
                continue
            set_u.setdefault(set_name, (u, row))
        items.append(item)
        reps.append(rep)
        values.append(value)
        sets.append(set_name)
        where.append(row)

    set_names = tuple(dict.fromkeys(sets)) if kind == "stability" else ()
    if not problems:
        _check_layout(kind, items, sets, where, set_names, bad)
    if problems:
        raise InputError(summarise_ambiguous(problems), summary=f"the {kind} table for {m.name} cannot be used")
    return ItemTable(
        file=sheet.file, kind=kind, items=tuple(items), replicates=tuple(reps),
        values=np.asarray(values, dtype=float), sets=tuple(sets) if kind == "stability" else None,
        set_names=set_names, set_u={k: v[0] for k, v in set_u.items()}, rows=tuple(where),
        notes=tuple(notes) + tuple(sheet.warnings),
    )


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
                tables[kind] = read_item_values(rnd, m, kind)  # type: ignore[arg-type]
            except InputError as exc:
                problems += exc.problems
        if problems:
            raise InputError(problems, summary=f"the item checks for {m.name} cannot be run")
        if tables:
            out[m.name] = tables
    return out
