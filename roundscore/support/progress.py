"""A progress bar on the terminal for long steps, quiet when output is not a terminal.

:func:`terminal_bar` returns a ``progress(stage, done, total)`` callback as
taken by :func:`roundscore.pipeline.write_outputs` and the readers: one
tqdm bar per stage (a new stage closes the previous bar), written to
standard error, and disabled when that stream is not a terminal (a log
file or a pipe gets nothing). Without tqdm the callback prints one
``stage: done/total`` line per update on a terminal.
"""

from __future__ import annotations

import sys
from typing import IO, Any

__all__ = ["TerminalBar", "terminal_bar"]


class TerminalBar:
    """``progress(stage, done, total)`` drawn as one tqdm bar per stage.

    Parameters
    ----------
    stream : file, optional
        Where the bar goes (default: standard error).
    enabled : bool, optional
        Force the bar on or off; by default it is on only when ``stream`` is
        a terminal.
    """

    def __init__(self, stream: IO[str] | None = None, *, enabled: bool | None = None) -> None:
        self.stream = stream if stream is not None else sys.stderr
        isatty = getattr(self.stream, "isatty", None)
        self.enabled = bool(isatty and isatty()) if enabled is None else enabled
        self._stage: str | None = None
        self._bar: Any = None

    def __call__(self, stage: str, done: int, total: int) -> None:
        if not self.enabled:
            return
        if stage != self._stage or self._bar is None:
            self.close()
            self._stage = stage
            self._bar = self._new(stage, total)
        bar = self._bar
        if bar is None:
            self.stream.write(f"\r  {stage}: {done}/{total}")
            if done >= total:
                self.stream.write("\n")
                self._stage = None
            self.stream.flush()
            return
        if bar.total != total:
            bar.total = total
        bar.update(max(0, done - bar.n))
        if done >= total:
            self.close()

    def _new(self, stage: str, total: int):
        try:
            from tqdm import tqdm
        except ImportError:  # plain lines instead
            return None
        return tqdm(total=total, desc=f"  {stage}", file=self.stream, leave=True, dynamic_ncols=True,
                    unit="", mininterval=0.2)

    def close(self) -> None:
        """Finish the current bar (called automatically when a stage completes)."""
        if self._bar is not None:
            self._bar.close()
        self._bar = None
        self._stage = None

    def __enter__(self) -> TerminalBar:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def terminal_bar(stream: IO[str] | None = None, *, enabled: bool | None = None) -> TerminalBar:
    """A progress callback with a bar on a terminal and silence elsewhere (see :class:`TerminalBar`)."""
    return TerminalBar(stream, enabled=enabled)
