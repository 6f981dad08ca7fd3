"""Qualitative results in the history: their row contract, their reading, and the trend rule for wrong results.

A nominal or ordinal measurand (:mod:`roundscore.model.qualitative`) is not scored with a number: each lab ×
measurand × test item has a reported category, the assigned one, an agreement (agrees, false positive, false
negative, disagrees), an ordinal deviation in categories and a signal, the columns of ``qualitative.csv``.  The
archive keeps these rows as they are (its ``qualitative`` table, migration 5 of
:mod:`roundscore.history.sqlite_schema`), beside the score rows; :func:`normalise_rows` validates them from a frame
or from the lab sheet's hidden ``qualitative_data`` sheet, collecting every problem with file, sheet, row and value.

The trend rule (:func:`check_qualitative`)
-------------------------------------------
A **run of wrong results**: in a scheme × lab × measurand series, a round counts as *wrong* when any of the lab's
results for that measurand (any test item) is a false positive, a false negative or another wrong category
(:data:`~roundscore.model.qualitative.WRONG_AGREEMENTS`; for an ordinal property any deviation from the assigned
grade).  The rule fires at a round when **at least two of the last three rounds** of the series up to it were wrong
(:data:`WRONG_OF`, :data:`WRONG_IN`), so a false negative repeated in the next round or the one after fires it.
It is the qualitative counterpart of the "two of three" rule the z-scores get (rule 2 of
:mod:`roundscore.history.rules`); the choice of two in three is common practice, ISO 13528:2022 leaves the follow-up
of qualitative results to the scheme (from memory).  Rounds where the lab has no assigned category to agree with
(signal ``not-scored``) are left out of the series, as unscored rounds are for the z-scores.  A finding is reported
when it fires at one of the last ``window`` rounds of the series.

This evaluation supports, and does not replace, the provider's documented procedures, ISO/IEC 17043 and the
accreditation body's rules (and the lab's own quality system).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd

from roundscore.errors import Location, Problem
from roundscore.history.cellvalues import scalar, unquote
from roundscore.model.labcodes import read_lab_code
from roundscore.model.qualitative import AGREEMENTS, QUALITATIVE_COLUMNS, QUALITATIVE_SHEET, WRONG_AGREEMENTS
from roundscore.model.signals import SIGNAL_NAMES
from roundscore.text import too_long

__all__ = ["QUALITATIVE_ROW_FIELDS", "QUALITATIVE_HISTORY_COLUMNS", "QUALITATIVE_SHEET", "WRONG_OF", "WRONG_IN",
           "RULE_NAME", "RULE_SOURCE", "QualitativeFinding", "normalise_rows", "check_qualitative",
           "qualitative_frame"]

#: The fields of an archived qualitative row, in order: the columns of ``qualitative.csv``.
QUALITATIVE_ROW_FIELDS: tuple[str, ...] = QUALITATIVE_COLUMNS
#: Columns of a qualitative history frame (:func:`roundscore.history.store.lab_qualitative_history`).
QUALITATIVE_HISTORY_COLUMNS: tuple[str, ...] = ("scheme", "round", "round_date", "title", *QUALITATIVE_ROW_FIELDS)
#: The rule: at least WRONG_OF wrong rounds among the last WRONG_IN rounds of a series (common practice).
WRONG_OF = 2
WRONG_IN = 3
RULE_NAME = f"{WRONG_OF} wrong results in {WRONG_IN} rounds"
RULE_SOURCE = "common practice, the counterpart of the z-scores' two-of-three rule"
_AT = {f: i for i, f in enumerate(QUALITATIVE_ROW_FIELDS)}
_TEXT = ("measurand", "item", "reported", "assigned", "agreement", "signal", "note")


def _plain(value: object) -> object:
    """A cell as a scalar; text stripped and un-neutralised, empty text as None."""
    value = scalar(value)
    if isinstance(value, str):
        return unquote(value.strip()) or None
    return value


def _text(value: object) -> str:
    return str(int(value)) if isinstance(value, float) and value.is_integer() else str(value)


def normalise_rows(records: Sequence[Mapping[Any, object]], *, file: str | None, sheet: str | None,
                   row_numbers: Sequence[int]) -> tuple[list[tuple], list[Problem]]:
    """Validate qualitative records into tuples in :data:`QUALITATIVE_ROW_FIELDS` order.

    Text is stripped (an empty item is ``""``: the measurand has no items); ``deviation`` is a whole number or
    empty; ``agreement`` and ``signal`` must be the known words; a lab × measurand × item twice is refused.
    """
    rows: list[tuple] = []
    problems: list[Problem] = []
    seen: dict[tuple[str, str, str], int] = {}
    for rec, number in zip(records, row_numbers):
        where: Location = {"file": file, "sheet": sheet, "row": number}
        out: dict[str, object] = {}
        for col in QUALITATIVE_ROW_FIELDS:
            raw = _plain(rec.get(col))
            if col == "lab":
                code, why = read_lab_code(int(raw) if isinstance(raw, float) and raw.is_integer() else raw)
                if code is None:
                    problems.append(Problem(message=why or "the lab code is empty", column=col, value=raw, **where))
                out[col] = code if code is not None else (None if raw is None else str(raw))
            elif col == "deviation":
                if raw is None:
                    out[col] = None
                    continue
                try:
                    number_ = float(raw)  # type: ignore[arg-type]  # any cell value; a non-number raises below
                except (TypeError, ValueError):
                    number_ = math.nan
                if not number_.is_integer():
                    problems.append(Problem(message="not a whole number of categories", column=col, value=raw,
                                            **where))
                out[col] = int(number_) if number_.is_integer() else None
            else:
                out[col] = "" if col == "item" and raw is None else (None if raw is None else _text(raw))
        for col in ("lab", "measurand", "reported"):
            if out[col] is None:
                problems.append(Problem(message="empty; a value is required", column=col, **where))
        why = too_long("measurand", str(out["measurand"] or ""))
        if why:
            problems.append(Problem(message=why, column="measurand", value=out["measurand"], **where))
        if out["agreement"] is not None and out["agreement"] not in AGREEMENTS:
            problems.append(Problem(message=f"unknown agreement; allowed: {', '.join(AGREEMENTS)}",
                                    column="agreement", value=out["agreement"], **where))
        if out["signal"] not in SIGNAL_NAMES:
            problems.append(Problem(message=f"unknown signal; allowed: {', '.join(SIGNAL_NAMES)}",
                                    column="signal", value=out["signal"], **where))
        key = (str(out["lab"]), str(out["measurand"]), str(out["item"]))
        if key in seen:
            problems.append(Problem(message=f"duplicate lab x measurand x item (also on row {seen[key]})",
                                    lab=key[0], measurand=key[1], **where))
        seen.setdefault(key, number)
        rows.append(tuple(out[c] for c in QUALITATIVE_ROW_FIELDS))
    return rows, problems


def qualitative_frame(rows: Sequence[tuple]) -> pd.DataFrame:
    """History rows (round keys, then a qualitative row) as a :data:`QUALITATIVE_HISTORY_COLUMNS` frame;
    ``deviation`` a nullable integer column."""
    frame = pd.DataFrame(list(rows), columns=list(QUALITATIVE_HISTORY_COLUMNS))
    frame["deviation"] = pd.array([None if v is None or (isinstance(v, float) and math.isnan(v)) else int(v)
                                   for v in frame["deviation"]], dtype="Int64")
    return frame


@dataclass(frozen=True, slots=True, kw_only=True)
class QualitativeFinding:
    """The rule fired at one round of a scheme × lab × measurand series.

    Attributes
    ----------
    scheme, lab, measurand : str
    round, round_date : str
        The round it fired at (the last of the three).
    rounds : tuple of str
        The rounds looked at (at most :data:`WRONG_IN`, oldest first) and ``wrong`` those with a wrong result.
    wrong : tuple of str
    results : tuple of str
        The wrong results in words ("2026-14 item KM-14S: false negative (not detected for detected)").
    message : str
        One sentence for the user.
    """

    scheme: str
    lab: str
    measurand: str
    round: str
    round_date: str
    rounds: tuple[str, ...]
    wrong: tuple[str, ...]
    results: tuple[str, ...]
    message: str

    def to_dict(self) -> dict[str, object]:
        return {f: (list(v) if isinstance(v := getattr(self, f), tuple) else v) for f in self.__slots__}


def _wrong_words(part: pd.DataFrame) -> list[str]:
    out = []
    for rnd, item, agreement, reported, assigned in zip(part["round"], part["item"], part["agreement"],
                                                         part["reported"], part["assigned"]):
        if agreement in WRONG_AGREEMENTS:
            where = f" item {item}" if item else ""
            out.append(f"{rnd}{where}: {agreement} ({reported} for {assigned})")
    return out


def check_qualitative(frame: pd.DataFrame, *, window: int | None = None) -> list[QualitativeFinding]:
    """The rule of the module docstring over every scheme × lab × measurand series of a qualitative history.

    Parameters
    ----------
    frame : pandas.DataFrame
        :data:`QUALITATIVE_HISTORY_COLUMNS` (:func:`roundscore.history.store.lab_qualitative_history`).
    window : int or None
        Report a finding only when it fires at one of the last ``window`` rounds of its series (None: any).
    """
    if frame.empty:
        return []
    used = frame[frame["signal"] != "not-scored"].sort_values(["round_date", "round"], kind="stable")
    findings: list[QualitativeFinding] = []
    for (scheme, lab, measurand), series in used.groupby(["scheme", "lab", "measurand"], sort=True):
        rounds = list(dict.fromkeys(zip(series["round_date"], series["round"])))
        wrong = {key for key, part in series.groupby(["round_date", "round"], sort=False)
                 if part["agreement"].isin(WRONG_AGREEMENTS).any()}
        first = 0 if window is None else max(0, len(rounds) - window)
        for at in range(max(first, WRONG_OF - 1), len(rounds)):
            looked = rounds[max(0, at - WRONG_IN + 1):at + 1]
            bad = [k for k in looked if k in wrong]
            if rounds[at] not in wrong or len(bad) < WRONG_OF:
                continue  # fires where the run is completed, at a wrong round
            names = tuple(r for _, r in looked)
            words = _wrong_words(series[series["round"].isin([r for _, r in bad])])
            findings.append(QualitativeFinding(
                scheme=str(scheme), lab=str(lab), measurand=str(measurand), round=rounds[at][1],
                round_date=rounds[at][0], rounds=names, wrong=tuple(r for _, r in bad), results=tuple(words),
                message=f"{RULE_NAME}: {len(bad)} of the rounds {', '.join(names)} had a wrong result "
                        f"({'; '.join(words)})"))
    return findings
