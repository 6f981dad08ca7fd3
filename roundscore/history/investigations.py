"""What a lab did about its signals: investigation records, the findings they answer, and its laboratory names.

A laboratory manager shows an assessor that every unsatisfactory result was
investigated. The archive keeps one **investigation record** per point of a
lab's series (scheme × round × lab code × measurand): its status (open or
closed), the cause found, the corrective action, who recorded it and when.
A record is changed by storing it again; the record it replaces is first
copied to the archive's audit table (kind ``"investigation"``), so the
history of a record can be shown.

A **finding** is a point of a lab's series that asks for an investigation: a
warning or action signal, or a trend rule of :mod:`roundscore.history.rules`
firing there (over the whole series: every round where a rule fired, not only
the last ``--window``). One record answers every finding at its point; a
finding is **open** until a closed record answers it (``history check --open``).

A lab takes part under different codes in different schemes; the
**laboratory name** given to each (scheme, code) groups them
(``history alias``): the codes sharing a name are one laboratory.

This evaluation supports, and does not replace, the lab's own quality system,
the provider's documented procedures, ISO/IEC 17043 and the accreditation
body's rules.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from typing import Literal

import pandas as pd

from roundscore.choices import check_choice
from roundscore.errors import InputError, Problem
from roundscore.history.backends import open_store
from roundscore.history.interface import AuditEntry, Investigation, Laboratory, now
from roundscore.history.rules import check_history
from roundscore.history.store import archived_labs, lab_history
from roundscore.model.signals import SIGNALS
from roundscore.text import quote, shown_list, too_long

__all__ = ["DISCLAIMER", "Status", "STATUSES", "FINDING_SIGNALS", "RuleHit", "FindingPoint", "NoteOutcome",
           "finding_points", "record_investigation", "investigations", "name_laboratory", "laboratory_codes",
           "LabIdentity", "lab_frame", "with_rules"]

#: The caution of every lab-facing output of the records (``history check --open``, the lab's pack).
DISCLAIMER = ("This history supports, and does not replace, the laboratory's own quality system, the provider's "
              "documented procedures, ISO/IEC 17043 and the accreditation body's rules.")
#: The status of an investigation record.
Status = Literal["open", "closed"]
STATUSES: tuple[str, ...] = ("open", "closed")
#: The signals that ask for an investigation (ISO 13528:2022 §9: warning and action signals).
FINDING_SIGNALS: tuple[str, ...] = ("warning", "action")
_PointKey = tuple[str, str, str, str]  # scheme, round, lab, measurand


@dataclass(frozen=True, slots=True, kw_only=True)
class RuleHit:
    """A trend rule that fired at a point: its number, name and side ("high", "low" or None)."""

    rule: int
    name: str
    side: str | None

    def label(self) -> str:
        """"rule 3 (9 in a row on one side), high"."""
        return f"rule {self.rule} ({self.name})" + (f", {self.side}" if self.side else "")


@dataclass(frozen=True, slots=True, kw_only=True)
class FindingPoint:
    """A point of a lab's series with a warning or action signal or a rule firing, and its record.

    Attributes
    ----------
    scheme, lab, measurand, round_id, round_date : str
        The point.
    unit : str
    result : float, str or None
        The lab's result (a censored result's text).
    assigned, sigma_pt, value : float
        The assigned value, σ_pt and the round's score value.
    score, signal : str
        The score's name and the signal it gave.
    rules : tuple of RuleHit
        The trend rules firing there.
    record : Investigation or None
        The lab's record of the point.
    """

    scheme: str
    lab: str
    measurand: str
    round_id: str
    round_date: str
    unit: str
    result: float | str | None
    assigned: float
    sigma_pt: float
    score: str
    value: float
    signal: str
    rules: tuple[RuleHit, ...]
    record: Investigation | None

    def key(self) -> _PointKey:
        return (self.scheme, self.round_id, self.lab, self.measurand)

    @property
    def is_open(self) -> bool:
        """No closed record answers it."""
        return self.record is None or self.record.status != "closed"


def finding_points(frame: pd.DataFrame, records: Sequence[Investigation] = ()) -> list[FindingPoint]:
    """Every finding of a history frame (:func:`roundscore.history.store.lab_history`), in round-date order.

    A point is a finding when its signal is a warning or action signal or when a trend rule fires at it
    (the rules over the whole series: ``window=None``). ``records`` are matched by their point.
    """
    if frame.empty:
        return []
    hits: dict[_PointKey, list[RuleHit]] = {}
    for series in check_history(frame, window=None).series:
        for f in series.findings:
            for p in f.positions:
                key = (series.scheme, series.rounds[p], series.lab, series.measurand)
                hits.setdefault(key, []).append(RuleHit(rule=f.rule, name=f.name, side=f.side))
    by_key = {r.key(): r for r in records}
    out = []
    for row in frame.to_dict(orient="records"):
        key = (str(row["scheme"]), str(row["round"]), str(row["lab"]), str(row["measurand"]))
        if row["signal"] not in FINDING_SIGNALS and key not in hits:
            continue
        result = row["result"]
        out.append(FindingPoint(
            scheme=key[0], lab=key[2], measurand=key[3], round_id=key[1], round_date=str(row["round_date"]),
            unit=str(row["unit"] or ""), result=result if isinstance(result, str) else float(result),
            assigned=float(row["assigned"]), sigma_pt=float(row["sigma_pt"]), score=str(row["score"]),
            value=float(row["score_value"]), signal=str(row["signal"]),
            rules=tuple(sorted(hits.get(key, ()), key=lambda h: (h.rule, h.side or ""))), record=by_key.get(key)))
    out.sort(key=lambda p: (p.round_date, p.round_id, p.scheme, p.measurand, p.lab))
    return out


def with_rules(frame: pd.DataFrame) -> pd.DataFrame:
    """The history frame with a ``rules`` column: the trend rules firing at each row ("3, 4"; "" for none)."""
    tags = {p.key(): ", ".join(str(r) for r in sorted({h.rule for h in p.rules})) for p in finding_points(frame)}
    keys = zip(frame["scheme"].astype(str), frame["round"].astype(str), frame["lab"].astype(str),
               frame["measurand"].astype(str))
    return frame.assign(rules=[tags.get(k, "") for k in keys])


def investigations(path: str | os.PathLike[str] | None, labs: Sequence[str] | None = None) -> list[Investigation]:
    """The archive's investigation records (of ``labs`` when given)."""
    with open_store(path).reading() as reader:
        return reader.investigations(None if labs is None else tuple(labs)) if reader is not None else []


