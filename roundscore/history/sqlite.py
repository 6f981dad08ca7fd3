"""The SQLite backend of the archive store: a local file (the default for a plain path).

It implements :mod:`roundscore.history.interface` with SQL over the tables of
:mod:`roundscore.history.sqlite_schema`; :mod:`roundscore.history.db` opens the file
(recognised by its application id, read-only for reads, ``quick_check``, busy waits, SQLite's
errors as messages naming the file).

* A write is one ``BEGIN IMMEDIATE ... COMMIT`` transaction in WAL mode with
  ``synchronous = FULL``: a process killed part-way leaves the change wholly present or wholly
  absent, and writers wait for each other (SQLite, "Atomic Commit In SQLite", "Write-Ahead
  Logging").
* :meth:`SqliteReader.history_rows` is one query whatever the number of labs: the codes are
  passed as one JSON array and expanded by SQLite's ``json_each``, so 2000 labs need neither 2000
  queries nor 2000 bound parameters (SQLite limits those to 32766 by default since 3.32, 999
  before; "Limits In SQLite").
* The queries read every released schema: a file of version 1 has no ``origin`` column and no
  audit table, and is read as rounds of origin ``"lab"`` with an empty audit; a file before
  version 5 has no ``qualitative`` table and is read as holding no qualitative rows.

References
----------
.. [1] SQLite, "Atomic Commit In SQLite", https://www.sqlite.org/atomiccommit.html
.. [2] SQLite, "Write-Ahead Logging", https://www.sqlite.org/wal.html
.. [3] SQLite, "The JSON1 Extension" (``json_each``); "Limits In SQLite" (bound parameters).
"""

from __future__ import annotations

import json
import os
import sqlite3
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

from roundscore.history import db as _db
from roundscore.history.interface import (QUALITATIVE_ROW_FIELDS, ROW_FIELDS, ArchiveReader, ArchiveStore,
                                          ArchiveWriter, AuditEntry, HistoryQuery, Investigation, Laboratory,
                                          RoundRecord)
from roundscore.history.sqlite_schema import MIGRATIONS, Migration

__all__ = ["SqliteArchive", "SqliteReader", "SqliteWriter"]

_ROUND_FIELDS = ("scheme", "round_id", "round_date", "title", "settings", "stored_at", "origin")
_AUDIT_FIELDS = ("replaced_at", "reason", "scheme", "round_id", "lab", "kind", "row")
_COLUMNS = ", ".join(ROW_FIELDS)
_QUALITATIVE_COLUMNS = ", ".join(QUALITATIVE_ROW_FIELDS)
#: The schema version that added the qualitative table (migration 5).
_QUALITATIVE_SINCE = 5
#: The investigations table's columns in :class:`Investigation` field order (``by`` is ``by_name``).
_INVESTIGATION_COLUMNS = ("scheme", "round_id", "lab", "measurand", "status", "cause", "action", "by_name",
                          "recorded_on", "stored_at")
_INVESTIGATION_FIELDS = ("scheme", "round_id", "lab", "measurand", "status", "cause", "action", "by",
                         "recorded_on", "stored_at")
_LABORATORY_FIELDS = ("scheme", "lab", "name", "stored_at")


class SqliteArchive(ArchiveStore):
    """An archive file.

    Parameters
    ----------
    path : path or None
        The file (``None``: ``$ROUNDSCORE_ARCHIVE``, else the user data folder's; see
        :func:`roundscore.history.db.archive_path`).  It is resolved when first needed, so a bad
        ``~`` is reported by the operation that uses the archive.
    migrations : sequence of Migration
        The schema steps (the released ones; a test passes the first ones to write a file of an
        older version).
    """

    def __init__(self, path: str | os.PathLike[str] | None = None, *,
                 migrations: Sequence[Migration] = MIGRATIONS) -> None:
        self._path = path
        self._migrations = tuple(migrations)

    @property
    def file(self) -> Path:
        """The archive file (``~`` expanded, the default applied)."""
        return _db.archive_path(self._path)

    @property
    def name(self) -> str:
        return str(self.file)

    @property
    def latest_version(self) -> int:
        return len(self._migrations)

    def exists(self) -> bool:
        return self.file.exists()

    @contextmanager
    def reading(self) -> Iterator[SqliteReader | None]:
        with _db.open_archive(self._path, write=False, migrations=self._migrations) as conn:
            yield SqliteReader(conn) if conn is not None else None

    @contextmanager
    def writing(self) -> Iterator[SqliteWriter]:
        with _db.open_archive(self._path, write=True, migrations=self._migrations) as conn:
            assert conn is not None  # opened to write: always a connection
            with _db.transaction(conn):
                yield SqliteWriter(conn)

    def check(self) -> None:
        with self.reading():  # header, application id, version, quick_check
            pass

    def __repr__(self) -> str:
        return f"SqliteArchive({self._path!r})"


