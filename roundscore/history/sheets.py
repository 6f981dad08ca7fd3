"""Reading score rows: the row contract, and the files a lab receives (``scores.csv``, ``labs/LAB.xlsx``).

:mod:`roundscore.history.store` stores what this module reads.  Everything here is
pure reading and validation; nothing touches the archive file.

* :func:`normalise_rows` turns score records (from a frame, a CSV or a
  workbook sheet) into tuples in :data:`ROW_FIELDS` order, collecting every
  problem with its file, sheet, row, column and value.
* :func:`read_lab_file` reads a ``scores.csv`` or a per-lab workbook into one
  :class:`LabRows` per (scheme, round) for the chosen lab.  These files come
  from outside: a workbook is read like a returned form (package check, then
  a bounded worker process: :func:`roundscore.intake.isolation.read_many`), a CSV by
  the bounded text reader (:func:`roundscore.intake.xlsx.read_csv_rows`); every
  row of the chosen lab is checked for consistency and a lab sheet against
  its digests (:mod:`roundscore.history.checks`).

A CSV writer neutralises cells that start with ``= + - @`` with a leading
``'`` (OWASP, "CSV Injection"); the readers undo that so the stored text is
the text the provider meant.
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass, replace
from pathlib import Path
from collections.abc import Mapping, Sequence
from typing import Any

import pandas as pd

from roundscore.errors import InputError, Location, Problem
from roundscore.intake.safety import hidden_by_design
from roundscore.model.labcodes import read_lab_code
from roundscore.text import too_long

from roundscore.model.digest import DIGEST_KEY, ROW_DIGEST_COLUMN, canonical, row_digest, sheet_digest
from roundscore.history.cellvalues import scalar, unquote
from roundscore.history.checks import EDIT_HINT, RESUBMIT_HINT, row_problems
from roundscore.history.qualitative import QUALITATIVE_ROW_FIELDS, normalise_rows as _qualitative_rows
from roundscore.model.qualitative import QUALITATIVE_COUNT_KEY, QUALITATIVE_SHEET

# One definition of the score-row contract (model/evaluation.py) and of the score and signal names (the
# registries of model/scores.py and model/signals.py).
from roundscore.model.evaluation import SCORE_COLUMNS, SCORE_FLOAT_COLUMNS, SCORE_ROW_COLUMNS
from roundscore.model.scores import SCORE_FIELD as SCORE_VALUE_COLUMN, SCORE_NAMES
from roundscore.model.signals import SIGNAL_NAMES as SIGNALS

__all__ = ["SCORE_COLUMNS", "ROW_FIELDS", "TEXT_FIELDS", "FLOAT_FIELDS", "SIGNALS", "SCORE_NAMES",
           "SCORE_VALUE_COLUMN", "WORKBOOK_FORMAT", "CENSORED_STARTS", "LabRows", "plain", "unquote", "text_key",
           "parse_date", "normalise_rows", "read_lab_file"]

#: First characters of a censored ``result`` ("below" / "above" a limit), as the pipeline writes it.
CENSORED_STARTS = ("<", ">")
#: Per-row fields stored in the ``scores`` table (scheme/round/date live on the round).
ROW_FIELDS: tuple[str, ...] = SCORE_ROW_COLUMNS
TEXT_FIELDS = frozenset({"lab", "measurand", "unit", "signal", "note", "score"})
FLOAT_FIELDS: tuple[str, ...] = SCORE_FLOAT_COLUMNS
#: Position of each field in a row of ROW_FIELDS.
_AT = {f: i for i, f in enumerate(ROW_FIELDS)}
WORKBOOK_FORMAT = 1
#: The format of a lab sheet that also carries qualitative results (hidden sheet ``qualitative_data``).
WORKBOOK_FORMAT_QUALITATIVE = 2


def plain(value: object) -> object:
    """A JSON-ready scalar: numpy scalars unwrapped, NaN/NaT/None as None, dates as ISO text."""
    value = scalar(value)
    if isinstance(value, (_dt.date, _dt.datetime, pd.Timestamp)):
        return value.isoformat()
    return value



# --------------------------------------------------------------------------- parsing rows

def text_key(value: object) -> str:
    """A key cell as text: stripped, un-neutralised, whole floats without ``.0``."""
    value = plain(value)
    if value is None:
        return ""
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    return unquote(str(value).strip())


def parse_date(value: object) -> str | None:
    if isinstance(value, _dt.datetime):
        return value.date().isoformat()
    if isinstance(value, _dt.date):
        return value.isoformat()
    try:
        return _dt.date.fromisoformat(str(value).strip()).isoformat()
    except ValueError:
        return None


def normalise_rows(records: Sequence[Mapping[Any, object]], *, file: str | None, sheet: str | None,
                   first_row: int, row_numbers: Sequence[int] | None = None,
                   ) -> tuple[list[tuple], list[Problem]]:
    """Validate and convert score records into tuples in :data:`ROW_FIELDS` order.

    Text cells are stripped and un-neutralised; empty cells become ``None``;
    numbers become ``float`` (``n_replicates`` an ``int``).  ``result`` may
    also be a censored result, kept as its text (``"<0.1"``, ``">200"``,
    ``"<limit not given"``, as the pipeline writes it); SQLite's REAL column
    affinity keeps such text as text ("Datatypes In SQLite", section 3).  Every problem is
    collected with its row (``first_row`` is the spreadsheet row of record 0, or
    ``row_numbers`` gives each record's row when blank rows were skipped).
    """
    rows: list[tuple] = []
    problems: list[Problem] = []
    seen: dict[tuple[str, str], int] = {}
    numbers = list(row_numbers) if row_numbers is not None else [first_row + i
                                                                  for i in range(len(records))]
    for i, rec in enumerate(records):
        where: Location = {"file": file, "sheet": sheet, "row": numbers[i]}
        out: list[object] = []
        for col in ROW_FIELDS:
            raw = plain(rec.get(col))
            raw = unquote(raw.strip()) if isinstance(raw, str) else raw
            if raw == "" or raw is None:
                out.append(None)
                continue
            if col == "lab":  # the lab-code rule of every other reader (roundscore.model.labcodes)
                code, why = read_lab_code(int(raw) if isinstance(raw, float) and raw.is_integer() else raw)
                if code is None:  # refused; the row keeps the text so that it is not also called empty
                    problems.append(Problem(message=why or "the lab code is empty", column=col, value=raw, **where))
                out.append(code if code is not None else str(raw))
                continue
            if col in TEXT_FIELDS:
                if isinstance(raw, float) and raw.is_integer():
                    raw = int(raw)
                why = too_long("measurand", str(raw)) if col == "measurand" else None
                if why:
                    problems.append(Problem(message=why, column=col, value=raw, **where))
                out.append(str(raw))
                continue
            if col == "result" and isinstance(raw, str) and raw[0] in CENSORED_STARTS:
                out.append(raw)  # a censored result as the round reported it, e.g. "<0.1"
                continue
            try:
                number = float(raw)  # type: ignore[arg-type]  # any cell value; a non-number raises below
            except (TypeError, ValueError):
                allowed = ("a number or a censored result such as <0.1"
                           if col == "result" else "a number")
                problems.append(Problem(message=f"not {allowed}", column=col, value=raw, **where))
                out.append(None)
                continue
            if col == "n_replicates":
                if not number.is_integer() or number < 0:
                    problems.append(Problem(message="not a whole number of replicates",
                                            column=col, value=raw, **where))
                out.append(int(number) if number.is_integer() else None)
            elif not math.isfinite(number):
                out.append(None)
            else:
                out.append(number + 0.0)  # -0.0 -> 0.0: SQLite reads negative zero back as 0.0
        row = tuple(out)
        lab, measurand, signal, score = (row[_AT[f]] for f in ("lab", "measurand", "signal", "score"))
        for col, val in (("lab", lab), ("measurand", measurand)):
            if val is None:
                problems.append(Problem(message="empty; a value is required", column=col, **where))
        if signal not in SIGNALS:
            problems.append(Problem(message=f"unknown signal; allowed: {', '.join(SIGNALS)}",
                                    column="signal", value=signal, **where))
        if signal != "not-scored" and score not in SCORE_NAMES:
            problems.append(Problem(message=f"unknown score name; allowed: {', '.join(SCORE_NAMES)}",
                                    column="score", value=score, **where))
        key = (str(lab), str(measurand))
        if key in seen and lab is not None and measurand is not None:
            problems.append(Problem(message=f"duplicate lab x measurand (also on row {seen[key]})",
                                    lab=str(lab), measurand=str(measurand), **where))
        seen.setdefault(key, numbers[i])
        rows.append(row)
    return rows, problems


# --------------------------------------------------------------------------- lab side: files

@dataclass(frozen=True, slots=True, kw_only=True)
class LabRows:
    """Rows of one lab in one round, read from a file, with what the reader noticed."""

    scheme: str
    round_id: str
    round_date: str
    lab: str
    title: str
    rows: tuple[tuple, ...]
    warnings: tuple[str, ...] = ()
    #: The lab's qualitative rows of the round (the lab sheet's hidden ``qualitative_data`` sheet).
    qualitative: tuple[tuple, ...] = ()
    #: Whether the file can carry qualitative rows (a lab sheet of format 2); a ``scores.csv`` cannot, so it
    #: says nothing about the qualitative rows archived already.
    carries_qualitative: bool = False


@dataclass(frozen=True, slots=True, kw_only=True)
class _Sheet:
    """The records of one score file: rows by header, their spreadsheet rows, and the file's keys."""

    records: list[dict[str, object]]
    numbers: list[int]
    sheet: str | None
    meta: dict[str, object] | None = None
    meta_items: tuple[tuple[object, object], ...] = ()
    header: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()
    #: The hidden ``qualitative_data`` sheet's records and their spreadsheet rows (a format-2 lab sheet).
    qualitative: tuple[dict[str, object], ...] = ()
    qualitative_numbers: tuple[int, ...] = ()


def _records(file: Path, rows: list[list[object]], sheet: str | None) -> _Sheet:
    """Header row + data rows into records (blank rows skipped, their numbers kept)."""
    header = tuple(str(c).strip() if c is not None else "" for c in rows[0]) if rows else ()
    missing = [c for c in SCORE_COLUMNS if c not in header]
    if missing:
        what = "not a roundscore scores.csv: " if sheet is None else ""
        raise InputError.single(f"{what}missing columns: {', '.join(missing)}", file=str(file),
                                sheet=sheet)
    records, numbers = [], []
    for i, r in enumerate(rows[1:], start=2):
        if any(v not in ("", None) for v in r):
            records.append(dict(zip(header, r)))
            numbers.append(i)
    return _Sheet(records=records, numbers=numbers, sheet=sheet, header=header)


def _read_csv(file: Path) -> _Sheet:
    """A ``scores.csv``: read by the bounded text reader (size limit, no binary, any common encoding)."""
    from roundscore.model.limits import DEFAULT_LIMITS
    from roundscore.intake.xlsx import read_csv_rows

    got = read_csv_rows(file, limits=DEFAULT_LIMITS)
    return _records(file, got.rows, None)


def _read_workbook(file: Path) -> _Sheet:
    """A lab's score sheet: its ``data`` and ``round`` sheets, read as a returned form is.

    The package is checked first (zip bombs, DTDs and entities, encryption:
    :func:`roundscore.intake.safety.inspect_workbook`) and the cells are read in a
    bounded worker process (:func:`roundscore.intake.isolation.read_many`), so a
    hostile or broken file is refused by name and never takes the process down.
    """
    from roundscore.model.limits import DEFAULT_LIMITS
    from roundscore.intake.isolation import read_many

    got = read_many([file], ["data", "round"], jobs=1, limits=DEFAULT_LIMITS)[0]
    if not hasattr(got, "sheets"):  # a ReadFailure: refused, crashed, out of memory or timed out
        problems = [replace(q, file=str(file), message=("not a roundscore lab workbook: " + q.message
                                                          if q.message.startswith("no sheet named")
                                                          else q.message))
                    for q in got.as_problems()]
        raise InputError(problems, summary=f"{file} cannot be read")
    data, meta_sheet = got.sheets
    sheet = _records(file, data.rows, "data")
    items = tuple((r[0], r[1] if len(r) > 1 else None) for r in meta_sheet.rows[1:]
                  if r and r[0] is not None and str(r[0]).strip())
    meta: dict[str, object] = {}
    for key, value in items:
        meta[str(key).strip()] = unquote(value.strip()) if isinstance(value, str) else value
    if text_key(meta.get("generator")) != "roundscore":
        raise InputError.single("not a roundscore lab workbook: key 'generator' is not 'roundscore'",
                                file=str(file), sheet="round", value=meta.get("generator"))
    fmt = text_key(meta.get("format"))
    if fmt not in (str(WORKBOOK_FORMAT), str(WORKBOOK_FORMAT_QUALITATIVE)):
        raise InputError.single(f"workbook format {meta.get('format')!r} is not supported "
                                f"(this version reads formats {WORKBOOK_FORMAT} and {WORKBOOK_FORMAT_QUALITATIVE})",
                                file=str(file), sheet="round")
    # hidden by the writer (outputs/lab_workbook.py): not worth a warning
    found = data.warnings + meta_sheet.warnings
    qual: list[dict[str, object]] = []
    qual_numbers: list[int] = []
    if fmt == str(WORKBOOK_FORMAT_QUALITATIVE):
        qual_sheet = read_many([file], [QUALITATIVE_SHEET], jobs=1, limits=DEFAULT_LIMITS)[0]
        if not hasattr(qual_sheet, "sheets"):
            raise InputError([replace(q, file=str(file), sheet=QUALITATIVE_SHEET) for q in qual_sheet.as_problems()],
                             summary=f"{file}: the qualitative results cannot be read")
        rows = qual_sheet.sheets[0].rows
        head = [str(c).strip() if c is not None else "" for c in rows[0]] if rows else []
        missing = [c for c in (*QUALITATIVE_ROW_FIELDS, ROW_DIGEST_COLUMN) if c not in head]
        if missing:
            raise InputError.single(f"missing columns: {', '.join(missing)}; the sheet was edited after roundscore "
                                    f"wrote it; {EDIT_HINT}", file=str(file), sheet=QUALITATIVE_SHEET)
        for i, r in enumerate(rows[1:], start=2):
            if any(v not in ("", None) for v in r):
                qual.append(dict(zip(head, r)))
                qual_numbers.append(i)
        found += qual_sheet.sheets[0].warnings
    warnings = hidden_by_design(dict.fromkeys(found), str(file), ["data", "round", QUALITATIVE_SHEET])
    return replace(sheet, meta=meta, meta_items=items, warnings=warnings, qualitative=tuple(qual),
                   qualitative_numbers=tuple(qual_numbers))


def _digest_findings(file: Path, got: _Sheet) -> tuple[list[Problem], list[str]]:
    """Compare a lab sheet's digests with its cells (see :mod:`roundscore.history.checks`)."""
    has_column, has_key = ROW_DIGEST_COLUMN in got.header, DIGEST_KEY in (got.meta or {})
    if not has_column and not has_key:
        return [], ["written by a roundscore without sheet digests, so edits made to it since "
                    "cannot be detected; each row was checked for consistency"]
    if has_column != has_key:
        lost = f"key {DIGEST_KEY!r}" if has_column else f"column {ROW_DIGEST_COLUMN!r}"
        return [Problem(message=f"the sheet's digest is incomplete ({lost} is missing): the "
                                f"sheet was edited after roundscore wrote it; {EDIT_HINT}",
                        file=str(file), sheet="round" if has_column else "data")], []
    problems = []
    for name, columns, records, numbers in (("data", SCORE_COLUMNS, got.records, got.numbers),
                                            (QUALITATIVE_SHEET, QUALITATIVE_ROW_FIELDS, got.qualitative,
                                             got.qualitative_numbers)):
        for rec, number in zip(records, numbers):
            if canonical(rec.get(ROW_DIGEST_COLUMN)) != row_digest([rec.get(c) for c in columns]):
                problems.append(Problem(
                    message=f"this row does not match its digest: it was changed after roundscore "
                            f"wrote the sheet; {RESUBMIT_HINT}",
                    file=str(file), sheet=name, row=number, lab=text_key(rec.get("lab")) or None,
                    measurand=text_key(rec.get("measurand")) or None))
    counted = text_key((got.meta or {}).get(QUALITATIVE_COUNT_KEY)) or "0"
    if counted != str(len(got.qualitative)):
        problems.append(Problem(
            message=f"sheet 'round' counts {counted} qualitative results but sheet {QUALITATIVE_SHEET!r} holds "
                    f"{len(got.qualitative)}: rows were added or removed after roundscore wrote it; {RESUBMIT_HINT}",
            file=str(file), sheet=QUALITATIVE_SHEET))
    if not problems:
        whole = sheet_digest(got.meta_items, [rec.get(ROW_DIGEST_COLUMN)
                                              for rec in (*got.records, *got.qualitative)])
        if whole != canonical(got.meta[DIGEST_KEY]):  # type: ignore[index]  # meta is present when no problem was found
            problems.append(Problem(
                message="the sheet does not match its digest although every row does: rows were "
                        "added, copied or removed in sheet 'data', or sheet 'round' was edited, "
                        f"after roundscore wrote it; {RESUBMIT_HINT}", file=str(file), sheet="round"))
    return problems, []


def read_lab_file(file: Path, lab: str | None) -> list[LabRows]:
    """Read a ``scores.csv`` or ``labs/LAB.xlsx`` into per (scheme, round, lab) groups.

    Every row of the chosen lab is checked for consistency
    (:func:`roundscore.history.checks.row_problems`), and a lab sheet's rows
    against its digests; any problem refuses the whole file, naming the rows.
    """
    if not file.is_file():
        raise InputError.single("file not found", file=str(file))
    suffix = file.suffix.lower()
    if suffix in (".csv", ".txt"):
        got = _read_csv(file)
    elif suffix in (".xlsx", ".xlsm"):
        got = _read_workbook(file)
    else:
        raise InputError.single("neither a roundscore scores.csv nor a lab workbook "
                                "(.csv or .xlsx expected)", file=str(file))
    records, numbers, sheet, meta = got.records, got.numbers, got.sheet, got.meta
    rows, problems = normalise_rows(records, file=str(file), sheet=sheet, first_row=2,
                                    row_numbers=numbers)
    warnings = [w[len(str(file)) + 2:] if w.startswith(f"{file}: ") else w for w in got.warnings]
    qual_rows, qual_problems = _qualitative_rows(list(got.qualitative), file=str(file), sheet=QUALITATIVE_SHEET,
                                                 row_numbers=got.qualitative_numbers)
    problems += qual_problems
    if meta is not None:
        found, notes = _digest_findings(file, got)
        problems += found
        warnings += notes
    keys: list[tuple[str, str, str]] = []
    for number, rec in zip(numbers, records):
        scheme, round_id = text_key(rec.get("scheme")), text_key(rec.get("round"))
        date = parse_date(rec.get("round_date"))
        if not scheme or not round_id or date is None:
            problems.append(Problem(message="scheme, round and an ISO round_date are required",
                                    file=str(file), sheet=sheet, row=number,
                                    value=[scheme, round_id, rec.get("round_date")]))
        keys.append((scheme, round_id, date or ""))  # no date: a problem above, raised below
    if meta is not None:
        held = {"scheme": {k[0] for k in keys}, "round": {k[1] for k in keys},
                "lab": {str(r[0]) for r in (*rows, *qual_rows)}}
        for key, got_keys in held.items():
            want = text_key(meta.get(key))
            if not want or got_keys - {want}:
                problems.append(Problem(message=f"sheet 'round' gives {key} {want!r} but the "
                                        f"data sheet holds {sorted(got_keys)}", file=str(file),
                                        sheet="round"))
    labs = sorted({r[0] for r in (*rows, *qual_rows) if r[0] is not None})
    chosen = lab if lab is not None else (labs[0] if len(labs) == 1 else None)
    for number, row in zip(numbers, rows):
        if chosen is not None and row[0] == chosen:
            problems += row_problems(dict(zip(ROW_FIELDS, row)), file=str(file), sheet=sheet,
                                     row_number=number)
    if problems:
        raise InputError(problems, summary=f"{file}: the scores have problems")
    if not rows and not qual_rows:
        raise InputError.single("holds no score rows", file=str(file), sheet=sheet)
    if lab is None and len(labs) > 1:
        shown = ", ".join(labs[:10]) + (" ..." if len(labs) > 10 else "")
        raise InputError.single(f"holds {len(labs)} labs ({shown}); pass --lab to choose yours",
                                file=str(file))
    if lab is not None and lab not in labs:
        raise InputError.single(f"has no rows for lab {lab!r} (labs in the file: "
                                f"{', '.join(labs[:10])})", file=str(file))
    if chosen is None:
        raise InputError.single("holds no lab code", file=str(file), sheet=sheet)
    groups: dict[tuple[str, str, str], list[tuple]] = {}
    for round_key, row in zip(keys, rows):
        if row[0] == chosen:
            groups.setdefault(round_key, []).append(row)
    if len({(s, r) for s, r, _ in groups}) != len(groups):
        raise InputError.single("one round carries two different round dates", file=str(file))
    title = str(meta.get("title") or "") if meta else ""
    qualitative = tuple(r for r in qual_rows if r[0] == chosen)
    carries = meta is not None and text_key(meta.get("format")) == str(WORKBOOK_FORMAT_QUALITATIVE)
    if meta is not None and qualitative and not groups:  # a round of qualitative measurands only
        date = parse_date(meta.get("round_date"))
        if date is None:
            raise InputError.single("the round date is not an ISO date YYYY-MM-DD", file=str(file), sheet="round",
                                    value=meta.get("round_date"))
        groups[(text_key(meta.get("scheme")), text_key(meta.get("round")), date)] = []
    # a lab sheet holds one round (checked above against sheet 'round'): its qualitative rows belong to it
    return [LabRows(scheme=s, round_id=r, round_date=d, lab=chosen, title=title, rows=tuple(v),
                    warnings=tuple(warnings), qualitative=qualitative, carries_qualitative=carries)
            for (s, r, d), v in sorted(groups.items())]
