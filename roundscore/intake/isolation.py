"""Reading untrusted files in isolated worker processes, bounded in memory and time.

A worker that aborts, segfaults, runs out of memory or hangs costs only the
file it was reading, which comes back as a :class:`ReadFailure` with the
reason; a fresh worker takes over the rest of its batch. Results come back
in input order and do not depend on the number of workers.

References
----------
.. [1] POSIX ``setrlimit`` (RLIMIT_AS): the address-space limit of a process.
"""

from __future__ import annotations

import os
import signal
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from multiprocessing.connection import Connection
from multiprocessing.connection import wait as _wait
from multiprocessing.process import BaseProcess
from pathlib import Path
from typing import Any, TypeVar, overload

from roundscore.errors import InputError, Problem
from roundscore.support.parallel import resolve_jobs
from roundscore.support.processes import context, worker_started
from roundscore.model.limits import DEFAULT_LIMITS, MiB, ReadLimits

__all__ = ["ReadFailure", "FileRows", "read_many", "resolve_read_jobs", "READER_HOOK_ENV", "BATCH_FILES"]

#: Environment variable naming a ``module:function`` that replaces the file reader inside
#: workers (tests use it to make a worker abort on one file).
READER_HOOK_ENV = "ROUNDSCORE_TEST_READER"

@dataclass(frozen=True, slots=True, kw_only=True)
class ReadFailure:
    """A file that could not be read, and why.

    Attributes
    ----------
    file : str
        The path as given.
    reason : str
        One line for the user.
    problems : tuple of Problem
        The detailed problems when the reader refused the file with an
        :class:`~roundscore.errors.InputError` (empty for a crash or timeout).
    """

    file: str
    reason: str
    problems: tuple[Problem, ...] = ()

    def as_problems(self) -> list[Problem]:
        """The failure as problems for an :class:`~roundscore.errors.InputError`."""
        return list(self.problems) or [Problem(message=self.reason, file=self.file)]


@dataclass(frozen=True, slots=True, kw_only=True)
class FileRows:
    """The requested sheets of one file, in the order they were asked for.

    Attributes
    ----------
    file : str
        The path as given.
    sheets : tuple of SheetRows
    """

    file: str
    sheets: tuple  # tuple[SheetRows, ...]

    def sheet(self, name: str | None):
        """The :class:`~roundscore.intake.xlsx.SheetRows` of sheet ``name`` (None: the first read)."""
        if name is None:
            return self.sheets[0]
        for s in self.sheets:
            if s.sheet == name:
                return s
        raise KeyError(name)


Reader = Callable[[str, Sequence[str | None], ReadLimits], FileRows]


def _default_reader(path: str, sheets: Sequence[str | None], limits: ReadLimits) -> FileRows:
    from roundscore.intake.xlsx import read_file_sheets

    return FileRows(file=path, sheets=tuple(read_file_sheets(path, sheets, limits=limits)))


def _hooked_reader() -> Reader:
    spec = os.environ.get(READER_HOOK_ENV)
    if not spec:
        return _default_reader
    import importlib

    module, _, name = spec.partition(":")
    return getattr(importlib.import_module(module), name)


def _read_one(reader: Reader, path: str, sheets: Sequence[str | None], limits: ReadLimits,
              then: Callable[[FileRows], object] | None = None):
    try:
        got = reader(path, sheets, limits)
        return then(got) if then is not None else got
    except InputError as exc:
        reason = str(exc.problems[0].message) if exc.problems else str(exc)
        return ReadFailure(file=path, reason=reason, problems=tuple(exc.problems))
    except MemoryError:
        return ReadFailure(file=path, reason=f"reading the file needed more than the memory limit of "
                                             f"{limits.memory_bytes // MiB} MiB")
    except RecursionError:
        return ReadFailure(file=path, reason="the file is nested too deeply to read")
    except (KeyboardInterrupt, SystemExit):
        raise
    except BaseException as exc:  # a reader bug or library error (pyo3 panics are BaseException): this file only
        return ReadFailure(file=path, reason=f"the reader failed on this file ({type(exc).__name__}: {exc})")


def _virtual_size() -> int:
    try:
        with open("/proc/self/statm") as fh:
            return int(fh.read().split()[0]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError, AttributeError):
        return 0


def _limit_memory(extra: int) -> None:
    try:
        import resource
    except ImportError:  # not on a POSIX system: time limits only
        return
    base = _virtual_size()
    if base == 0:
        return
    _soft, hard = resource.getrlimit(resource.RLIMIT_AS)
    want = base + extra
    if hard != resource.RLIM_INFINITY:
        want = min(want, hard)
    try:
        resource.setrlimit(resource.RLIMIT_AS, (want, hard))
    except (ValueError, OSError):
        pass


