"""Result records as JSON-ready values: the one conversion behind every ``to_dict()`` of a result.

:func:`to_plain` turns numpy arrays and tuples into lists, numpy scalars into Python numbers, a record with
its own ``to_dict()`` into that dict, and a non-finite float into None (JSON has no NaN or infinity);
:class:`AsDict` gives a frozen result dataclass its ``to_dict()`` through it. (The archive keeps its score
rows with a scalar rule of its own, :func:`roundscore.history.sheets.plain`: there an infinite score stays a
number and a date becomes its ISO text.)
"""

from __future__ import annotations

import math
from dataclasses import fields
from typing import Any

import numpy as np
import pandas as pd

__all__ = ["to_plain", "plain_fields", "AsDict"]


def to_plain(value: object) -> Any:
    """``value`` as a JSON-ready value.

    Examples
    --------
    >>> to_plain((np.float64(1.5), np.array([1, 2]), float("nan"), np.bool_(True)))
    [1.5, [1, 2], None, True]
    """
    if isinstance(value, np.ndarray):
        return [to_plain(v) for v in value.tolist()]
    if isinstance(value, (list, tuple)):
        return [to_plain(v) for v in value]
    if hasattr(value, "to_dict") and not isinstance(value, (pd.DataFrame, pd.Series)):
        return value.to_dict()
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def plain_fields(record: Any) -> dict[str, Any]:
    """The fields of a dataclass ``record`` by name, each through :func:`to_plain`."""
    return {f.name: to_plain(getattr(record, f.name)) for f in fields(record)}


class AsDict:
    """Mixin of the result dataclasses: ``to_dict()`` gives their fields as JSON-ready values."""

    __slots__ = ()

    def to_dict(self) -> dict[str, Any]:
        """The fields as JSON-ready values (arrays as lists, non-finite numbers as None)."""
        return plain_fields(self)
