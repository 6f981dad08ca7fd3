"""Process-pool helpers: run a function over batches of items on all cores, results in input order.

Reading 2000 returned forms or writing 2000 score sheets is many small,
independent pieces of work; one process per core does them side by side.
Three rules keep the outputs the same for any number of jobs:

* work is cut into contiguous batches and the results are put back in the
  order of the items, whatever order the workers finish in;
* a worker only returns values: it never shares state with the others,
  and every file it writes depends only on its own item;
* ``jobs=1`` (or a single batch) runs inline in this process, with no
  pool, so a small round pays nothing for the machinery.

Large read-only context (the round's evaluation, say) is passed once as
``shared``: with the ``fork`` start method (Linux) the workers inherit it
without copying or pickling; elsewhere it is pickled once per worker.
Errors raised in a worker reach the caller as the same exception type with
the same fields (roundscore's errors carry lists of problems, which plain
exception pickling would lose).
"""

from __future__ import annotations

import os
import pickle
import sys
import time
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from collections.abc import Callable, Sequence
from typing import Any, TypeVar

from roundscore.errors import WorkerError
from roundscore.support.processes import context, worker_started

__all__ = ["resolve_jobs", "run_batches", "shared", "batches", "Progress", "terminal_progress",
           "BATCHES_PER_JOB"]

T = TypeVar("T")
R = TypeVar("R")

#: Batches per worker: enough to even out slow items, few enough that each pickle round trip is amortised
#: (common practice for pools of short tasks).
BATCHES_PER_JOB = 4

#: A progress callback: ``progress(stage, done, total)``.
Progress = Callable[[str, int, int], None]

_SHARED: Any = None


def resolve_jobs(jobs: int | None) -> int:
    """The number of worker processes to use: ``None`` or 0 means every core this process may use.

    Raises
    ------
    ValueError
        For a negative number.
    """
    if jobs is None or jobs == 0:
        try:
            return max(1, len(os.sched_getaffinity(0)))
        except AttributeError:  # not on Linux
            return max(1, os.cpu_count() or 1)
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 0:
        raise ValueError(f"jobs must be a whole number ≥ 0 (0 = all cores), got {jobs!r}")
    return jobs


