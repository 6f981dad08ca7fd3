"""The archive store interface: what the history needs from the place that keeps the rounds.

:mod:`roundscore.history.store` decides *what* is stored and *when*: it validates the rows,
compares content hashes (idempotent stores), refuses or replaces, copies replaced rows to the
audit, and gives the queries their meaning.  A **backend** only keeps the records and finds them
again: it implements :class:`ArchiveStore` (open to read, open to write in one transaction,
check, versions) and the sessions it yields, :class:`ArchiveReader` and :class:`ArchiveWriter`.
The SQLite file (:mod:`roundscore.history.sqlite`) is the one backend today;
:mod:`roundscore.history.backends` chooses the backend from the archive's location.

What every backend promises
---------------------------
* **One transaction per write.**  :meth:`ArchiveStore.writing` yields a writer whose changes are
  all kept when the block ends normally and none of them when it raises (also when the process
  is killed part-way).  Writers are serialised: between the reads and the writes of one block no
  other writer changes the archive, so "compare, then replace" is safe.  A writer that cannot get
  its turn in reasonable time raises :class:`~roundscore.errors.ArchiveError` saying the archive
  is busy; nothing is replaced because of a lock.
* **Reading never writes.**  :meth:`ArchiveStore.reading` creates nothing and migrates nothing;
  it reads every released version of the backend's schema.  It yields ``None`` for an archive
  that exists but holds nothing yet, and raises ``ArchiveError`` when there is no archive.
* **Versioned.**  Opening to write first brings the archive to :attr:`ArchiveStore.latest_version`
  (released migrations are never edited, only appended); an archive of a newer version is refused.
* **Checked.**  Opening (and :meth:`ArchiveStore.check`) refuses an archive that is damaged or is
  not a roundscore archive, naming it, without writing to it.
* **Values kept as given.**  Score rows are tuples in :data:`ROW_FIELDS` order holding ``str``,
  ``int`` (``n_replicates``), ``float`` or ``None``; ``result`` may be a censored result's text
  (``"<0.1"``).  They come back as they went in (a float to the last bit, a text as text).
  Text compares by code point (SQLite's BINARY collation).
* Qualitative rows (nominal and ordinal measurands) are tuples in :data:`QUALITATIVE_ROW_FIELDS` order
  (text, ``deviation`` an ``int`` or ``None``, ``item`` ``""`` when the measurand has no items), kept beside
  the score rows of the same round and removed with them.  An archive of a version before they were kept
  reads as holding none.
* Every error a backend raises is an ``ArchiveError`` naming the archive (:attr:`ArchiveStore.name`).

The interface names are our own; they carry no SQL.  A test double beside the tests
(``tests/memory_archive.py``) implements them in memory, and the archive tests run over every
implementation (``tests/archive_backends.py``).
"""

from __future__ import annotations

import datetime as _dt
from abc import ABC, abstractmethod
from collections.abc import Sequence
from contextlib import AbstractContextManager
from dataclasses import asdict, dataclass

from roundscore.history.qualitative import QUALITATIVE_ROW_FIELDS
from roundscore.history.sheets import ROW_FIELDS

__all__ = ["ROW_FIELDS", "HISTORY_ROW_FIELDS", "QUALITATIVE_ROW_FIELDS", "QUALITATIVE_HISTORY_ROW_FIELDS",
           "RoundRecord", "AuditEntry", "HistoryQuery",
           "Investigation", "Laboratory", "ArchiveReader", "ArchiveWriter", "ArchiveStore", "now"]

#: Fields of a row of :meth:`ArchiveReader.history_rows`: the round's keys, then a score row.
HISTORY_ROW_FIELDS: tuple[str, ...] = ("scheme", "round", "round_date", "title", *ROW_FIELDS)
#: Fields of a row of :meth:`ArchiveReader.qualitative_history_rows`: the round's keys, then a qualitative row.
QUALITATIVE_HISTORY_ROW_FIELDS: tuple[str, ...] = ("scheme", "round", "round_date", "title",
                                                   *QUALITATIVE_ROW_FIELDS)


def now() -> str:
    """The current UTC time, ISO 8601 to the second (stored with rounds, migrations and audit rows)."""
    return _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")


