"""The history archive: a lab's (or a provider's) scores across PT rounds.

Two sides write to the same kind of file:

* the **coordinator** stores a whole evaluated round with :func:`store_round`
  (settings, per-measurand statistics, every lab's scores, precision);
  ``roundscore score --archive`` calls :func:`round_history` (every lab's
  earlier rounds in one query, for the lab sheets) before writing the outputs
  and :func:`store_evaluation` after they are complete;
* a **participant** adds the files the provider sent it with :func:`add_files`
  (the round's ``scores.csv`` or its own workbook ``labs/LAB.xlsx``).

:func:`lab_history` reads one lab's series back, one row per round x measurand
(several labs in one query).  Reading and validating the files and the score
rows lives in :mod:`roundscore.history.sheets`.

This module decides what is stored and when; the archive itself is reached
through the store interface (:mod:`roundscore.history.interface`), whose
backend :mod:`roundscore.history.backends` chooses from the archive's location
(a file path: the SQLite file of :mod:`roundscore.history.sqlite`).

Design decisions
----------------
* Keys are scheme + round + lab code: a lab may take part in several schemes
  under different codes, and round identifiers repeat across schemes.
* Every write runs in one transaction of the store (SQLite: ``BEGIN IMMEDIATE
  ... COMMIT`` in WAL mode), so a process killed part-way through an import
  leaves the round wholly present or wholly absent (SQLite's atomic commit).
* Imports are idempotent: the content is compared through a canonical hash of
  the rows (rows sorted, score floats rounded to 12 significant digits, the
  precision of the pipeline's ``scores.csv``, then written with ``repr``;
  missing as null).
  The same content again is ``"unchanged"``; different content is refused
  unless ``replace=True``, and the replaced rows are first copied to the
  ``audit`` table with a UTC timestamp and a reason.
* The schema is versioned (SQLite: ``PRAGMA user_version``) by a list of
  released migrations frozen as literal SQL (:data:`MIGRATIONS`, in
  :mod:`roundscore.history.sqlite_schema`); each applied migration is also
  logged in the ``schema_version`` table.  Opening a file to write applies the
  missing migrations; reading never does (the queries read every released
  schema).  A file from a newer roundscore is refused rather than guessed at.
* The file is marked with ``PRAGMA application_id`` (migration 3), checked
  with ``PRAGMA quick_check`` whenever it is opened, opened read-only by the
  reading functions, and waited for while another process writes: see
  :mod:`roundscore.history.db`.

References
----------
.. [1] SQLite, "Atomic Commit In SQLite", https://www.sqlite.org/atomiccommit.html
.. [2] SQLite, "Write-Ahead Logging", https://www.sqlite.org/wal.html
"""

from __future__ import annotations

import datetime as _dt
import functools
import hashlib
import json
import math
import os
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Literal

import pandas as pd

from roundscore.history.sheets import (FLOAT_FIELDS as _FLOAT_FIELDS, ROW_FIELDS as _ROW_FIELDS, SCORE_COLUMNS,
                                       SCORE_VALUE_COLUMN, LabRows as _LabRows, normalise_rows as _normalise_rows,
                                       parse_date as _parse_date, plain as _plain, read_lab_file as _read_lab_file,
                                       text_key as _text, unquote as _unquote)
from roundscore.history.backends import open_store
from roundscore.history import qualitative as _qualitative
from roundscore.history.interface import (HISTORY_ROW_FIELDS as _HISTORY_ROW_FIELDS,
                                          QUALITATIVE_ROW_FIELDS as _QUALITATIVE_FIELDS, ArchiveWriter, AuditEntry,
                                          HistoryQuery, RoundRecord,
                                          now as _now)
# The SQLite file's names, kept here where they have always been importable from.
from roundscore.history.db import APPLICATION_ID, ARCHIVE_ENV, archive_path
from roundscore.history.sqlite_schema import MIGRATIONS, SCHEMA_VERSION
from roundscore.errors import ArchiveConflict, InputError, Problem, RoundFileError

if TYPE_CHECKING:  # only for annotations: the archive does not depend on the evaluation
    from roundscore.model.evaluation import RoundEvaluation
    from roundscore.model.round import Round

