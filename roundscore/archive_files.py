"""Reading score rows: the row contract, and the files a lab receives (``scores.csv``, ``labs/LAB.xlsx``).

:mod:`roundscore.archive` stores what this module reads.  Everything here is
pure reading and validation; nothing touches the archive file.

* :func:`normalise_rows` turns score records (from a frame, a CSV or a
  workbook sheet) into tuples in :data:`ROW_FIELDS` order, collecting every
  problem with its file, sheet, row, column and value.
* :func:`read_lab_file` reads a ``scores.csv`` or a per-lab workbook into one
  :class:`LabRows` per (scheme, round) for the chosen lab.

A CSV writer neutralises cells that start with ``= + - @`` with a leading
``'`` (OWASP, "CSV Injection"); the readers undo that so the stored text is
the text the provider meant.
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import pandas as pd

from roundscore.errors import InputError, Problem

# One definition of the score-row contract (evaluate.py) and of the score and signal names.
from .evaluate import SCORE_COLUMNS, SCORE_FIELD as SCORE_VALUE_COLUMN
from .round import SCORES as SCORE_NAMES
from .stats.scores import SIGNALS

__all__ = ["SCORE_COLUMNS", "ROW_FIELDS", "TEXT_FIELDS", "FLOAT_FIELDS", "SIGNALS", "SCORE_NAMES",
           "SCORE_VALUE_COLUMN", "WORKBOOK_FORMAT", "CENSORED_STARTS", "LabRows", "plain", "unquote", "text_key",
           "parse_date", "normalise_rows", "read_lab_file"]

#: First characters of a censored ``result`` ("below" / "above" a limit), as the pipeline writes it.
CENSORED_STARTS = ("<", ">")
#: Per-row fields stored in the ``scores`` table (scheme/round/date live on the round).
ROW_FIELDS: tuple[str, ...] = SCORE_COLUMNS[:17]
TEXT_FIELDS = frozenset({"lab", "measurand", "unit", "signal", "note", "score"})
FLOAT_FIELDS = ("result", "assigned", "u_assigned", "sigma_pt", "z", "z_prime",
                 "zeta", "en", "d", "d_percent")
#: Leading characters a CSV writer neutralises with a ``'`` (OWASP, "CSV Injection").
_FORMULA_STARTS = ("=", "+", "-", "@")
WORKBOOK_FORMAT = 1


def plain(value: object) -> object:
    """A JSON-ready scalar: numpy scalars unwrapped, NaN/NaT/None as None."""
    if value is None or value is pd.NaT:
        return None
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    if isinstance(value, (_dt.date, _dt.datetime, pd.Timestamp)):
        return value.isoformat()
    return value



# --------------------------------------------------------------------------- parsing rows

def unquote(text: str) -> str:
    """Undo formula-injection neutralising: drop one ``'`` before ``= + - @``."""
    if len(text) >= 2 and text[0] == "'" and text[1] in _FORMULA_STARTS:
        return text[1:]
    return text


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


def normalise_rows(records: Sequence[dict[str, object]], *, file: str | None, sheet: str | None,
                    first_row: int) -> tuple[list[tuple], list[Problem]]:
    """Validate and convert score records into tuples in :data:`ROW_FIELDS` order.

    Text cells are stripped and un-neutralised; empty cells become ``None``;
    numbers become ``float`` (``n_replicates`` an ``int``).  ``result`` may
    also be a censored result, kept as its text (``"<0.1"``, ``">200"``,
    ``"<limit not given"``, as the pipeline writes it); SQLite's REAL column
    affinity keeps such text as text ("Datatypes In SQLite", section 3).  Every problem is
    collected with its row (``first_row`` is the spreadsheet row of record 0).
    """
    rows: list[tuple] = []
    problems: list[Problem] = []
    seen: dict[tuple[str, str], int] = {}
    for i, rec in enumerate(records):
        where = dict(file=file, sheet=sheet, row=first_row + i)
        out: list[object] = []
        for col in ROW_FIELDS:
            raw = plain(rec.get(col))
            raw = unquote(raw.strip()) if isinstance(raw, str) else raw
            if raw == "" or raw is None:
                out.append(None)
                continue
            if col in TEXT_FIELDS:
                if isinstance(raw, float) and raw.is_integer():
                    raw = int(raw)  # a numeric lab code read from a workbook
                out.append(str(raw))
                continue
            if col == "result" and isinstance(raw, str) and raw[0] in CENSORED_STARTS:
                out.append(raw)  # a censored result as the round reported it, e.g. "<0.1"
                continue
            try:
                number = float(raw)  # type: ignore[arg-type]
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
        lab, measurand, signal, score = row[0], row[1], row[14], row[16]
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
                                    lab=lab, measurand=measurand, **where))
        seen.setdefault(key, first_row + i)
        rows.append(row)
    return rows, problems


# --------------------------------------------------------------------------- lab side: files

@dataclass(frozen=True, slots=True, kw_only=True)
class LabRows:
    """Rows of one lab in one round, read from a file."""

    scheme: str
    round_id: str
    round_date: str
    lab: str
    title: str
    rows: tuple[tuple, ...]


