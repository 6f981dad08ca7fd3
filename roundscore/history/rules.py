"""A lab's scores across rounds checked: the trend rules applied to every scheme × lab × measurand series.

The rules, combined scores and the bias check are defined (with their
sources) in :mod:`roundscore.stats.trends`. They are applied to the z-like
scores (z, z′ and ζ); a series of En scores is screened only for action
signals (the score families and their limits are the score registry's,
:data:`roundscore.model.scores.SCORE_FAMILIES`). Rounds without a score (``not-scored``) are left out, so
"consecutive" means consecutive *scored* rounds. The rules run over the
whole series; a finding is reported when it fires at one of the last
``window`` scored rounds. Combined scores and the bias check use those last
``window`` scores.

This evaluation supports, and does not replace, the provider's documented
procedures, ISO/IEC 17043 and the accreditation body's rules.
"""

from __future__ import annotations

from dataclasses import dataclass
from collections.abc import Sequence
from typing import Literal

import numpy as np
import pandas as pd

from roundscore.choices import check_choice
from roundscore.errors import InputError, StatisticsError
from roundscore.model.scores import SCORE_FAMILIES, SCORE_NAMES, SCORES, FamilyName
from roundscore.stats.trends import (CUSUM_H, CUSUM_K, RUN_LENGTH, AsDict, BiasCheck, CombinedScores, CusumResult, Side,
                                     action_signals, as_series, bias_check, combined_scores, cusum, same_side_runs,
                                     two_of_three)

__all__ = ["DEFAULT_WINDOW", "DISCLAIMER", "RULE_NAMES", "RULE_SOURCES", "RuleFinding", "SeriesCheck",
           "HistoryCheck", "check_series", "check_history"]

#: Default number of most recent scored rounds a finding must fall in (the score sheets show 8).
DEFAULT_WINDOW = 8
DISCLAIMER = (
    "This evaluation supports, and does not replace, the provider's documented procedures, "
    "ISO/IEC 17043 and the accreditation body's rules.")

RuleNumber = Literal[1, 2, 3, 4]
RULE_NAMES: dict[int, str] = {
    1: "action signal",
    2: "two of three beyond 2 on one side",
    3: f"{RUN_LENGTH} in a row on one side",
    4: "CUSUM",
}
RULE_SOURCES: dict[int, str] = {
    1: "ISO 13528:2022, z-score action signal",
    2: "Western Electric Statistical Quality Control Handbook (1956), zone A rule",
    3: "Nelson (1984) J. Qual. Technol. 16:237, test 2; ISO 7870-2:2013 test 2",
    4: "Page (1954) Biometrika 41:100; k = 0.5, h = 4 after Montgomery, Introduction to "
       "Statistical Quality Control (from memory)",
}


# --------------------------------------------------------------------------- series and history

@dataclass(frozen=True, slots=True, kw_only=True)
class RuleFinding(AsDict):
    """A rule that fired in a series.

    Attributes
    ----------
    rule : int
        1 action signal, 2 two of three beyond 2, 3 run on one side, 4 CUSUM.
    name, source : str
        The rule's name and its published source.
    positions : tuple of int
        Positions in the series where the rule fires.
    rounds, dates : tuple of str
        The rounds and round dates at those positions.
    side : {"high", "low"} or None
        Direction, for rules that have one.
    message : str
        What fired, in words.
    """

    rule: int
    name: str
    source: str
    positions: tuple[int, ...]
    rounds: tuple[str, ...]
    dates: tuple[str, ...]
    side: Side | None
    message: str


