"""The rule for lab codes: what a code may hold, how it is normalised, and which codes clash.

A lab code names a participant in every output: in tables, on charts, in
the archive, and in file names (``labs/K01.xlsx``). It is read from
participants' files, so it is checked where it is read, with the cell
named:

* it is text, or a whole number (``101``, read from a number cell as
  ``101.0``); a date, a truth value or a fraction is refused;
* surrounding spaces are removed and the code is brought to Unicode
  normalisation form NFKC, so a code typed with full-width characters
  (``Ｋ０１``) or as decomposed accents is the same code as its plain form;
* it holds at most :data:`MAX_LAB_CODE` characters, each a letter, mark,
  digit, punctuation character, symbol or the ordinary space; control
  characters (escape sequences, line breaks, tabs), format characters
  (bidirectional overrides, zero-width joiners), private-use and unassigned
  code points are refused, and so is a first character ``=``, ``+``, ``-``
  or ``@`` (a spreadsheet formula's start).

Two different codes whose :func:`lab_key` is the same (they differ only in
letter case, or in their Unicode form before normalisation, such as ``K01``
and ``k01``) would be one file on the case-insensitive file systems of
Windows and macOS, and one lab to most readers: they are refused, naming the
place of each.
"""

from __future__ import annotations

import datetime as _dt
import unicodedata
from collections.abc import Mapping
from typing import Unpack

from roundscore.errors import Problem, Place
from roundscore.text import quote, terminal_text

__all__ = ["MAX_LAB_CODE", "LAB_CODE_RULE", "read_lab_code", "lab_code_problem", "lab_key", "clash_problems",
           "LabCodeReader"]

#: Longest lab code, in characters after normalisation. Scheme codes are usually 3 to 10 characters; 32 leaves
#: room for a scheme prefix and a site while keeping figure labels, sheet titles and file names readable.
MAX_LAB_CODE = 32

#: First characters a lab code may not have: a spreadsheet takes them for a formula, so CSV writers prefix
#: them (roundscore.outputs.csvout.neutralise), and the code would no longer read back as itself.
FORMULA_STARTS = "=+-@"

#: The rule in words, for messages and the README.
LAB_CODE_RULE = (f"a lab code is text or a whole number of at most {MAX_LAB_CODE} characters: letters, digits, "
                 "punctuation, symbols and spaces, not beginning with = + - @ (no control or formatting "
                 "characters)")

_ALLOWED_MAJOR = frozenset("LMNPS")
#: Spaces removed around a code: the space separators, tab and line ends (str.strip would also remove
#: the control characters NEL and FS-US, which are refused instead).
_EDGE = (" \t\r\n\u00a0\u1680\u2000\u2001\u2002\u2003\u2004\u2005\u2006\u2007\u2008\u2009\u200a"
         "\u202f\u205f\u3000")
_LARGEST_WHOLE = 10**15  # a whole-number code beyond this is not a code a lab writes (a float's digits blur)


def _bad_character(code: str) -> str | None:
    for ch in code:
        if ch == " ":
            continue
        cat = unicodedata.category(ch)
        if cat[0] not in _ALLOWED_MAJOR:
            what = {"Cc": "a control character", "Cf": "a formatting character (such as a direction override)",
                    "Co": "a private-use character", "Cn": "an unassigned character",
                    "Cs": "a lone surrogate"}.get(cat, "a space or separator other than the ordinary space")
            return f"{what} {terminal_text(ch)}"
    return None


def read_lab_code(value: object) -> tuple[str | None, str | None]:
    """``(code, None)`` for a valid lab code cell, ``(None, reason)`` otherwise (None, None when blank).

    The code is stripped and NFKC-normalised (see the module docstring).
    """
    if value is None:
        return None, None
    if isinstance(value, bool):
        return None, f"a truth value is not a lab code; {LAB_CODE_RULE}"
    if isinstance(value, (_dt.date, _dt.datetime, _dt.time)):
        return None, f"a date or time is not a lab code (format the cell as text); {LAB_CODE_RULE}"
    if isinstance(value, int):
        text = str(value)
    elif isinstance(value, float):
        if value != value:  # NaN: an empty cell of a pandas reader
            return None, None
        if not value.is_integer() or abs(value) >= _LARGEST_WHOLE:
            return None, (f"a number that is not a whole number is not a lab code (format the cell as text); "
                          f"{LAB_CODE_RULE}")
        text = str(int(value))
    elif isinstance(value, str):
        text = value
    else:
        text = str(value)
    text = text.strip(_EDGE)
    if not text:
        return None, None
    if not (text.isascii() and text.isalnum()):  # the common case needs no normalisation
        text = unicodedata.normalize("NFKC", text).strip(_EDGE)
    reason = lab_code_problem(text)
    return (None, reason) if reason else (text, None)


