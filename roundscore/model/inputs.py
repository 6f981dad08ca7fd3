"""What intake hands to the evaluation: the round, its results, its participants and its item tables."""

from __future__ import annotations

from dataclasses import dataclass, field

from roundscore.model.items import ItemTables
from roundscore.model.round import Round
from roundscore.model.table import ResultTable

__all__ = ["Participant", "RoundInputs"]


@dataclass(frozen=True, slots=True, kw_only=True)
class Participant:
    """A participant's confidential details, from ``participants.csv``."""

    lab: str
    name: str
    contact: str
    #: The row of the participants file the lab was read from (None when not read from a file).
    row: int | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class RoundInputs:
    """Everything a round's evaluation reads, as read and validated by :func:`roundscore.intake.inputs.read_inputs`.

    Attributes
    ----------
    round : Round
    table : ResultTable
        The results, with the lab codes checked against the participants file.
    participants : dict of str to Participant
        Confidential; empty when the round names no participants file.
    items : dict of str to dict of str to ItemTable
        The homogeneity and stability tables by measurand and kind (see
        :data:`roundscore.model.items.ItemTables`).
    """

    round: Round
    table: ResultTable
    participants: dict[str, Participant] = field(default_factory=dict)
    items: ItemTables = field(default_factory=dict)
