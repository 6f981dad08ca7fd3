"""The archive implementations the archive tests run over, and what the tests read through them.

A test that takes the ``archive_at`` fixture runs once per implementation in
:data:`IMPLEMENTATIONS`: ``archive_at("lab")`` gives a fresh location of that implementation
(a file path for SQLite, ``memory://...`` for the in-memory one of ``tests/memory_archive.py``).
A new backend (a server database) is one entry here: its location maker, and the registration
(if its scheme is not yet in ``roundscore.history.backends.BACKENDS``).  Such tests look at the
archive only through the store interface (:func:`totals`, :func:`audit`, :func:`tables`), never
through SQL; the tests that are about SQLite files (damage, application id, locks, old schema
versions) take ``tmp_path`` instead and say so.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import pytest

from roundscore.history import backends
from roundscore.history.interface import AuditEntry

from . import memory_archive


@dataclass(frozen=True)
class Implementation:
    """How the tests get a fresh archive of one backend."""

    name: str
    location: Callable[[Path, str], object]  # (the test's tmp_path, a name) -> a location
    register: Callable[[pytest.MonkeyPatch], None] | None = None  # done before the test runs
    cleanup: Callable[[], None] | None = None  # done after it


def _memory_register(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setitem(backends.BACKENDS, memory_archive.SCHEME, memory_archive.MemoryArchive)


IMPLEMENTATIONS: tuple[Implementation, ...] = (
    Implementation("sqlite", lambda tmp, name: tmp / f"{name}.sqlite"),
    Implementation("memory", lambda tmp, name: f"memory://{tmp.name}/{name}",
                   register=_memory_register, cleanup=memory_archive.ARCHIVES.clear),
)


@pytest.fixture(params=IMPLEMENTATIONS, ids=lambda impl: impl.name)
def archive_at(request, tmp_path, monkeypatch):
    """Factory: ``archive_at(name="a")`` -> a location of a new, not yet existing archive."""
    impl: Implementation = request.param
    if impl.register is not None:
        impl.register(monkeypatch)
    yield lambda name="a": impl.location(tmp_path, name)
    if impl.cleanup is not None:
        impl.cleanup()


def totals(location) -> tuple[int, int, int]:
    """(rounds, score rows, audit entries) in the archive."""
    with backends.open_store(location).reading() as reader:
        if reader is None:
            return (0, 0, 0)
        rounds = reader.rounds()
        scores = sum(len(reader.score_rows(r.scheme, r.round_id)) for r in rounds)
        return (len(rounds), scores, len(reader.audit_entries()))


def audit(location) -> list[AuditEntry]:
    with backends.open_store(location).reading() as reader:
        return reader.audit_entries() if reader is not None else []


def tables(location, scheme: str, round_id: str, kind: str) -> list[dict]:
    """A round's stored statistics or precision rows, in their order."""
    with backends.open_store(location).reading() as reader:
        return [json.loads(row) for k, row in reader.round_tables(scheme, round_id) if k == kind]


def exists(location) -> bool:
    return backends.open_store(location).exists()