__all__ = ["ARCHIVE_ENV", "APPLICATION_ID", "SCORE_COLUMNS", "HISTORY_COLUMNS", "MIGRATIONS", "SCHEMA_VERSION",
           "StoreOutcome", "archive_path", "open_store", "store_round", "add_files", "lab_history",
           "lab_qualitative_history", "QUALITATIVE_HISTORY_COLUMNS",
           "archived_labs", "round_history", "store_evaluation", "check_round_keys"]

#: Significant digits of score floats in the content hash: the precision of the pipeline's
#: ``scores.csv`` (roundscore.outputs.csvout.FLOAT_FORMAT, ``{:.12g}``), the least precise file a
#: lab receives; its workbook keeps about 15 (xlsxwriter writes 16, Excel computes with 15:
#: Microsoft, "Floating-point arithmetic may give inaccurate results in Excel").
HASH_DIGITS = 12

Status = Literal["added", "unchanged", "replaced"]


@dataclass(frozen=True, slots=True, kw_only=True)
class StoreOutcome:
    """What one import did.

    Attributes
    ----------
    status : {"added", "unchanged", "replaced"}
        ``"unchanged"`` means the archive already held identical content and
        nothing was written.
    rows : int
        Number of score rows the import concerns.
    message : str
        One sentence for the user.
    scheme, round_id : str
        The round's keys.
    lab : str or None
        The lab whose rows were imported (``None`` for a whole round).
    file : str or None
        The file read (``None`` for :func:`store_round`).
    warnings : tuple of str
        What the reader noticed without refusing the file (a lab sheet too old
        to carry a digest, hidden rows...).
    """

    status: Status
    rows: int
    message: str
    scheme: str = ""
    round_id: str = ""
    lab: str | None = None
    file: str | None = None
    warnings: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, object]:
        return {f: getattr(self, f) for f in self.__slots__}


# --------------------------------------------------------------------------- canonical rows

def _json_default(value: object) -> object:
    """Non-JSON settings values: numpy scalars and dates as plain values, sets sorted, else text."""
    if isinstance(value, (set, frozenset)):
        return sorted(value, key=repr)
    plain = _plain(value)
    return plain if plain is not value else str(value)


def _canonical_json(obj: object) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), default=_json_default,
                      allow_nan=False, ensure_ascii=False)


def _table_rows(frame: pd.DataFrame | None) -> list[str]:
    """Each row of a statistics/precision table as canonical JSON, in the frame's order."""
    if frame is None:
        return []
    records = frame.to_dict(orient="records")
    return [_canonical_json({str(k): _plain(v) for k, v in rec.items()}) for rec in records]


def _digest(round_date: str, score_rows: Iterable[tuple], *, title: str | None = None,
            settings: str | None = None, tables: Sequence[tuple[str, str]] = (),
            qualitative: Sequence[tuple] = ()) -> str:
    """Canonical content hash: sorted rows, floats as ``repr`` (via JSON), missing as null.

    Score floats are first rounded to :data:`HASH_DIGITS` significant digits:
    ``scores.csv`` keeps 12 (roundscore.outputs.csvout) and a workbook about 15
    (xlsxwriter writes 16, Excel computes with 15), so the same round read
    from ``scores.csv`` and from ``LAB.xlsx`` must hash equally.  Changes
    beyond the 12th digit are not content changes; the value stored first is
    the one kept.  Qualitative rows enter the hash only when there are some, so
    a round without them hashes as it did before they were kept.
    """
    rows = ([float(f"{v:.{HASH_DIGITS}g}") if isinstance(v, float) else v for v in r]
            for r in score_rows)
    body = {"round_date": round_date, "scores": sorted(rows, key=lambda r: (r[0], r[1]))}
    if title is not None:
        body["title"] = title
    if settings is not None:
        body["settings"] = settings
    if tables:
        body["tables"] = sorted(list(t) for t in tables)
    if qualitative:
        body["qualitative"] = sorted((list(r) for r in qualitative), key=lambda r: (r[0], r[1], r[2]))
    return hashlib.sha256(_canonical_json(body).encode("utf-8")).hexdigest()


# --------------------------------------------------------------------------- writing

