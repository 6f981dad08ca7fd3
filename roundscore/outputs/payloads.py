"""What a per-lab writer receives: typed, frozen records taken from the evaluation (cheap to send to a worker).

A lab's score sheet (and any later per-lab output) is written from a
:class:`LabPayload`: the round's facts, the lab's identity, its rows of the
scores and of the per-lab stage tables, and its archived rounds. It holds
plain data only, so a worker process receives it without the whole
evaluation when needed, and nothing in it is recomputed.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from collections.abc import Mapping

import pandas as pd

from roundscore.model.evaluation import RoundEvaluation
from roundscore.model.round import Round
from roundscore.model.signals import Words

__all__ = ["RoundFacts", "LabPayload", "lab_payload"]


@dataclass(frozen=True, slots=True, kw_only=True)
class RoundFacts:
    """The round as a sheet or a page names it.

    Attributes
    ----------
    id, title, scheme, date, provider, material : str
    words : {"signals", "performance"}
        The signal vocabulary (``[round] words``).
    paper : {"a4", "letter"}
        The paper the sheets print on (``[round] paper``).
    """

    id: str
    title: str
    scheme: str
    date: str
    provider: str
    material: str
    words: Words
    paper: str = "a4"

    @classmethod
    def of(cls, rnd: Round) -> RoundFacts:
        """The facts of a round's settings."""
        return cls(id=rnd.id, title=rnd.title, scheme=rnd.scheme, date=rnd.date, provider=rnd.provider,
                   material=rnd.material, words=rnd.words, paper=rnd.paper)


@dataclass(frozen=True, slots=True, kw_only=True)
class LabPayload:
    """Everything one lab's sheet shows.

    Attributes
    ----------
    round : RoundFacts
    lab, name, contact : str
        The lab's code, and its name and contact from the participants file
        ("" when not given; only the lab's own sheet shows them).
    failed_checks : tuple of str
        Headlines of the round's failed checks, in the coordinator's words (not shown to the lab).
    notices : tuple of str
        What those checks mean for the lab's scores, in plain words
        (:attr:`~roundscore.model.evaluation.RoundEvaluation.lab_notices`): they head the sheet.
    receipt : tuple of (str, str)
        What the lab's returned form says of its sample (label, value: the date it arrived, its condition,
        the date of analysis), the fields it filled in; empty without them.
    scores : pandas.DataFrame
        The lab's rows of the scores (:data:`~roundscore.model.evaluation.SCORE_COLUMNS`,
        ``rank``, ``n_scored``).
    p : mapping of str to int
        Labs used for each measurand's statistics.
    decimals : mapping of str to int or None
        Each measurand's decimals.
    extras : mapping of str to DataFrame
        The lab's rows of every stage table with a ``lab`` column (Mandel h and k...).
    history : pandas.DataFrame or None
        The lab's earlier rounds from the archive
        (:data:`roundscore.history.store.HISTORY_COLUMNS`), or None.
    """

    round: RoundFacts
    lab: str
    name: str
    contact: str
    failed_checks: tuple[str, ...]
    scores: pd.DataFrame
    p: Mapping[str, int]
    decimals: Mapping[str, int | None]
    extras: Mapping[str, pd.DataFrame] = field(default_factory=dict)
    history: pd.DataFrame | None = None
    notices: tuple[str, ...] = ()
    receipt: tuple[tuple[str, str], ...] = ()


def lab_payload(ev: RoundEvaluation, lab: str, history: pd.DataFrame | None = None) -> LabPayload:
    """The payload of one lab's sheet, from the evaluation (its per-lab split: no table is filtered whole)."""
    p = ev.participants.get(lab)
    return LabPayload(
        round=RoundFacts.of(ev.round), lab=lab, name=p.name if p else "", contact=p.contact if p else "",
        failed_checks=tuple(ev.failed_checks), scores=ev.lab_scores(lab),
        p={n: m.p for n, m in ev.measurands.items()},
        decimals={n: m.decimals for n, m in ev.round.measurands.items()},
        extras={k: ev.lab_rows(k, lab) for k in ev.lab_tables if k != "scores"},
        history=history, notices=tuple(ev.lab_notices),
        receipt=tuple(r.lines()) if (r := ev.table.receipts.get(lab)) is not None else (),
    )