# --------------------------------------------------------------------------- storing a record

@dataclass(frozen=True, slots=True, kw_only=True)
class NoteOutcome:
    """What storing a record (or a laboratory's name) did: ``status`` "added", "changed" or "unchanged"."""

    status: Literal["added", "changed", "unchanged"]
    message: str


def _today() -> str:
    return _dt.datetime.now(_dt.UTC).date().isoformat()


def _text_problems(fields: Sequence[tuple[str, str, str]]) -> list[Problem]:
    """Each given text checked against its limit (roundscore.text.TEXT_LIMITS)."""
    problems = []
    for option, kind, text in fields:
        long = too_long(kind, text)
        if long:
            problems.append(Problem(message=f"{option}: {long}", value=text))
    return problems


def _point_of(path, *, lab: str, round_id: str, measurand: str, scheme: str | None) -> tuple[str, pd.DataFrame]:
    """The scheme of the lab's point and the lab's history in it, or a refusal naming what is unknown."""
    frame = lab_history(path, lab=lab, scheme=scheme)
    if frame.empty:
        where = f" in scheme {quote(scheme)}" if scheme else ""
        raise InputError.single(f"no archived scores for lab {quote(lab)}{where} (labs in the archive: "
                                f"{shown_list(archived_labs(path)) or 'none'})")
    in_round = frame[frame["round"] == round_id]
    if in_round.empty:
        rounds = list(dict.fromkeys(frame["round"].astype(str)))
        raise InputError.single(f"lab {quote(lab)} has no archived scores in round {quote(round_id)} "
                                f"(its rounds: {shown_list(rounds)})")
    schemes = sorted(set(in_round["scheme"].astype(str)))
    if len(schemes) > 1:
        raise InputError.single(f"round {quote(round_id)} is archived in schemes {', '.join(map(quote, schemes))}; "
                                "give --scheme")
    point = in_round[in_round["measurand"] == measurand]
    if point.empty:
        raise InputError.single(f"lab {quote(lab)} has no score for measurand {quote(measurand)} in round "
                                f"{quote(round_id)} (its measurands there: "
                                f"{shown_list(sorted(set(in_round['measurand'].astype(str))))})")
    return schemes[0], frame[frame["scheme"] == schemes[0]]