def _audit(tx: ArchiveWriter, *, scheme: str, round_id: str, lab: str | None,
           reason: str, whole_round: bool, qualitative: bool = True) -> None:
    """Copy records about to be replaced into the audit (round record, score rows, qualitative rows unless
    ``qualitative`` is false, tables)."""
    rec = tx.find_round(scheme, round_id)
    entries = [(lab, "round", _canonical_json(rec.as_dict()))] if rec is not None else []
    entries += [(row[0], "score", _canonical_json(dict(zip(_ROW_FIELDS, row))))
                for row in tx.score_rows(scheme, round_id, lab)]
    entries += [(row[0], "qualitative", _canonical_json(dict(zip(_QUALITATIVE_FIELDS, row))))
                for row in (tx.qualitative_rows(scheme, round_id, lab) if qualitative else [])]
    if whole_round:
        entries += [(None, kind, row) for kind, row in tx.round_tables(scheme, round_id)]
    when = _now()
    tx.add_audit([AuditEntry(replaced_at=when, reason=reason, scheme=scheme, round_id=round_id,
                             lab=who, kind=kind, row=row) for who, kind, row in entries])


def _check_keys(scheme: object, round_id: object, round_date: object) -> tuple[str, str, str]:
    keys = (_text(scheme), _text(round_id), _parse_date(round_date))
    problems = [Problem(message=f"{name} is empty or not a date YYYY-MM-DD", value=value)
                for name, key, value in zip(("scheme", "round_id", "round_date"), keys,
                                            (scheme, round_id, round_date)) if not key]
    if problems:
        raise InputError(problems, summary="the round's keys are incomplete")
    return keys  # type: ignore[return-value]  # none is None: checked above