class SqliteReader(ArchiveReader):
    """Reads through one connection (read-only, or the writer's own)."""

    def __init__(self, conn: sqlite3.Connection) -> None:
        self._conn = conn

    def _rows(self, sql: str, args: Sequence[object] = ()) -> list[tuple]:
        """Every row of a query, the statement finished even when reading fails.

        A statement left unfinished (its cursor held by a traceback) keeps the connection open
        after ``close()``: Python closes with ``sqlite3_close_v2``, which waits for unfinalized
        statements (SQLite, "Closing A Database Connection"); a damaged archive read by
        ``history show`` then kept its ``-wal``/``-shm`` files (seen in
        tests/test_archive_file.py, "text_not_utf8").
        """
        cur = self._conn.execute(sql, args)
        try:
            return [tuple(r) for r in cur.fetchall()]
        finally:
            cur.close()

    def version(self) -> int:
        return int(self._rows("PRAGMA user_version")[0][0])

    def _origin(self) -> str:
        return "origin" if self.version() >= 2 else "'lab' AS origin"  # added by migration 2

    def find_round(self, scheme: str, round_id: str) -> RoundRecord | None:
        rows = self._rows(
            f"SELECT scheme, round_id, round_date, title, settings, stored_at, {self._origin()} "
            "FROM rounds WHERE scheme = ? AND round_id = ?", (scheme, round_id))
        return RoundRecord(**dict(zip(_ROUND_FIELDS, rows[0]))) if rows else None

    def rounds(self) -> list[RoundRecord]:
        return [RoundRecord(**dict(zip(_ROUND_FIELDS, row))) for row in self._rows(
            f"SELECT scheme, round_id, round_date, title, settings, stored_at, {self._origin()} "
            "FROM rounds ORDER BY scheme, round_id")]

    def score_rows(self, scheme: str, round_id: str, lab: str | None = None) -> list[tuple]:
        sql = f"SELECT {_COLUMNS} FROM scores WHERE scheme = ? AND round_id = ?"
        args: list[object] = [scheme, round_id]
        if lab is not None:
            sql += " AND lab = ?"
            args.append(lab)
        return self._rows(sql, args)

    def round_tables(self, scheme: str, round_id: str) -> list[tuple[str, str]]:
        if self.version() < 2:
            return []
        return [(r[0], r[1]) for r in self._rows(
            "SELECT kind, row FROM round_tables WHERE scheme = ? AND round_id = ? "
            "ORDER BY kind, position", (scheme, round_id))]

    @staticmethod
    def _history_where(query: HistoryQuery) -> tuple[list[str], list[object]]:
        """The WHERE clauses of a history query over a table ``s`` joined to ``rounds r``, and their values."""
        clauses = ["s.lab IN (SELECT value FROM json_each(?))"]
        args: list[object] = [json.dumps(list(query.labs))]
        for clause, value in (("s.scheme = ?", query.scheme), ("s.measurand = ?", query.measurand),
                              ("r.round_date >= ?", query.since),
                              ("r.round_date < ?", query.before),
                              ("s.round_id <> ?", query.exclude_round)):
            if value is not None:
                clauses.append(clause)
                args.append(value)
        return clauses, args

    def history_rows(self, query: HistoryQuery) -> list[tuple]:
        clauses, args = self._history_where(query)
        sql = (f"SELECT s.scheme, s.round_id AS round, r.round_date, r.title, "
               f"{', '.join('s.' + c for c in ROW_FIELDS)} FROM scores s JOIN rounds r "
               f"ON r.scheme = s.scheme AND r.round_id = s.round_id WHERE {' AND '.join(clauses)} "
               "ORDER BY r.round_date, s.round_id, s.scheme, s.lab, s.measurand")
        return self._rows(sql, args)

    def labs(self) -> list[str]:
        if self.version() < _QUALITATIVE_SINCE:
            return [r[0] for r in self._rows("SELECT DISTINCT lab FROM scores ORDER BY lab")]
        return [r[0] for r in self._rows("SELECT lab FROM scores UNION SELECT lab FROM qualitative ORDER BY lab")]

    def qualitative_rows(self, scheme: str, round_id: str, lab: str | None = None) -> list[tuple]:
        if self.version() < _QUALITATIVE_SINCE:
            return []
        sql = f"SELECT {_QUALITATIVE_COLUMNS} FROM qualitative WHERE scheme = ? AND round_id = ?"
        args: list[object] = [scheme, round_id]
        if lab is not None:
            sql += " AND lab = ?"
            args.append(lab)
        return self._rows(sql, args)

    def qualitative_history_rows(self, query: HistoryQuery) -> list[tuple]:
        if self.version() < _QUALITATIVE_SINCE:
            return []
        clauses, args = self._history_where(query)
        sql = (f"SELECT s.scheme, s.round_id AS round, r.round_date, r.title, "
               f"{', '.join('s.' + c for c in QUALITATIVE_ROW_FIELDS)} FROM qualitative s JOIN rounds r "
               f"ON r.scheme = s.scheme AND r.round_id = s.round_id WHERE {' AND '.join(clauses)} "
               "ORDER BY r.round_date, s.round_id, s.scheme, s.lab, s.measurand, s.item")
        return self._rows(sql, args)

    def audit_entries(self) -> list[AuditEntry]:
        if self.version() < 2:
            return []
        return [AuditEntry(**dict(zip(_AUDIT_FIELDS, row))) for row in self._rows(
            f"SELECT {', '.join(_AUDIT_FIELDS)} FROM audit ORDER BY id")]

    def investigations(self, labs: Sequence[str] | None = None) -> list[Investigation]:
        if self.version() < 4:  # added by migration 4
            return []
        sql = f"SELECT {', '.join(_INVESTIGATION_COLUMNS)} FROM investigations"
        args: list[object] = []
        if labs is not None:
            sql += " WHERE lab IN (SELECT value FROM json_each(?))"
            args.append(json.dumps(list(labs)))
        return [Investigation(**dict(zip(_INVESTIGATION_FIELDS, row))) for row in self._rows(
            sql + " ORDER BY scheme, round_id, lab, measurand", args)]

    def laboratories(self) -> list[Laboratory]:
        if self.version() < 4:
            return []
        return [Laboratory(**dict(zip(_LABORATORY_FIELDS, row))) for row in self._rows(
            f"SELECT {', '.join(_LABORATORY_FIELDS)} FROM laboratories ORDER BY scheme, lab")]


