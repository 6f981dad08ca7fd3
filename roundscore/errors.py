"""The package's exceptions.

Every error a user can cause derives from :class:`RoundscoreError`; the
command line turns these into a message and exit code 2, never a traceback.
Input errors carry *where* the problem is (file, sheet, row, column, lab) and
*what* was found, and may bundle several problems so the user sees every one
of them at once instead of fixing files one complaint at a time.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from .text import clip, quote, terminal_text

#: Longest message text of one problem (a message lists what is allowed; values in it are quoted clipped).
MAX_MESSAGE_CHARS = 2000


def _shown(text: object, limit: int = 80) -> str:
    return terminal_text(clip(str(text), limit))

__all__ = [
    "RoundscoreError",
    "Problem",
    "InputError",
    "RoundFileError",
    "StatisticsError",
    "ArchiveError",
]


class RoundscoreError(Exception):
    """Base class of every error roundscore raises on purpose."""


@dataclass(frozen=True, slots=True, kw_only=True)
class Problem:
    """One thing wrong with an input, with its place.

    Attributes
    ----------
    message : str
        What is wrong, in words ("not a number", "duplicate replicate").
    file, sheet : str or None
        The file (as given by the user) and, for a workbook, the sheet.
    row : int or None
        1-based row as the user sees it in a spreadsheet or text editor
        (the header is row 1).
    column : str or None
        Column name or cell reference.
    lab, measurand : str or None
        The lab code and measurand the row belongs to, when known.
    value : object
        The offending value as it was read.
    """

    message: str
    file: str | None = None
    sheet: str | None = None
    row: int | None = None
    column: str | None = None
    lab: str | None = None
    measurand: str | None = None
    value: object = None

    def __str__(self) -> str:
        # Every part may come from a participant's file (a sheet name, a lab code, a cell): each is clipped
        # and its control characters escaped (roundscore.text), so a message stays short and cannot drive
        # the terminal. The message itself is roundscore's own text, quoting values through the same rules.
        where = []
        if self.file:
            where.append(_shown(self.file, 200))
        if self.sheet:
            where.append(f"sheet {_shown(self.sheet)!r}")
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column:
            where.append(f"column {_shown(self.column)!r}")
        who = []
        if self.lab:
            who.append(f"lab {_shown(self.lab)}")
        if self.measurand:
            who.append(f"measurand {_shown(self.measurand)}")
        text = ", ".join(where)
        if who:
            text += (" (" + ", ".join(who) + ")") if text else ", ".join(who)
        if self.value is not None:
            text += f": value {quote(self.value)}"
        message = terminal_text(clip(self.message, MAX_MESSAGE_CHARS))  # one line: a newline in it is quoted text
        return f"{text}: {message}" if text else message


@dataclass(eq=False)
class InputError(ValueError, RoundscoreError):
    """One or more problems in the user's input files.

    ``problems`` lists every problem found, not just the first; ``str()``
    gives a readable multi-line message.
    """

    problems: list[Problem] = field(default_factory=list)
    summary: str = "the input has problems"

    def __post_init__(self) -> None:
        ValueError.__init__(self, str(self))

    @classmethod
    def single(cls, message: str, **where: object) -> "InputError":
        """An error with a single problem; ``where`` are :class:`Problem` fields."""
        return cls([Problem(message=message, **where)], summary=message)

    def __str__(self) -> str:
        if len(self.problems) == 1:
            return str(self.problems[0])
        shown = self.problems[:50]
        lines = [f"{self.summary} ({len(self.problems)} problems):"]
        lines += [f"  - {p}" for p in shown]
        if len(self.problems) > len(shown):
            lines.append(f"  ... and {len(self.problems) - len(shown)} more")
        return "\n".join(lines)


class RoundFileError(InputError):
    """A mistake in ``round.toml``: names the file, the key, what was found and what is allowed."""

    @classmethod
    def key(cls, file: str, key: str, found: object, allowed: str) -> "RoundFileError":
        msg = f"{file}: key {quote(key, 80)}: found {quote(found)}; allowed: {allowed}"
        return cls([Problem(message=msg)], summary=msg)


class StatisticsError(ValueError, RoundscoreError):
    """A statistic cannot be computed from the data given (too few values, zero spread...)."""


class ArchiveError(RoundscoreError):
    """The history archive cannot take or give what was asked."""