def record_investigation(path: str | os.PathLike[str] | None, *, lab: str, round_id: str, measurand: str,
                         status: str, by: str, cause: str = "", action: str = "", date: str | None = None,
                         scheme: str | None = None,
                         reason: str = "investigation record changed") -> NoteOutcome:
    """Store the lab's investigation record of one point; a changed record's old version goes to the audit.

    Refused (``InputError``, nothing stored): an unknown lab, round or measurand; a round id archived in
    several schemes without ``scheme``; a point with neither a warning/action signal nor a rule firing
    (nothing to investigate); a date that is not ``YYYY-MM-DD``, is in the future or before the round; a
    closed record without cause or action; no ``by``; text beyond its limit.
    """
    status = check_choice("--status", status, Status)
    cause, action, by = (str(v or "").strip() for v in (cause, action, by))
    problems = _text_problems((("--cause", "investigation text", cause), ("--action", "investigation text", action),
                               ("--by", "participant name", by)))
    if not by:
        problems.append(Problem(message="--by: say who recorded the investigation"))
    if status == "closed":
        problems += [Problem(message=f"{opt}: a closed record needs the {what}")
                     for opt, what, text in (("--cause", "cause found", cause), ("--action", "action taken", action))
                     if not text]
    day = _today() if date is None else str(date).strip()
    try:
        day = _dt.date.fromisoformat(day).isoformat()
    except ValueError:
        problems.append(Problem(message="--date: not a date YYYY-MM-DD", value=date))
        day = ""
    if day and day > _today():
        problems.append(Problem(message="--date: the day is in the future", value=day))
    if problems:
        raise InputError(problems, summary="the investigation record was not stored")
    scheme, frame = _point_of(path, lab=lab, round_id=round_id, measurand=measurand, scheme=scheme)
    key = (scheme, round_id, lab, measurand)
    row = frame[(frame["round"] == round_id) & (frame["measurand"] == measurand)].iloc[0]
    if day < str(row["round_date"]):
        raise InputError.single(f"--date: {day} is before round {quote(round_id)} ({row['round_date']})")
    if not any(p.key() == key for p in finding_points(frame)):
        raise InputError.single(
            f"lab {quote(lab)}, round {quote(round_id)}, {quote(measurand)}: the score gave "
            f"{SIGNALS[str(row['signal'])].label() if str(row['signal']) in SIGNALS else row['signal']} and no "
            "trend rule fired there: a record is kept for a warning or action signal or a rule finding only")
    record = Investigation(scheme=scheme, round_id=round_id, lab=lab, measurand=measurand, status=status,
                           cause=cause, action=action, by=by, recorded_on=day, stored_at=now())
    label = f"lab {lab!r}, round {round_id!r} of scheme {scheme!r}, {measurand!r}"
    with open_store(path).writing() as tx:
        old = next((r for r in tx.investigations((lab,)) if r.key() == key), None)
        if old is not None and old.content() == record.content():
            return NoteOutcome(status="unchanged", message=f"{label}: the same record is archived; nothing changed")
        if old is not None:
            tx.add_audit([AuditEntry(replaced_at=record.stored_at, reason=reason, scheme=scheme, round_id=round_id,
                                     lab=lab, kind="investigation", row=_json(asdict(old)))])
        tx.put_investigation(record)
    verb = "changed (the previous record is kept in the audit table)" if old is not None else "recorded"
    return NoteOutcome(status="changed" if old is not None else "added", message=f"{label}: {status} record {verb}")