@dataclass(frozen=True, slots=True, kw_only=True)
class RoundRecord:
    """One archived round (without its rows).

    Attributes
    ----------
    scheme, round_id : str
        The keys: round identifiers repeat across schemes.
    round_date : str
        ISO ``YYYY-MM-DD``.
    title : str
        The round's title (``""`` when a lab's file gave none).
    settings : str
        The round's settings as canonical JSON (``"{}"`` for a round added from a lab's file).
    stored_at : str
        UTC time of the store, ISO 8601.
    origin : {"coordinator", "lab"}
        Stored whole by the provider (:func:`~roundscore.history.store.store_round`) or built
        from a lab's files (:func:`~roundscore.history.store.add_files`); rounds stored before
        the origin was kept are ``"lab"``.
    """

    scheme: str
    round_id: str
    round_date: str
    title: str = ""
    settings: str = "{}"
    stored_at: str
    origin: str = "lab"

    def as_dict(self) -> dict[str, str]:
        """The fields by name (the audit keeps a replaced round as this dict in JSON)."""
        return asdict(self)


@dataclass(frozen=True, slots=True, kw_only=True)
class AuditEntry:
    """A record copied to the audit before it was replaced.

    Attributes
    ----------
    replaced_at : str
        UTC time of the replacement, ISO 8601.
    reason : str
        Why (given by the user, or the command's default).
    scheme, round_id : str
        The round concerned.
    lab : str or None
        The lab of a score row, or of a lab's import; ``None`` for a whole round's tables.
    kind : {"round", "score", "qualitative", "statistics", "precision", "investigation", "laboratory"}
        What was replaced (an investigation record or a laboratory's name is kept here when it
        is changed).
    row : str
        The replaced record as canonical JSON.
    """

    replaced_at: str
    reason: str
    scheme: str
    round_id: str
    lab: str | None
    kind: str
    row: str


@dataclass(frozen=True, slots=True, kw_only=True)
class HistoryQuery:
    """Which archived score rows :meth:`ArchiveReader.history_rows` returns.

    Attributes
    ----------
    labs : tuple of str
        The lab codes (any number: a backend must not need one query or one bound parameter
        per lab).
    scheme, measurand : str or None
        Only this scheme / measurand.
    since : str or None
        Only rounds dated on or after this ISO date.
    before : str or None
        Only rounds dated strictly before this ISO date.
    exclude_round : str or None
        Leave out rounds with this identifier.
    """

    labs: tuple[str, ...]
    scheme: str | None = None
    measurand: str | None = None
    since: str | None = None
    before: str | None = None
    exclude_round: str | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class Investigation:
    """A lab's record of what it did about a signal or a trend-rule finding.

    Attributes
    ----------
    scheme, round_id, lab, measurand : str
        The point of the lab's series it is about (one record per point).
    status : {"open", "closed"}
        Whether the investigation is still going on.
    cause, action : str
        The cause found and the corrective action taken (``""`` while unknown).
    by : str
        Who recorded (or closed) it.
    recorded_on : str
        The day it was recorded or closed, ISO ``YYYY-MM-DD``.
    stored_at : str
        UTC time of the store, ISO 8601.
    """

    scheme: str
    round_id: str
    lab: str
    measurand: str
    status: str
    cause: str = ""
    action: str = ""
    by: str
    recorded_on: str
    stored_at: str

    def key(self) -> tuple[str, str, str, str]:
        """(scheme, round, lab, measurand): the point it is about."""
        return (self.scheme, self.round_id, self.lab, self.measurand)

    def content(self) -> dict[str, str]:
        """The fields a user gave (``stored_at`` aside): what decides whether a record changed."""
        return {k: v for k, v in asdict(self).items() if k != "stored_at"}


@dataclass(frozen=True, slots=True, kw_only=True)
class Laboratory:
    """The laboratory behind a lab code of one scheme (a lab takes part under other codes elsewhere).

    Attributes
    ----------
    scheme, lab : str
        The scheme and the code the lab has there.
    name : str
        The laboratory's name; codes sharing a name are one laboratory.
    stored_at : str
        UTC time of the store, ISO 8601.
    """

    scheme: str
    lab: str
    name: str
    stored_at: str