@dataclass(frozen=True, slots=True, kw_only=True)
class SeriesCheck(AsDict):
    """The rules, combined scores and bias check of one scheme x lab x measurand series.

    Attributes
    ----------
    scheme, lab, measurand : str
        The series.
    family : {"z-like", "en"}
        z, z' and zeta are checked together; En only for action signals.
    rounds, dates : tuple of str
        Scored rounds in order.
    scores : tuple of str
        The score name of each round.
    values : numpy.ndarray
        The score values.
    window : int
        Number of most recent rounds the findings, combined scores and bias check use.
    findings : tuple of RuleFinding
        Rules that fired within the window.
    cusum : CusumResult or None
        The CUSUM over the whole series (z-like series only).
    combined : CombinedScores or None
        Over the window (z-like series only).
    bias : BiasCheck or None
        Over the window, when there are enough scores.
    notes : tuple of str
        What was not computed, and why.
    """

    scheme: str
    lab: str
    measurand: str
    family: FamilyName
    rounds: tuple[str, ...]
    dates: tuple[str, ...]
    scores: tuple[str, ...]
    values: np.ndarray
    window: int
    findings: tuple[RuleFinding, ...]
    cusum: CusumResult | None
    combined: CombinedScores | None
    bias: BiasCheck | None
    notes: tuple[str, ...]

    @property
    def fired(self) -> bool:
        """Whether any rule fired within the window."""
        return bool(self.findings)


#: Both sides of zero, in the order findings are listed.
_SIDES: tuple[Side, Side] = ("high", "low")


def _finding(rule: int, positions: Sequence[int], side: Side | None, detail: str,
             rounds: Sequence[str], dates: Sequence[str]) -> RuleFinding:
    pos = tuple(int(p) for p in positions)
    where = ", ".join(f"{rounds[p]} ({dates[p]})" for p in pos)
    return RuleFinding(rule=rule, name=RULE_NAMES[rule], source=RULE_SOURCES[rule], positions=pos,
                       rounds=tuple(rounds[p] for p in pos), dates=tuple(dates[p] for p in pos),
                       side=side, message=f"rule {rule} ({RULE_NAMES[rule]}): {detail} at {where}")


def check_series(values: Sequence[float] | np.ndarray, *, rounds: Sequence[str],
                 dates: Sequence[str], scores: Sequence[str] | None = None,
                 family: FamilyName = "z-like", window: int | None = DEFAULT_WINDOW,
                 scheme: str = "", lab: str = "", measurand: str = "") -> SeriesCheck:
    """Apply rules 1-4, combined scores and the bias check to one series.

    Parameters
    ----------
    values : array_like
        Score values in round order, unscored rounds left out.
    rounds, dates : sequence of str
        Round identifiers and dates, aligned with ``values``.
    scores : sequence of str, optional
        Score names (default all "z").
    family : {"z-like", "en"}
        "en": only rule 1 at ``|En| >= 1``.
    window : int or None
        Report findings at the last ``window`` points; None: the whole series.
    """
    arr = as_series(values)
    if len(rounds) != arr.size or len(dates) != arr.size:
        raise StatisticsError("rounds and dates must have one entry per score")
    fam = SCORE_FAMILIES[check_choice("family", family, FamilyName)]
    if window is not None and window < 1:
        raise InputError.single("window: must be at least 1", value=window)
    n = int(arr.size)
    w = n if window is None else min(int(window), n)
    first = n - w
    rounds, dates = [str(r) for r in rounds], [str(d) for d in dates]
    recent = lambda positions: [p for p in positions if p >= first]  # noqa: E731
    found: list[RuleFinding] = []
    notes: list[str] = []
    hits = recent(action_signals(arr, limit=fam.action, strict=fam.strict).tolist())
    if hits:
        found.append(_finding(1, hits, None, fam.action_text, rounds, dates))
    cus = combined = bias = None
    if not fam.trend_rules:
        notes.append(f"rules 2-4, combined scores and the bias check are not applied to {fam.title} "
                     "(they assume a standard-normal score)")
    else:
        warning = fam.warning if fam.warning is not None else fam.action  # z-like: 2
        for side in _SIDES:
            pos = recent([p for p, s in two_of_three(arr, limit=warning) if s == side])
            if pos:
                found.append(_finding(2, pos, side, f"two of three {'above +' if side == 'high' else 'below -'}"
                                      f"{warning:g}", rounds, dates))
        for start, end, side in same_side_runs(arr):
            pos = recent(range(start + RUN_LENGTH - 1, end + 1))
            if pos:
                found.append(_finding(3, pos, side, f"{end - start + 1} scores in a row "
                                      f"{'above' if side == 'high' else 'below'} 0 from "
                                      f"{rounds[start]}", rounds, dates))
        cus = cusum(arr)
        for side in _SIDES:
            pos = recent([p for p, s in cus.alarms if s == side])
            if pos:
                found.append(_finding(4, pos, side, f"{'upper' if side == 'high' else 'lower'} "
                                      f"CUSUM above h = {CUSUM_H:g} (k = {CUSUM_K:g})",
                                      rounds, dates))
        # Combined scores only where a rule fired (README: they are a second look at a finding, never a
        # verdict on their own; IUPAC harmonized protocol 2006 advises against judging a lab by them).
        combined = combined_scores(arr[first:]) if found else None
        try:
            bias = bias_check(arr[first:])
        except StatisticsError as exc:
            notes.append(f"bias check not computed: {exc}")
    found.sort(key=lambda f: (f.rule, f.positions))
    return SeriesCheck(scheme=scheme, lab=lab, measurand=measurand, family=family,
                       rounds=tuple(rounds), dates=tuple(dates),
                       scores=tuple(scores) if scores is not None else ("z",) * n, values=arr,
                       window=w, findings=tuple(found), cusum=cus, combined=combined, bias=bias,
                       notes=tuple(notes))