def store_round(path: str | os.PathLike[str] | None, *, scheme: str, round_id: str,
                round_date: str | _dt.date, title: str, settings: dict,
                statistics: pd.DataFrame, scores: pd.DataFrame,
                precision: pd.DataFrame | None = None, replace: bool = False,
                reason: str = "replaced on request (replace=True)",
                qualitative: pd.DataFrame | None = None) -> StoreOutcome:
    """Store a whole evaluated round (coordinator side).

    Parameters
    ----------
    path : path or None
        Archive file (``None``: :func:`archive_path` default).
    scheme, round_id, round_date, title
        The round's keys and description; ``round_date`` ISO ``YYYY-MM-DD``.
    settings : dict
        The round's settings, stored as canonical JSON (non-JSON values as text).
    statistics, precision : pandas.DataFrame
        Per-measurand tables, stored row by row as JSON (any columns).
    qualitative : pandas.DataFrame, optional
        The nominal and ordinal measurands' results, one row per lab x measurand x item with the
        ``qualitative.csv`` columns (:data:`roundscore.history.qualitative.QUALITATIVE_ROW_FIELDS`).
    scores : pandas.DataFrame
        Every lab x measurand row with the ``scores.csv`` columns
        (:data:`SCORE_COLUMNS`; ``scheme``/``round``/``round_date`` optional and,
        when present, must agree with the keyword arguments).
    replace : bool
        Replace a stored round whose content differs (old rows go to ``audit``).
    reason : str
        Reason recorded in the audit table when replacing.

    Returns
    -------
    StoreOutcome

    Raises
    ------
    ArchiveError
        The round is archived with different content and ``replace`` is false.
    InputError
        Missing columns or bad values in ``scores``.
    """
    scheme, round_id, date = _check_keys(scheme, round_id, round_date)
    missing = [c for c in _ROW_FIELDS if c not in scores.columns]
    if missing:
        raise InputError.single(f"scores table: missing columns: {', '.join(missing)}")
    problems: list[Problem] = []
    for col, want in (("scheme", scheme), ("round", round_id), ("round_date", date)):
        if col in scores.columns:
            got = {(_parse_date(v) if col == "round_date" else _unquote(str(v).strip()))
                   for v in scores[col]}
            if got - {want}:
                problems.append(Problem(message=f"scores table column {col!r} holds "
                                        f"{sorted(map(str, got - {want}))}, not {want!r}"))
    rows, row_problems = _normalise_rows(scores.to_dict(orient="records"), file="scores table",
                                         sheet=None, first_row=1)
    problems += row_problems
    qual_rows: list[tuple] = []
    if qualitative is not None:
        missing = [c for c in _QUALITATIVE_FIELDS if c not in qualitative.columns]
        if missing:
            raise InputError.single(f"qualitative table: missing columns: {', '.join(missing)}")
        qual_rows, qual_problems = _qualitative.normalise_rows(
            qualitative.to_dict(orient="records"), file="qualitative table", sheet=None,
            row_numbers=range(1, len(qualitative) + 1))
        problems += qual_problems
    if problems:
        raise InputError(problems, summary="the scores table has problems")
    settings_json = _canonical_json(settings)
    tables = ([("precision", r) for r in _table_rows(precision)]
              + [("statistics", r) for r in _table_rows(statistics)])
    title = str(title or "")
    new_hash = _digest(date, rows, title=title, settings=settings_json, tables=tables, qualitative=qual_rows)
    label = f"round {round_id!r} of scheme {scheme!r}"
    with open_store(path).writing() as tx:
        old = tx.find_round(scheme, round_id)
        status: Status = "added"
        if old is not None:
            old_hash = _digest(old.round_date, tx.score_rows(scheme, round_id),
                               title=old.title, settings=old.settings,
                               tables=tx.round_tables(scheme, round_id),
                               qualitative=tx.qualitative_rows(scheme, round_id))
            if old_hash == new_hash:
                return StoreOutcome(status="unchanged", rows=len(rows), scheme=scheme,
                                    round_id=round_id,
                                    message=f"{label} is already archived with identical "
                                            "content; nothing changed")
            if not replace:
                raise ArchiveConflict(
                    f"{label} is already archived (stored {old.stored_at}) with different "
                    "content; replace=True replaces it (the old rows are then kept in the audit "
                    "table)")
            _audit(tx, scheme=scheme, round_id=round_id, lab=None, reason=reason,
                   whole_round=True)
            tx.remove_round(scheme, round_id)
            status = "replaced"
        tx.add_round(RoundRecord(scheme=scheme, round_id=round_id, round_date=date, title=title,
                                 settings=settings_json, stored_at=_now(), origin="coordinator"))
        tx.add_scores(scheme, round_id, rows)
        if qual_rows:
            tx.add_qualitative(scheme, round_id, qual_rows)
        tx.add_tables(scheme, round_id, [(kind, i, r) for kind, frame in
                                         (("statistics", statistics), ("precision", precision))
                                         for i, r in enumerate(_table_rows(frame))])
    verb = "replaced" if status == "replaced" else "added"
    extra = "; the previous content is kept in the audit table" if status == "replaced" else ""
    qual = f" and {len(qual_rows)} qualitative results" if qual_rows else ""
    return StoreOutcome(status=status, rows=len(rows), scheme=scheme, round_id=round_id,
                        message=f"{label}: {verb} {len(rows)} score rows{qual}{extra}")


# --------------------------------------------------------------------------- lab side: files