class ArchiveReader(ABC):
    """An archive opened to read (:meth:`ArchiveStore.reading`)."""

    @abstractmethod
    def version(self) -> int:
        """The schema version of the archive as it is (an old one is read as it is)."""

    @abstractmethod
    def find_round(self, scheme: str, round_id: str) -> RoundRecord | None:
        """The round with these keys, or ``None``."""

    @abstractmethod
    def rounds(self) -> list[RoundRecord]:
        """Every archived round, ordered by scheme, then round identifier."""

    @abstractmethod
    def score_rows(self, scheme: str, round_id: str, lab: str | None = None) -> list[tuple]:
        """The round's score rows (only ``lab``'s when given), tuples in :data:`ROW_FIELDS` order,
        in no particular order."""

    @abstractmethod
    def round_tables(self, scheme: str, round_id: str) -> list[tuple[str, str]]:
        """The round's statistics and precision rows as ``(kind, canonical JSON)``, ordered by
        kind, then position."""

    @abstractmethod
    def history_rows(self, query: HistoryQuery) -> list[tuple]:
        """The score rows the query selects, each with its round's keys (:data:`HISTORY_ROW_FIELDS`),
        ordered by round date, round identifier, scheme, lab and measurand."""

    @abstractmethod
    def labs(self) -> list[str]:
        """Every lab code with score rows or qualitative rows, sorted, each once."""

    @abstractmethod
    def qualitative_rows(self, scheme: str, round_id: str, lab: str | None = None) -> list[tuple]:
        """The round's qualitative rows (only ``lab``'s when given), tuples in :data:`QUALITATIVE_ROW_FIELDS`
        order, in no particular order."""

    @abstractmethod
    def qualitative_history_rows(self, query: HistoryQuery) -> list[tuple]:
        """The qualitative rows the query selects, each with its round's keys
        (:data:`QUALITATIVE_HISTORY_ROW_FIELDS`), ordered by round date, round identifier, scheme, lab,
        measurand and item."""

    @abstractmethod
    def audit_entries(self) -> list[AuditEntry]:
        """The audit, oldest entry first (in the order the entries were added)."""

    @abstractmethod
    def investigations(self, labs: Sequence[str] | None = None) -> list[Investigation]:
        """The investigation records (only those of ``labs`` when given), ordered by scheme, round,
        lab and measurand; none in an archive older than the records."""

    @abstractmethod
    def laboratories(self) -> list[Laboratory]:
        """Every laboratory name given to a lab code, ordered by scheme and code; none in an archive
        older than the names."""


class ArchiveWriter(ArchiveReader):
    """An archive opened to write: the reads see the writes made in the same transaction."""

    @abstractmethod
    def add_round(self, record: RoundRecord) -> None:
        """Add a round that is not archived yet."""

    @abstractmethod
    def update_round(self, scheme: str, round_id: str, *, round_date: str | None = None,
                     title: str | None = None) -> None:
        """Change the given fields of an archived round (``None``: left as it is)."""

    @abstractmethod
    def remove_round(self, scheme: str, round_id: str) -> None:
        """Remove a round with all its score rows, qualitative rows and tables."""

    @abstractmethod
    def remove_scores(self, scheme: str, round_id: str, lab: str) -> None:
        """Remove one lab's score rows and qualitative rows of a round (the round stays)."""

    @abstractmethod
    def add_scores(self, scheme: str, round_id: str, rows: Sequence[tuple]) -> None:
        """Add score rows (:data:`ROW_FIELDS` order) to an archived round; a lab x measurand
        archived already is an error."""

    @abstractmethod
    def add_qualitative(self, scheme: str, round_id: str, rows: Sequence[tuple]) -> None:
        """Add qualitative rows (:data:`QUALITATIVE_ROW_FIELDS` order) to an archived round; a lab x measurand
        x item archived already is an error."""

    @abstractmethod
    def add_tables(self, scheme: str, round_id: str, rows: Sequence[tuple[str, int, str]]) -> None:
        """Add statistics/precision rows as ``(kind, position, canonical JSON)``."""

    @abstractmethod
    def add_audit(self, entries: Sequence[AuditEntry]) -> None:
        """Append entries to the audit, in this order."""

    @abstractmethod
    def put_investigation(self, record: Investigation) -> None:
        """Store a record, replacing the one of the same point (the caller audits the old one)."""

    @abstractmethod
    def put_laboratory(self, record: Laboratory) -> None:
        """Store a code's laboratory name, replacing the one given before (the caller audits it)."""


class ArchiveStore(ABC):
    """An archive at one location; opened through the backend registry
    (:func:`roundscore.history.backends.open_store`)."""

    @property
    @abstractmethod
    def name(self) -> str:
        """How messages name the archive (a file path, a server database without its password)."""

    @property
    @abstractmethod
    def latest_version(self) -> int:
        """The schema version this roundscore writes."""

    @abstractmethod
    def exists(self) -> bool:
        """Whether there is an archive at the location (it may be empty)."""

    @abstractmethod
    def reading(self) -> AbstractContextManager[ArchiveReader | None]:
        """Open to read; yields ``None`` for an empty archive (see the module docstring)."""

    @abstractmethod
    def writing(self) -> AbstractContextManager[ArchiveWriter]:
        """Open to write (created when missing, migrated to :attr:`latest_version`) in one
        transaction, committed when the block ends without an exception."""

    @abstractmethod
    def check(self) -> None:
        """Refuse (``ArchiveError``) an archive that is missing, damaged, foreign or newer;
        writes nothing."""