def _worker(conn, progress, limits: ReadLimits, reader: Reader | None,
            then: Callable[[FileRows], object] | None, parent_pid: int) -> None:
    """Worker loop: receive a batch ``[(index, path, sheets)]``, send back its results as one list.

    Before each file it writes ``(index, start time)`` into the shared
    ``progress`` array, so the parent knows which file a dead or hung worker
    was on without a message per file.
    """
    worker_started(parent_pid)  # ends with the parent; the parent handles ^C and SIGTERM and ends its workers
    import faulthandler

    faulthandler.disable()  # a crash here is reported by the parent as a ReadFailure, not a dump
    import gc

    # The parent's objects, inherited by fork, are left out of this process's collections: a full
    # collection walking them would copy every page they live on (copy-on-write).
    gc.freeze()
    _limit_memory(limits.memory_bytes)
    use = reader if reader is not None else _hooked_reader()
    try:
        while True:
            batch = conn.recv()
            if batch is None:
                return
            out = []
            for index, path, sheets in batch:
                progress[1] = time.monotonic()
                progress[0] = index
                out.append(_read_one(use, path, sheets, limits, then))
            conn.send(out)
    except (EOFError, OSError, KeyboardInterrupt):
        return


#: One work item: (index in the input, path, the sheets wanted).
_Item = tuple[int, str, list[str | None]]


@dataclass(slots=True)
class _Slot:
    process: BaseProcess
    conn: Connection
    progress: Any  # shared ctypes array of two doubles: index of the file being read, its start time
    batch: list[_Item] = field(default_factory=list)


def _died(process: BaseProcess) -> str:
    code = process.exitcode
    if code is not None and code < 0:
        try:
            name = signal.Signals(-code).name
        except ValueError:
            name = f"signal {-code}"
        how = f"was stopped by {name}"
    else:
        how = f"exited with code {code}"
    return (f"unreadable: the reader process {how} while reading this file (the file may be damaged, or need "
            "more than the memory limit); the other files were read")


def resolve_read_jobs(jobs: int | None, n_files: int) -> int:
    """Worker count: ``None`` or 0 = the cores this process may use (:func:`~roundscore.support.parallel.resolve_jobs`),
    never more than the files."""
    return max(1, min(resolve_jobs(jobs), n_files))


#: Most files per batch sent to a worker: a batch is one message each way, so IPC is
#: amortised; about four batches per worker even out slow files (common practice).
BATCH_FILES = 32
_BATCHES_PER_WORKER = 4


T = TypeVar("T")


@overload
def read_many(paths: Sequence[str | Path], sheets: str | Sequence[str | None] | None = None, *,
              jobs: int | None = None, limits: ReadLimits = DEFAULT_LIMITS, then: None = None,
              progress: Callable[[int, int], None] | None = None,
              _reader: Reader | None = None) -> list[FileRows | ReadFailure]: ...
@overload
def read_many(paths: Sequence[str | Path], sheets: str | Sequence[str | None] | None = None, *,
              jobs: int | None = None, limits: ReadLimits = DEFAULT_LIMITS, then: Callable[[FileRows], T],
              progress: Callable[[int, int], None] | None = None,
              _reader: Reader | None = None) -> list[T | ReadFailure]: ...
def read_many(paths: Sequence[str | Path], sheets: str | Sequence[str | None] | None = None, *,
              jobs: int | None = None, limits: ReadLimits = DEFAULT_LIMITS,
              then: Callable[[FileRows], object] | None = None,
              progress: Callable[[int, int], None] | None = None,
              _reader: Reader | None = None) -> list[Any]:
    """Read many untrusted files in isolated worker processes; one result per path, in input order.

    Parameters
    ----------
    paths : sequence of path
        The files (workbooks or CSV).
    sheets : str, None or sequence of str or None
        The sheet(s) to read from every file (None: the first sheet).
    jobs : int, optional
        Worker processes; None or 0 means every core (at most one per file).
        Even ``jobs=1`` reads in a separate process, so a crash or hang of a
        reader library never reaches the caller.
    limits : ReadLimits
        Size, memory and time bounds per file.
    then : callable, optional
        ``then(file_rows) -> result`` run inside the worker on each file
        read, under the same bounds; its result is returned instead of the
        ``FileRows`` (so a caller can turn rows into a compact result where
        they were read, instead of sending every cell back). An
        :class:`~roundscore.errors.InputError` it raises becomes the file's
        ``ReadFailure``. Under ``spawn`` it must be picklable.
    progress : callable, optional
        ``progress(files_done, files_total)``, called as batches come back.
    _reader : callable, optional
        ``reader(path, sheets, limits) -> FileRows`` replacing the file
        reader inside the workers (for tests).

    Returns
    -------
    list of FileRows or ReadFailure
        ``FileRows`` with the requested sheets, or ``ReadFailure`` naming the
        file and the reason (refused, crashed, out of memory, timed out).

    Notes
    -----
    Each worker sets ``RLIMIT_AS`` to its size at start plus
    ``limits.memory_bytes``. A worker that dies, or spends more than
    ``timeout_s`` on one file, is ended (by its own process handle) and
    replaced; the file it was on fails and the rest of its batch is read
    again by the replacement. Assumes the ``fork`` start method (Linux) for
    speed; ``spawn`` works but needs a picklable ``_reader``.
    """
    wanted = [sheets] if sheets is None or isinstance(sheets, str) else list(sheets)
    items = [(i, str(p), wanted) for i, p in enumerate(paths)]
    if not items:
        return []
    n_workers = resolve_read_jobs(jobs, len(items))
    pool = _Pool(items, n_workers, limits=limits, reader=_reader, then=then, progress=progress)
    try:
        for _ in range(n_workers):
            pool.start()
        while pool.step():
            pass
    finally:
        pool.close()
    return [r if r is not None else ReadFailure(file=items[i][1], reason="the file was not read")
            for i, r in enumerate(pool.results)]


