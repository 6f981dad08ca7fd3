"""Worker processes and signals: one start method, workers that die with their parent, SIGTERM as an error.

Every process roundscore starts (the pools of :mod:`roundscore.support.parallel` and
the isolated readers of :mod:`roundscore.intake.isolation`) calls
:func:`worker_started` first. On Linux it asks the kernel to end the worker
when its parent dies (``PR_SET_PDEATHSIG``), so a ``kill -9`` of the command
leaves no worker behind; everywhere, a small thread also watches the parent's
process id as a second guard (and the only one where ``prctl`` is missing).

The command line turns SIGTERM and SIGHUP into :class:`Terminated`, an
exception that unwinds like any error: partial outputs are removed, workers
are ended, and the command exits non-zero.
"""

from __future__ import annotations

import ctypes
import multiprocessing as mp
import os
import signal
import sys
import threading
from contextlib import contextmanager
from collections.abc import Iterator

__all__ = ["context", "worker_started", "Terminated", "signals_as_errors", "PARENT_POLL_S"]

#: How often a worker's watchdog thread looks at its parent's process id (s): the longest a worker outlives
#: its parent where the kernel cannot end it.
PARENT_POLL_S = 1.0

_PR_SET_PDEATHSIG = 1  # linux/prctl.h


def context():
    """The multiprocessing context for roundscore's workers.

    ``fork`` where it is safe (Linux and other POSIX systems but macOS, where
    forking a process that has loaded system frameworks can crash), otherwise
    ``spawn``: with fork the workers inherit the shared read-only context
    without pickling it.
    """
    methods = mp.get_all_start_methods()
    return mp.get_context("fork" if "fork" in methods and sys.platform != "darwin" else "spawn")


def worker_started(parent_pid: int) -> None:
    """Call first in every worker: end this process when ``parent_pid`` ends; default signal handlers.

    SIGINT is ignored (the parent handles ^C and ends its workers); SIGTERM
    and SIGHUP get their default action, so the parent can end a worker
    with them and the parent's own handlers (inherited by ``fork``) do not
    run in the worker.
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    for name in ("SIGTERM", "SIGHUP"):
        if hasattr(signal, name):
            signal.signal(getattr(signal, name), signal.SIG_DFL)
    if sys.platform.startswith("linux"):
        try:
            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0)
        except (OSError, AttributeError):
            pass
    if os.getppid() != parent_pid:  # the parent died before the request above took effect
        os._exit(1)
    threading.Thread(target=_watch_parent, args=(parent_pid,), name="roundscore-parent-watch",
                     daemon=True).start()


def _watch_parent(parent_pid: int) -> None:
    import time

    while True:
        time.sleep(PARENT_POLL_S)
        if os.getppid() != parent_pid:
            os._exit(1)


class Terminated(BaseException):
    """The process was asked to stop (SIGTERM or SIGHUP); unwinds like an error, so nothing is left half-done.

    A ``BaseException`` like ``KeyboardInterrupt``, so that ordinary
    ``except Exception`` clauses do not swallow it.
    """

    def __init__(self, signum: int) -> None:
        self.signum = signum
        try:
            name = signal.Signals(signum).name
        except ValueError:
            name = f"signal {signum}"
        super().__init__(name)

    @property
    def exit_code(self) -> int:
        """128 + the signal number, as shells report a process ended by a signal."""
        return 128 + self.signum


@contextmanager
def signals_as_errors() -> Iterator[None]:
    """Within the block (main thread only), SIGTERM and SIGHUP raise :class:`Terminated`."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return

    def raise_terminated(signum, frame):  # the signal module's signature
        for sig in previous:  # once: a second signal must not interrupt the clean-up of the first
            signal.signal(sig, signal.SIG_IGN)
        raise Terminated(signum)

    previous = {}
    for name in ("SIGTERM", "SIGHUP"):
        if hasattr(signal, name):
            sig = getattr(signal, name)
            previous[sig] = signal.signal(sig, raise_terminated)
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
