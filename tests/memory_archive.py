"""An archive kept in memory, for the tests only: a second implementation of the store interface.

It shows that :mod:`roundscore.history.store` reaches the archive through
:mod:`roundscore.history.interface` alone (the SQLite backend is not the only one that works),
and it runs the archive tests that are not about SQLite files (``tests/archive_backends.py``).
It is registered for the ``memory://`` scheme only while a test runs.  It keeps no file, so it
is not part of the package; a real second backend (a server database) would be written the same
way, with one line in ``roundscore.history.backends.BACKENDS``.

Transactions: a write works on a copy of the archive's records, put in place when the block ends
without an exception (all or nothing); a lock serialises the writers.
"""

from __future__ import annotations

import copy
import threading
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field, replace

from roundscore.errors import ArchiveError
from roundscore.history.interface import (ArchiveReader, ArchiveStore, ArchiveWriter, AuditEntry,
                                          HistoryQuery, Investigation, Laboratory, RoundRecord)

SCHEME = "memory"
LATEST_VERSION = 5


@dataclass
class _Records:
    rounds: dict[tuple[str, str], RoundRecord] = field(default_factory=dict)
    scores: dict[tuple[str, str], dict[tuple[str, str], tuple]] = field(default_factory=dict)
    tables: dict[tuple[str, str], list[tuple[str, int, str]]] = field(default_factory=dict)
    qualitative: dict[tuple[str, str], dict[tuple[str, str, str], tuple]] = field(default_factory=dict)
    audit: list[AuditEntry] = field(default_factory=list)
    investigations: dict[tuple[str, str, str, str], Investigation] = field(default_factory=dict)
    laboratories: dict[tuple[str, str], Laboratory] = field(default_factory=dict)
    version: int = 0


#: Every memory archive by its location (cleared by the fixture after each test).
ARCHIVES: dict[str, _Records] = {}
_LOCK = threading.Lock()


class MemoryReader(ArchiveReader):
    def __init__(self, records: _Records) -> None:
        self._r = records

    def version(self) -> int:
        return self._r.version

    def find_round(self, scheme: str, round_id: str) -> RoundRecord | None:
        return self._r.rounds.get((scheme, round_id))

    def rounds(self) -> list[RoundRecord]:
        return [self._r.rounds[k] for k in sorted(self._r.rounds)]

    def score_rows(self, scheme: str, round_id: str, lab: str | None = None) -> list[tuple]:
        rows = self._r.scores.get((scheme, round_id), {})
        return [row for (who, _), row in rows.items() if lab is None or who == lab]

    def round_tables(self, scheme: str, round_id: str) -> list[tuple[str, str]]:
        return [(kind, row) for kind, _, row in sorted(self._r.tables.get((scheme, round_id), []))]

    def history_rows(self, query: HistoryQuery) -> list[tuple]:
        return self._history(self._r.scores, query, key=lambda r: (r[2], r[1], r[0], r[4], r[5]))

    def qualitative_history_rows(self, query: HistoryQuery) -> list[tuple]:
        return self._history(self._r.qualitative, query, key=lambda r: (r[2], r[1], r[0], r[4], r[5], r[6]))

    def qualitative_rows(self, scheme: str, round_id: str, lab: str | None = None) -> list[tuple]:
        rows = self._r.qualitative.get((scheme, round_id), {})
        return [row for key, row in rows.items() if lab is None or key[0] == lab]

    def _history(self, table, query: HistoryQuery, *, key) -> list[tuple]:
        labs = set(query.labs)
        out = []
        for (scheme, round_id), rows in table.items():
            rnd = self._r.rounds[(scheme, round_id)]
            if ((query.scheme is not None and scheme != query.scheme)
                    or (query.since is not None and rnd.round_date < query.since)
                    or (query.before is not None and rnd.round_date >= query.before)
                    or (query.exclude_round is not None and round_id == query.exclude_round)):
                continue
            for (lab, measurand, *_), row in rows.items():
                if lab in labs and (query.measurand is None or measurand == query.measurand):
                    out.append((scheme, round_id, rnd.round_date, rnd.title, *row))
        return sorted(out, key=key)

    def labs(self) -> list[str]:
        return sorted({key[0] for table in (self._r.scores, self._r.qualitative)
                       for rows in table.values() for key in rows})

    def audit_entries(self) -> list[AuditEntry]:
        return list(self._r.audit)

    def investigations(self, labs: Sequence[str] | None = None) -> list[Investigation]:
        return [self._r.investigations[k] for k in sorted(self._r.investigations)
                if labs is None or k[2] in set(labs)]

    def laboratories(self) -> list[Laboratory]:
        return [self._r.laboratories[k] for k in sorted(self._r.laboratories)]