def lab_code_problem(code: str) -> str | None:
    """Why an already normalised ``code`` breaks the rule (None when it keeps it)."""
    if len(code) > MAX_LAB_CODE:
        return f"the lab code is {len(code)} characters long; {LAB_CODE_RULE}"
    if code.isascii() and code.isalnum():
        return None
    bad = _bad_character(code)
    if bad:
        return f"the lab code holds {bad}; {LAB_CODE_RULE}"
    if code[0] in FORMULA_STARTS:
        return (f"the lab code begins with {code[0]!r}, which a spreadsheet reads as the start of a formula "
                f"(and the CSV files must then alter it); {LAB_CODE_RULE}")
    if unicodedata.normalize("NFKC", code) != code:
        return f"the lab code is not in Unicode form NFKC; {LAB_CODE_RULE}"
    return None


def lab_key(code: str) -> str:
    """The form under which two codes are the same lab to a file system and to a reader.

    Letter case folded and compatibility forms unified (Unicode's
    NFKC_Casefold construction: NFKC(casefold(NFKC(casefold(NFD(code)))))).
    """
    if code.isascii():
        return code.lower()
    nf = unicodedata.normalize
    return nf("NFKC", nf("NFKC", nf("NFD", code).casefold()).casefold())


def _where(place: Place) -> str:
    return str(Problem(message="", **place)).rstrip(": ")


def clash_problems(first_seen: Mapping[str, Place], *,
                   also: Mapping[str, Place] | None = None) -> list[Problem]:
    """Problems for codes that differ but share a :func:`lab_key`.

    ``first_seen`` maps each distinct code to where it was first read
    (:class:`~roundscore.errors.Problem` fields: file, sheet, row, column);
    ``also`` maps codes of another source (the participants file, when
    checking the results) that must not clash with them either. Each clash
    is one problem at the later code's place, naming the other's.
    """
    groups: dict[str, list[tuple[str, Place]]] = {}
    for source in (first_seen, also or {}):
        for code, place in source.items():
            group = groups.setdefault(lab_key(code), [])
            if all(code != c for c, _ in group):
                group.append((code, place))
    problems = []
    for group in groups.values():
        if len(group) < 2:
            continue
        first_code, first_place = group[0]
        for code, place in group[1:]:
            problems.append(Problem(
                message=(f"lab code {quote(code)} and lab code {quote(first_code)} ({_where(first_place)}) differ "
                         "only in letter case or Unicode form: they would be one file on Windows and macOS and "
                         "are easily taken for one lab; use one spelling for one lab, or distinct codes"),
                lab=code, file=place.get("file"), sheet=place.get("sheet"), row=place.get("row"),
                column=place.get("column")))
    return problems


class LabCodeReader:
    """Reads the lab code cells of one source, remembering the first place of each code (for clashes).

    ``read(value, **place)`` returns the code, or None after appending a
    problem at ``place`` to ``problems``; a cell value seen before is not
    checked again (a long table repeats each code on every row).
    """

    def __init__(self, problems: list[Problem]) -> None:
        self.problems = problems
        self.first_seen: dict[str, Place] = {}
        self._cache: dict[tuple[type, object], tuple[str | None, str | None]] = {}

    def read(self, value: object, /, **place: Unpack[Place]) -> str | None:
        try:
            key = (type(value), value)
            got = self._cache.get(key)
            if got is None:
                got = self._cache[key] = read_lab_code(value)
        except TypeError:  # an unhashable cell value: never from a reader, but keep the rule
            got = read_lab_code(value)
        code, reason = got
        if code is None:
            self.problems.append(Problem(message=reason or "the lab code is empty", value=value, **place))
            return None
        if code not in self.first_seen:
            self.first_seen[code] = place
        return code