def batches(items: Sequence[T], jobs: int, batch_size: int | None = None) -> list[Sequence[T]]:
    """Cut ``items`` into contiguous batches: ``batch_size`` each, or about BATCHES_PER_JOB per job."""
    n = len(items)
    if n == 0:
        return []
    if batch_size is None:
        batch_size = max(1, -(-n // (jobs * BATCHES_PER_JOB)))
    return [items[i:i + batch_size] for i in range(0, n, batch_size)]


def shared() -> Any:
    """The ``shared`` object given to :func:`run_batches`, as seen inside a worker (or inline)."""
    return _SHARED


@dataclass(frozen=True, slots=True, kw_only=True)
class _Failure:
    """An exception raised in a worker, in a form that survives pickling."""

    kind: type[BaseException]
    state: dict
    args: tuple
    text: str

    def rebuild(self) -> BaseException:
        try:
            exc = self.kind.__new__(self.kind)
            exc.args = self.args
            exc.__dict__.update(self.state)
            return exc
        except Exception:
            return RuntimeError(self.text)


def _set_shared(obj: Any) -> None:
    global _SHARED
    _SHARED = obj


def _call(fn: Callable, batch: Sequence) -> Any:
    try:
        return fn(batch)
    except BaseException as exc:  # sent back and raised again in the caller
        try:
            pickle.loads(pickle.dumps(exc))
            roundtrip = True
        except Exception:
            roundtrip = False
        if roundtrip and not getattr(exc, "__dict__", None):
            return _Failure(kind=type(exc), state={}, args=exc.args, text=repr(exc))
        state = dict(getattr(exc, "__dict__", {}))
        try:
            pickle.dumps(state)
        except Exception:
            state = {}
        return _Failure(kind=type(exc), state=state, args=_picklable_args(exc.args),
                        text=f"{type(exc).__name__}: {exc}")


def _picklable_args(args: tuple) -> tuple:
    try:
        pickle.dumps(args)
        return args
    except Exception:
        return tuple(str(a) for a in args)


def _start_worker(parent_pid: int, context: Any, set_context: bool) -> None:
    """Pool initializer: end with the parent (see :mod:`roundscore.support.processes`); take ``shared`` under spawn."""
    worker_started(parent_pid)
    if set_context:
        _set_shared(context)


def run_batches(
    fn: Callable[[Sequence[T]], list[R]],
    items: Sequence[T],
    *,
    jobs: int | None = None,
    shared: Any = None,
    batch_size: int | None = None,
    progress: Progress | None = None,
    stage: str = "",
    here: int | None = None,
    then: Callable[[Sequence[T], list[R]], list] | None = None,
) -> list:
    """``fn`` applied to contiguous batches of ``items`` in worker processes; the results, flattened, in order.

    Parameters
    ----------
    fn : callable
        A module-level function taking a batch (a slice of ``items``) and
        returning a list with one result per item. It may read
        :func:`shared` for context common to all items.
    items : sequence
    jobs : int or None
        Worker processes; None or 0 = all cores (:func:`resolve_jobs`).
        With 1, or when everything fits in one batch, ``fn`` runs here; with
        one batch per job, the last batch runs here beside ``jobs − 1`` workers.
    shared : object
        Read-only context made available to ``fn`` through :func:`shared`.
    batch_size : int, optional
        Items per batch (default: about :data:`BATCHES_PER_JOB` batches per job).
    progress : callable, optional
        Called as ``progress(stage, done, total)`` after each finished batch.
    here : int, optional
        Run the last ``here`` items in this process, as one batch, while the
        workers run the others (in batches of ``batch_size``): a share chosen
        by the caller, for work whose results this process also handles
        (``then``). Default: with one batch per job, the last batch.
    then : callable, optional
        ``then(batch, results)`` → results, called in this process on each
        batch's results as soon as they are in (a batch run here: right after
        it; a worker's: when it arrives, while the workers go on with the
        others); what it returns (one per item) replaces them. Work on the
        results that is cheaper done here than sent back overlaps the workers' work.

    Returns
    -------
    list
        One result per item (``fn``'s, or ``then``'s), in the order of ``items``.

    Raises
    ------
    Exception
        The first exception raised by ``fn`` (by batch order), with its type and fields.
    """
    items = list(items) if not isinstance(items, Sequence) else items
    n = len(items)
    jobs = resolve_jobs(jobs)
    if here is not None and not 0 <= here <= n:
        raise ValueError(f"here must be between 0 and the {n} items, got {here}")
    if here is None or jobs == 1:  # (one job: every batch runs here, whatever the share)
        parts = batches(items, jobs, batch_size)
        mine_last = len(parts) == jobs  # one batch per job: the last runs here
    elif here == n:
        parts, mine_last = batches(items, 1, n or None), True  # everything here, as one batch
    else:
        parts = batches(items[:n - here], jobs - 1, batch_size) + ([items[n - here:]] if here else [])
        mine_last = here > 0
    then = then or _unchanged
    if jobs == 1 or len(parts) <= 1:
        previous = _SHARED
        _set_shared(shared)
        try:
            out: list = []
            for part in parts:
                res = fn(part)
                _check_length(res, part)
                res = then(part, res)
                _check_length(res, part)
                out.extend(res)
                if progress:
                    progress(stage, len(out), n)
            return out
        finally:
            _set_shared(previous)
    ctx = context()
    results: list[Any] = [None] * len(parts)
    done_items = 0
    previous = _SHARED
    forked = ctx.get_start_method() == "fork"
    _set_shared(shared)  # inherited by forked workers; read by a batch run here
    # The share ``here`` (as the evaluation asks), or one batch per job: the last batch runs here while the workers
    # run the others, so one process fewer is started and that batch's results are not sent back (the parent
    # would only wait).
    sent = parts[:-1] if mine_last else parts
    workers = min(jobs - 1 if mine_last else jobs, len(sent))
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_start_worker,
                               initargs=(os.getpid(), None if forked else shared, not forked))
    try:
        pending = {pool.submit(_call, fn, part): i for i, part in enumerate(sent)}
        if mine_last:
            mine = fn(parts[-1])
            _check_length(mine, parts[-1])
            mine = then(parts[-1], mine)
            _check_length(mine, parts[-1])
            results[-1] = mine
            done_items += len(parts[-1])
            if progress:
                progress(stage, done_items, n)
        while pending:
            finished, _ = wait(pending, return_when=FIRST_COMPLETED)
            for fut in finished:
                i = pending.pop(fut)
                res = fut.result()
                if isinstance(res, _Failure):
                    raise res.rebuild()
                _check_length(res, parts[i])
                res = then(parts[i], res)
                _check_length(res, parts[i])
                results[i] = res
                done_items += len(parts[i])
                if progress:
                    progress(stage, done_items, n)
    except BrokenProcessPool:
        _stop(pool)
        raise WorkerError(f"a worker process ended before giving its results{f' ({stage})' if stage else ''} "
                          "(killed, or out of memory?); nothing was written by this step: run the command "
                          "again, or with --jobs 1") from None
    except BaseException:
        _stop(pool)  # an error, ^C or SIGTERM: the workers are ended now, not after their batches
        raise
    else:
        pool.shutdown(wait=True)
    finally:
        _set_shared(previous)
    return [r for part in results for r in part]


def _stop(pool: ProcessPoolExecutor) -> None:
    """End a pool at once: cancel what has not started and kill its workers (by their own handles)."""
    processes = list(getattr(pool, "_processes", {}).values())  # the executor keeps no public handle list
    pool.shutdown(wait=False, cancel_futures=True)
    for proc in processes:
        if proc.is_alive():
            proc.kill()
    for proc in processes:
        proc.join(timeout=5.0)


def _unchanged(part: Sequence, res: list) -> list:
    return res


def _check_length(res: Any, part: Sequence) -> None:
    if not isinstance(res, list) or len(res) != len(part):
        raise TypeError(f"the batch function must return a list with one result per item "
                        f"({len(part)}), got {type(res).__name__}"
                        + (f" of {len(res)}" if isinstance(res, list) else ""))


def terminal_progress(stream=None, *, every: float = 0.5) -> Progress:
    """A progress callback that prints ``stage: done/total`` on one line, at most every ``every`` seconds."""
    stream = stream or sys.stderr
    last_t, last_stage = 0.0, ""

    def show(stage: str, done: int, total: int) -> None:
        nonlocal last_t, last_stage
        now = time.monotonic()
        final = done >= total
        if not final and stage == last_stage and now - last_t < every:
            return
        last_t, last_stage = now, stage
        end = "\n" if final else ""
        stream.write(f"\r  {stage}: {done}/{total}{end}")
        stream.flush()

    return show