def _json(obj: object) -> str:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False)


# --------------------------------------------------------------------------- laboratories

def name_laboratory(path: str | os.PathLike[str] | None, *, scheme: str, lab: str, name: str,
                    reason: str = "laboratory name changed") -> NoteOutcome:
    """Give the lab code ``lab`` of ``scheme`` its laboratory's name (codes sharing a name are one laboratory).

    Refused: a code with no archived scores in the scheme, an empty or over-long name.
    """
    name = str(name or "").strip()
    problems = _text_problems((("--name", "participant name", name),))
    if not name:
        problems.append(Problem(message="--name: give the laboratory's name"))
    if problems:
        raise InputError(problems, summary="the laboratory's name was not stored")
    if lab_history(path, lab=lab, scheme=scheme).empty:
        raise InputError.single(f"no archived scores for lab {quote(lab)} in scheme {quote(scheme)} (labs in the "
                                f"archive: {shown_list(archived_labs(path)) or 'none'})")
    record = Laboratory(scheme=scheme, lab=lab, name=name, stored_at=now())
    label = f"lab {lab!r} of scheme {scheme!r}"
    with open_store(path).writing() as tx:
        old = next((r for r in tx.laboratories() if (r.scheme, r.lab) == (scheme, lab)), None)
        if old is not None and old.name == name:
            return NoteOutcome(status="unchanged", message=f"{label} is already {name!r}; nothing changed")
        if old is not None:
            tx.add_audit([AuditEntry(replaced_at=record.stored_at, reason=reason, scheme=scheme, round_id="",
                                     lab=lab, kind="laboratory", row=_json(asdict(old)))])
        tx.put_laboratory(record)
    return NoteOutcome(status="changed" if old is not None else "added", message=f"{label} is {name!r}")


@dataclass(frozen=True, slots=True, kw_only=True)
class LabIdentity:
    """A laboratory as the archive knows it: its name (``""`` when none was given) and its (scheme, code)
    pairs (``()`` from :func:`laboratory_codes` when no name was given)."""

    name: str
    codes: tuple[tuple[str, str], ...]


def laboratory_codes(path: str | os.PathLike[str] | None, lab: str) -> LabIdentity:
    """The laboratory ``lab`` (a code, or a name given with :func:`name_laboratory`) and all its codes."""
    with open_store(path).reading() as reader:
        labs = reader.laboratories() if reader is not None else []
    names = {r.name for r in labs if r.lab == lab} or {r.name for r in labs if r.name == lab}
    if len(names) > 1:
        raise InputError.single(f"lab code {quote(lab)} belongs to several laboratories "
                                f"({', '.join(map(quote, sorted(names)))}); give the laboratory's name")
    if not names:
        return LabIdentity(name="", codes=())
    name = names.pop()
    return LabIdentity(name=name, codes=tuple((r.scheme, r.lab) for r in labs if r.name == name))


def lab_frame(path: str | os.PathLike[str] | None, lab: str, *, scheme: str | None = None,
              since: str | None = None) -> tuple[LabIdentity, pd.DataFrame]:
    """The laboratory of ``lab`` (a code or a laboratory's name) and its history under all its codes.

    With a name recorded, the rows of each (scheme, code) of the laboratory; without, the code's rows in
    every scheme it has scores in (the identity then lists those pairs and has no name).
    """
    who = laboratory_codes(path, lab)
    codes = sorted({c for _, c in who.codes}) or [lab]
    frame = lab_history(path, lab=codes, scheme=scheme, since=since)
    if who.codes:
        pairs = set(who.codes)
        keep = [(s, c) in pairs for s, c in zip(frame["scheme"], frame["lab"])]
        frame = frame.loc[pd.Series(keep, index=frame.index, dtype=bool)].reset_index(drop=True)
    pairs_found = tuple(dict.fromkeys(zip(frame["scheme"].astype(str), frame["lab"].astype(str))))
    return LabIdentity(name=who.name, codes=tuple(sorted(pairs_found))), frame
