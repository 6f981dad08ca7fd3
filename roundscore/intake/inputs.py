"""Everything a round's evaluation needs, read from its files: :func:`read_inputs`."""

from __future__ import annotations

from collections.abc import Callable

from roundscore.intake.cache import InputCache
from roundscore.intake.items import read_item_tables
from roundscore.intake.readers import check_labs, read_participants, read_results
from roundscore.model.inputs import RoundInputs
from roundscore.model.round import Round

__all__ = ["read_inputs"]


def read_inputs(rnd: Round, *, jobs: int | None = None,
                progress: Callable[[str, int, int], None] | None = None,
                cache: InputCache | None = None) -> RoundInputs:
    """Read a round's results, participants and item tables, in that order, each validated.

    The lab codes of the results are checked against the participants file
    and the exclusions (:func:`roundscore.intake.readers.check_labs`).
    ``jobs`` worker processes read the returned forms (None = all cores);
    nothing read depends on it. The first file that cannot be used stops
    the reading with an :class:`~roundscore.errors.InputError` listing its
    problems. ``cache``: the input cache the returned forms are taken from
    where they are unchanged (:func:`roundscore.intake.readers.read_results`).
    """
    table = read_results(rnd, jobs=jobs, progress=progress, cache=cache)
    participants = read_participants(rnd)
    table = check_labs(rnd, table, participants)  # codes agree with the participants file and the exclusions
    return RoundInputs(round=rnd, table=table, participants=participants, items=read_item_tables(rnd))