def _store_lab_rows(tx: ArchiveWriter, item: _LabRows, *, replace: bool, file: str,
                    reason: str) -> StoreOutcome:
    label = f"lab {item.lab!r}, round {item.round_id!r} of scheme {item.scheme!r}"
    outcome = functools.partial(StoreOutcome, rows=len(item.rows), scheme=item.scheme, round_id=item.round_id,
                                lab=item.lab, file=file, warnings=item.warnings)
    old_round = tx.find_round(item.scheme, item.round_id)
    old_rows = tx.score_rows(item.scheme, item.round_id, item.lab)
    # a scores.csv (or a sheet written before qualitative results were kept) cannot carry qualitative rows:
    # it is compared on its score rows, and the qualitative rows archived from the lab's sheet stay
    kept = tx.qualitative_rows(item.scheme, item.round_id, item.lab)
    old_qual = kept if item.carries_qualitative else []
    status: Status = "added"
    if old_round is not None and (old_rows or old_qual or old_round.round_date != item.round_date):
        old_hash = _digest(old_round.round_date, old_rows, qualitative=old_qual)
        if old_hash == _digest(item.round_date, item.rows, qualitative=item.qualitative):
            return outcome(status="unchanged", message=f"{label} is already archived with "
                           "identical content; nothing changed")
        if not replace:
            what = ("a different round date "
                    f"({old_round.round_date} archived, {item.round_date} in the file)"
                    if old_round.round_date != item.round_date else "different scores")
            raise ArchiveConflict(f"{file}: {label} is already archived with {what}; use "
                               "--replace to replace it (the old rows are kept in the audit table)")
        _audit(tx, scheme=item.scheme, round_id=item.round_id, lab=item.lab, reason=reason,
               whole_round=False, qualitative=item.carries_qualitative)
        tx.remove_scores(item.scheme, item.round_id, item.lab)
        if not item.carries_qualitative:
            tx.add_qualitative(item.scheme, item.round_id, kept)
        tx.update_round(item.scheme, item.round_id, round_date=item.round_date)
        status = "replaced"
    if old_round is None:
        tx.add_round(RoundRecord(scheme=item.scheme, round_id=item.round_id,
                                 round_date=item.round_date, title=item.title, settings="{}",
                                 stored_at=_now(), origin="lab"))
    elif item.title and not old_round.title:
        tx.update_round(item.scheme, item.round_id, title=item.title)
    tx.add_scores(item.scheme, item.round_id, item.rows)
    if item.qualitative:
        tx.add_qualitative(item.scheme, item.round_id, item.qualitative)
    qual = f" and {len(item.qualitative)} qualitative results" if item.qualitative else ""
    if status == "replaced":
        msg = f"{label}: replaced {len(item.rows)} rows{qual}; the previous rows are kept in the audit table"
    else:
        msg = f"{label}: added {len(item.rows)} rows{qual}"
    return outcome(status=status, message=msg)


def add_files(path: str | os.PathLike[str] | None, files: Iterable[str | os.PathLike[str]], *,
              lab: str | None = None, replace: bool = False,
              reason: str = "replaced on request (--replace)") -> list[StoreOutcome]:
    """Add a lab's rows from ``scores.csv`` files or per-lab workbooks (lab side).

    Each file is read completely and validated before anything is written, and
    is then stored in one transaction (all of its rows or none).  Files are
    processed in order; an error stops at that file, earlier files stay stored.

    Parameters
    ----------
    path : path or None
        Archive file.
    files : iterable of paths
        ``scores.csv`` (with ``lab`` when it holds several labs) or ``LAB.xlsx``.
    lab : str, optional
        The lab code to take from the files.
    replace : bool
        Replace rows archived with different content (old rows go to ``audit``).
    reason : str
        Reason recorded in the audit table when replacing.

    Returns
    -------
    list of StoreOutcome
        One per (file, scheme, round).

    Raises
    ------
    InputError
        A file is missing, of an unknown kind, lacks columns or has bad values.
    ArchiveError
        Rows already archived differ and ``replace`` is false.
    """
    outcomes: list[StoreOutcome] = []
    for name in files:
        file = Path(name)
        items = _read_lab_file(file, lab)
        with open_store(path).writing() as tx:
            for item in items:
                outcomes.append(_store_lab_rows(tx, item, replace=replace, file=str(file),
                                                reason=reason))
    return outcomes


# --------------------------------------------------------------------------- queries

#: Columns of :func:`lab_history`'s frame.
HISTORY_COLUMNS: tuple[str, ...] = ("scheme", "round", "round_date", "title", *_ROW_FIELDS,
                                     "score_value")


def _date_arg(name: str, value: str | _dt.date | None) -> str | None:
    if value is None:
        return None
    date = _parse_date(value)
    if date is None:
        raise InputError.single(f"{name}: not an ISO date YYYY-MM-DD", value=value)
    return date


