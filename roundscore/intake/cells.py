"""Reading one result cell: numbers as labs type them, censored results, blanks.

Labs type results in many ways. What is accepted (and what each becomes):

========================  ==========================================
``8.2``, ``8,2``          a value (decimal point or decimal comma)
``1 234.5``, ``1'234,5``  a value (thousands in groups of three: space,
                          no-break space, thin space, apostrophe, and a
                          comma or point as described below)
``1.2e-3``, ``1,2E-3``    a value (exponent notation)
``−0.4`` (U+2212)         a value (Unicode minus)
``<0.5``, ``< 0,5``       censored below 0.5 ("less than")
``>200``                  censored above 200
``<LOQ``, ``n.d.``, ``ND``  censored without a limit
blank                     not reported
========================  ==========================================

**Numbers that read two ways.** A comma or point can be the decimal mark
or a thousands separator. Text is refused with :class:`AmbiguousNumber`
when both readings are numbers: one mark followed by exactly three digits
after a first group of one to three digits not starting with 0 (``1,234``,
``1.234``, ``12,345``), or both marks (``1.234,5``, ``1,234.5``). Text with
one reading is read so: ``4,75``, ``0,838`` (no thousands group starts
with 0), ``1234,567`` (four digits before the mark), ``1 234,5`` (spaces
group the thousands, so the comma is the decimal mark), ``1,234,567`` (a
repeated mark only groups thousands), ``1,234E3`` (a mantissa is not
grouped). With a declared decimal mark (``decimal="comma"`` or ``"point"``,
from ``[round] decimal`` or a form's own setting) the two-way text is read
by it and the other mark groups thousands; text that contradicts it
(``1.234,5`` with a point) is refused. Numbers stored as numbers are never
ambiguous. Spaces inside the digits other than thousands groups (``0,4 2``)
are refused: two results in one cell, or a slip.

Anything else (other text, ``inf``, ``nan``, a date typed into the cell,
TRUE/FALSE, control characters, digits of scripts other than ASCII, text
longer than :data:`MAX_CELL_TEXT`) raises :class:`CellError` (and nothing
else does), which the table builder turns into a
:class:`~roundscore.errors.Problem` with the file, the cell and the value;
the error's ``hint`` says what to do.
"""

from __future__ import annotations

import datetime as _dt
import math
import numbers
import re
from dataclasses import dataclass
from decimal import Decimal, InvalidOperation
from typing import Literal, TypeGuard

from roundscore.choices import is_choice, options
from roundscore.errors import RoundscoreError
from roundscore.model.round import DecimalMark

__all__ = ["Cell", "CellError", "AmbiguousNumber", "parse_cell", "MAX_CELL_TEXT", "DECIMAL_MARKS", "DecimalMark",
           "is_decimal_mark"]

#: Longest text accepted in a result cell; longer text is refused unread.
MAX_CELL_TEXT = 64

CellKind = Literal["value", "censored", "blank"]
#: The decimal marks a round file or a form can declare (``[round] decimal``; the Literal is the round's).
DECIMAL_MARKS: tuple[str, ...] = options(DecimalMark)


def is_decimal_mark(value: object) -> TypeGuard[DecimalMark]:
    """Whether ``value`` is one of :data:`DECIMAL_MARKS` ("comma", "point")."""
    return is_choice(value, DecimalMark)


class CellError(ValueError, RoundscoreError):
    """A cell that is not a result; the message says what was found.

    The only exception :func:`parse_cell` raises, whatever it is given.
    ``hint`` says what to do, in words, when there is more to say than
    "type a result" (the callers show it once for all cells that share it).
    The message does not repeat the cell's value: the caller shows it with
    the cell's place.
    """

    def __init__(self, message: str, *, hint: str | None = None) -> None:
        super().__init__(message)
        self.hint = hint


class AmbiguousNumber(CellError):
    """Text whose number depends on which decimal mark was meant (``1,234``, ``1.234,5``)."""


@dataclass(frozen=True, slots=True, kw_only=True)
class Cell:
    """One parsed result cell.

    Attributes
    ----------
    kind : {"value", "censored", "blank"}
    value : float or None
        The number for a value cell.
    text : str or None
        The number as a plain decimal string (``"8.20"``), kept so that
        statistics can centre in exact decimal arithmetic.
    relation : {"<", ">"} or None
        For a censored cell: below or above ``limit``.
    limit : float or None
        The limit of a censored cell; None when none was given (``n.d.``).
    """

    kind: CellKind
    value: float | None = None
    text: str | None = None
    relation: str | None = None
    limit: float | None = None


