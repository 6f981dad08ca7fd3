"""The package's exceptions.

Every error a user can cause derives from :class:`RoundscoreError`; the
command line turns these into a message and exit code 2, never a traceback.
Input errors carry *where* the problem is (file, sheet, row, column, lab) and
*what* was found, and may bundle several problems so the user sees every one
of them at once instead of fixing files one complaint at a time.
"""

from __future__ import annotations

import datetime as _dt
import re
from dataclasses import dataclass, field
from typing import TypedDict, Unpack

from roundscore.text import clip, quote, terminal_text

#: Longest message text of one problem (a message lists what is allowed; values in it are quoted clipped).
MAX_MESSAGE_CHARS = 2000


def _shown(text: object, limit: int = 80) -> str:
    return terminal_text(clip(str(text), limit))

__all__ = [
    "RoundscoreError",
    "Problem",
    "Location",
    "Place",
    "Where",
    "place",
    "is_text_file",
    "cell_ref",
    "column_letters",
    "sheet_cell",
    "shown_value",
    "InputError",
    "RoundFileError",
    "StatisticsError",
    "ArchiveError",
    "ArchiveConflict",
    "WorkerError",
]


class RoundscoreError(Exception):
    """Base class of every error roundscore raises on purpose."""


#: Files whose rows are lines of text (messages say "line 12", not "row 12"); as io.xlsx.TEXT_SUFFIXES.
_TEXT_SUFFIXES = (".csv", ".txt", ".tsv")
_SIMPLE_SHEET = re.compile(r"[A-Za-z_][A-Za-z0-9_.]*")
#: Longest value shown in a message (characters, as shown); longer is cut with "...".
MAX_SHOWN_VALUE = 60


def column_letters(index: int) -> str:
    """The spreadsheet letters of a 0-based column index: 0 → A, 25 → Z, 26 → AA.

    >>> column_letters(0), column_letters(3), column_letters(27)
    ('A', 'D', 'AB')
    """
    letters = ""
    n = index + 1
    while n:
        n, r = divmod(n - 1, 26)
        letters = chr(65 + r) + letters
    return letters


def cell_ref(row: int, index: int) -> str:
    """An A1-style reference from a 1-based row and a 0-based column index (``cell_ref(11, 3)`` → ``D11``)."""
    return f"{column_letters(index)}{row}"


def sheet_cell(sheet: str, cell: str) -> str:
    """``Results!D11`` as a spreadsheet writes it (a sheet name with spaces or dashes in quotes)."""
    if _SIMPLE_SHEET.fullmatch(sheet):
        return f"{sheet}!{cell}"
    quoted = sheet.replace("'", "''")
    return f"'{quoted}'!{cell}"


def shown_value(value: object) -> str:
    """A cell's value as the person typed or saw it: text in quotes, dates as 2027-06-01, 3.0 as 3."""
    if isinstance(value, bool):
        shown = "TRUE" if value else "FALSE"
    elif isinstance(value, _dt.datetime):
        shown = value.date().isoformat() if value.time() == _dt.time() else value.isoformat(sep=" ",
                                                                                             timespec="minutes")
    elif isinstance(value, (_dt.date, _dt.time)):
        shown = value.isoformat()
    elif isinstance(value, float) and value.is_integer() and abs(value) < 1e16:
        shown = str(int(value))
    elif isinstance(value, int) and value.bit_length() > 3000:  # str() refuses ints past 4300 digits
        shown = f"a whole number of about {int(value.bit_length() * 0.30103) + 1} digits"
    elif isinstance(value, (int, float, _dt.timedelta)):
        shown = str(value)
    else:  # text in quotes, control characters and invisible spaces escaped
        shown = repr(value)
    if len(shown) > MAX_SHOWN_VALUE:
        if isinstance(value, str):  # say how long it was: a 10 MB cell is not the same mistake as a typo
            shown = repr(value[:MAX_SHOWN_VALUE - 3])[:-1] + f"…' ({len(value)} characters)"
        else:
            shown = shown[:MAX_SHOWN_VALUE - 3] + "..."
    return terminal_text(shown)


def is_text_file(file: str | None, sheet: str | None) -> bool:
    """True when a row of ``file`` is a line of text (a CSV or text file, not a workbook's sheet)."""
    return sheet is None and file is not None and str(file).lower().endswith(_TEXT_SUFFIXES)


