"""Qualitative measurands as plain data: nominal and ordinal properties, their categories and how text maps to them.

A ``[measurand.NAME]`` table with ``kind = "nominal"`` (identifications, detected / not detected) or
``kind = "ordinal"`` (ordered grades: negative < weak < positive) is read by
:func:`roundscore.intake.qualitative_keys.qualitative_measurand` into a :class:`QualitativeSettings`;
the keys are documented in :data:`roundscore.model.round.MEASURAND_KEYS`. A reported word is turned
into a category by :meth:`QualitativeSettings.category_of`: case-folded, its white space collapsed
(:func:`normalise`), then looked up among the categories and the round file's ``aliases``; anything
else is refused by the caller, naming the cell.

>>> s = QualitativeSettings(name="salmonella", kind="nominal", categories=("detected", "not detected"),
...                         aliases={normalise("+"): "detected", normalise("ND"): "not detected"})
>>> s.category_of("  Not   DETECTED "), s.category_of("+"), s.category_of("nd"), s.category_of("maybe")
('not detected', 'detected', 'not detected', None)

References
----------
.. [1] ISO 13528:2022 clause 11 (qualitative PT schemes: nominal and ordinal properties; from memory).
"""

from __future__ import annotations

import unicodedata
from dataclasses import dataclass, field
from types import MappingProxyType
from collections.abc import Mapping
from typing import Literal

__all__ = ["QualitativeKind", "QualitativeMethod", "QualitativeSettings", "normalise", "NEGATIVE_WORDS",
           "DEFAULT_WARNING_STEPS", "DEFAULT_ACTION_STEPS", "MAX_CATEGORIES", "QUALITATIVE_RESULT",
           "QUALITATIVE_COLUMNS", "QUALITATIVE_SUMMARY_COLUMNS", "DISTRIBUTION_COLUMNS", "QUALITATIVE_METHODS_COLUMNS",
           "Agreement", "AGREEMENTS", "QualitativeItem", "WRONG_AGREEMENTS", "QUALITATIVE_SHEET",
           "QUALITATIVE_COUNT_KEY"]

#: ``kind`` of a qualitative measurand (a measurand without ``kind`` is quantitative).
QualitativeKind = Literal["nominal", "ordinal"]
#: ``assigned`` from the participants: the median category (ordinal only) or the most frequent one.
QualitativeMethod = Literal["median", "mode"]
#: The ``status`` of a qualitative result in :attr:`roundscore.model.table.ResultTable.frame` (its category
#: in the ``category`` column, the word as typed in ``text``).
QUALITATIVE_RESULT = "category"
#: A deviation of this many categories or more gives a warning signal (``deviation_signals.warning``).
DEFAULT_WARNING_STEPS = 1
#: ... and of this many or more an action signal (``deviation_signals.action``; e.g. 0 acceptable, 1 warning,
#: ≥ 2 action, as the issue's example rule; common practice, ISO 13528:2022 leaves the rule to the scheme).
DEFAULT_ACTION_STEPS = 2
#: Most categories a measurand may list (a form's list validation holds 255 characters in all).
MAX_CATEGORIES = 50
#: Categories taken to mean "absent" when the round file does not name one with ``negative`` (the counts of
#: false positives and false negatives need one); normalised as :func:`normalise` does.
NEGATIVE_WORDS = ("not detected", "negative", "absent", "not found")


def normalise(text: str) -> str:
    """A word as it is compared: Unicode NFKC, case-folded, white space collapsed to single spaces."""
    return " ".join(unicodedata.normalize("NFKC", text).casefold().split())