BLANK = Cell(kind="blank")

# Characters that separate groups of three digits: space, no-break space, narrow no-break space, thin
# space, figure space, and the apostrophe used as a thousands separator in Switzerland.
_SPACE_CHARS = " \u00a0\u202f\u2009\u2007"
_GROUP_CHARS = _SPACE_CHARS + "'\u2019"
_G = "[" + _GROUP_CHARS + "]"
_MINUS = str.maketrans({"\u2212": "-", "\u2012": "-", "\u2013": "-", "\ufe63": "-", "\uff0d": "-"})
_NOT_DETECTED = {
    "nd", "n.d.", "n.d", "n/d", "notdetected", "<loq", "<lod", "<lor", "<dl", "loq", "<bg", "bdl",
    "<nwg", "<bestimmungsgrenze", "<ql",
}
# ASCII digits only (re.ASCII): digits of other scripts are refused rather than guessed at.
_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$", re.ASCII)
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f]")
_MANTISSA_CHARS = frozenset("0123456789,." + _GROUP_CHARS)
_DIGITS = re.compile(r"\d*", re.ASCII)
_EXPONENT = re.compile(r"[+-]?\d+", re.ASCII)
# A first group of one to three digits that does not start with 0: only such a number can be written
# with thousands separators (nobody writes 0,838 for 838).
_LEAD = re.compile(r"[1-9]\d{0,2}", re.ASCII)
_GROUPED = {
    ",": re.compile(r"[1-9]\d{0,2}(?:,\d{3})+", re.ASCII),
    ".": re.compile(r"[1-9]\d{0,2}(?:\.\d{3})+", re.ASCII),
    " ": re.compile(r"[1-9]\d{0,2}(?:" + _G + r"\d{3})+", re.ASCII),
}
_MARK_NAME = {",": "comma", ".": "point"}
_MARK_OF = {"comma": ",", "point": "."}

#: What to do about a number whose reading depends on the decimal mark.
HINT_DECLARE = ('say which decimal mark text cells use: [round] decimal = "comma" or "point" in round.toml (a '
                "form can also say it in its 'Decimal mark' cell); or type the number without a thousands "
                "separator, as a number rather than as text")
#: What to do about a number that breaks the declared decimal mark.
HINT_DECLARED = ("correct the cell, or check the decimal mark declared for it ([round] decimal in round.toml, "
                 "or the form's 'Decimal mark' cell)")
_HINT_SPACE = "remove the space, or check that the cell holds a single result"
_INNER_SPACE = ("a space inside the digits (a space may only separate groups of three digits before the "
                "decimal mark, as in 1 234,5)")


def _spaced(part: str) -> str | None:
    """The digits of an integer part with optional space/apostrophe groups; None when not digits at all."""
    if _DIGITS.fullmatch(part):
        return part
    if not any(ch in _GROUP_CHARS for ch in part) or not all(ch.isdigit() or ch in _GROUP_CHARS for ch in part):
        return None
    if _GROUPED[" "].fullmatch(part):
        return "".join(ch for ch in part if ch not in _GROUP_CHARS)
    raise CellError(_INNER_SPACE, hint=_HINT_SPACE)


def _fraction(frac: str) -> str:
    if _DIGITS.fullmatch(frac):
        return frac
    if any(ch in _GROUP_CHARS for ch in frac):
        raise CellError(_INNER_SPACE, hint=_HINT_SPACE)
    raise _NotANumber


class _NotANumber(Exception):
    """Internal: the text is no number at all (the caller words the refusal)."""


def _mixed(m: str, mark: str) -> tuple[str, str]:
    """A mantissa with both marks read with ``mark`` as the decimal one: thousands groups of the other before it.

    Raises _NotANumber when that reading does not hold (1.234,5 with a decimal point).
    """
    other = "." if mark == "," else ","
    int_part, _, frac = m.partition(mark)
    if m.count(mark) != 1 or not _GROUPED[other].fullmatch(int_part) or not _DIGITS.fullmatch(frac):
        raise _NotANumber
    return int_part.replace(other, ""), frac


