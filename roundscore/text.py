"""Participant text made safe to show: control characters escaped for terminals and logs, long values clipped.

Text read from a participant's file (lab codes, names, methods, comments,
units, sheet and file names) can hold anything a cell can: an escape
sequence (``ESC [ 2 J`` clears a terminal, others retitle its window or
forge colours), a newline that forges a line of output, a bidirectional
override that shows a code backwards. :func:`terminal_text` is the one
function every message, warning and summary passes through before it is
printed; :func:`clip` bounds a value quoted in a message.
"""

from __future__ import annotations

import re
import unicodedata

__all__ = ["terminal_text", "json_text", "clip", "quote", "too_long", "MESSAGE_VALUE_CHARS",
           "TEXT_LIMITS", "MAX_LIST_SHOWN", "shown_list", "shown_number"]

#: Characters of a value quoted in a message before it is clipped ("… (N characters)").
MESSAGE_VALUE_CHARS = 60

#: Longest text, in characters, of each kind of text that reaches an output (the README lists them).
#: Longer text is refused where it is read, with the file and key or cell named; nothing is truncated
#: silently. The lab code's own limit is roundscore.model.labcodes.MAX_LAB_CODE.
TEXT_LIMITS: dict[str, int] = {
    "round id": 64,            # also a file name part (blank forms) and an archive key
    "scheme": 64,              # an archive key
    "title": 200,
    "provider": 200,
    "material": 200,
    "measurand": 64,           # the [measurand.NAME] key: column heads, chart titles, figure names
    "label": 100,              # a measurand's longer name, in report and figure titles
    "unit": 32,                # in the round file and in result cells (read by the unit converter)
    "results sheet": 31,       # Excel's own limit for a sheet name
    "exclusion reason": 500,
    "participant name": 200,
    "contact": 200,
    "method": 200,             # as the submission form's own cell validation says
    "comment": 200,
    "item label": 32,          # homogeneity and stability tables: shown under the item-means figure
    "set": 64,                 # a stability table's set names: the figure's axis, the notes
    "investigation text": 2000,  # a lab's investigation record: the cause found, the action taken
}

#: Names listed in a message (known measurands, ...) before "and N more".
MAX_LIST_SHOWN = 10

#: Unicode categories never shown raw: controls (C0, DEL, C1), format characters (bidirectional
#: overrides and isolates, zero-width joiners, the byte-order mark), surrogates, private use,
#: unassigned code points, and the line and paragraph separators.
_UNSAFE_CATEGORIES = frozenset({"Cc", "Cf", "Cs", "Co", "Cn", "Zl", "Zp"})

_ASCII_SAFE = re.compile(r"[\x20-\x7e\n]*")


def _is_unsafe(ch: str) -> bool:
    return unicodedata.category(ch) in _UNSAFE_CATEGORIES


def _escape(ch: str) -> str:
    n = ord(ch)
    if n < 0x100:
        return f"\\x{n:02x}"
    if n < 0x10000:
        return f"\\u{n:04x}"
    return f"\\U{n:08x}"


def terminal_text(text: object, *, newlines: bool = False) -> str:
    """``text`` with every control, format and separator character shown as an escape (``\\x1b``, ``\\u202e``).

    With ``newlines`` True a line feed is kept (a message of several lines
    built by roundscore itself); participant text is escaped with the
    default, so a newline in a lab's comment cannot forge a line. Ordinary
    text, of any script, is unchanged.
    """
    s = str(text)
    if _ASCII_SAFE.fullmatch(s) and (newlines or "\n" not in s):
        return s
    return "".join(_escape(ch) if (_is_unsafe(ch) and not (newlines and ch == "\n")) else ch for ch in s)


def json_text(text: str) -> str:
    """JSON text (from :func:`json.dumps`) with the characters :func:`terminal_text` escapes written as ``\\uXXXX``.

    ``json.dumps`` escapes C0 controls itself but leaves C1 controls and
    direction overrides raw when ``ensure_ascii`` is False; they can occur
    only inside strings, where a ``\\uXXXX`` escape (a surrogate pair beyond
    the BMP) is valid JSON for the same character.
    """
    def esc(ch: str) -> str:
        n = ord(ch)
        if n < 0x10000:
            return f"\\u{n:04x}"
        n -= 0x10000
        return f"\\u{0xD800 + (n >> 10):04x}\\u{0xDC00 + (n & 0x3FF):04x}"

    if text.isascii():
        return text
    return "".join(esc(ch) if ch != "\n" and _is_unsafe(ch) else ch for ch in text)


def clip(text: object, limit: int = MESSAGE_VALUE_CHARS) -> str:
    """``text`` cut to its first ``limit`` characters, saying how long it was: ``"abc… (5000 characters)"``."""
    s = str(text)
    if len(s) <= limit:
        return s
    return f"{s[:limit]}… ({len(s)} characters)"


def quote(value: object, limit: int = MESSAGE_VALUE_CHARS) -> str:
    """A participant's value for a message: clipped, controls escaped, in quotes (``'K01'``)."""
    if isinstance(value, str):
        return "'" + terminal_text(clip(value, limit)) + "'"
    return terminal_text(clip(repr(value), limit))


def too_long(kind: str, text: str) -> str | None:
    """Why ``text`` is too long for its ``kind`` (a key of :data:`TEXT_LIMITS`), or None."""
    limit = TEXT_LIMITS[kind]
    if len(text) <= limit:
        return None
    return f"the {kind} is {len(text)} characters long; at most {limit} are allowed"


def shown_list(names, limit: int = MAX_LIST_SHOWN) -> str:
    """``a, b, c`` for a message, at most ``limit`` names (each clipped) and then "and N more"."""
    names = list(names)
    shown = ", ".join(terminal_text(clip(str(n), 40)) for n in names[:limit])
    return shown + (f" and {len(names) - limit} more" if len(names) > limit else "")


def shown_number(x: float, decimals: int | None, fallback: str = ".4g", more: int = 0) -> str:
    """A number as people read it in a note or a summary line: to ``decimals`` (+ ``more``) places when the
    measurand sets them (``[measurand.NAME] decimals``), else by the format ``fallback``; "n/a" when not finite.

    >>> shown_number(0.03010242632412457, 3), shown_number(0.0301024, None), shown_number(0.0301, 2, more=1)
    ('0.030', '0.0301', '0.030')
    >>> shown_number(float("nan"), 2)
    'n/a'
    """
    if x != x or x in (float("inf"), float("-inf")):
        return "n/a"
    if decimals is None:
        return format(x, fallback)
    return f"{x:.{decimals + more}f}"
