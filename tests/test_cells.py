"""The cell parser: numbers as labs type them, censored results, and clear refusals.

Number writing conventions (decimal comma, space / no-break space / thin
space / apostrophe as thousands separators, U+2212 minus) are those of
ISO 80000-1 §7.3.1 and common locale practice; the censored spellings
(``<LOQ``, ``n.d.``, ``ND``) are common practice in laboratory reports.
"""

from __future__ import annotations

import datetime as dt
from decimal import Decimal

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from roundscore.intake.cells import MAX_CELL_TEXT, AmbiguousNumber, Cell, CellError, parse_cell
from roundscore.errors import RoundscoreError


@pytest.mark.parametrize("raw, value, text", [
    ("8.2", 8.2, "8.2"),
    ("8,2", 8.2, "8.2"),
    (" 8.20 ", 8.2, "8.20"),
    ("1 234.5", 1234.5, "1234.5"),
    ("1\u00a0234,5", 1234.5, "1234.5"),       # no-break space
    ("1\u202f234,5", 1234.5, "1234.5"),       # narrow no-break space
    ("1\u2009234", 1234.0, "1234"),           # thin space
    ("1'234.5", 1234.5, "1234.5"),            # Swiss apostrophe
    ("1,234,567", 1234567.0, "1234567"),
    ("1.234.567", 1234567.0, "1234567"),
    ("1.2e-3", 0.0012, "0.0012"),
    ("1,2E-3", 0.0012, "0.0012"),
    ("\u22120.4", -0.4, "-0.4"),              # Unicode minus
    ("+5", 5.0, "5"),
    (".5", 0.5, "0.5"),
    (3, 3.0, "3"),
    (0.1, 0.1, "0.1"),
    (np.float32(0.5), 0.5, "0.5"),
    (np.int64(7), 7.0, "7"),
])
def test_values(raw, value, text):
    cell = parse_cell(raw)
    assert cell.kind == "value"
    assert cell.value == pytest.approx(value, rel=1e-12)
    assert cell.text == text


@pytest.mark.parametrize("raw, relation, limit", [
    ("<0.5", "<", 0.5),
    ("< 0,5", "<", 0.5),
    ("≤0.5", "<", 0.5),
    ("<=0.5", "<", 0.5),
    (">200", ">", 200.0),
    ("<LOQ", "<", None),
    ("< LOD", "<", None),
    ("n.d.", "<", None),
    ("ND", "<", None),
    ("nd", "<", None),
    ("N.D.", "<", None),
])
def test_censored(raw, relation, limit):
    cell = parse_cell(raw)
    assert cell.kind == "censored" and cell.relation == relation and cell.limit == limit
    assert cell.value is None


@pytest.mark.parametrize("raw", [None, "", "   ", "\u00a0"])
def test_blank(raw):
    assert parse_cell(raw) == Cell(kind="blank")


@pytest.mark.parametrize("raw, message", [
    ("inf", "not a finite number"),
    ("-inf", "not a finite number"),
    ("nan", "not a finite number"),
    ("NaN", "not a finite number"),
    ("1e999", "not a finite number"),
    ("#DIV/0!", "not a finite number"),
    (float("nan"), "not a finite number"),
    (float("inf"), "not a finite number"),
    ("abc", "not a number"),
    ("1,23,4", "not a number"),
    ("1..2", "not a number"),
    ("\u0661\u0662", "not a number"),        # Arabic-Indic digits: refused, not guessed
    ("x" * (MAX_CELL_TEXT + 1), "characters is not a result"),
    ("1\x002", "control characters"),
    ("<abc1", "needs a number"),
    (True, "TRUE/FALSE"),
    (dt.datetime(2026, 1, 5), "a date or time was typed into a result cell"),
    (dt.date(2026, 1, 5), "a date or time"),
    (dt.time(8, 30), "a date or time"),
    (dt.timedelta(hours=1), "a date or time"),
    (10 ** 400, "too large"),
    (b"8.2", "not a result"),
    ([1], "not a result"),
])
def test_refused(raw, message):
    with pytest.raises(CellError, match=message.replace("(", r"\(")):
        parse_cell(raw)


def test_cell_error_is_a_package_error():
    assert issubclass(CellError, RoundscoreError) and issubclass(CellError, ValueError)


def test_very_long_text_is_refused_by_its_length():
    # Refused by the length rule before any number parsing is tried (so its cost does not grow with it).
    with pytest.raises(CellError, match="10000000 characters"):
        parse_cell("9" * 10_000_000)


# --------------------------------------------------------------------------- decimal marks
# A number whose reading depends on the decimal mark is refused unless the round or the form declares it.
# The conventions (decimal point or comma; a comma, point, space, no-break or thin space or apostrophe
# grouping thousands in threes) are those of ISO 80000-1 §7.3.1 and common locale practice.

@pytest.mark.parametrize("raw", [
    "1,234", "1.234", "12,345", "123.456", "-1,234", "<1,234",   # one mark, then exactly three digits
    "1.234,5", "1,234.5", "1.234.567,8", "1,234,567.8",          # both marks
])
def test_ambiguous_numbers_are_refused_with_both_readings(raw):
    with pytest.raises(AmbiguousNumber) as info:
        parse_cell(raw)
    assert info.value.hint and "[round] decimal" in info.value.hint  # says what to do
    assert "1234" in str(info.value)  # names the reading (the thousands one, or the only one)