@dataclass(frozen=True, slots=True, kw_only=True)
class HistoryCheck(AsDict):
    """Every series checked.

    Attributes
    ----------
    series : tuple of SeriesCheck
        One per scheme x lab x measurand x score family, sorted.
    window : int or None
        The window used.
    disclaimer : str
        :data:`DISCLAIMER`.
    """

    series: tuple[SeriesCheck, ...]
    window: int | None
    disclaimer: str = DISCLAIMER

    @property
    def fired(self) -> bool:
        """Whether any rule fired in any series."""
        return any(s.fired for s in self.series)


def check_history(history: pd.DataFrame, *, window: int | None = DEFAULT_WINDOW) -> HistoryCheck:
    """Run :func:`check_series` over every series of an archive history frame.

    Parameters
    ----------
    history : pandas.DataFrame
        As returned by :func:`roundscore.history.store.lab_history` (columns scheme,
        lab, measurand, round, round_date, score, score_value, signal), ordered by date.
    window : int or None
        See :func:`check_series`.
    """
    need = ["scheme", "lab", "measurand", "round", "round_date", "score", "score_value", "signal"]
    missing = [c for c in need if c not in history.columns]
    if missing:
        raise InputError.single(f"history table: missing columns: {', '.join(missing)}")
    scored = history[(history["signal"] != "not-scored")
                     & np.isfinite(pd.to_numeric(history["score_value"], errors="coerce"))]
    unknown = sorted(set(scored["score"]) - set(SCORE_NAMES))
    if unknown:
        raise InputError.single(f"unknown score names {unknown}; allowed: {', '.join(SCORE_NAMES)}")
    scored = scored.assign(family=scored["score"].map({n: k.family for n, k in SCORES.items()}))
    scored = scored.sort_values(["round_date", "round"], kind="stable")
    out = []
    for (scheme, lab, measurand, family), part in scored.groupby(
            ["scheme", "lab", "measurand", "family"], sort=True):
        out.append(check_series(part["score_value"].to_numpy(float),
                                rounds=part["round"].astype(str).tolist(),
                                dates=part["round_date"].astype(str).tolist(),
                                scores=part["score"].tolist(), family=family, window=window,
                                scheme=str(scheme), lab=str(lab), measurand=str(measurand)))
    return HistoryCheck(series=tuple(out), window=window)
