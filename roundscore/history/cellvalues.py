"""Cell values read back from a lab's score sheet: the scalar rules the score rows and the qualitative rows share.

Kept apart from :mod:`roundscore.history.sheets` (which imports the qualitative rows) so that both readers
use one definition without an import cycle.
"""

from __future__ import annotations

import math

import pandas as pd

__all__ = ["scalar", "unquote", "FORMULA_STARTS"]

#: Leading characters a CSV writer neutralises with a ``'`` (OWASP, "CSV Injection").
FORMULA_STARTS = ("=", "+", "-", "@")


def scalar(value: object) -> object:
    """A Python scalar: numpy scalars unwrapped, NaN, NaT and None as None (other values unchanged).

    >>> import numpy as np
    >>> scalar(np.float64(2.5)), scalar(float("nan")), scalar(pd.NaT), scalar("x")
    (2.5, None, None, 'x')
    """
    if value is None or value is pd.NaT:
        return None
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


def unquote(text: str) -> str:
    """Undo formula-injection neutralising: drop one ``'`` before ``= + - @``.

    >>> unquote("'=1+1"), unquote("'abc"), unquote("'")
    ('=1+1', "'abc", "'")
    """
    if len(text) >= 2 and text[0] == "'" and text[1] in FORMULA_STARTS:
        return text[1:]
    return text