def _read_csv(file: Path) -> list[dict[str, object]]:
    try:
        frame = pd.read_csv(file, dtype=str, keep_default_na=False, encoding="utf-8-sig")
    except (UnicodeDecodeError, pd.errors.ParserError, pd.errors.EmptyDataError) as exc:
        raise InputError.single(f"cannot be read as a scores.csv table ({exc})",
                                file=str(file)) from None
    missing = [c for c in SCORE_COLUMNS if c not in frame.columns]
    if missing:
        raise InputError.single(f"not a roundscore scores.csv: missing columns: {', '.join(missing)}",
                                file=str(file))
    return frame.to_dict(orient="records")


def _read_workbook(file: Path) -> tuple[list[dict[str, object]], dict[str, object]]:
    from python_calamine import CalamineWorkbook

    try:
        book = CalamineWorkbook.from_path(str(file))
    except Exception as exc:  # calamine raises its own error types
        raise InputError.single(f"cannot be read as a workbook ({exc})", file=str(file)) from None
    for name in ("data", "round"):
        if name not in book.sheet_names:
            raise InputError.single(f"not a roundscore lab workbook: no sheet {name!r}",
                                    file=str(file))
    cells = book.get_sheet_by_name("data").to_python()
    header = [str(c).strip() for c in cells[0]] if cells else []
    missing = [c for c in SCORE_COLUMNS if c not in header]
    if missing:
        raise InputError.single(f"missing columns: {', '.join(missing)}", file=str(file),
                                sheet="data")
    records = [dict(zip(header, r)) for r in cells[1:] if any(v not in ("", None) for v in r)]
    meta: dict[str, object] = {}
    for r in book.get_sheet_by_name("round").to_python()[1:]:
        if len(r) >= 2 and str(r[0]).strip():
            value = r[1]
            meta[str(r[0]).strip()] = unquote(value.strip()) if isinstance(value, str) else value
    if text_key(meta.get("generator")) != "roundscore":
        raise InputError.single("not a roundscore lab workbook: key 'generator' is not 'roundscore'",
                                file=str(file), sheet="round", value=meta.get("generator"))
    if text_key(meta.get("format")) != str(WORKBOOK_FORMAT):
        raise InputError.single(f"workbook format {meta.get('format')!r} is not supported "
                                f"(this version reads format {WORKBOOK_FORMAT})",
                                file=str(file), sheet="round")
    return records, meta


def read_lab_file(file: Path, lab: str | None) -> list[LabRows]:
    """Read a ``scores.csv`` or ``labs/LAB.xlsx`` into per (scheme, round, lab) groups."""
    if not file.is_file():
        raise InputError.single("file not found", file=str(file))
    suffix, first, meta, sheet = file.suffix.lower(), 2, None, None  # row 1 is the header
    if suffix in (".csv", ".txt"):
        records = _read_csv(file)
    elif suffix in (".xlsx", ".xlsm"):
        (records, meta), sheet = _read_workbook(file), "data"
    else:
        raise InputError.single("neither a roundscore scores.csv nor a lab workbook "
                                "(.csv or .xlsx expected)", file=str(file))
    rows, problems = normalise_rows(records, file=str(file), sheet=sheet, first_row=first)
    keys = []
    for i, rec in enumerate(records):
        scheme, round_id = text_key(rec.get("scheme")), text_key(rec.get("round"))
        date = parse_date(rec.get("round_date"))
        if not scheme or not round_id or date is None:
            problems.append(Problem(message="scheme, round and an ISO round_date are required",
                                    file=str(file), sheet=sheet, row=first + i,
                                    value=[scheme, round_id, rec.get("round_date")]))
        keys.append((scheme, round_id, date))
    if meta is not None:
        held = {"scheme": {k[0] for k in keys}, "round": {k[1] for k in keys},
                "lab": {str(r[0]) for r in rows}}
        for key, got in held.items():
            want = text_key(meta.get(key))
            if not want or got - {want}:
                problems.append(Problem(message=f"sheet 'round' gives {key} {want!r} but the "
                                        f"data sheet holds {sorted(got)}", file=str(file),
                                        sheet="round"))
    if problems:
        raise InputError(problems, summary=f"{file}: the scores have problems")
    if not rows:
        raise InputError.single("holds no score rows", file=str(file), sheet=sheet)
    labs = sorted({r[0] for r in rows})
    if lab is None and len(labs) > 1:
        shown = ", ".join(labs[:10]) + (" ..." if len(labs) > 10 else "")
        raise InputError.single(f"holds {len(labs)} labs ({shown}); pass --lab to choose yours",
                                file=str(file))
    if lab is not None and lab not in labs:
        raise InputError.single(f"has no rows for lab {lab!r} (labs in the file: "
                                f"{', '.join(labs[:10])})", file=str(file))
    chosen = lab if lab is not None else labs[0]
    groups: dict[tuple[str, str, str], list[tuple]] = {}
    for key, row in zip(keys, rows):
        if row[0] == chosen:
            groups.setdefault(key, []).append(row)  # type: ignore[arg-type]
    if len({(s, r) for s, r, _ in groups}) != len(groups):
        raise InputError.single("one round carries two different round dates", file=str(file))
    title = str(meta.get("title") or "") if meta else ""
    return [LabRows(scheme=s, round_id=r, round_date=d, lab=chosen, title=title, rows=tuple(v))
            for (s, r, d), v in sorted(groups.items())]

