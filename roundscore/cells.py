"""Reading one result cell: numbers as labs type them, censored results, blanks.

Labs type results in many ways. What is accepted (and what each becomes):

========================  ==========================================
``8.2``, ``8,2``          a value (decimal point or decimal comma)
``1 234.5``, ``1,234.5``  a value (thousands separators: space, no-break
                          space, thin space, comma or point)
``1.2e-3``, ``1,2E-3``    a value (exponent notation)
``−0.4`` (U+2212)         a value (Unicode minus)
``<0.5``, ``< 0,5``       censored below 0.5 ("less than")
``>200``                  censored above 200
``<LOQ``, ``n.d.``, ``ND``  censored without a limit
blank                     not reported
========================  ==========================================

Anything else (other text, ``inf``, ``nan``, a date typed into the cell,
TRUE/FALSE, control characters, digits of scripts other than ASCII, text
longer than :data:`MAX_CELL_TEXT`) raises :class:`CellError` (and nothing
else does), which the table builder turns into a
:class:`~roundscore.errors.Problem` with the file, sheet, row and value.
"""

from __future__ import annotations

import datetime as _dt
import math
import numbers
import re
from dataclasses import dataclass
from decimal import Decimal, InvalidOperation
from typing import Literal

from .errors import RoundscoreError

__all__ = ["Cell", "CellError", "parse_cell", "MAX_CELL_TEXT"]

#: Longest text accepted in a result cell; longer text is refused unread.
MAX_CELL_TEXT = 64

CellKind = Literal["value", "censored", "blank"]


class CellError(ValueError, RoundscoreError):
    """A cell that is not a result; the message says what was found.

    The only exception :func:`parse_cell` raises, whatever it is given.
    """


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

# Characters that are spaces inside numbers: space, no-break space, narrow
# no-break space, thin space, figure space, and the apostrophe used as a
# thousands separator in Switzerland.
_SPACES = dict.fromkeys(map(ord, " \u00a0\u202f\u2009\u2007'\u2019"), None)
_MINUS = str.maketrans({"\u2212": "-", "\u2012": "-", "\u2013": "-", "\ufe63": "-", "\uff0d": "-"})
_NOT_DETECTED = {
    "nd", "n.d.", "n.d", "n/d", "notdetected", "<loq", "<lod", "<lor", "<dl", "loq", "<bg", "bdl",
    "<nwg", "<bestimmungsgrenze", "<ql",
}
# ASCII digits only (re.ASCII): digits of other scripts are refused rather than guessed at.
_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$", re.ASCII)
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f]")
_GROUPS_COMMA = re.compile(r"[+-]?\d{1,3}(,\d{3})+", re.ASCII)
_GROUPS_POINT = re.compile(r"[+-]?\d{1,3}(\.\d{3})+", re.ASCII)


def _normalise_number(text: str) -> str | None:
    """Return a plain decimal string for ``text`` or None when it is not a number."""
    s = text.translate(_MINUS).translate(_SPACES)
    if not s:
        return None
    mantissa, sep, exponent = s.partition("e") if "e" in s else s.partition("E")
    has_comma, has_point = "," in mantissa, "." in mantissa
    if has_comma and has_point:
        # The later separator is the decimal one; the other groups thousands.
        if mantissa.rfind(",") > mantissa.rfind("."):
            mantissa = mantissa.replace(".", "").replace(",", ".")
        else:
            mantissa = mantissa.replace(",", "")
    elif has_comma:
        if mantissa.count(",") == 1:
            mantissa = mantissa.replace(",", ".")  # decimal comma
        elif _GROUPS_COMMA.fullmatch(mantissa):
            mantissa = mantissa.replace(",", "")  # 1,234,567
        else:
            return None
    elif mantissa.count(".") > 1:
        if _GROUPS_POINT.fullmatch(mantissa):
            mantissa = mantissa.replace(".", "")  # 1.234.567
        else:
            return None
    s = mantissa + (sep and "e") + exponent
    return s if _NUMBER.match(s) else None