class _Pool:
    """The workers of one :func:`read_many` call: each slot reads one batch at a time; a dead or hung
    worker is replaced and its batch, less the file it was on, is read again."""

    def __init__(self, items: list[_Item], n_workers: int, *, limits: ReadLimits, reader: Reader | None,
                 then: Callable[[FileRows], object] | None, progress: Callable[[int, int], None] | None) -> None:
        self.results: list[object | None] = [None] * len(items)
        self.total = len(items)
        size = max(1, min(BATCH_FILES, -(-len(items) // (n_workers * _BATCHES_PER_WORKER))))
        self.queue = [items[i:i + size] for i in range(0, len(items), size)]
        self.queue.reverse()  # pop() from the end gives the batches in order
        self.ctx = context()
        self.slots: list[_Slot] = []
        self.limits, self.reader, self.then, self.progress = limits, reader, then, progress
        self.done = 0

    def start(self) -> None:
        parent, child = self.ctx.Pipe(duplex=True)
        shared_progress = self.ctx.RawArray("d", 2)
        proc = self.ctx.Process(target=_worker, daemon=True,
                                args=(child, shared_progress, self.limits, self.reader, self.then, os.getpid()))
        proc.start()
        child.close()
        slot = _Slot(process=proc, conn=parent, progress=shared_progress)
        self.slots.append(slot)
        self.feed(slot)

    def feed(self, slot: _Slot) -> None:
        if self.queue:
            slot.batch = self.queue.pop()
            slot.progress[0] = -1.0
            slot.progress[1] = time.monotonic()
            slot.conn.send(slot.batch)

    def retire(self, slot: _Slot, reason: str) -> None:
        # The file the worker was on fails; the others of its batch are read again.
        current = int(slot.progress[0])
        indices = [b[0] for b in slot.batch]
        culprit = indices.index(current) if current in indices else 0
        index, path, _ = slot.batch[culprit]
        self.results[index] = ReadFailure(file=path, reason=reason)
        rest = slot.batch[:culprit] + slot.batch[culprit + 1:]
        if rest:
            self.queue.append(rest)
        slot.batch = []
        _end(slot)
        self.slots.remove(slot)
        if self.queue:
            self.start()

    def step(self) -> bool:
        """Wait for the busy workers once and handle what came back; False when no work is left."""
        busy = [s for s in self.slots if s.batch]
        if not busy:
            return False
        timeout_s = self.limits.timeout_s
        deadline = min(s.progress[1] for s in busy) + timeout_s
        ready = _wait([s.conn for s in busy] + [s.process.sentinel for s in busy],
                      timeout=max(0.0, deadline - time.monotonic()))
        now = time.monotonic()
        for slot in busy:
            got = None
            if slot.conn in ready:
                try:
                    got = slot.conn.recv()
                except (EOFError, OSError):
                    got = None
            if got is not None:
                self.collect(slot, got)
            elif slot.conn in ready or slot.process.sentinel in ready:
                slot.process.join(timeout=5.0)
                self.retire(slot, _died(slot.process))
            elif now - slot.progress[1] >= timeout_s:
                self.retire(slot, f"unreadable: reading the file took longer than the limit of "
                                  f"{timeout_s:g} s, so it was stopped; the other files were read")
        return True

    def collect(self, slot: _Slot, got: list[object]) -> None:
        for (index, _, _), value in zip(slot.batch, got):
            self.results[index] = value
        self.done += len(slot.batch)
        slot.batch = []
        self.feed(slot)
        if self.progress is not None:
            self.progress(self.done, self.total)

    def close(self) -> None:
        for slot in list(self.slots):
            _end(slot, polite=True)


def _end(slot: _Slot, polite: bool = False) -> None:
    proc = slot.process
    if polite and proc.is_alive():
        try:
            slot.conn.send(None)
        except (OSError, ValueError):
            pass
        proc.join(timeout=1.0)
    if proc.is_alive():
        proc.kill()  # this worker only, by its own handle
        proc.join(timeout=5.0)
    try:
        slot.conn.close()
    except OSError:
        pass
