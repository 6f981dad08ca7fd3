"""The round's evaluation: computed once, read by every writer; pure (no file is read here).

``evaluate(round, table, participants, items=)`` takes the validated
settings, results and item tables (read by :mod:`roundscore.intake`) and
returns a :class:`~roundscore.model.evaluation.RoundEvaluation` holding, per
measurand, the lab means, the robust statistics, the assigned value and its
uncertainty, σ_pt, every lab's scores and signals, and an audit trail of
every decision (what was left out and why). Writers never recompute a
statistic. The public :func:`roundscore.evaluation.evaluate` reads the item tables the
round names and then calls this function.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from roundscore.errors import StatisticsError
from roundscore.evaluation import consensus
from roundscore.evaluation.items import apply_item_checks
from roundscore.evaluation.precision import MeasurandPart, assemble, drop_choice, measurand_part, replicate_rows
from roundscore.evaluation.qualitative import qualitative_stage
from roundscore.evaluation.uncertainty import uncertainty_stage
from roundscore.model.evaluation import (AUDIT_COLUMNS, SCORE_COLUMNS, STATISTICS_COLUMNS, MeasurandResult,
                                         RoundEvaluation, lab_order_key)
from roundscore.model.inputs import Participant
from roundscore.model.items import ITEMS_COLUMNS, ItemTable, ItemTables
from roundscore.model.round import MeasurandSettings, Round
from roundscore.model.scores import CENSORED_ACTION, SCORES, ScoreInputs
from roundscore.model.table import ResultTable
from roundscore.model.units import UnitError, mass_fraction
from roundscore.ranges import sigma_relative_problem
from roundscore.stats import robust, scores as sc, sigma as sg
from roundscore.stats.limits import within
from roundscore.support.parallel import resolve_jobs, run_batches, shared

__all__ = ["evaluate", "check_scorable", "U_CHECK_FACTOR", "DEFAULT_K"]

#: u(x_pt) is negligible when ≤ 0.3 σ_pt (ISO 13528 §9.2.1).
U_CHECK_FACTOR = 0.3
#: Coverage factor assumed when a lab gives U without k (common practice: k = 2 for about 95 %).
DEFAULT_K = 2.0


def _lab_tables(f: pd.DataFrame, names: list[str], all_labs: list[str]) -> dict[str, pd.DataFrame]:
    """Per-lab summary of each measurand's replicates, for every lab (vectorised over the whole table).

    A lab's result is the mean of its numeric replicates. If any replicate is
    censored the result is treated as censored (limit: the largest "<" limit,
    or the smallest ">" limit), with a reason when numeric replicates were
    also given. The lab's u, U, k and method are the first given for that
    lab and measurand; u = U/k (k = 2 when not given) when only U is.
    ``f`` holds the result table's rows (of these measurands, or more).
    """
    keys = ["measurand", "lab"]
    idx = pd.MultiIndex.from_product([names, all_labs], names=keys)
    # Each row's (measurand, lab) cell as one integer, its place in ``idx`` (the text columns are matched once,
    # not once per grouping); a measurand the round does not name (or a lab not listed) gets -1 and no cell.
    meas = pd.Index(names).get_indexer(pd.Index(f["measurand"].to_numpy(dtype=object)))
    lab = pd.Index(all_labs).get_indexer(pd.Index(f["lab"].to_numpy(dtype=object)))
    meas, lab = np.asarray(meas, dtype=np.int64), np.asarray(lab, dtype=np.int64)
    cell = np.where((meas >= 0) & (lab >= 0), meas * len(all_labs) + lab, -1)
    places = np.arange(len(idx))
    status = f["status"].to_numpy(dtype=object)
    value_rows = f[status == "value"]
    vals = value_rows["value"].groupby(cell[status == "value"], sort=False)
    agg = pd.DataFrame({"n_values": vals.count(), "mean": vals.mean(), "sd": vals.std(ddof=1)}).reindex(places)
    on = status == "censored"
    cens_rows = f[on]
    cg = cens_rows.groupby(cell[on], sort=False)
    cens = pd.DataFrame({
        "n_cens": cg.size(), "relation": cg["relation"].first(),
        "lim_max": cg["limit"].max(), "lim_min": cg["limit"].min(),
    }).reindex(places)
    firsts = f[["u", "U", "k", "method"]].groupby(cell, sort=False).first().reindex(places)
    n_val = agg["n_values"].fillna(0).astype(int).to_numpy()
    n_cens = cens["n_cens"].fillna(0).astype(int).to_numpy()
    is_cens = n_cens > 0
    is_val = (n_val > 0) & ~is_cens
    rel = cens["relation"].to_numpy(dtype=object)
    lim = np.where(rel == ">", cens["lim_min"].to_numpy(float), cens["lim_max"].to_numpy(float))
    status = np.where(is_cens, "censored", np.where(is_val, "value", "not-reported"))
    text = np.full(len(idx), "", dtype=object)
    text[is_cens] = [f"{r}{v:g}" if np.isfinite(v) else f"{r}limit not given"
                     for r, v in zip(rel[is_cens].tolist(), lim[is_cens].tolist())]
    u = firsts["u"].to_numpy(float)
    U = firsts["U"].to_numpy(float)
    k = firsts["k"].to_numpy(float)
    u = np.where(np.isnan(u) & np.isfinite(U), U / np.where(np.isfinite(k), k, DEFAULT_K), u)
    reason = np.where(is_cens & (n_val > 0), "some replicates censored: the result is treated as censored", "")
    out = pd.DataFrame({
        "measurand": idx.get_level_values(0), "lab": idx.get_level_values(1),
        "n_replicates": np.where(is_cens, n_val + n_cens, np.where(is_val, n_val, 0)),
        "mean": np.where(is_val, agg["mean"].to_numpy(float), np.nan),
        "sd": np.where(is_val, agg["sd"].to_numpy(float), np.nan),
        # Types fixed by the table, not inferred from the values: the same for any batch of measurands.
        "status": status, "relation": pd.Series(np.where(is_cens, rel, None), dtype=object),  # type: ignore[call-overload, arg-type]  # numpy's stubs refuse the None fill
        "limit": np.where(is_cens, lim, np.nan),
        "u": u, "U": U, "k": k, "method": firsts["method"].array,
        "result_text": text, "used": False, "reason": reason,
    })
    if not len(out):
        return {}
    body, step = out.drop(columns="measurand"), len(all_labs)  # measurand-major: one slice per measurand
    return {str(n): body.iloc[i * step:(i + 1) * step].reset_index(drop=True) for i, n in enumerate(names)}


def _assign(m: MeasurandSettings, est, med, made_v, p, alt) -> tuple[float, float, str, list[str]]:
    notes: list[str] = []
    if not m.is_consensus:
        return float(m.assigned), float(m.u_assigned or 0.0), "reference value stated in the round file", notes
    if p < 3:
        notes.append(f"only {p} usable result(s): a consensus value needs at least 3; no scores for this measurand")
        return np.nan, np.nan, "consensus (not computable)", notes
    other = consensus.assign(m, alt, p)  # q-hampel, kernel-mode (roundscore.evaluation.consensus)
    if other is not None:
        return other
    if m.assigned == "median":
        u = robust.CONSENSUS_U_FACTOR * made_v / np.sqrt(p)
        return med, u, f"median of {p} lab means; u = 1.25·MADe/√p", notes
    return est.mean, est.u_mean, f"robust mean (Algorithm A) of {p} lab means; u = 1.25·s*/√p", notes


def _sigma(m: MeasurandSettings, est, x_pt: float, qh=None) -> tuple[float, str, list[str]]:
    spec = m.sigma_pt
    if spec.kind == "q-method":
        if qh is None or not qh.sd > 0:
            return np.nan, spec.describe(), ["σ_pt from the Q method cannot be set (too few results or zero spread)"]
        return qh.sd, spec.describe(), []
    if spec.kind == "fixed":
        return spec.fixed(), spec.describe(), []
    if spec.kind == "precision":
        return sg.sigma_from_precision(*spec.experiment()), spec.describe(), []
    if spec.kind == "robust-sd":
        if est is None or not est.sd > 0:
            return np.nan, spec.describe(), ["σ_pt from the robust SD cannot be set (too few results or zero spread)"]
        return est.sd, spec.describe(), []
    # Horwitz–Thompson at the assigned value.
    try:
        mf = mass_fraction(m.unit)
    except UnitError as exc:
        return np.nan, spec.describe(), [str(exc)]
    if not x_pt > 0:
        return np.nan, spec.describe(), ["the Horwitz function needs an assigned value > 0"]
    if x_pt * mf > 1:
        return np.nan, spec.describe(), [f"the assigned value {x_pt:.6g} {m.unit} is a mass fraction of "
                                         f"{x_pt * mf:.3g}, above 1 (100 %): no Horwitz σ_pt; check the unit"]
    return float(sg.horwitz_thompson(x_pt * mf) / mf), f"{spec.describe()} at x_pt = {x_pt:.6g} {m.unit}", []


def _measurand(rnd: Round, labs: pd.DataFrame, m: MeasurandSettings, est: robust.RobustEstimate | None,
               audit: list[tuple], tables: dict[str, ItemTable], qh=None) -> tuple[MeasurandResult, Any]:
    labs = labs.copy()
    for e in rnd.exclusions:
        if e.measurand in (None, m.name):
            hit = labs["lab"] == e.lab
            labs.loc[hit, "reason"] = f"excluded by the coordinator: {e.reason}"
            labs.loc[hit, "excluded"] = True
            labs.loc[hit, "withhold"] = not e.scored
            if not e.scored:
                labs.loc[hit, "reason"] = f"withheld by the coordinator: {e.reason}"
            if hit.any():
                audit.append((m.name, e.lab, "exclusion", "left out of the statistics", e.reason))
                if not e.scored:
                    audit.append((m.name, e.lab, "exclusion", "score withheld: no score in any output",
                                  e.reason))
    if "excluded" not in labs:
        labs["excluded"] = False
    if "withhold" not in labs:
        labs["withhold"] = False
    labs["excluded"] = labs["excluded"].fillna(False).astype(bool)
    labs["withhold"] = labs["withhold"].fillna(False).astype(bool)
    status, codes = labs["status"].to_numpy(dtype=object), labs["lab"].to_numpy(dtype=object)
    in_use = (status == "value") & ~labs["excluded"].to_numpy(bool)
    if m.consensus_labs is not None:  # a consensus of the labs the round file names
        in_use &= labs["lab"].isin(m.consensus_labs).to_numpy()
    labs["used"] = in_use
    cens = status == "censored"
    audit.extend((m.name, lab, "import", "left out of the statistics", f"censored result {t}")
                 for lab, t in zip(codes[cens], labs["result_text"].to_numpy(dtype=object)[cens]))
    audit.extend((m.name, lab, "import", "not scored", "no result reported") for lab in codes[status == "not-reported"])
    used = labs["mean"].to_numpy()[in_use]
    p = len(used)
    med = float(np.median(used)) if p else np.nan
    made_v = float(robust.made(used)) if p else np.nan
    niqr_v = float(robust.niqr(used)) if p else np.nan
    kern, knote = consensus.kernel_for(m, used, lambda x: _sigma(m, est, x, qh)[0], med)
    alt = consensus.Alternatives(q_hampel=qh, kernel=kern, kernel_note=knote)
    x_pt, u_pt, a_src, notes = _assign(m, est, med, made_v, p, alt)
    if m.consensus_labs is not None and (missing := sorted(set(m.consensus_labs) - set(labs.loc[labs["used"], "lab"]))):
        notes.append(f"{len(missing)} of the {len(m.consensus_labs)} labs named for the consensus gave no usable "
                     f"result: {', '.join(missing[:10])}")
    if est is not None and est.note and not (m.is_consensus and u_pt == 0):
        notes.append(f"Algorithm A: {est.note}")
    findings = _zero_spread(m, u_pt, p, audit)
    notes += [ZERO_SPREAD_NOTE] if findings else []
    s_pt, s_src, s_notes = _sigma(m, est, x_pt if np.isfinite(x_pt) else np.nan, qh)
    notes += s_notes
    item_checks = None
    if m.homogeneity is not None or m.stability is not None:
        # ISO 13528 Annex B: the item checks may widen σ_pt and add u_hom, u_stab to u(x_pt).
        item_checks = apply_item_checks(m, tables, sigma_pt=s_pt, u_char=u_pt)
        s_pt, u_pt = item_checks.sigma_pt, item_checks.u_assigned
        notes += list(item_checks.notes)
        audit.extend(item_checks.audit)
    if np.isfinite(x_pt) and np.isfinite(s_pt) and s_pt > 0:
        why = sigma_relative_problem(s_pt, x_pt)  # roundscore.ranges: a σ_pt below the results' resolution
        if why is not None:
            notes.append(f"{why}; no scores for this measurand")
            audit.append((m.name, "", "sigma_pt", "not usable", why))
            s_pt = np.nan
    u_ok = None
    if np.isfinite(u_pt) and np.isfinite(s_pt) and not findings:
        u_ok = bool(within(u_pt, U_CHECK_FACTOR * s_pt))  # roundscore.stats.limits: on the limit passes
        if not u_ok:
            msg = (f"u(x_pt) = {u_pt:.3g} exceeds 0.3 σ_pt = {U_CHECK_FACTOR * s_pt:.3g}: the uncertainty of the "
                   "assigned value is not negligible")
            if m.score == "z":
                msg += "; consider z′ (score = \"z-prime\")"
            notes.append(msg)
            audit.append((m.name, "", "assigned value", "check failed", msg))
    audit.append((m.name, "", "assigned value", "set", f"{a_src}: x_pt = {x_pt:.6g}, u(x_pt) = {u_pt:.3g}"))
    audit.append((m.name, "", "sigma_pt", "set", f"{s_src}: σ_pt = {s_pt:.6g}") if np.isfinite(s_pt) else
                 (m.name, "", "sigma_pt", "not set", f"{s_src}: no σ_pt, so no scores (see the notes)"))
    return MeasurandResult(
        settings=m, labs=labs, p=p, robust=est, median=med, made=made_v, niqr=niqr_v,
        assigned=x_pt, u_assigned=u_pt, sigma_pt=s_pt, assigned_source=a_src, sigma_source=s_src,
        u_check_passed=u_ok, notes=tuple(notes), item_checks=item_checks, findings=tuple(findings),
    ), alt


#: The headline of a consensus whose spread is zero (a finding, not a pass of the u(x_pt) check), and what it means.
ZERO_SPREAD_FINDING = ("the robust SD is zero (more than half of the lab means are identical): "
                       "u(x_pt) = 0 is not credible")
ZERO_SPREAD_NOTE = ("the robust SD of the lab means is zero, so u(x_pt) = 1.25 s*/√p = 0 understates the "
                    "uncertainty of the assigned value and the u(x_pt) check is not made; σ_pt cannot be the robust "
                    "SD: set it from fitness for purpose or a precision experiment, and confirm the assigned value "
                    "another way")


def _zero_spread(m: MeasurandSettings, u_pt: float, p: int, audit: list[tuple]) -> list[str]:
    """The finding of a consensus value computed from results whose robust spread is zero (ISO 13528 §7.7).

    With more than half of the lab means equal, MADe and Algorithm A's s* are 0, so u(x_pt) = 1.25 s*/√p
    is 0: a u check on it would pass while saying nothing (common practice: a zero robust SD is a finding).
    """
    if not (m.is_consensus and p >= 3 and u_pt == 0):
        return []
    audit.append((m.name, "", "assigned value", "finding", ZERO_SPREAD_NOTE))
    return [ZERO_SPREAD_FINDING]


def _score_rows(rnd: Round, mr: MeasurandResult, converted: dict[str, str] | None = None) -> dict[str, Any]:
    """Every score of the registry (roundscore.model.scores) for each lab; the round's score gives the signal.

    Each row gets its one state (:data:`~roundscore.model.evaluation.ScoreState`). A withheld row has no
    score values at all (z, z′, ζ, En, D, D% blank), so no writer can show one. ``converted``: lab → the
    note of a unit conversion of its result ("entered in g/kg, converted ×1000").
    """
    m = mr.settings
    labs = mr.labs
    official = SCORES[m.score]
    x = labs["mean"].to_numpy(float)
    x_pt, u_pt, s_pt = mr.assigned, mr.u_assigned, mr.sigma_pt
    u_lab = labs["u"].to_numpy(float)
    U_lab = labs["U"].to_numpy(float)
    U_lab = np.where(np.isnan(U_lab), DEFAULT_K * u_lab, U_lab)
    inputs = ScoreInputs(x=x, x_pt=x_pt, u_x_pt=u_pt, sigma_pt=s_pt, u_x=u_lab, U_x=U_lab, U_x_pt=2.0 * u_pt)
    # A score dividing by uncertainties the lab and the assigned value both state as 0 is not defined
    # (±inf or 0/0): left empty with a note rather than written as infinite (ScoreKind.compute).
    computed = {kind.name: kind.compute(inputs) for kind in SCORES.values()}
    with np.errstate(all="ignore"):
        d = sc.difference(x, x_pt)
        dp = sc.percent_difference(x, x_pt)
    chosen, undefined = computed[m.score]
    chosen = np.where(labs["withhold"].to_numpy(bool), np.nan, chosen)
    sig = official.signals(chosen)
    notes = labs["reason"].fillna("").astype(str).to_numpy(dtype=object)
    slip = sc.possible_unit_slip(x, x_pt)
    status = labs["status"].to_numpy(dtype=object)
    limits = labs["limit"].to_numpy(dtype=float)
    relations = labs["relation"].to_numpy(dtype=object)
    texts = labs["result_text"].to_numpy(dtype=object)
    withheld = labs["withhold"].to_numpy(dtype=bool) & (status != "not-reported")
    converted = converted or {}
    lab_codes = labs["lab"].to_numpy(dtype=object)
    # Each row's one state, decided in this order (the first that holds wins), and the note it adds.
    scored = mr.scored
    reported = status != "not-reported"
    censored = reported & ~withheld & (status == "censored")
    rest = reported & ~withheld & ~censored
    with np.errstate(invalid="ignore"):
        finite = np.isfinite(limits)
        false_neg = censored & (relations == "<") & finite & scored & (limits < x_pt - CENSORED_ACTION * s_pt)
        false_pos = (censored & ~false_neg & (relations == ">") & finite & scored
                     & (limits > x_pt + CENSORED_ACTION * s_pt))
    not_cens = censored & ~false_neg & ~false_pos
    unscored = rest & (not scored)
    undef = rest & scored & undefined.astype(bool)
    missing = rest & scored & ~undefined.astype(bool) & np.isnan(chosen)
    state = np.select([~reported, withheld, false_neg, false_pos, not_cens | unscored | undef | missing],
                      ["not-reported", "withheld", "false-negative", "false-positive", "not-scored"],
                      "scored").astype(object)
    sig = np.where(false_neg | false_pos, "action", sig).astype(object)
    said = np.select(
        [~reported, false_neg, false_pos, not_cens, unscored, undef, missing],
        ["not reported", "false negative: the limit is below x_pt − 3σ_pt",
         "false positive: the limit is above x_pt + 3σ_pt", "censored result " + texts + ": not scored",
         "not scored: the assigned value or σ_pt could not be set", official.undefined_note, official.missing_note],
        "").astype(object)
    slipped = np.where((sig == "action") & (status == "value") & slip.astype(bool),
                       "possible unit or decimal slip", "").astype(object)
    conv = np.array([converted.get(c, "") for c in lab_codes.tolist()], dtype=object) if converted else None
    notes = np.where(withheld, "not scored: " + notes, notes)
    notes = _joined([notes, said, slipped] + ([conv] if conv is not None else []))
    # Withheld means absent: no score value of any kind, so no writer can show one.
    values = {kind.column: np.where(withheld, np.nan, computed[kind.name][0]) for kind in SCORES.values()}
    d, dp = np.where(withheld, np.nan, d), np.where(withheld, np.nan, dp)
    shown: Any = np.where(np.isfinite(x), x, np.nan)
    is_cens = status == "censored"
    if is_cens.any():  # the censored result's text ("<0.5") in place of a mean, each row's own object as before
        shown = [t if (c and t) else (v if f else np.nan)
                 for t, c, v, f in zip(texts.tolist(), is_cens.tolist(), list(x), np.isfinite(x).tolist())]
    value = np.abs(chosen)
    ok = np.isfinite(value)
    ranks = np.full(len(value), np.nan)
    if ok.any():
        order = pd.Series(value[ok]).rank(method="min").to_numpy()
        ranks[ok] = order
    n = len(labs)
    return {
        "lab": labs["lab"].to_numpy(dtype=object), "measurand": _same(m.name, n), "unit": _same(m.unit, n),
        "n_replicates": labs["n_replicates"].to_numpy(), "result": shown,
        "assigned": np.full(n, x_pt, dtype=float), "u_assigned": np.full(n, u_pt, dtype=float),
        "sigma_pt": np.full(n, s_pt, dtype=float),
        **values, "d": d, "d_percent": dp,
        "signal": sig, "note": notes, "score": _same(m.score, n),
        "scheme": _same(rnd.scheme, n), "round": _same(rnd.id, n), "round_date": _same(rnd.date, n),
        "rank": ranks, "n_scored": np.full(n, int(ok.sum()), dtype=np.int64), "method": labs["method"].to_numpy(),
        "state": state,
    }


def _same(value: Any, n: int) -> np.ndarray:
    """One text (or None) for each of ``n`` rows, as an object column."""
    return np.full(n, value, dtype=object)


def _score_frame(parts: list[dict[str, Any]]) -> pd.DataFrame:
    """The scores table: every measurand's score columns (:func:`_score_rows`), joined column by column.

    One frame is built for the whole round instead of one per measurand and their concatenation, with the same
    columns and types: a column of numbers in every part stays numbers; a column of objects is text when every
    part holds only text (or missing values, but not only those), as each part's own frame would have been
    inferred and then concatenated, else objects (the censored ``result`` texts beside the means, a method column
    some measurand has no method in).
    """
    if not parts:
        return pd.DataFrame(columns=SCORE_COLUMNS)
    columns: dict[str, Any] = {}
    for name in parts[0]:
        pieces = [part[name] for part in parts]
        if all(isinstance(x, np.ndarray) and x.dtype.kind != "O" for x in pieces):
            columns[name] = np.concatenate(pieces)
            continue
        if all(isinstance(x, np.ndarray) and x.dtype.kind == "O" for x in pieces):
            joined = np.concatenate(pieces)
        else:  # numbers beside lists of objects: each element as the parts hold it (numpy floats)
            joined = np.empty(sum(len(x) for x in pieces), dtype=object)
            joined[:] = [v for x in pieces for v in x]
        text = all(pd.api.types.infer_dtype(x, skipna=True) == "string" for x in pieces)
        columns[name] = joined if text else pd.Series(joined, dtype=object)
    return pd.DataFrame(columns)


def _joined(parts: list[np.ndarray]) -> np.ndarray:
    """Row by row, the non-empty texts of ``parts`` joined with "; " (object arrays of str of one length)."""
    out = parts[0]
    for part in parts[1:]:
        has_out, has_part = out != "", part != ""
        out = np.where(has_part & has_out, out + "; " + part, np.where(has_part, part, out))
    return out


def _conversions(table: ResultTable, audit: list[tuple]) -> dict[str, dict[str, str]]:
    """Every unit conversion done on reading: one audit row and one note per lab × measurand × unit given.

    Returns measurand → lab → the note said beside the result ("entered in g/kg, converted ×1000 to mg/kg").
    """
    f = table.frame
    if "unit_given" not in f.columns:
        return {}
    done = f[f["unit_given"].notna()]
    out: dict[str, dict[str, str]] = {}
    if not len(done):
        return out
    firsts = done.groupby(["measurand", "lab", "unit_given"], sort=False)[["factor", "unit"]].first()
    for key, row in firsts.iterrows():  # the table is in measurand, lab order
        meas, lab, given = (str(k) for k in key)  # type: ignore[attr-defined]  # a 3-level index key (Hashable)
        text = f"entered in {given}, converted ×{row['factor']:.6g} to {row['unit']}"
        full = f"{row['factor']:.12g}"  # the factor to 12 digits, said only where the note's 6 digits round it
        audit.append((meas, lab, "import", "unit converted",
                      text if full == f"{row['factor']:.6g}" else f"{text} (factor {full})"))
        got = out.setdefault(str(meas), {})
        got[lab] = f"{got[lab]}; {text}" if lab in got else text
    return out


#: Numeric results (rows of the result table) from which the measurands are evaluated in worker processes:
#: below it the pool's start (about 0.1 s) costs more than it saves (measured with benchmarks/scale.py's
#: ``evaluate`` part; each result costs about 10 µs of per-measurand work).
PARALLEL_MIN_RESULTS = 40_000


@dataclass(frozen=True, slots=True, kw_only=True)
class _Context:
    """What every measurand's evaluation reads (inherited by forked workers, never changed): the result table's
    rows (``frame``), every lab code in order, the item tables, the unit-conversion notes, the numeric results
    by measurand (:func:`roundscore.evaluation.consensus.replicates`) and their replicate frames."""

    rnd: Round
    names: list[str]
    frame: pd.DataFrame
    all_labs: list[str]
    items: ItemTables
    converted: dict[str, dict[str, str]]
    replicates: tuple
    by_measurand: dict[str, pd.DataFrame]
    drop: Any


@dataclass(frozen=True, slots=True, kw_only=True)
class _Done:
    """One measurand evaluated: its result, the other estimates, its audit rows and precision part (its score
    rows are built in the parent: a large frame of text, cheaper to build than to send back)."""

    result: MeasurandResult
    alternatives: consensus.Alternatives
    audit: list[tuple]
    precision: MeasurandPart


#: What this process does for a measurand a worker evaluated (its score rows, taking its result in), as a share of
#: the whole evaluation of one measurand: about 7.5 ms of 55 to 60 ms at 2000 labs, 2 cores. Set by trial on the
#: 2000-lab round (9 evaluations each, alternating with the two equal batches before): 0.17 (18 measurands here)
#: 1.81 s against 1.83 s, the worker finishing last; 0.12 (19 here) 1.71 s against 1.86 s.
HANDLING_SHARE = 0.12


def _shares(n: int, workers: int) -> tuple[int | None, int]:
    """How many of the ``n`` measurands this process evaluates itself beside ``workers − 1`` workers, and the
    size of the workers' batches (about four each, so their results come in while they go on).

    This process also handles every worker's results (:data:`HANDLING_SHARE` of a measurand each), so it takes
    fewer: ``h`` with ``h + s(n − h) = (n − h)/(w − 1)`` (s the share, w the workers), which is 47 % of them
    beside one worker, 18 % beside three.
    """
    if workers <= 1:
        return None, max(1, n)
    per = 1.0 / (workers - 1)
    here = round(n * max(0.0, per - HANDLING_SHARE) / (1.0 - HANDLING_SHARE + per))
    return here, max(1, -(-(n - here) // ((workers - 1) * 4)))


def _measurands(batch: Sequence[int]) -> list[_Done]:
    """Evaluate the measurands at the positions ``batch`` of the round (in a worker or here)."""
    c: _Context = shared()
    names = [c.names[i] for i in batch]
    f = c.frame
    pre = _lab_tables(f[f["measurand"].isin(names).to_numpy()], names, c.all_labs)
    # The lab means used, measurand × lab, for one vectorised Algorithm A call (each row on its own: any grouping
    # of the measurands gives the same numbers).
    excluded = {(e.lab, e.measurand) for e in c.rnd.exclusions}
    mat = np.full((len(names), len(c.all_labs)), np.nan)
    for i, n in enumerate(names):
        lt = pre[n]
        gone = [lab for lab, which in excluded if which is None or which == n]  # the coordinator's exclusions
        keep = (lt["status"] == "value") & ~lt["lab"].isin(gone)
        subset = c.rnd.measurands[n].consensus_labs
        if subset is not None:
            keep &= lt["lab"].isin(subset)
        mat[i, keep.to_numpy()] = lt.loc[keep, "mean"].to_numpy()
    estimates = robust.algorithm_a_rows(mat) if len(names) else []
    rows, pos, ranks, values = c.replicates
    q_hampel = consensus.estimates_for(([rows[i] for i in batch], pos, ranks, values), names, mat,
                                       range(len(names)))
    out = []
    for i, n in enumerate(names):
        audit: list[tuple] = []
        est = estimates[i] if estimates[i].n >= 3 else None
        result, alt = _measurand(c.rnd, pre[n], c.rnd.measurands[n], est, audit, dict(c.items.get(n, {})),
                                 q_hampel[n])
        out.append(_Done(result=result, alternatives=alt, audit=audit,
                         precision=measurand_part(c.rnd, result, c.by_measurand.get(n), c.drop)))
    return out


def evaluate(rnd: Round, table: ResultTable, participants: dict[str, Participant] | None = None, *,
             items: ItemTables | None = None, jobs: int | None = 1) -> RoundEvaluation:
    """Evaluate a round: statistics, assigned values, σ_pt and scores for every measurand.

    Algorithm A runs once, vectorised over all measurands. ``items`` holds
    the homogeneity and stability tables the round names, as read by
    :func:`roundscore.intake.items.read_item_tables` (measurand → kind →
    table); a round naming a table that is not given raises ValueError.
    Nothing is read from a file here. ``jobs``: worker processes for the
    measurands of a large round (:data:`PARALLEL_MIN_RESULTS`; None or 0 = all
    cores; the default 1 evaluates here); the evaluation does not depend on it.
    """
    participants = participants or {}
    items = items or {}
    all_labs = sorted(set(table.frame["lab"].unique()) | set(participants), key=lab_order_key)
    # How text cells were read (a declared decimal mark): one line per round or per form, from the reader.
    audit: list[tuple] = [("", lab, "import", "decimal mark", text) for lab, text in table.readings]
    # what each returned form says of the lab's sample (intake/forms.py form_receipt), as the lab gave it
    audit += [("", lab, "import", "sample receipt", f"{r.text()} ({r.source})") for lab, r in table.receipts.items()]
    names = list(rnd.measurands)
    conversions: list[tuple] = []
    converted = _conversions(table, conversions)
    drop = drop_choice(rnd)
    # Each measurand's own work (Q/Hampel, assigned value, σ_pt, scores, precision, method groups) depends on its
    # results alone: in worker processes for a large round (one contiguous batch per worker, the results back in
    # the round's order, so the evaluation is the same for any number of jobs), here for a small one.
    replicates = consensus.replicates(table, names, all_labs)
    context = _Context(rnd=rnd, names=names, frame=table.frame, all_labs=all_labs, items=items,
                       converted=converted, replicates=replicates,
                       by_measurand=replicate_rows(table, names, replicates[0]), drop=drop)
    workers = resolve_jobs(jobs) if int(table.frame.shape[0]) >= PARALLEL_MIN_RESULTS else 1
    workers = max(1, min(workers, len(names)))
    here, size = _shares(len(names), workers)

    def then(batch: Sequence[int], got: list[_Done]) -> list[tuple[_Done, dict[str, Any]]]:
        # Here, as each batch comes in (while the workers go on): the round's own settings object (a worker's
        # result carries a copy of it) and the score rows (a large frame of text, cheaper built than sent back).
        out = []
        for i, one in zip(batch, got):
            n = names[i]
            result = dataclasses.replace(one.result, settings=rnd.measurands[n])
            out.append((dataclasses.replace(one, result=result), _score_rows(rnd, result, converted.get(n))))
        return out

    done_rows = run_batches(_measurands, list(range(len(names))), jobs=workers, shared=context, stage="evaluation",
                            batch_size=size, here=here, then=then)
    done = [one for one, _ in done_rows]
    results, alts = {}, {}
    for n, one in zip(names, done):
        results[n], alts[n] = one.result, one.alternatives
        audit.extend(one.audit)
    audit += conversions
    scores = _score_frame([rows for _, rows in done_rows])
    stats_rows = []
    for n in names:
        r = results[n]
        e = r.robust
        stats_rows.append({
            "measurand": n, "unit": r.settings.unit, "p": r.p, "assigned": r.assigned,
            "u_assigned": r.u_assigned, "sigma_pt": r.sigma_pt,
            "robust_mean": e.mean if e else np.nan, "robust_sd": e.sd if e else np.nan,
            "median": r.median, "made": r.made, "niqr": r.niqr,
            "iterations": e.iterations if e else 0, "u_check_passed": r.u_check_passed,
            "score": r.settings.score,
        })
    statistics = pd.DataFrame(stats_rows, columns=list(STATISTICS_COLUMNS))
    extras: dict[str, pd.DataFrame] = {}
    stage_notes: dict[str, tuple[str, ...]] = {}
    details: dict[str, Any] = {}
    item_rows = [row for n in names if (ic := results[n].item_checks) is not None for row in ic.rows]
    if item_rows:
        extras["items"] = pd.DataFrame(item_rows, columns=list(ITEMS_COLUMNS))
    # STAGE: consensus — other estimates side by side (consensus.csv), the reference check.
    tables, c_notes = consensus.stage(results, alts)
    extras.update(tables)
    stage_notes.update(c_notes)
    # STAGE: precision (ISO 5725-2) and method groups (each measurand's part computed above) — adds extras,
    # stage_notes, details and audit rows here.
    assemble([one.precision for one in done]).merge_into(extras=extras, stage_notes=stage_notes, details=details,
                                                    audit=audit)
    # STAGE: the labs' reported uncertainties, and z with ζ (roundscore.evaluation.uncertainty; reads s_R).
    if (unc := uncertainty_stage(results, scores, extras.get("precision"), rnd.words)) is not None:
        extras["uncertainties"] = unc
    # STAGE: qualitative — nominal and ordinal measurands (roundscore.evaluation.qualitative).
    qual = qualitative_stage(rnd, table, all_labs)
    extras.update(qual.extras)
    stage_notes.update(qual.notes)
    audit += qual.audit
    if qual.items:
        details["qualitative"] = qual.items
    audit_df = pd.DataFrame(audit, columns=list(AUDIT_COLUMNS))
    return RoundEvaluation(
        round=rnd, table=table, participants=participants, measurands=results, scores=scores,
        statistics=statistics, audit=audit_df, extras=extras, stage_notes=stage_notes, details=details,
        warnings=tuple(rnd.warnings) + tuple(table.warnings),
    )


def check_scorable(ev: RoundEvaluation) -> None:
    """Raise when no measurand could be scored at all (nothing useful to circulate)."""
    if ev.measurands and not any(m.scored for m in ev.measurands.values()):
        raise StatisticsError("no measurand could be scored: " + "; ".join(
            f"{m.name}: {' '.join(m.notes) or 'no assigned value'}" for m in ev.measurands.values()))