def _finite(text: str, raw: object) -> float:
    try:
        value = float(text)
    except (ValueError, OverflowError):
        raise CellError(f"not a number: {raw!r}") from None
    if not math.isfinite(value):
        raise CellError(f"not a finite number: {raw!r}")
    return value


def _float_text(value: float) -> str:
    # repr gives the shortest string that reads back as the same float, which is
    # what the lab typed whenever the spreadsheet stored it as a number.
    return repr(value)


def parse_cell(raw: object) -> Cell:
    """Parse one result cell as read from a CSV file or a workbook.

    Parameters
    ----------
    raw : object
        The cell: None, str, int, float, bool, or a date/time.

    Returns
    -------
    Cell

    Raises
    ------
    CellError
        When the cell is neither a number, a censored result nor blank.

    Examples
    --------
    >>> parse_cell("4,75").value
    4.75
    >>> parse_cell("<0.5").kind, parse_cell("<0.5").limit
    ('censored', 0.5)
    """
    if type(raw) is float and math.isfinite(raw):  # the usual case from a workbook: no further checks needed
        return Cell(kind="value", value=raw, text=repr(raw))
    if raw is None:
        return BLANK
    if isinstance(raw, bool):
        raise CellError(f"a TRUE/FALSE cell is not a result: {raw!r}")
    if isinstance(raw, (_dt.datetime, _dt.date, _dt.time, _dt.timedelta)):
        raise CellError(f"a date or time was typed into a result cell: {raw!s}")
    if isinstance(raw, numbers.Integral):  # int, numpy integers
        try:
            value = float(raw)
        except OverflowError:
            raise CellError(f"a number too large to be a result: {str(raw)[:20]}...") from None
        return Cell(kind="value", value=value, text=str(int(raw)))
    if isinstance(raw, numbers.Real) and not isinstance(raw, float):  # numpy floats other than float64
        raw = float(raw)
    if isinstance(raw, float):
        if not math.isfinite(raw):
            raise CellError(f"not a finite number: {raw!r}")
        return Cell(kind="value", value=raw, text=_float_text(raw))
    if not isinstance(raw, str):
        raise CellError(f"not a result: {raw!r}")
    if len(raw) > MAX_CELL_TEXT:
        raise CellError(f"text of {len(raw)} characters is not a result (at most {MAX_CELL_TEXT})")
    text = raw.strip().strip("\u00a0\u202f\u2009")
    if not text:
        return BLANK
    if _CONTROL.search(text):
        raise CellError(f"control characters in a result cell: {raw!r}")
    if text.lower().replace(" ", "") in _NOT_DETECTED:
        return Cell(kind="censored", relation="<", limit=None)
    if text[0] in "<>≤≥":
        relation = "<" if text[0] in "<≤" else ">"
        rest = text[1:].lstrip("=").strip()
        number = _normalise_number(rest)
        if number is None:
            if rest.isalpha() or rest.upper() in ("LOQ", "LOD", "LOR", "DL"):
                return Cell(kind="censored", relation=relation, limit=None)
            raise CellError(f"a censored result needs a number after {text[0]!r}: {raw!r}")
        limit = _finite(number, raw)
        return Cell(kind="censored", relation=relation, limit=limit)
    number = _normalise_number(text)
    if number is None:
        low = text.lower()
        if low in ("inf", "+inf", "-inf", "infinity", "nan", "#num!", "#div/0!", "#value!", "#n/a"):
            raise CellError(f"not a finite number: {raw!r}")
        raise CellError(f"not a number: {raw!r}")
    value = _finite(number, raw)
    try:
        exact = str(Decimal(number))
    except InvalidOperation:  # pragma: no cover - the regex admits only decimals
        raise CellError(f"not a number: {raw!r}") from None
    return Cell(kind="value", value=value, text=exact)