def _digits(m: str, exponent: bool, declared: str | None) -> tuple[str, str | None]:
    """Integer digits and fraction of a mantissa.

    A number with one reading is read so, whatever is declared (``4,75`` is
    4.75 even in a round that declares a decimal point). A number whose
    reading depends on the decimal mark (one mark followed by exactly three
    digits, or both marks) is read by the ``declared`` mark ("," or "."),
    and refused with :class:`AmbiguousNumber` when none is declared, or
    with :class:`CellError` when it contradicts the declared one.
    """
    commas, points = m.count(","), m.count(".")
    if commas and points:
        readings = []
        for mark in (",", "."):
            try:
                readings.append((mark, _mixed(m, mark)))
            except _NotANumber:
                continue
        if not readings:  # no order of the two makes a number (1,2.3,4)
            raise _NotANumber
        mark, (int_part, frac) = readings[0]  # one at most: the decimal mark follows the thousands groups
        name, other = _MARK_NAME[mark], _MARK_NAME["." if mark == "," else ","]
        if declared is None:
            raise AmbiguousNumber(
                f"a comma and a point in one number: it is {int_part}.{frac} only if the decimal mark is a "
                f"{name} and the {other} separates thousands", hint=HINT_DECLARE)
        if declared != mark:
            raise CellError(
                f"a comma and a point in one number, but with the decimal mark declared as a "
                f"{_MARK_NAME[declared]} the {name} cannot come after the {other}", hint=HINT_DECLARED)
        return int_part, frac
    if not commas and not points:
        digits = _spaced(m)
        if digits is None:
            raise _NotANumber
        return digits, None
    x = "," if commas else "."
    if commas + points > 1:  # the mark repeated: it can only separate thousands
        if _GROUPED[x].fullmatch(m):
            return m.replace(x, ""), None
        if any(ch in _GROUP_CHARS for ch in m):
            raise CellError(_INNER_SPACE, hint=_HINT_SPACE)
        raise _NotANumber
    int_part, _, frac = m.partition(x)
    frac = _fraction(frac)
    digits = _spaced(int_part)
    if digits is None:
        raise _NotANumber
    if len(frac) == 3 and not exponent and digits == int_part and _LEAD.fullmatch(int_part):
        if declared is None:
            raise AmbiguousNumber(
                f"ambiguous: {int_part}{frac} if {x!r} separates thousands, or {int_part}.{frac} if {x!r} is "
                "the decimal mark", hint=HINT_DECLARE)
        if declared != x:
            return int_part + frac, None  # the declared mark is the other one: this one groups thousands
    return digits, frac


def _normalise_number(text: str, decimal: str | None = None) -> str | None:
    """A plain decimal string for ``text``; None when it is no number; CellError when its reading is unsafe.

    ``decimal`` is the declared decimal mark ("comma" or "point") or None.
    """
    s = text.translate(_MINUS)
    if s and s[0] in "'\u2019":  # a spreadsheet's text prefix
        s = s[1:]
    sign = ""
    if s and s[0] in "+-":
        sign, s = s[0], s[1:].lstrip(_SPACE_CHARS)
    exponent = None
    for e in "eE":
        if e in s:
            s, _, exponent = s.partition(e)
            s, exponent = s.rstrip(_SPACE_CHARS), exponent.strip(_SPACE_CHARS)
            if not _EXPONENT.fullmatch(exponent):
                return None
            break
    if not s or not set(s) <= _MANTISSA_CHARS or not any(ch.isdigit() for ch in s):
        return None
    try:
        int_part, frac = _digits(s, exponent is not None, _MARK_OF[decimal] if decimal is not None else None)
    except _NotANumber:
        return None
    out = sign + int_part + ("." + frac if frac is not None else "") + ("e" + exponent if exponent else "")
    return out if _NUMBER.match(out) else None


#: What to do about a cell that is no result at all.
HINT_NUMBER = "type a number (4.75 or 4,75), a censored result such as <0.5, or leave the cell blank"
_HINT_DATE = ("a spreadsheet may have turned what was typed into a date: format the cell as a number or as "
              "text and type the result again")


def _finite(text: str) -> float:
    try:
        value = float(text)
    except (ValueError, OverflowError):
        raise CellError("not a number", hint=HINT_NUMBER) from None
    if not math.isfinite(value):
        raise CellError("not a finite number", hint=HINT_NUMBER)
    return value


