"""The cell parser: numbers as labs type them, censored results, and clear refusals.

Number writing conventions (decimal comma, space / no-break space / thin
space / apostrophe as thousands separators, U+2212 minus) are those of
ISO 80000-1 §7.3.1 and common locale practice; the censored spellings
(``<LOQ``, ``n.d.``, ``ND``) are common practice in laboratory reports.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from roundscore.cells import MAX_CELL_TEXT, Cell, CellError, parse_cell
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
