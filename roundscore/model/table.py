"""The tidy table of results every statistic reads: one row per reported replicate.

:class:`ResultTable` holds the participants' results validated and in the
measurands' units; :class:`Record` is one result cell with its place before
validation. The records are made and checked by :mod:`roundscore.intake`
(:func:`roundscore.intake.validate.build_table`), which refuses an import
listing every problem.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from roundscore.errors import Place
from roundscore.model.round import DecimalMark

__all__ = ["ResultTable", "Record", "SampleReceipt", "COLUMNS", "NUMBER_COLUMNS", "table_frame", "columns_of",
           "frame_from_columns"]

#: Columns of :attr:`ResultTable.frame`, in order.
COLUMNS = (
    "lab", "measurand", "replicate", "status", "value", "text", "relation", "limit",
    "unit", "u", "U", "k", "method", "comment", "file", "sheet", "row", "unit_given", "factor",
    "item", "category",
)
#: The numeric columns and their dtypes; the others hold text or None.
NUMBER_COLUMNS = {"replicate": "int64", "value": "float64", "limit": "float64", "u": "float64", "U": "float64",
                  "k": "float64", "row": "int64", "factor": "float64"}


@dataclass(slots=True, kw_only=True)
class Record:
    """One result cell with its place, before validation against the round.

    Not frozen, unlike the results of the package: a large round builds a
    few hundred thousand of these, and a frozen dataclass's ``__init__``
    (one ``object.__setattr__`` per field) is about four times slower. Nothing
    changes a record after it is made.
    """

    lab: object
    measurand: object
    replicate: object
    value: object
    file: str
    sheet: str | None
    row: int
    unit: object = None
    u: object = None
    U: object = None
    k: object = None
    method: object = None
    comment: object = None
    #: The test item of a qualitative result (the optional ``item`` column); ignored for a number.
    item: object = None
    #: The decimal mark declared for this record's text cells ("comma", "point"), or None for the round's.
    decimal: DecimalMark | None = None
    #: Field name → (0-based column index, the column's header as in the file), shared by the rows of a
    #: sheet, so that a problem names the cell (``Results!D11``) and the header the person sees.
    cols: dict | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class SampleReceipt:
    """What a returned form says about the lab's sample: when it arrived, in what condition, when it was analysed.

    Each is "" when the lab left it blank; the dates are ISO dates (YYYY-MM-DD). ``source`` names the form's
    cells (``lab-K01.xlsx, Results!I2:I4``).
    """

    arrived: str = ""
    condition: str = ""
    analysed: str = ""
    source: str = ""

    #: (field, what a person reads) in the order shown.
    LABELS = (("arrived", "Date the sample arrived"), ("condition", "Condition on arrival"),
              ("analysed", "Date of analysis"))

    def lines(self) -> list[tuple[str, str]]:
        """(label, value) of each field filled in."""
        return [(label, getattr(self, name)) for name, label in self.LABELS if getattr(self, name)]

    def text(self) -> str:
        """One line for the audit trail ("" when every field is blank)."""
        return "; ".join(f"{label.lower()}: {value}" for label, value in self.lines())


@dataclass(frozen=True, slots=True, kw_only=True)
class ResultTable:
    """The participants' results, validated and in the measurands' units.

    Attributes
    ----------
    frame : pandas.DataFrame
        Columns :data:`COLUMNS`. ``status`` is "value", "censored" or
        "blank" (not reported); ``value`` is NaN unless status is "value";
        ``text`` keeps the number as typed for exact centring. ``value``,
        ``limit``, ``u`` and ``U`` are in the measurand's ``unit``; a result
        entered in another unit keeps that unit in ``unit_given`` and the
        factor it was multiplied by in ``factor`` (``unit_given`` None and
        ``factor`` 1 when it was entered in the measurand's unit), so the
        evaluation can record every conversion. A result of a nominal or
        ordinal measurand (:mod:`roundscore.model.qualitative`) has status
        "category": its category in ``category``, the word as typed in
        ``text``, its test item in ``item`` ("" when the round has none);
        both are None on the rows of numbers.
    files : tuple of str
        The files read.
    warnings : tuple of str
        Things that did not stop the import.
    readings : tuple of (str, str)
        How text cells were read, for the audit trail: (lab or "", what was
        done), one per round or per file, never per cell.
    lab_places : dict of str to Place
        Where each lab code was first read (:class:`~roundscore.errors.Problem`
        fields file, sheet, row, column), for messages that name it.
    receipts : dict of str to SampleReceipt
        The sample's arrival, condition and analysis date each returned form
        gives (labs whose form has none of them filled in are not listed).
    """

    frame: pd.DataFrame
    files: tuple[str, ...] = ()
    warnings: tuple[str, ...] = field(default=())
    readings: tuple[tuple[str, str], ...] = field(default=())
    lab_places: dict[str, Place] = field(default_factory=dict)
    receipts: dict[str, SampleReceipt] = field(default_factory=dict)

    @property
    def labs(self) -> list[str]:
        return sorted(self.frame["lab"].unique())


def table_frame(rows: list[tuple]) -> pd.DataFrame:
    """The :attr:`ResultTable.frame` of validated rows (from :func:`validate_records`), in table order."""
    return frame_from_columns(columns_of(rows))


def columns_of(rows: list[tuple]) -> dict[str, np.ndarray]:
    """Validated row tuples as columns (:data:`COLUMNS`): numbers in their dtypes, text as object arrays."""
    out: dict[str, np.ndarray] = {}
    cols = list(zip(*rows)) if rows else [()] * len(COLUMNS)
    for name, values in zip(COLUMNS, cols):
        if name in NUMBER_COLUMNS:
            out[name] = np.array(values, dtype=NUMBER_COLUMNS[name])
        else:
            a = np.empty(len(values), dtype=object)
            a[:] = values
            out[name] = a
    return out


def frame_from_columns(columns: dict[str, np.ndarray]) -> pd.DataFrame:
    """The :attr:`ResultTable.frame` of columns in reading order (:func:`columns_of`, or the input cache's),
    sorted by measurand, lab and replicate: the one constructor, so the table is the same however it was read."""
    frame = pd.DataFrame({name: columns[name] for name in COLUMNS})
    frame = frame.astype(NUMBER_COLUMNS)
    return frame.sort_values(["measurand", "lab", "replicate"], kind="stable").reset_index(drop=True)