class MemoryWriter(MemoryReader, ArchiveWriter):
    def add_round(self, record: RoundRecord) -> None:
        key = (record.scheme, record.round_id)
        if key in self._r.rounds:
            raise ArchiveError(f"round {key} is archived already")
        self._r.rounds[key] = record

    def update_round(self, scheme: str, round_id: str, *, round_date: str | None = None,
                     title: str | None = None) -> None:
        old = self._r.rounds[(scheme, round_id)]
        self._r.rounds[(scheme, round_id)] = replace(
            old, round_date=old.round_date if round_date is None else round_date,
            title=old.title if title is None else title)

    def remove_round(self, scheme: str, round_id: str) -> None:
        for table in (self._r.scores, self._r.qualitative, self._r.tables, self._r.rounds):
            table.pop((scheme, round_id), None)

    def remove_scores(self, scheme: str, round_id: str, lab: str) -> None:
        for table in (self._r.scores, self._r.qualitative):
            rows = table.get((scheme, round_id), {})
            for key in [k for k in rows if k[0] == lab]:
                del rows[key]

    def add_qualitative(self, scheme: str, round_id: str, rows: Sequence[tuple]) -> None:
        if (scheme, round_id) not in self._r.rounds:
            raise ArchiveError(f"no round {(scheme, round_id)} for its qualitative rows")
        kept = self._r.qualitative.setdefault((scheme, round_id), {})
        for row in rows:
            if (row[0], row[1], row[2]) in kept:
                raise ArchiveError(f"qualitative row {(row[0], row[1], row[2])} is archived already")
            kept[(row[0], row[1], row[2])] = tuple(row)

    def add_scores(self, scheme: str, round_id: str, rows: Sequence[tuple]) -> None:
        if (scheme, round_id) not in self._r.rounds:
            raise ArchiveError(f"no round {(scheme, round_id)} for its score rows")
        kept = self._r.scores.setdefault((scheme, round_id), {})
        for row in rows:
            if (row[0], row[1]) in kept:
                raise ArchiveError(f"score row {(row[0], row[1])} is archived already")
            kept[(row[0], row[1])] = tuple(row)

    def add_tables(self, scheme: str, round_id: str, rows: Sequence[tuple[str, int, str]]) -> None:
        self._r.tables.setdefault((scheme, round_id), []).extend(rows)

    def add_audit(self, entries: Sequence[AuditEntry]) -> None:
        self._r.audit.extend(entries)

    def put_investigation(self, record: Investigation) -> None:
        self._r.investigations[record.key()] = record

    def put_laboratory(self, record: Laboratory) -> None:
        self._r.laboratories[(record.scheme, record.lab)] = record


class MemoryArchive(ArchiveStore):
    def __init__(self, location) -> None:
        self._location = str(location)

    @property
    def name(self) -> str:
        return self._location

    @property
    def latest_version(self) -> int:
        return LATEST_VERSION

    def exists(self) -> bool:
        return self._location in ARCHIVES

    def check(self) -> None:
        if not self.exists():
            raise ArchiveError(f"no archive at {self._location}")

    @contextmanager
    def reading(self) -> Iterator[MemoryReader | None]:
        self.check()
        records = ARCHIVES[self._location]
        yield MemoryReader(records) if records.version else None

    @contextmanager
    def writing(self) -> Iterator[MemoryWriter]:
        with _LOCK:
            work = copy.deepcopy(ARCHIVES.get(self._location, _Records()))
            work.version = LATEST_VERSION
            yield MemoryWriter(work)
            ARCHIVES[self._location] = work  # reached only when the block raised nothing