@pytest.mark.parametrize("raw, value", [
    ("4,75", 4.75), ("0.42", 0.42), ("1.5E-3", 0.0015), ("1,2E-3", 0.0012),
    ("0,838", 0.838), ("-0.838", -0.838), (".838", 0.838),    # a thousands group never starts with 0
    ("1234,567", 1234.567), ("1234.567", 1234.567),          # four digits before: no thousands reading
    ("1,234E3", 1234.0),                                      # an exponent's mantissa is not grouped
    ("1 234,5", 1234.5), ("1\u00a0234,5", 1234.5), ("1\u2009234.5", 1234.5), ("1'234.5", 1234.5),
    ("1 234,567", 1234.567),  # spaces group the thousands, so the comma is the decimal mark
    ("1,234,567", 1234567.0), ("1.234.567", 1234567.0),       # a repeated mark can only group thousands
    ("'-0.4", -0.4),                                          # a spreadsheet's text prefix
])
def test_numbers_with_one_reading_pass_untouched(raw, value):
    assert parse_cell(raw).value == pytest.approx(value, rel=1e-15)


def test_censored_limit_with_a_decimal_comma():
    cell = parse_cell("<0,05")
    assert cell.kind == "censored" and cell.limit == 0.05


@pytest.mark.parametrize("raw", ["0,4 2", "1 23", "12 34,5", "0 123", "1,5 0"])
def test_inner_spaces_are_refused(raw):
    with pytest.raises(CellError, match="a space inside the digits"):
        parse_cell(raw)


@pytest.mark.parametrize("raw, decimal, value", [
    ("1,234", "point", 1234.0), ("1,234", "comma", 1.234),
    ("1.234", "point", 1.234), ("1.234", "comma", 1234.0),
    ("1,234.5", "point", 1234.5), ("1.234,5", "comma", 1234.5),
    ("1.234.567,8", "comma", 1234567.8), ("1,234,567.8", "point", 1234567.8),
    ("4,75", "point", 4.75), ("0.42", "comma", 0.42),   # one reading only: read so whatever is declared
    ("<1,234", "comma", None),
])
def test_a_declared_decimal_mark_decides(raw, decimal, value):
    cell = parse_cell(raw, decimal=decimal)
    if value is None:
        assert cell.kind == "censored" and cell.limit == 1.234
    else:
        assert cell.value == pytest.approx(value, rel=1e-15)


@pytest.mark.parametrize("raw, decimal", [("1.234,5", "point"), ("1,234.5", "comma"), ("1,234,567.8", "comma")])
def test_a_number_against_the_declared_mark_is_refused(raw, decimal):
    with pytest.raises(CellError, match="declared as a") as info:
        parse_cell(raw, decimal=decimal)
    assert not isinstance(info.value, AmbiguousNumber)


def test_stored_numbers_are_never_ambiguous():
    for decimal in (None, "comma", "point"):
        assert parse_cell(1.234, decimal=decimal).value == 1.234
        assert parse_cell(1234, decimal=decimal).value == 1234.0


def test_an_unknown_decimal_mark_is_a_programming_error():
    with pytest.raises(ValueError, match="decimal must be"):
        parse_cell("1,5", decimal="dot")


# The way numbers are written in the common conventions: thousands grouped by the mark that is not the
# decimal one, or by a space, no-break space, thin space or apostrophe (ISO 80000-1 §7.3.1; common practice).
_SEPARATORS = {",": [None, ".", " ", "\u00a0", "\u202f", "'"], ".": [None, ",", " ", "\u00a0", "\u2009", "'"]}


@st.composite
def _written(draw):
    """(text, the decimal mark's name, the exact value) of a number as a person writes it."""
    mark = draw(st.sampled_from([",", "."]))
    group = draw(st.sampled_from(_SEPARATORS[mark]))
    whole = draw(st.integers(min_value=0, max_value=10 ** 10))
    frac = draw(st.text(alphabet="0123456789", min_size=0, max_size=6))
    sign = draw(st.sampled_from(["", "-"]))
    digits = f"{whole:,}".replace(",", group) if group else str(whole)
    text = sign + digits + (mark + frac if frac else "")
    return text, {",": "comma", ".": "point"}[mark], Decimal(f"{sign}{whole}.{frac or '0'}")


@settings(max_examples=400, deadline=None)
@given(_written())
def test_never_a_silent_misreading(case):
    text, mark, exact = case
    # Declared: read exactly as written.
    assert Decimal(parse_cell(text, decimal=mark).text) == exact
    # Not declared: read exactly as written, or refused as ambiguous; never another number.
    try:
        cell = parse_cell(text)
    except AmbiguousNumber:
        return
    assert Decimal(cell.text) == exact


@settings(max_examples=200, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False), st.sampled_from([None, "comma", "point"]))
def test_a_stored_float_is_read_as_stored(v, decimal):
    assert parse_cell(v, decimal=decimal).value == v