def lab_history(path: str | os.PathLike[str] | None, *, lab: str | Sequence[str],
                scheme: str | None = None, measurand: str | None = None,
                since: str | _dt.date | None = None, before_date: str | _dt.date | None = None,
                exclude_round: str | None = None, last: int | None = None) -> pd.DataFrame:
    """One lab's archived scores, one row per round x measurand.

    Parameters
    ----------
    path : path or None
        Archive file.
    lab : str or sequence of str
        Lab code(s); give several when the lab has different codes in different schemes.
    scheme, measurand : str, optional
        Keep only this scheme / measurand.
    since : date or ISO str, optional
        Keep rounds dated on or after this day.
    before_date : date or ISO str, optional
        Keep rounds dated strictly before this day (the pipeline passes the
        current round's date to show the earlier rounds).
    exclude_round : str, optional
        Leave out this round identifier (the pipeline passes the round being
        scored, so a re-scored round never shows itself as its own history).
    last : int, optional
        Keep only the last ``last`` rounds of each scheme x lab x measurand series.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`HISTORY_COLUMNS`; ``score`` is the round's chosen score
        name and ``score_value`` its value.  ``result`` is float, or object
        when some results are censored (their text, e.g. ``"<0.1"``).  Ordered by round date, then round,
        scheme, lab and measurand.  Empty (with these columns) when nothing matches.

    Notes
    -----
    One query whatever the number of labs (the store's
    :meth:`~roundscore.history.interface.ArchiveReader.history_rows`; SQLite
    expands the codes passed as one JSON array with ``json_each``, so 2000
    labs need neither 2000 queries nor 2000 bound parameters).  ``last`` is
    applied per scheme x lab x measurand after the date filters.
    """
    labs = [lab] if isinstance(lab, str) else list(lab)
    if not labs or not all(isinstance(x, str) and x for x in labs):
        raise InputError.single("lab: give one or more lab codes", value=lab)
    if last is not None and (not isinstance(last, int) or last < 1):
        raise InputError.single("last: must be a whole number of at least 1", value=last)
    if exclude_round is not None and not isinstance(exclude_round, str):
        raise InputError.single("exclude_round: give a round identifier", value=exclude_round)
    query = HistoryQuery(labs=tuple(sorted(set(labs))), scheme=scheme, measurand=measurand,
                         since=_date_arg("since", since),
                         before=_date_arg("before_date", before_date), exclude_round=exclude_round)
    with open_store(path).reading() as reader:
        rows = reader.history_rows(query) if reader is not None else []  # None: an empty archive
    frame = pd.DataFrame(rows, columns=list(_HISTORY_ROW_FIELDS))
    if last is not None and len(frame):
        frame = frame.groupby(["scheme", "lab", "measurand"], sort=False).tail(last)
    value_col = frame["score"].map(SCORE_VALUE_COLUMN)
    values = [frame.at[i, c] if isinstance(c, str) else math.nan
              for i, c in zip(frame.index, value_col)]
    frame = frame.assign(score_value=pd.Series(values, index=frame.index, dtype=float))
    for col in _FLOAT_FIELDS:
        if col != "result":
            frame[col] = frame[col].astype(float)
    frame["result"] = _result_column(frame["result"])
    return frame.loc[:, list(HISTORY_COLUMNS)].reset_index(drop=True)


#: Columns of :func:`lab_qualitative_history`'s frame.
QUALITATIVE_HISTORY_COLUMNS: tuple[str, ...] = _qualitative.QUALITATIVE_HISTORY_COLUMNS


def lab_qualitative_history(path: str | os.PathLike[str] | None, *, lab: str | Sequence[str],
                            scheme: str | None = None, measurand: str | None = None,
                            since: str | _dt.date | None = None) -> pd.DataFrame:
    """One lab's archived qualitative results (nominal and ordinal measurands), one row per round x
    measurand x item, ordered by round date, round, scheme, lab, measurand and item.

    Columns :data:`QUALITATIVE_HISTORY_COLUMNS` (``deviation`` a nullable integer; ``item`` ``""`` where the
    measurand has none); empty with these columns when nothing matches or the archive predates them.
    """
    labs = [lab] if isinstance(lab, str) else list(lab)
    if not labs or not all(isinstance(x, str) and x for x in labs):
        raise InputError.single("lab: give one or more lab codes", value=lab)
    query = HistoryQuery(labs=tuple(sorted(set(labs))), scheme=scheme, measurand=measurand,
                         since=_date_arg("since", since))
    with open_store(path).reading() as reader:
        rows = reader.qualitative_history_rows(query) if reader is not None else []
    return _qualitative.qualitative_frame(rows)


