"""Test-item tables and the outcome of the item checks, as plain data.

:class:`ItemTable` is a homogeneity or stability table as read and validated
(by :mod:`roundscore.intake.items`); :class:`ItemOutcome` is what the item
checks of one measurand found and did to σ_pt and u(x_pt) (computed by
:mod:`roundscore.evaluation.items`). The ``item_checks`` and
``stability_criterion`` choices are listed here once, as ``Literal`` types.
"""

from __future__ import annotations

from dataclasses import dataclass
from collections.abc import Mapping
from typing import Any, Literal

import numpy as np

from roundscore.choices import check_choice
from roundscore.stats import items as st

__all__ = ["ITEMS_COLUMNS", "ItemConsequence", "StabilityChoice", "TableKind", "ItemTable", "ItemTables",
           "ItemOutcome", "check_item_choice"]

#: items.csv columns (fixed by the issue); ``check`` is "homogeneity" or "stability".
ITEMS_COLUMNS = ("measurand", "check", "g", "m", "mean", "s_x", "s_w", "s_s", "criterion", "allowed",
                 "passed", "note")

#: ``item_checks``: what a failed (or passed) item check does to σ_pt and u(x_pt).
ItemConsequence = Literal["uncertainty", "widen-sigma", "both", "report"]
#: ``stability_criterion``: the stability check's criterion (the statistic's own choice).
StabilityChoice = st.StabilityCriterion
TableKind = Literal["homogeneity", "stability"]


def check_item_choice(name: str, value: object, allowed: object) -> str:
    """``value`` if it is one of the ``Literal`` choices ``allowed``, else InputError listing them
    (:func:`roundscore.choices.check_choice`)."""
    return check_choice(name, value, allowed)


@dataclass(frozen=True, slots=True, kw_only=True)
class ItemTable:
    """A homogeneity or stability table as read and validated, values in the measurand's unit.

    Attributes
    ----------
    file : str
        The file as shown to the user (relative to the round folder).
    kind : {"homogeneity", "stability"}
    items : tuple of str
        Item label of each measurement.
    replicates : tuple of int
        Replicate number of each measurement.
    values : numpy.ndarray
        The measurements (float), converted to the measurand's unit.
    sets : tuple of str or None
        Set label of each measurement (stability tables only).
    set_names : tuple of str
        The distinct sets in order of first appearance (empty for homogeneity).
    set_u : dict of str to float
        Standard uncertainty of each set's mean where the table gives one.
    rows : tuple of int
        Spreadsheet row (header = row 1) of each measurement.
    notes : tuple of str
        Things that did not stop the import (e.g. ignored columns).
    """

    file: str
    kind: TableKind
    items: tuple[str, ...]
    replicates: tuple[int, ...]
    values: np.ndarray
    sets: tuple[str, ...] | None
    set_names: tuple[str, ...]
    set_u: dict[str, float]
    rows: tuple[int, ...]
    notes: tuple[str, ...] = ()


#: The item tables of a round as read by intake: measurand → {"homogeneity": table, "stability": table}
#: (only the kinds the measurand names).
ItemTables = Mapping[str, Mapping[str, ItemTable]]


@dataclass(frozen=True, slots=True, kw_only=True)
class ItemOutcome:
    """The item checks of one measurand and what they did to σ_pt and u(x_pt).

    Attributes
    ----------
    sigma_pt : float
        σ_pt to score with: widened to √(σ_pt² + s_s²) when the consequence
        asks for it, else as given.
    u_assigned : float
        u(x_pt) to score with: √(u_char² + u_hom² + u_stab²) when the
        consequence asks for it, else u_char.
    sigma_pt_before, u_char : float
        σ_pt and u(x_pt) as they came in (the checks use ``sigma_pt_before``).
    consequence : {"uncertainty", "widen-sigma", "both", "report"}
        The ``item_checks`` setting applied.
    homogeneity : HomogeneityResult or None
        The homogeneity check (None when no table is named or σ_pt is unknown).
    stability : StabilityResult or None
        The stability check (None when no table is named or σ_pt is unknown).
    homogeneity_table, stability_table : ItemTable or None
        The tables as read (the item-means chart reads them).
    stability_sets : tuple of (str, str) or None
        Names of the first (ȳ₁) and second (ȳ₂) stability sets.
    u_hom : float
        s_s of the homogeneity check (0 when s_s was truncated to 0, or no check).
    u_stab : float
        |ȳ₁ − ȳ₂|/√3 of the stability check (0 when no check).
    widened : bool
        True when σ_pt was widened (consequence asks for it and s_s > 0).
    rows : tuple of dict
        Rows of items.csv, keys :data:`ITEMS_COLUMNS`.
    notes : tuple of str
        Lines for the measurand's notes in every output.
    audit : tuple of tuple
        Audit rows (measurand, lab, step, action, reason).
    """

    sigma_pt: float
    u_assigned: float
    sigma_pt_before: float
    u_char: float
    consequence: ItemConsequence
    homogeneity: st.HomogeneityResult | None
    stability: st.StabilityResult | None
    homogeneity_table: ItemTable | None
    stability_table: ItemTable | None
    stability_sets: tuple[str, str] | None
    u_hom: float
    u_stab: float
    widened: bool
    rows: tuple[dict[str, Any], ...]
    notes: tuple[str, ...]
    audit: tuple[tuple[str, str, str, str, str], ...]

    @property
    def passed(self) -> bool:
        """True when every check that was named passed (a check that could not be run has not passed)."""
        return all(bool(r["passed"]) for r in self.rows)
