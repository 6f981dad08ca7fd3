"""Test-item homogeneity and stability in the round: run the checks, apply the consequences.

A measurand's ``[measurand.NAME]`` table in ``round.toml`` may name a
homogeneity table (``homogeneity = "homogeneity.csv"``) and a stability table
(``stability = "stability.csv"``). This stage takes them as read by intake,
runs :func:`roundscore.stats.items.homogeneity` and
:func:`roundscore.stats.items.stability` at the round's σ_pt, and applies the
consequence chosen with ``item_checks``:

``"uncertainty"`` (default)
    u(x_pt)² = u_char² + u_hom² + u_stab², with u_hom = s_s and
    u_stab = |ȳ₁ − ȳ₂|/√3.
``"widen-sigma"``
    σ_pt' = √(σ_pt² + s_s²).
``"both"``
    both of the above.
``"report"``
    the checks are reported; σ_pt and u(x_pt) are unchanged.

The chosen consequence is applied whether or not the check passed (it is the
provider's documented choice, made before the data are seen); a failed check
does not stop scoring, it heads the summary and every lab sheet through
:attr:`roundscore.model.evaluation.RoundEvaluation.failed_checks`, and
``roundscore score --strict`` exits 1.

The tables are read and validated by :mod:`roundscore.intake.items` before the
evaluation runs (their layouts are described there); this stage reads no file.

The results support, and do not replace, the provider's documented
procedures, ISO/IEC 17043 and the accreditation body's rules.

References
----------
.. [1] ISO 13528:2015, Annex B (homogeneity and stability), clause 7 (the
   uncertainty of the assigned value); clause numbers from memory.
.. [2] M. Thompson, S. L. R. Ellison, R. Wood, "The International Harmonized
   Protocol for the proficiency testing of analytical chemistry
   laboratories", Pure Appl. Chem. 78 (2006) 145-196, Section 3.11 (from memory).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from roundscore.errors import InputError, StatisticsError
from roundscore.model.items import (ITEMS_COLUMNS, ItemConsequence, ItemOutcome, ItemTable, StabilityChoice,
                                    check_item_choice)
from roundscore.model.round import MeasurandSettings
from roundscore.stats import items as st

__all__ = ["apply_item_checks"]


def _set_values(table: ItemTable, set_name: str) -> tuple[np.ndarray, int, float, str]:
    """The values entering the stability mean of one set, with item count, replicates per item and a word.

    With two or more items in the set the item means are used (the item is
    the sampling unit, so u = SD of the item means / √g); with one item its
    replicates are used.
    """
    assert table.sets is not None
    mask = np.array([s == set_name for s in table.sets])
    vals = table.values[mask]
    its = [it for it, keep in zip(table.items, mask) if keep]
    order = list(dict.fromkeys(its))
    if len(order) < 2:
        return vals, 1, float(vals.size), "replicates of the single item"
    codes = np.array([order.index(it) for it in its])
    counts = np.bincount(codes)
    shift = float(np.median(vals))
    means = shift + np.bincount(codes, weights=vals - shift) / counts
    return means, len(order), float(np.mean(counts)), "item means"


def _wrap(exc: StatisticsError, table: ItemTable, m: MeasurandSettings) -> InputError:
    return InputError.single(f"the {table.kind} check cannot be computed: {exc}", file=table.file,
                             measurand=m.name)


def _fmt(x: float) -> str:
    return f"{x:.4g}"


def _homogeneity_row(m: MeasurandSettings, h: st.HomogeneityResult, extra: list[str]) -> dict[str, Any]:
    return {
        "measurand": m.name, "check": "homogeneity", "g": h.g, "m": h.m, "mean": h.mean, "s_x": h.s_x,
        "s_w": h.s_w, "s_s": h.s_s, "criterion": h.criterion, "allowed": h.allowed, "passed": bool(h.passed),
        "note": "; ".join([*h.notes, *extra]),
    }


def _stability_row(m: MeasurandSettings, s: st.StabilityResult, g: int, reps: float,
                   names: tuple[str, str], extra: list[str]) -> dict[str, Any]:
    allowed = s.criterion if s.criterion_used == "simple" else s.allowed_expanded
    head = (f"mean = ȳ1 − ȳ2 = {_fmt(s.difference)}: ȳ1 = {_fmt(s.mean_first)} (set {names[0]!r}), "
            f"ȳ2 = {_fmt(s.mean_second)} (set {names[1]!r})")
    return {
        "measurand": m.name, "check": "stability", "g": g, "m": reps, "mean": s.difference,
        "s_x": None, "s_w": None, "s_s": None, "criterion": s.criterion, "allowed": allowed,
        "passed": bool(s.passed), "note": "; ".join([head, *s.notes, *extra]),
    }


def _not_run_row(m: MeasurandSettings, kind: str, why: str) -> dict[str, Any]:
    return {c: None for c in ITEMS_COLUMNS} | {"measurand": m.name, "check": kind, "passed": False,
                                               "note": f"not evaluated: {why}"}


def apply_item_checks(m: MeasurandSettings, tables: Mapping[str, ItemTable], *, sigma_pt: float,
                      u_char: float) -> ItemOutcome:
    """Run the homogeneity and stability checks of measurand ``m`` and apply the consequence chosen.

    Parameters
    ----------
    m : MeasurandSettings
        ``m.homogeneity`` / ``m.stability`` name the tables, ``m.item_checks``
        the consequence, ``m.stability_criterion`` the stability verdict.
    tables : mapping of str to ItemTable
        The measurand's tables as read by intake
        (:func:`roundscore.intake.items.read_item_tables`), by kind
        ("homogeneity", "stability"): one for each kind the measurand names.
    sigma_pt : float
        σ_pt as set for the round, before any widening; the criteria use it
        (also when σ_pt is the participants' robust SD). NaN when it could not
        be set: the tables are still validated, the checks are reported as not
        evaluated (and so not passed).
    u_char : float
        u(x_pt) from the characterisation (reference value or consensus).

    Returns
    -------
    ItemOutcome

    Raises
    ------
    InputError
        When a check cannot be computed from a table.
    ValueError
        When a table the measurand names is not in ``tables`` (it was not read).

    Notes
    -----
    Assumptions, stated:

    - u_hom = s_s of the homogeneity check; where s_s was truncated to 0
      (s_x² < s_w²/m) u_hom is 0, and the notes say so.
    - u_stab = |ȳ₁ − ȳ₂|/√3 (the difference as half-width of a rectangular
      distribution), whether or not the stability check passed.
    - The consequence is applied whether or not the checks passed: it is
      the provider's documented choice. Widening needs a homogeneity table.
    - In a stability table each set's mean is the mean of its item means
      (two or more items) or of its replicates (one item); ``u`` in the
      table is that mean's standard uncertainty. With ``stability_criterion
      = "auto"`` the expanded criterion gives the verdict when the table
      gives ``u`` for a set, otherwise the simple one; both are reported.

    References
    ----------
    .. [1] ISO 13528:2015, B.2-B.6 and clause 7 (from memory).
    """
    consequence: ItemConsequence = check_item_choice(f"measurand.{m.name}.item_checks", m.item_checks,
                                                     ItemConsequence)  # type: ignore[assignment]  # checked: one of the Literal's values
    choice: StabilityChoice = check_item_choice(f"measurand.{m.name}.stability_criterion",
                                                getattr(m, "stability_criterion", "auto"),
                                                StabilityChoice)  # type: ignore[assignment]  # checked: one of the Literal's values
    missing = [kind for kind in ("homogeneity", "stability") if getattr(m, kind) is not None and kind not in tables]
    if missing:
        raise ValueError(f"measurand {m.name}: its {' and '.join(missing)} table was not read; read the item "
                         "tables first (roundscore.intake.items.read_item_tables)")
    tables = {kind: tables[kind] for kind in ("homogeneity", "stability") if getattr(m, kind) is not None}

    notes: list[str] = []
    audit: list[tuple[str, str, str, str, str]] = []
    rows: list[dict[str, Any]] = []
    for t in tables.values():
        notes += list(t.notes)
    sigma_ok = bool(np.isfinite(sigma_pt) and sigma_pt > 0)
    hom_t, stab_t = tables.get("homogeneity"), tables.get("stability")
    if not sigma_ok:
        why = "σ_pt could not be set, so the item criteria cannot be applied"
        for kind in tables:
            rows.append(_not_run_row(m, kind, why))
            notes.append(f"{kind} check {why}")
            audit.append((m.name, "", kind, "not evaluated", why))
    hom = _homogeneity(m, hom_t, sigma_pt) if sigma_ok and hom_t is not None else None
    run = _stability(m, stab_t, sigma_pt, choice) if sigma_ok and stab_t is not None else None
    stab = run.result if run is not None else None
    names = run.names if run is not None else None

    u_hom = hom.s_s if hom is not None else 0.0
    u_stab = stab.u_stab if stab is not None else 0.0
    s_new, u_new, widened = sigma_pt, u_char, False
    effect: list[str] = []
    if sigma_ok:
        s_new, u_new, widened = _consequence(m, consequence, hom, stab, sigma_pt=sigma_pt, u_char=u_char,
                                             u_hom=u_hom, u_stab=u_stab, effect=effect)
    if hom is not None:
        line = _homogeneity_line(hom, notes)
        audit.append((m.name, "", "homogeneity", "passed" if hom.passed else "check failed", line))
        rows.append(_homogeneity_row(m, hom, effect))
    if stab is not None and names is not None and run is not None:
        verdict = "passed" if stab.passed else "FAILED"
        allowed = stab.criterion if stab.criterion_used == "simple" else stab.allowed_expanded
        line = (f"stability ({names[0]!r} vs {names[1]!r}): |ȳ1 − ȳ2| = {_fmt(abs(stab.difference))}, "
                f"allowance = {_fmt(allowed)} ({stab.criterion_used} criterion): {verdict}")
        notes.append(line)
        audit.append((m.name, "", "stability", "passed" if stab.passed else "check failed", line))
        rows.append(_stability_row(m, stab, run.items, run.replicates, names, [run.how, *effect]))
    notes += effect
    if effect:
        action = ("σ_pt widened and u(x_pt) increased" if widened and u_new != u_char
                  else "σ_pt widened" if widened else "u(x_pt) increased" if u_new != u_char
                  else "no change")
        audit.append((m.name, "", "item checks", action, "; ".join(effect)))
    return ItemOutcome(
        sigma_pt=float(s_new), u_assigned=float(u_new), sigma_pt_before=float(sigma_pt), u_char=float(u_char),
        consequence=consequence, homogeneity=hom, stability=stab, homogeneity_table=hom_t,
        stability_table=stab_t, stability_sets=names, u_hom=float(u_hom), u_stab=float(u_stab),
        widened=widened, rows=tuple(rows), notes=tuple(notes), audit=tuple(audit),
    )


def _homogeneity(m: MeasurandSettings, table: ItemTable, sigma_pt: float) -> st.HomogeneityResult:
    try:
        return st.homogeneity(list(table.items), table.values, sigma_pt)
    except StatisticsError as exc:
        raise _wrap(exc, table, m) from None


@dataclass(frozen=True, slots=True)
class _StabilityRun:
    """The stability check of a measurand, with what its row of the items table shows."""

    result: st.StabilityResult
    names: tuple[str, str]  # the first and second set
    items: int  # items (or replicates of a single item) of both sets
    replicates: float  # the mean of the two sets' replicate numbers
    how: str  # how each set's mean was taken, and the criterion choice


def _stability(m: MeasurandSettings, table: ItemTable, sigma_pt: float, choice: StabilityChoice) -> _StabilityRun:
    names = (table.set_names[0], table.set_names[1])
    v1, g1, r1, how = _set_values(table, names[0])
    v2, g2, r2, _ = _set_values(table, names[1])
    try:
        result = st.stability(v1, v2, sigma_pt, u_first=table.set_u.get(names[0]),
                              u_second=table.set_u.get(names[1]), criterion=choice)
    except StatisticsError as exc:
        raise _wrap(exc, table, m) from None
    return _StabilityRun(result=result, names=names, items=g1 + g2, replicates=(r1 + r2) / 2.0,
                         how=f"each set's mean from its {how}; criterion choice {choice!r}")


def _consequence(m: MeasurandSettings, consequence: ItemConsequence, hom: st.HomogeneityResult | None,
                 stab: st.StabilityResult | None, *, sigma_pt: float, u_char: float, u_hom: float, u_stab: float,
                 effect: list[str]) -> tuple[float, float, bool]:
    """σ_pt and u(x_pt) after the consequence chosen, and whether σ_pt was widened; ``effect`` says why."""
    s_new, u_new, widened = sigma_pt, u_char, False
    if consequence in ("uncertainty", "both") and (hom is not None or stab is not None):
        if np.isfinite(u_char):
            u_new = st.item_uncertainty(u_char, u_hom, u_stab)
            effect.append(
                f"u(x_pt) = √(u_char² + u_hom² + u_stab²) = √({_fmt(u_char)}² + {_fmt(u_hom)}² + "
                f"{_fmt(u_stab)}²) = {_fmt(u_new)} (item_checks = {consequence!r})")
        else:
            effect.append("u_hom and u_stab not added: u(x_pt) could not be set")
        if hom is not None and hom.s_s_truncated:
            effect.append("s_s was truncated to 0, so u_hom = 0")
        if m.is_consensus:
            effect.append("the consensus value's u already reflects part of the between-item spread; "
                          "adding u_hom and u_stab is the cautious choice")
    if consequence in ("widen-sigma", "both"):
        if hom is None:
            effect.append(f"σ_pt not widened: item_checks = {consequence!r} needs a homogeneity table")
        elif hom.s_s > 0:
            s_new = st.widened_sigma(sigma_pt, hom.s_s)
            widened = True
            effect.append(f"σ_pt widened to √(σ_pt² + s_s²) = √({_fmt(sigma_pt)}² + {_fmt(hom.s_s)}²) "
                          f"= {_fmt(s_new)} (item_checks = {consequence!r})")
        else:
            effect.append("σ_pt not widened: s_s was truncated to 0" if hom.s_s_truncated
                          else "σ_pt not widened: s_s = 0")
        if m.sigma_pt.kind == "robust-sd" and widened:
            effect.append("σ_pt from the participants' robust SD already holds the between-item spread; "
                          "widening counts it again (the criteria used the σ_pt before widening)")
    if consequence == "report":
        effect.append("item_checks = 'report': σ_pt and u(x_pt) are not changed by the item checks")
    return s_new, u_new, widened


def _homogeneity_line(hom: st.HomogeneityResult, notes: list[str]) -> str:
    """The homogeneity verdict in one line (also the audit's), its notes added to ``notes``."""
    verdict = "passed" if hom.passed else "FAILED"
    line = (f"homogeneity ({hom.g} items × {hom.m:g}): s_s = {_fmt(hom.s_s)}, 0.3 σ_pt = {_fmt(hom.criterion)}, "
            f"expanded allowance = {_fmt(hom.allowed)}: {verdict}")
    if hom.passed and not hom.passed_simple:
        line += " (on the expanded criterion only; the simple one is not met)"
    notes.append(line)
    if hom.s_s_truncated:
        notes.append("homogeneity: s_x̄² < s_w²/m, s_s truncated to 0")
    if hom.precision_warning:
        notes.append(f"homogeneity: {hom.precision_warning}")
    if hom.cochran_signal in ("straggler", "outlier"):
        notes.append(f"homogeneity: Cochran's test flags item {hom.cochran_item!r} as a {hom.cochran_signal}")
    return line
