"""What intake hands to the evaluation: the participants' details (and, with the item tables, the round's inputs)."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Participant"]


@dataclass(frozen=True, slots=True, kw_only=True)
class Participant:
    """A participant's confidential details, from ``participants.csv``."""

    lab: str
    name: str
    contact: str
    #: The row of the participants file the lab was read from (None when not read from a file).
    row: int | None = None
