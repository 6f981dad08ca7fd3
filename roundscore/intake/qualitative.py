"""Results of nominal and ordinal measurands → rows of the :class:`~roundscore.model.table.ResultTable`.

:class:`QualitativeRows` is fed the records :func:`roundscore.intake.validate.validate_records` finds
for a qualitative measurand (in the long layout or a returned form). Each word is mapped to a category
(:meth:`~roundscore.model.qualitative.QualitativeSettings.category_of`: case and spaces ignored, the
round file's aliases); a word that is neither is refused, naming the file, sheet, row and cell. The
``item`` column tells a round's test items apart; replicates of one item must give one category.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from roundscore.errors import Problem
from roundscore.model.qualitative import QUALITATIVE_RESULT, QualitativeSettings, normalise
from roundscore.model.round import Round
from roundscore.model.table import Record
from roundscore.text import quote, shown_list, too_long

__all__ = ["QualitativeRows", "HINT_CATEGORY", "MAX_REPLICATE"]

#: What to do about a word that is no category.
HINT_CATEGORY = ("give one of the categories of round.toml, or add the spelling to the measurand's aliases "
                 "(aliases = { \"+\" = \"detected\" })")
#: Largest replicate number of a qualitative result (as for numbers: roundscore.intake.validate).
MAX_REPLICATE = 1_000_000


class QualitativeRows:
    """Collects the validated rows of the qualitative measurands of one set of records.

    ``problem(message, record, column, value, hint)`` builds a problem at a record's cell (as
    :mod:`roundscore.intake.validate` does for numbers); problems go to ``problems``.
    """

    def __init__(self, rnd: Round, problems: list[Problem],
                 problem: Callable[[str, Record, str | None, object, str | None], Problem]) -> None:
        self.known = rnd.qualitative
        self.lower = {k.lower(): k for k in rnd.qualitative}
        self.problems = problems
        self.problem = problem
        self.rows: list[tuple] = []
        self.seen: dict[tuple[str, str, str, int], Record] = {}
        self.given: dict[tuple[str, str, str], tuple[str, Record]] = {}

    def add(self, rec: Record, lab: str, name: str, label: Callable[[object], str | None]) -> bool:
        """Validate one record if its measurand is qualitative (True), else leave it to the caller (False)."""
        q = self.known.get(name) or self.known.get(self.lower.get(name.lower(), ""))
        if q is None:
            return False
        text = label(rec.value)
        if text is None:  # a blank cell: nothing reported
            return True
        item = self._item(rec, q, label)
        replicate = self._replicate(rec, label)
        if item is None or replicate is None:
            return True
        why = too_long("label", text)
        category = None if why else q.category_of(text)
        if category is None:
            self.problems.append(self.problem(
                why or f"not a category of {q.name}; allowed: {shown_list(q.categories)}"
                + (f" or an alias ({shown_list(list(q.aliases))})" if q.aliases else ""),
                rec, "value", rec.value, None if why else HINT_CATEGORY))
            return True
        key = (lab, q.name, item, replicate)
        if key in self.seen:
            self.problems.append(self.problem(
                f"duplicate result for lab {lab}, {q.name}{_of(item)}, replicate {replicate}", rec, "replicate",
                rec.replicate, "keep one row per lab, measurand, item and replicate"))
            return True
        self.seen[key] = rec
        first = self.given.setdefault((lab, q.name, item), (category, rec))
        if first[0] != category:
            self.problems.append(self.problem(
                f"replicates of {q.name}{_of(item)} give different categories ({quote(first[0])} in row "
                f"{first[1].row}, {quote(category)} here)", rec, "value", rec.value,
                "report one category per test item (tell items apart with the item column)"))
            return True
        if first[1] is not rec:  # the same category again: one result
            return True
        self.rows.append((
            lab, q.name, replicate, QUALITATIVE_RESULT, np.nan, text, None, np.nan, "", np.nan, np.nan, np.nan,
            self._bounded(rec, "method", rec.method, label), self._bounded(rec, "comment", rec.comment, label),
            rec.file, rec.sheet, rec.row, None, 1.0, item, category))
        return True

    def _item(self, rec: Record, q: QualitativeSettings, label: Callable[[object], str | None]) -> str | None:
        given = label(rec.item)
        if given is None:
            if len(q.items) > 1:
                self.problems.append(self.problem(
                    f"the test item is missing; {q.name} has items {shown_list(q.items)}", rec, "item", rec.item,
                    "give the item code in the item column"))
                return None
            return q.items[0] if q.items else ""
        if q.items:
            found = next((i for i in q.items if normalise(i) == normalise(given)), None)
            if found is None:
                self.problems.append(self.problem(
                    f"unknown test item; {q.name} has items {shown_list(q.items)}", rec, "item", rec.item,
                    "give one of the items round.toml lists for this measurand"))
            return found
        why = too_long("measurand", given)
        if why:
            self.problems.append(self.problem(why, rec, "item", rec.item, None))
            return None
        return given

    def _replicate(self, rec: Record, label: Callable[[object], str | None]) -> int | None:
        text = label(rec.replicate)
        if text is None:
            return 1  # one result per item is the usual design: the replicate may be left blank
        try:
            rep = int(text)
        except ValueError:
            rep = -1
        if not 1 <= rep <= MAX_REPLICATE:
            self.problems.append(self.problem(f"the replicate must be a whole number from 1 to {MAX_REPLICATE}",
                                              rec, "replicate", rec.replicate, None))
            return None
        return rep


    def _bounded(self, rec: Record, kind: str, raw: Any, label: Callable[[object], str | None]) -> str | None:
        """The method or comment as read; text past its bound is a problem, as for numbers."""
        text = label(raw)
        why = too_long(kind, text) if text is not None else None
        if why:
            self.problems.append(self.problem(why, rec, kind, raw, None))
        return text


def _of(item: str) -> str:
    return f", item {item}" if item else ""