class SqliteWriter(SqliteReader, ArchiveWriter):
    """Writes inside the transaction :meth:`SqliteArchive.writing` holds."""

    def add_round(self, record: RoundRecord) -> None:
        self._conn.execute(f"INSERT INTO rounds ({', '.join(_ROUND_FIELDS)}) "
                           "VALUES (?, ?, ?, ?, ?, ?, ?)",
                           tuple(getattr(record, f) for f in _ROUND_FIELDS))

    def update_round(self, scheme: str, round_id: str, *, round_date: str | None = None,
                     title: str | None = None) -> None:
        for column, value in (("round_date", round_date), ("title", title)):
            if value is not None:
                self._conn.execute(f"UPDATE rounds SET {column} = ? WHERE scheme = ? AND round_id = ?",
                                   (value, scheme, round_id))

    def remove_round(self, scheme: str, round_id: str) -> None:
        tables = ("scores", "qualitative", "round_tables", "rounds")  # rows before the round they refer to
        for table in tables if self.version() >= _QUALITATIVE_SINCE else tables[:1] + tables[2:]:
            self._conn.execute(f"DELETE FROM {table} WHERE scheme = ? AND round_id = ?",
                               (scheme, round_id))

    def remove_scores(self, scheme: str, round_id: str, lab: str) -> None:
        for table in ("scores", "qualitative") if self.version() >= _QUALITATIVE_SINCE else ("scores",):
            self._conn.execute(f"DELETE FROM {table} WHERE scheme = ? AND round_id = ? AND lab = ?",
                               (scheme, round_id, lab))

    def add_qualitative(self, scheme: str, round_id: str, rows: Sequence[tuple]) -> None:
        marks = ", ".join("?" * (len(QUALITATIVE_ROW_FIELDS) + 2))
        self._conn.executemany(
            f"INSERT INTO qualitative (scheme, round_id, {_QUALITATIVE_COLUMNS}) VALUES ({marks})",
            ((scheme, round_id, *r) for r in rows))

    def add_scores(self, scheme: str, round_id: str, rows: Sequence[tuple]) -> None:
        marks = ", ".join("?" * (len(ROW_FIELDS) + 2))
        self._conn.executemany(f"INSERT INTO scores (scheme, round_id, {_COLUMNS}) VALUES ({marks})",
                               ((scheme, round_id, *r) for r in rows))

    def add_tables(self, scheme: str, round_id: str, rows: Sequence[tuple[str, int, str]]) -> None:
        self._conn.executemany(
            "INSERT INTO round_tables (scheme, round_id, kind, position, row) VALUES (?, ?, ?, ?, ?)",
            [(scheme, round_id, kind, position, row) for kind, position, row in rows])

    def add_audit(self, entries: Sequence[AuditEntry]) -> None:
        self._conn.executemany(
            f"INSERT INTO audit ({', '.join(_AUDIT_FIELDS)}) VALUES (?, ?, ?, ?, ?, ?, ?)",
            [tuple(getattr(e, f) for f in _AUDIT_FIELDS) for e in entries])

    def put_investigation(self, record: Investigation) -> None:
        self._conn.execute(
            f"INSERT OR REPLACE INTO investigations ({', '.join(_INVESTIGATION_COLUMNS)}) "
            f"VALUES ({', '.join('?' * len(_INVESTIGATION_COLUMNS))})",
            tuple(getattr(record, f) for f in _INVESTIGATION_FIELDS))

    def put_laboratory(self, record: Laboratory) -> None:
        self._conn.execute(f"INSERT OR REPLACE INTO laboratories ({', '.join(_LABORATORY_FIELDS)}) "
                           "VALUES (?, ?, ?, ?)", tuple(getattr(record, f) for f in _LABORATORY_FIELDS))