def place(file: str | None, sheet: str | None = None, row: int | None = None, cell: str | None = None) -> str:
    """Where something is, as the person looks for it: ``f.xlsx, Results!D11``, ``f.csv, line 12``."""
    parts = [str(file)] if file else []
    if sheet and cell:
        parts.append(sheet_cell(sheet, cell))
    else:
        if sheet:
            parts.append(f"sheet {sheet!r}")
        if row is not None:
            parts.append(f"{'line' if is_text_file(file, sheet) else 'row'} {row}")
    return ", ".join(parts)


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
        1-based row as the user sees it in a spreadsheet, or the line of a
        text file (the header is row or line 1).
    column : str or None
        The column's name as in the file's header (or the key it stands for).
    cell : str or None
        The A1-style reference of the cell in ``sheet`` (``D11``); messages then
        name it as ``Results!D11``.
    lab, measurand : str or None
        The lab code and measurand the row belongs to, when known.
    value : object
        The offending value as it was read; shown as typed (:func:`shown_value`).
    hint : str or None
        What to do about it; shown once under all the problems that share it.
    """

    message: str
    file: str | None = None
    sheet: str | None = None
    row: int | None = None
    column: str | None = None
    lab: str | None = None
    measurand: str | None = None
    value: object = None
    cell: str | None = None
    hint: str | None = None

    def __str__(self) -> str:
        # Every part may come from a participant's file (a sheet name, a lab code, a cell): each is clipped
        # and its control characters escaped (roundscore.text), so a message stays short and cannot drive
        # the terminal. The message itself is roundscore's own text, quoting values through the same rules.
        here = place(_shown(self.file, 200) if self.file else None, _shown(self.sheet) if self.sheet else None,
                     self.row, self.cell)
        where = [here] if here else []
        who = []
        if self.column:
            if self.cell and self.sheet:
                who.append(f"column {_shown(self.column)!r}")
            else:
                where.append(f"column {_shown(self.column)!r}")
        if self.lab:
            who.append(f"lab {_shown(self.lab)}")
        if self.measurand:
            who.append(f"measurand {_shown(self.measurand)}")
        text = ", ".join(where)
        if who:
            text += (" (" + ", ".join(who) + ")") if text else ", ".join(who)
        if self.value is not None:
            text += f": value {shown_value(self.value)}"
        message = terminal_text(clip(self.message, MAX_MESSAGE_CHARS))  # one line: a newline in it is quoted text
        return f"{text}: {message}" if text else message

    def _key(self) -> tuple:
        return (self.message, self.file, self.sheet, self.row, self.column, self.cell, self.lab, self.measurand,
                shown_value(self.value) if self.value is not None else None)


class Location(TypedDict, total=False):
    """Where in a file a :class:`Problem` is: its file, sheet, row and cell fields."""

    file: str | None
    sheet: str | None
    row: int | None
    cell: str | None


class Place(Location, total=False):
    """A :class:`Location` and the column: where a lab code was read (:mod:`roundscore.model.labcodes`)."""

    column: str | None


class Where(Place, total=False):
    """A :class:`Problem`'s fields other than the message, as keyword arguments: ``Problem(message=m, **where)``."""

    lab: str | None
    measurand: str | None
    value: object
    hint: str | None


@dataclass(eq=False)
class InputError(ValueError, RoundscoreError):
    """One or more problems in the user's input files.

    ``problems`` lists every problem found, not just the first, each once
    (a problem found twice at the same place, such as the uncertainty of a
    form row read once per replicate, is kept once); ``str()`` gives a
    readable multi-line message with what to do at the end.
    """

    problems: list[Problem] = field(default_factory=list)
    summary: str = "the input has problems"

    def __post_init__(self) -> None:
        seen: set[tuple] = set()
        unique = []
        for p in self.problems:
            key = p._key()
            if key not in seen:
                seen.add(key)
                unique.append(p)
        self.problems = unique
        ValueError.__init__(self, str(self))

    @classmethod
    def single(cls, message: str, **where: Unpack[Where]) -> InputError:
        """An error with a single problem; ``where`` are :class:`Problem` fields."""
        return cls([Problem(message=message, **where)], summary=message)

    def hints(self) -> list[str]:
        """What to do, each piece of advice once, in the order of the problems."""
        return list(dict.fromkeys(p.hint for p in self.problems if p.hint))

    def __str__(self) -> str:
        hints = self.hints()
        if len(self.problems) == 1:
            lines = [str(self.problems[0])]
        else:
            shown = self.problems[:50]
            lines = [f"{self.summary} ({len(self.problems)} problems):"]
            lines += [f"  - {p}" for p in shown]
            if len(self.problems) > len(shown):
                lines.append(f"  ... and {len(self.problems) - len(shown)} more")
        if len(hints) == 1:
            lines.append(f"What to do: {hints[0]}.")
        elif hints:
            lines.append("What to do:")
            lines += [f"  - {h}." for h in hints]
        return "\n".join(lines)


class RoundFileError(InputError):
    """A mistake in ``round.toml``: names the file, the key, what was found and what is allowed."""

    @classmethod
    def key(cls, file: str, key: str, found: object, allowed: str) -> RoundFileError:
        msg = f"{file}: key {quote(key, 80)}: found {shown_value(found)}; allowed: {allowed}"
        return cls([Problem(message=msg)], summary=msg)


class StatisticsError(ValueError, RoundscoreError):
    """A statistic cannot be computed from the data given (too few values, zero spread...)."""


class WorkerError(RoundscoreError):
    """A worker process ended without giving its results (killed, or out of memory); nothing was kept of it."""


class ArchiveError(RoundscoreError):
    """The history archive cannot take or give what was asked."""


class ArchiveConflict(ArchiveError):
    """The archive already holds this round (or this lab's rows) with different content.

    The only archive error that replacing (``--replace``, ``--replace-archive``) resolves.
    """