@dataclass(frozen=True, slots=True, kw_only=True)
class QualitativeSettings:
    """The settings of one nominal or ordinal measurand (a ``[measurand.NAME]`` table with ``kind``).

    Attributes
    ----------
    name, label : str
    kind : {"nominal", "ordinal"}
    categories : tuple of str
        The categories as the round file spells them; ordered from lowest to highest for an ordinal property.
    assigned : str or None
        The category assigned to every item, or a method (:data:`QualitativeMethod`) naming how it is found
        from the participants; None: no default (then every item needs its own entry in ``assigned_items``).
    assigned_items : mapping of str to str
        Item code → its assigned category or method (``assigned = { "QA-1" = "detected", ... }``).
    items : tuple of str
        The test items declared (``items = [...]``, else the keys of ``assigned_items``); empty: any item
        code is accepted, and a result without one belongs to the item "".
    aliases : mapping of str to str
        Normalised spelling → category (``aliases = { "+" = "detected" }``).
    negative : str or None
        The category meaning "absent", for false positives and false negatives (None: not counted).
    warning_steps, action_steps : int
        Ordinal: |deviation| ≥ warning_steps gives a warning signal, ≥ action_steps an action signal.
    decimals : None
        Kept so code reading a measurand's decimals treats both kinds alike.
    """

    def __deepcopy__(self, memo: dict) -> QualitativeSettings:
        """Itself: frozen, its mappings read-only (``copy.deepcopy`` of an evaluation copies its tables)."""
        return self


    name: str
    kind: QualitativeKind
    categories: tuple[str, ...]
    label: str = ""
    assigned: str | None = None
    assigned_items: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    items: tuple[str, ...] = ()
    aliases: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    negative: str | None = None
    warning_steps: int = DEFAULT_WARNING_STEPS
    action_steps: int = DEFAULT_ACTION_STEPS
    decimals: None = None

    def category_of(self, text: str) -> str | None:
        """The category a reported word stands for (None: neither a category nor an alias)."""
        key = normalise(text)
        for c in self.categories:
            if normalise(c) == key:
                return c
        return self.aliases.get(key)

    def rank(self, category: str) -> int:
        """The position of a category in ``categories`` (the order of an ordinal property)."""
        return self.categories.index(category)

    def assigned_for(self, item: str) -> str | None:
        """The category or method the round file assigns to ``item`` (None: none given)."""
        return self.assigned_items.get(item, self.assigned)

    def describe(self) -> str:
        """One line for the settings tables: kind and categories."""
        order = " < " if self.kind == "ordinal" else ", "
        return f"{self.kind}: {order.join(self.categories)}"


#: ``qualitative.csv`` (fixed by contract): one row per lab × measurand × item.
QUALITATIVE_COLUMNS = ("lab", "measurand", "item", "reported", "assigned", "agreement", "deviation", "signal", "note")
#: The lab sheet's hidden sheet of the lab's ``qualitative.csv`` rows with a digest each (read back by
#: ``history add``), and the key of sheet ``round`` counting them (roundscore.outputs.lab_workbook).
QUALITATIVE_SHEET = "qualitative_data"
QUALITATIVE_COUNT_KEY = "qualitative_rows"
#: ``qualitative_summary.csv`` (fixed by contract): one row per measurand × item; the interval is Wilson's
#: (roundscore.stats.qualitative.INTERVAL_METHOD) at ``[round] confidence``.
QUALITATIVE_SUMMARY_COLUMNS = ("measurand", "item", "assigned", "n", "agreeing", "proportion", "ci_low", "ci_high",
                               "false_positives", "false_negatives")
#: ``qualitative_distribution.csv``: how many labs reported each category of each item (the figures' data).
DISTRIBUTION_COLUMNS = ("measurand", "item", "category", "order", "count", "proportion", "assigned")
#: ``qualitative_methods.csv``: agreement by method group, with the test of independence used.
QUALITATIVE_METHODS_COLUMNS = ("measurand", "item", "groups", "test", "statistic", "df", "p_value", "note")
#: The ``agreement`` of a result with the assigned category: "agrees"; "false positive" (the assigned category
#: is the negative one and the lab reported another); "false negative" (the lab reported the negative category
#: where another was assigned); "disagrees" (another wrong category: a wrong identification, a wrong grade).
Agreement = Literal["agrees", "false positive", "false negative", "disagrees"]
AGREEMENTS: tuple[str, ...] = ("agrees", "false positive", "false negative", "disagrees")
#: The agreements that are wrong results (a run of them is a history trend: roundscore.history.rules).
WRONG_AGREEMENTS: tuple[str, ...] = AGREEMENTS[1:]


@dataclass(frozen=True, slots=True, kw_only=True)
class QualitativeItem:
    """The assigned category of one measurand × item and how it was set (kept in the evaluation's details).

    Attributes
    ----------
    measurand, item : str
    assigned : str or None
        The assigned category (None: it could not be set; no signals then).
    source : str
        In words, where it came from ("stated in the round file", "median category of 12 labs").
    n : int
        Results used (reported by labs not excluded).
    mode : str or None
        The most frequent category among them (None on a tie) and ``mode_agreement`` the share reporting it.
    mode_agreement : float
    """

    measurand: str
    item: str
    assigned: str | None
    source: str
    n: int
    mode: str | None
    mode_agreement: float