def _float_text(value: float) -> str:
    # repr gives the shortest string that reads back as the same float, which is
    # what the lab typed whenever the spreadsheet stored it as a number.
    return repr(value)


def parse_cell(raw: object, *, decimal: DecimalMark | None = None) -> Cell:
    """Parse one result cell as read from a CSV file or a workbook.

    Parameters
    ----------
    raw : object
        The cell: None, str, int, float, bool, or a date/time.
    decimal : {"comma", "point"} or None
        The declared decimal mark of text cells (``[round] decimal`` or the
        form's own setting). None: either mark is read, and text whose
        reading depends on which was meant is refused (:class:`AmbiguousNumber`).
        Numbers stored as numbers are never affected.

    Returns
    -------
    Cell

    Raises
    ------
    CellError
        When the cell is neither a number, a censored result nor blank, or
        its number is ambiguous (:class:`AmbiguousNumber`).

    Examples
    --------
    >>> parse_cell("4,75").value
    4.75
    >>> parse_cell("<0.5").kind, parse_cell("<0.5").limit
    ('censored', 0.5)
    >>> parse_cell("1,234", decimal="point").value
    1234.0
    """
    if type(raw) is float and math.isfinite(raw):  # the usual case from a workbook: no further checks needed
        return Cell(kind="value", value=raw, text=repr(raw))
    if raw is None:
        return BLANK
    if isinstance(raw, bool):
        raise CellError("a TRUE/FALSE cell is not a result", hint=HINT_NUMBER)
    if isinstance(raw, (_dt.datetime, _dt.date, _dt.time, _dt.timedelta)):
        raise CellError("a date or time was typed into a result cell", hint=_HINT_DATE)
    if isinstance(raw, numbers.Integral):  # int, numpy integers
        try:
            value = float(raw)
        except OverflowError:
            raise CellError("a number too large to be a result") from None
        return Cell(kind="value", value=value, text=str(int(raw)))
    if isinstance(raw, numbers.Real) and not isinstance(raw, float):  # numpy floats other than float64
        raw = float(raw)
    if isinstance(raw, float):
        if not math.isfinite(raw):
            raise CellError("not a finite number", hint=HINT_NUMBER)
        return Cell(kind="value", value=raw, text=_float_text(raw))
    if not isinstance(raw, str):
        raise CellError("not a result", hint=HINT_NUMBER)
    if decimal is not None and decimal not in DECIMAL_MARKS:
        raise ValueError(f"decimal must be one of {DECIMAL_MARKS} or None, not {decimal!r}")
    if len(raw) > MAX_CELL_TEXT:
        raise CellError(f"text of {len(raw)} characters is not a result (at most {MAX_CELL_TEXT})",
                        hint=HINT_NUMBER)
    text = raw.strip().strip("\u00a0\u202f\u2009")
    if not text:
        return BLANK
    if _CONTROL.search(text):
        raise CellError("control characters in a result cell", hint=HINT_NUMBER)
    if text.lower().replace(" ", "") in _NOT_DETECTED:
        return Cell(kind="censored", relation="<", limit=None)
    if text[0] in "<>≤≥":
        relation = "<" if text[0] in "<≤" else ">"
        rest = text[1:].lstrip("=").strip()
        number = _normalise_number(rest, decimal)
        if number is None:
            if rest.isalpha() or rest.upper() in ("LOQ", "LOD", "LOR", "DL"):
                return Cell(kind="censored", relation=relation, limit=None)
            raise CellError(f"a censored result needs a number after {text[0]!r}",
                            hint=f"type the limit after {text[0]!r}, as in {text[0]}0.5")
        limit = _finite(number)
        return Cell(kind="censored", relation=relation, limit=limit)
    number = _normalise_number(text, decimal)
    if number is None:
        low = text.lower()
        if low in ("inf", "+inf", "-inf", "infinity", "nan", "#num!", "#div/0!", "#value!", "#n/a"):
            raise CellError("not a finite number", hint=HINT_NUMBER)
        raise CellError("not a number", hint=HINT_NUMBER)
    value = _finite(number)
    try:
        exact = str(Decimal(number))
    except InvalidOperation:  # pragma: no cover - the regex admits only decimals
        raise CellError("not a number", hint=HINT_NUMBER) from None
    return Cell(kind="value", value=value, text=exact)
