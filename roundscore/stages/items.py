"""Test-item homogeneity and stability in the round: read the tables, run the checks, apply the consequences.

A measurand's ``[measurand.NAME]`` table in ``round.toml`` may name a
homogeneity table (``homogeneity = "homogeneity.csv"``) and a stability table
(``stability = "stability.csv"``). This stage reads them with the same cell
rules as the results import, runs :func:`roundscore.stats.items.homogeneity`
and :func:`roundscore.stats.items.stability` at the round's σ_pt, and applies
the consequence chosen with ``item_checks``:

``"uncertainty"`` (default)
    u(x_pt)² = u_char² + u_hom² + u_stab², with u_hom = s_s and
    u_stab = |ȳ₁ − ȳ₂|/√3.
``"widen-sigma"``
    σ_pt' = √(σ_pt² + s_s²).
``"both"``
    both of the above.
``"report"``
    the checks are reported; σ_pt and u(x_pt) are unchanged.

The chosen consequence is applied whether or not the check passed (it is the
provider's documented choice, made before the data are seen); a failed check
does not stop scoring, it heads the summary and every lab sheet through
:attr:`roundscore.evaluate.RoundEvaluation.failed_checks`, and
``roundscore score --strict`` exits 1.

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

The results support, and do not replace, the provider's documented
procedures, ISO/IEC 17043 and the accreditation body's rules.

References
----------
.. [1] ISO 13528:2015, Annex B (homogeneity and stability), clause 7 (the
   uncertainty of the assigned value); clause numbers from memory.
.. [2] M. Thompson, S. L. R. Ellison, R. Wood, "The International Harmonized
   Protocol for the proficiency testing of analytical chemistry
   laboratories", Pure Appl. Chem. 78 (2006) 145-196, Section 3.11 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal, get_args

import numpy as np

from roundscore.intake.cells import CellError, parse_cell
from roundscore.errors import InputError, Problem, StatisticsError, cell_ref, is_text_file
from roundscore.intake.readers import read_item_table
from roundscore.intake.xlsx import SheetRows
from roundscore.ranges import magnitude_problem
from roundscore.model.round import MeasurandSettings, Round
from roundscore.stats import items as st
from roundscore.intake.validate import cell_label, summarise_ambiguous
from roundscore.text import shown_list, too_long
from roundscore.model.units import UnitError, factor

__all__ = [
    "ITEMS_COLUMNS",
    "ItemConsequence",
    "ItemTable",
    "ItemOutcome",
    "read_item_values",
    "apply_item_checks",
]

#: items.csv columns (fixed by the issue); ``check`` is "homogeneity" or "stability".
ITEMS_COLUMNS = ("measurand", "check", "g", "m", "mean", "s_x", "s_w", "s_s", "criterion", "allowed",
                 "passed", "note")

ItemConsequence = Literal["uncertainty", "widen-sigma", "both", "report"]
StabilityChoice = Literal["auto", "simple", "expanded"]
TableKind = Literal["homogeneity", "stability"]

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


def _check_choice(name: str, value: object, allowed: object) -> str:
    """``value`` if it is one of the ``Literal`` choices ``allowed``, else InputError listing them."""
    choices = get_args(allowed)
    if value not in choices:
        shown = ", ".join(repr(c) for c in choices)
        raise InputError.single(f"{name}: found {value!r}; allowed: {shown}")
    return str(value)


@dataclass(frozen=True, slots=True, kw_only=True)
class ItemTable:
    """A homogeneity or stability table as read and validated, values in the measurand's unit.

    Attributes
    ----------
    file : str
        The file as shown to the user (relative to the round folder).
    kind : {"homogeneity", "stability"}
    items : tuple of str
        Item label of each measurement.
    replicates : tuple of int
        Replicate number of each measurement.
    values : numpy.ndarray
        The measurements (float), converted to the measurand's unit.
    sets : tuple of str or None
        Set label of each measurement (stability tables only).
    set_names : tuple of str
        The distinct sets in order of first appearance (empty for homogeneity).
    set_u : dict of str to float
        Standard uncertainty of each set's mean where the table gives one.
    rows : tuple of int
        Spreadsheet row (header = row 1) of each measurement.
    notes : tuple of str
        Things that did not stop the import (e.g. ignored columns).
    """

    file: str
    kind: TableKind
    items: tuple[str, ...]
    replicates: tuple[int, ...]
    values: np.ndarray
    sets: tuple[str, ...] | None
    set_names: tuple[str, ...]
    set_u: dict[str, float]
    rows: tuple[int, ...]
    notes: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True, kw_only=True)
class ItemOutcome:
    """The item checks of one measurand and what they did to σ_pt and u(x_pt).

    Attributes
    ----------
    sigma_pt : float
        σ_pt to score with: widened to √(σ_pt² + s_s²) when the consequence
        asks for it, else as given.
    u_assigned : float
        u(x_pt) to score with: √(u_char² + u_hom² + u_stab²) when the
        consequence asks for it, else u_char.
    sigma_pt_before, u_char : float
        σ_pt and u(x_pt) as they came in (the checks use ``sigma_pt_before``).
    consequence : {"uncertainty", "widen-sigma", "both", "report"}
        The ``item_checks`` setting applied.
    homogeneity : HomogeneityResult or None
        The homogeneity check (None when no table is named or σ_pt is unknown).
    stability : StabilityResult or None
        The stability check (None when no table is named or σ_pt is unknown).
    homogeneity_table, stability_table : ItemTable or None
        The tables as read (the item-means chart reads them).
    stability_sets : tuple of (str, str) or None
        Names of the first (ȳ₁) and second (ȳ₂) stability sets.
    u_hom : float
        s_s of the homogeneity check (0 when s_s was truncated to 0, or no check).
    u_stab : float
        |ȳ₁ − ȳ₂|/√3 of the stability check (0 when no check).
    widened : bool
        True when σ_pt was widened (consequence asks for it and s_s > 0).
    rows : tuple of dict
        Rows of items.csv, keys :data:`ITEMS_COLUMNS`.
    notes : tuple of str
        Lines for the measurand's notes in every output.
    audit : tuple of tuple
        Audit rows (measurand, lab, step, action, reason).
    """

    sigma_pt: float
    u_assigned: float
    sigma_pt_before: float
    u_char: float
    consequence: ItemConsequence
    homogeneity: st.HomogeneityResult | None
    stability: st.StabilityResult | None
    homogeneity_table: ItemTable | None
    stability_table: ItemTable | None
    stability_sets: tuple[str, str] | None
    u_hom: float
    u_stab: float
    widened: bool
    rows: tuple[dict[str, Any], ...]
    notes: tuple[str, ...]
    audit: tuple[tuple[str, str, str, str, str], ...]

    @property
    def passed(self) -> bool:
        """True when every check that was named passed (a check that could not be run has not passed)."""
        return all(bool(r["passed"]) for r in self.rows)


# ----------------------------------------------------------------------------------------- reading


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
    _check_choice("kind", kind, TableKind)
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


# ------------------------------------------------------------------------------------------ checks


def _set_values(table: ItemTable, set_name: str) -> tuple[np.ndarray, int, float, str]:
    """The values entering the stability mean of one set, with item count, replicates per item and a word.

    With two or more items in the set the item means are used (the item is
    the sampling unit, so u = SD of the item means / √g); with one item its
    replicates are used.
    """
    assert table.sets is not None
    mask = np.array([s == set_name for s in table.sets])
    vals = table.values[mask]
    its = [it for it, keep in zip(table.items, mask) if keep]
    order = list(dict.fromkeys(its))
    if len(order) < 2:
        return vals, 1, float(vals.size), "replicates of the single item"
    codes = np.array([order.index(it) for it in its])
    counts = np.bincount(codes)
    shift = float(np.median(vals))
    means = shift + np.bincount(codes, weights=vals - shift) / counts
    return means, len(order), float(np.mean(counts)), "item means"


def _wrap(exc: StatisticsError, table: ItemTable, m: MeasurandSettings) -> InputError:
    return InputError.single(f"the {table.kind} check cannot be computed: {exc}", file=table.file,
                             measurand=m.name)


def _fmt(x: float) -> str:
    return f"{x:.4g}"


def _homogeneity_row(m: MeasurandSettings, h: st.HomogeneityResult, extra: list[str]) -> dict[str, Any]:
    return {
        "measurand": m.name, "check": "homogeneity", "g": h.g, "m": h.m, "mean": h.mean, "s_x": h.s_x,
        "s_w": h.s_w, "s_s": h.s_s, "criterion": h.criterion, "allowed": h.allowed, "passed": bool(h.passed),
        "note": "; ".join([*h.notes, *extra]),
    }


def _stability_row(m: MeasurandSettings, s: st.StabilityResult, g: int, reps: float,
                   names: tuple[str, str], extra: list[str]) -> dict[str, Any]:
    allowed = s.criterion if s.criterion_used == "simple" else s.allowed_expanded
    head = (f"mean = y1 - y2 = {_fmt(s.difference)}: y1 = {_fmt(s.mean_first)} (set {names[0]!r}), "
            f"y2 = {_fmt(s.mean_second)} (set {names[1]!r})")
    return {
        "measurand": m.name, "check": "stability", "g": g, "m": reps, "mean": s.difference,
        "s_x": None, "s_w": None, "s_s": None, "criterion": s.criterion, "allowed": allowed,
        "passed": bool(s.passed), "note": "; ".join([head, *s.notes, *extra]),
    }


def _not_run_row(m: MeasurandSettings, kind: str, why: str) -> dict[str, Any]:
    return {c: None for c in ITEMS_COLUMNS} | {"measurand": m.name, "check": kind, "passed": False,
                                               "note": f"not evaluated: {why}"}


def apply_item_checks(rnd: Round, m: MeasurandSettings, *, sigma_pt: float, u_char: float) -> ItemOutcome:
    """Run the homogeneity and stability checks of measurand ``m`` and apply the consequence chosen.

    Parameters
    ----------
    rnd : Round
        The round (its folder holds the tables).
    m : MeasurandSettings
        ``m.homogeneity`` / ``m.stability`` name the tables, ``m.item_checks``
        the consequence, ``m.stability_criterion`` the stability verdict.
    sigma_pt : float
        σ_pt as set for the round, before any widening; the criteria use it
        (also when σ_pt is the participants' robust SD). NaN when it could not
        be set: the tables are still validated, the checks are reported as not
        evaluated (and so not passed).
    u_char : float
        u(x_pt) from the characterisation (reference value or consensus).

    Returns
    -------
    ItemOutcome

    Raises
    ------
    InputError
        When a table is missing or cannot be used (see :func:`read_item_values`);
        problems in both tables are reported together.

    Notes
    -----
    Assumptions, stated:

    - u_hom = s_s of the homogeneity check; where s_s was truncated to 0
      (s_x² < s_w²/m) u_hom is 0, and the notes say so.
    - u_stab = |ȳ₁ − ȳ₂|/√3 (the difference as half-width of a rectangular
      distribution), whether or not the stability check passed.
    - The consequence is applied whether or not the checks passed: it is
      the provider's documented choice. Widening needs a homogeneity table.
    - In a stability table each set's mean is the mean of its item means
      (two or more items) or of its replicates (one item); ``u`` in the
      table is that mean's standard uncertainty. With ``stability_criterion
      = "auto"`` the expanded criterion gives the verdict when the table
      gives ``u`` for a set, otherwise the simple one; both are reported.

    References
    ----------
    .. [1] ISO 13528:2015, B.2-B.6 and clause 7 (from memory).
    """
    consequence: ItemConsequence = _check_choice(f"measurand.{m.name}.item_checks", m.item_checks,
                                                 ItemConsequence)  # type: ignore[assignment]
    choice: StabilityChoice = _check_choice(f"measurand.{m.name}.stability_criterion",
                                            getattr(m, "stability_criterion", "auto"),
                                            StabilityChoice)  # type: ignore[assignment]
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

    notes: list[str] = []
    audit: list[tuple[str, str, str, str, str]] = []
    rows: list[dict[str, Any]] = []
    for t in tables.values():
        notes += list(t.notes)
    sigma_ok = bool(np.isfinite(sigma_pt) and sigma_pt > 0)
    hom = stab = None
    names: tuple[str, str] | None = None
    hom_t, stab_t = tables.get("homogeneity"), tables.get("stability")
    if not sigma_ok:
        why = "σ_pt could not be set, so the item criteria cannot be applied"
        for kind in tables:
            rows.append(_not_run_row(m, kind, why))
            notes.append(f"{kind} check {why}")
            audit.append((m.name, "", kind, "not evaluated", why))
    if sigma_ok and hom_t is not None:
        try:
            hom = st.homogeneity(list(hom_t.items), hom_t.values, sigma_pt)
        except StatisticsError as exc:
            raise _wrap(exc, hom_t, m) from None
    if sigma_ok and stab_t is not None:
        names = (stab_t.set_names[0], stab_t.set_names[1])
        v1, g1, r1, how = _set_values(stab_t, names[0])
        v2, g2, r2, _ = _set_values(stab_t, names[1])
        try:
            stab = st.stability(v1, v2, sigma_pt, u_first=stab_t.set_u.get(names[0]),
                                u_second=stab_t.set_u.get(names[1]), criterion=choice)
        except StatisticsError as exc:
            raise _wrap(exc, stab_t, m) from None
        stab_how = f"each set's mean from its {how}; criterion choice {choice!r}"
    else:
        g1 = g2 = 0
        r1 = r2 = 0.0
        stab_how = ""

    u_hom = hom.s_s if hom is not None else 0.0
    u_stab = stab.u_stab if stab is not None else 0.0
    s_new, u_new, widened = sigma_pt, u_char, False
    effect: list[str] = []
    if sigma_ok and consequence in ("uncertainty", "both") and (hom is not None or stab is not None):
        if np.isfinite(u_char):
            u_new = st.item_uncertainty(u_char, u_hom, u_stab)
            effect.append(
                f"u(x_pt) = sqrt(u_char^2 + u_hom^2 + u_stab^2) = sqrt({_fmt(u_char)}^2 + {_fmt(u_hom)}^2 + "
                f"{_fmt(u_stab)}^2) = {_fmt(u_new)} (item_checks = {consequence!r})")
        else:
            effect.append("u_hom and u_stab not added: u(x_pt) could not be set")
        if hom is not None and hom.s_s_truncated:
            effect.append("s_s was truncated to 0, so u_hom = 0")
        if m.is_consensus:
            effect.append("the consensus value's u already reflects part of the between-item spread; "
                          "adding u_hom and u_stab is the cautious choice")
    if sigma_ok and consequence in ("widen-sigma", "both"):
        if hom is None:
            effect.append(f"σ_pt not widened: item_checks = {consequence!r} needs a homogeneity table")
        elif hom.s_s > 0:
            s_new = st.widened_sigma(sigma_pt, hom.s_s)
            widened = True
            effect.append(f"σ_pt widened to sqrt(σ_pt^2 + s_s^2) = sqrt({_fmt(sigma_pt)}^2 + {_fmt(hom.s_s)}^2) "
                          f"= {_fmt(s_new)} (item_checks = {consequence!r})")
        else:
            effect.append("σ_pt not widened: s_s was truncated to 0" if hom.s_s_truncated
                          else "σ_pt not widened: s_s = 0")
        if m.sigma_pt.kind == "robust-sd" and widened:
            effect.append("σ_pt from the participants' robust SD already holds the between-item spread; "
                          "widening counts it again (the criteria used the σ_pt before widening)")
    if sigma_ok and consequence == "report":
        effect.append("item_checks = 'report': σ_pt and u(x_pt) are not changed by the item checks")

    if hom is not None:
        verdict = "passed" if hom.passed else "FAILED"
        line = (f"homogeneity ({hom.g} items x {hom.m:g}): s_s = {_fmt(hom.s_s)}, 0.3 σ_pt = {_fmt(hom.criterion)}, "
                f"expanded allowance = {_fmt(hom.allowed)}: {verdict}")
        if hom.passed and not hom.passed_simple:
            line += " (on the expanded criterion only; the simple one is not met)"
        notes.append(line)
        if hom.s_s_truncated:
            notes.append("homogeneity: s_x^2 < s_w^2/m, s_s truncated to 0")
        if hom.precision_warning:
            notes.append(f"homogeneity: {hom.precision_warning}")
        if hom.cochran_signal in ("straggler", "outlier"):
            notes.append(f"homogeneity: Cochran's test flags item {hom.cochran_item!r} as a {hom.cochran_signal}")
        audit.append((m.name, "", "homogeneity", "passed" if hom.passed else "check failed", line))
        rows.append(_homogeneity_row(m, hom, effect))
    if stab is not None and names is not None:
        verdict = "passed" if stab.passed else "FAILED"
        allowed = stab.criterion if stab.criterion_used == "simple" else stab.allowed_expanded
        line = (f"stability ({names[0]!r} vs {names[1]!r}): |y1 - y2| = {_fmt(abs(stab.difference))}, "
                f"allowance = {_fmt(allowed)} ({stab.criterion_used} criterion): {verdict}")
        notes.append(line)
        audit.append((m.name, "", "stability", "passed" if stab.passed else "check failed", line))
        rows.append(_stability_row(m, stab, g1 + g2, (r1 + r2) / 2.0, names, [stab_how, *effect]))
    notes += effect
    if effect:
        action = ("σ_pt widened and u(x_pt) increased" if widened and u_new != u_char
                  else "σ_pt widened" if widened else "u(x_pt) increased" if u_new != u_char
                  else "no change")
        audit.append((m.name, "", "item checks", action, "; ".join(effect)))
    return ItemOutcome(
        sigma_pt=float(s_new), u_assigned=float(u_new), sigma_pt_before=float(sigma_pt), u_char=float(u_char),
        consequence=consequence, homogeneity=hom, stability=stab, homogeneity_table=hom_t,
        stability_table=stab_t, stability_sets=names, u_hom=float(u_hom), u_stab=float(u_stab),
        widened=widened, rows=tuple(rows), notes=tuple(notes), audit=tuple(audit),
    )