def _result_column(values: pd.Series) -> pd.Series:
    """Results as floats; when some are censored (text such as ``"<0.1"``) an object column
    holding floats and those texts."""
    if all(v is None or isinstance(v, (int, float)) for v in values):
        return values.astype(float)
    return pd.Series([math.nan if v is None else (v if isinstance(v, str) else float(v))
                      for v in values], index=values.index, dtype=object)


def archived_labs(path: str | os.PathLike[str] | None) -> list[str]:
    """Every lab code in the archive, sorted."""
    with open_store(path).reading() as reader:
        return reader.labs() if reader is not None else []  # None: an empty archive


# --------------------------------------------------------------------------- the round pipeline

def check_round_keys(rnd: Round) -> None:
    """Refuse to archive a round whose file lacks the keys the archive is keyed on.

    Called before any output is written, so a missing ``[round] scheme`` or
    ``date`` is reported at once rather than after a complete run.

    Raises
    ------
    RoundFileError
        Naming ``round.toml`` and the missing key.
    """
    problems = []
    for key, value, allowed in (("round.scheme", rnd.scheme, "the scheme's name (text)"),
                                ("round.date", rnd.date, "a date in the form 2026-10-14"),
                                ("round.id", rnd.id, "the round identifier (text)")):
        if not str(value or "").strip():
            problems.append(Problem(message=f"{rnd.path}: key {key!r} is needed to store the round "
                                            f"in the history archive; allowed: {allowed}"))
    if problems:
        raise RoundFileError(problems, summary=f"{rnd.path}: the round cannot be archived")


def round_history(path: str | os.PathLike[str], *, scheme: str, labs: Sequence[str],
                  round_id: str, round_date: str, last: int) -> dict[str, pd.DataFrame]:
    """The earlier rounds of every lab of a round, from one query, grouped by lab.

    Parameters
    ----------
    path : path
        Archive, opened read-only (nothing is created or migrated).
        When it does not exist yet there is no history: ``{}``.
    scheme : str
        The round's scheme (lab codes are only meaningful within a scheme).
    labs : sequence of str
        The round's labs.
    round_id, round_date : str
        The round being scored: rounds dated on or after ``round_date`` and the
        round ``round_id`` itself are left out, so a re-scored round shows only
        what came before it.
    last : int
        Most recent rounds kept per lab x measurand.

    Returns
    -------
    dict of str to pandas.DataFrame
        Lab code to its :data:`HISTORY_COLUMNS` frame (labs without history are absent).
    """
    if not labs or not open_store(path).exists():
        return {}
    frame = lab_history(path, lab=list(labs), scheme=scheme, before_date=round_date,
                        exclude_round=round_id, last=last)
    return {str(lab): part.reset_index(drop=True)
            for lab, part in frame.groupby("lab", sort=False)}


def store_evaluation(path: str | os.PathLike[str], ev: RoundEvaluation, *, replace: bool = False,
                     reason: str = "round re-scored and replaced on request") -> StoreOutcome:
    """Store an evaluated round: settings, statistics, precision (when computed) and every score.

    A thin layer over :func:`store_round` that takes the pieces from the
    evaluation: ``ev.round.settings_dict()``, ``ev.statistics``,
    ``ev.extras["precision"]`` (absent when the round has no precision stage)
    ``ev.scores`` (the ``scores.csv`` columns; ``rank`` and ``n_scored``
    are not stored since they follow from the scores) and ``ev.extras["qualitative"]``
    (the nominal and ordinal measurands' results, when the round has any).

    Raises
    ------
    RoundFileError
        The round file lacks a scheme, date or identifier.
    ArchiveError
        The round is archived with different content and ``replace`` is false.
    """
    rnd = ev.round
    check_round_keys(rnd)
    precision = ev.extras.get("precision")
    qualitative = ev.extras.get("qualitative")
    return store_round(path, scheme=rnd.scheme, round_id=rnd.id, round_date=rnd.date,
                       title=rnd.title, settings=rnd.settings_dict(), statistics=ev.statistics,
                       scores=ev.scores, precision=precision if isinstance(precision, pd.DataFrame)
                       else None, replace=replace, reason=reason,
                       qualitative=qualitative if isinstance(qualitative, pd.DataFrame) else None)
