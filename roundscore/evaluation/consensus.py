"""The consensus stage: the other estimates of the assigned value, the sensitivity table and the reference check.

For every measurand, whatever ``assigned`` says, the stage computes Q/Hampel
(ISO 13528 C.5, on the labs' individual results) and the kernel-density mode
(AMC Technical Brief No. 4) beside Algorithm A and the median, so the
coordinator sees the chosen value in context (``consensus.csv``):

* **Sensitivity flag** (the rule of roundscore, after the issue that asked
  for it): a measurand is flagged when any two of the estimates differ by more
  than 2·√(u₁² + u₂²) or by more than 0.3 σ_pt.
* **Reference check** (``reference = { value, u }``; ISO 13528:2015 §7.8 on
  comparing a consensus with a reference value, clause from memory): the
  difference D = x_consensus − x_ref, u(D) = √(u²(x_consensus) + u²(x_ref)),
  and the En-like ratio D / (2 u(D)); |ratio| > 1 is flagged.

Nothing here reads a file; :func:`roundscore.evaluation.evaluate.evaluate`
calls :func:`estimates_for` before the measurands are assigned and
:func:`stage` after.
"""

from __future__ import annotations

from dataclasses import dataclass
from collections.abc import Callable, Sequence

import numpy as np
import pandas as pd

from roundscore.model.round import MeasurandSettings
from roundscore.model.table import ResultTable
from roundscore.stats import robust
from roundscore.stats.hampel import QHampelEstimate, hampel, q_method
from roundscore.stats.kernel import BANDWIDTH_FACTOR, BOOTSTRAP_SAMPLES, KernelMode, kernel_mode
from roundscore.stats.limits import above

__all__ = ["Alternatives", "estimates_for", "replicates", "kernel_for", "assign", "stage",
           "CONSENSUS_COLUMNS", "REFERENCE_COLUMNS",
           "SENSITIVITY_U_FACTOR", "SENSITIVITY_SIGMA_FACTOR", "REFERENCE_LIMIT"]

#: The sensitivity flag: two estimates differ by more than 2·√(u₁² + u₂²) ...
SENSITIVITY_U_FACTOR = 2.0
#: ... or by more than 0.3 σ_pt (the size below which u(x_pt) is negligible, ISO 13528 §9.2.1).
SENSITIVITY_SIGMA_FACTOR = 0.3
#: The reference check: |D| / (2 u(D)) above 1 (an En-like ratio with k = 2).
REFERENCE_LIMIT = 1.0
CONSENSUS_COLUMNS = ("measurand", "method", "value", "u", "robust_sd", "sigma_pt", "chosen", "n", "flag", "why")
REFERENCE_COLUMNS = ("measurand", "consensus", "u_consensus", "reference", "u_reference", "difference",
                     "u_difference", "ratio", "agrees", "conclusion")
_METHOD_WORDS = {"algorithm-a": "Algorithm A", "q-hampel": "Q/Hampel", "median": "median",
                 "kernel-mode": "kernel mode"}


@dataclass(frozen=True, slots=True, kw_only=True)
class Alternatives:
    """The estimates beside Algorithm A for one measurand (on the labs the consensus uses)."""

    q_hampel: QHampelEstimate | None
    kernel: KernelMode | None = None
    kernel_note: str = ""


def replicates(table: ResultTable, names: list[str], labs: list[str]
                ) -> tuple[list[np.ndarray], np.ndarray, np.ndarray, np.ndarray]:
    """The numeric results by measurand, each in the table's order: row positions per measurand (of
    ``names``), and for every numeric row its lab's place in ``labs``, that lab's rank in the lab codes'
    sorted order (the numbering ``q_method`` gives the codes themselves), and the value."""
    f = table.frame
    value = (f["status"] == "value").to_numpy()
    meas = pd.Index(names).get_indexer(pd.Index(f["measurand"].to_numpy(dtype=object)[value]))
    pos = pd.Index(labs).get_indexer(pd.Index(f["lab"].to_numpy(dtype=object)[value]))
    ranks = np.empty(len(labs), dtype=np.intp)
    ranks[sorted(range(len(labs)), key=labs.__getitem__)] = np.arange(len(labs))
    order = np.argsort(meas, kind="stable")  # grouped by measurand, the table's order kept within each
    bounds = np.searchsorted(meas[order], np.arange(len(names) + 1))
    rows = [order[bounds[i]:bounds[i + 1]] for i in range(len(names))]
    return rows, pos, np.where(pos >= 0, ranks[pos], -1), f["value"].to_numpy(float)[value]


def estimates_for(prepared: tuple[list[np.ndarray], np.ndarray, np.ndarray, np.ndarray], names: list[str],
                  mat: np.ndarray, which: Sequence[int]) -> dict[str, QHampelEstimate | None]:
    """Q/Hampel for the measurands at the positions ``which`` of ``names``: s* by the Q method on each used lab's
    replicates, x* by Hampel on the lab means (one call). ``mat`` holds the lab means used (a row per measurand
    of ``names``, a column per lab, NaN = not used), as Algorithm A receives them; ``prepared`` is what
    :func:`replicates` gives for the round. Each measurand's estimate depends on its own results only, so any
    grouping of the measurands gives the same numbers."""
    rows, pos, ranks, values = prepared
    which = list(which)
    sds = np.full(len(which), np.nan)
    info: list[tuple[int, int, float]] = []
    for j, i in enumerate(which):
        used = np.isfinite(mat[i])
        p = int(used.sum())
        mine = rows[i]
        if not mine.size or p < 3:
            info.append((p, 0, np.nan))
            continue
        mine = mine[used[pos[mine]]]
        s, ties = q_method(values[mine], ranks[mine])
        sds[j] = s
        info.append((p, int(mine.size), ties))
    x, sol = (hampel(mat[which], np.where(np.isfinite(sds), sds, 0.0)) if which
              else (np.zeros(0), np.zeros(0)))
    out: dict[str, QHampelEstimate | None] = {}
    for j, i in enumerate(which):
        p, n_res, ties = info[j]
        if p < 3:
            out[names[i]] = None
            continue
        note = ("every lab gave the same result: s* is zero, so it cannot serve as σ_pt" if sds[j] == 0 else
                "the Hampel equation has no solution: x* is the median" if sol[j] == 0 else "")
        out[names[i]] = QHampelEstimate(mean=float(x[j]), sd=float(sds[j]), n=p, n_results=n_res,
                                        ties=float(ties), solutions=int(sol[j]), note=note)
    return out


def kernel_for(m: MeasurandSettings, means: np.ndarray, sigma: Callable[[float], float],
               median: float) -> tuple[KernelMode | None, str]:
    """The kernel mode with h = 0.75 σ_pt; σ_pt as the round sets it, at the median when it depends on x_pt."""
    if means.size < 3:
        return None, ""
    s = sigma(median)
    if not np.isfinite(s) or not s > 0:
        return None, "kernel mode: no σ_pt to set the bandwidth h = 0.75 σ_pt"
    # The bootstrap SE (most of the cost: ~0.9 s a measurand at 2000 labs) only where the mode is the assigned
    # value; in the sensitivity table alone the mode has no u and is compared by the 0.3 σ_pt rule.
    chosen = m.assigned == "kernel-mode"
    return kernel_mode(means, BANDWIDTH_FACTOR * s, bootstrap=BOOTSTRAP_SAMPLES if chosen else 0), ""


def assign(m: MeasurandSettings, alt: Alternatives, p: int) -> tuple[float, float, str, list[str]] | None:
    """x_pt, u(x_pt), the source in words and notes for ``q-hampel`` and ``kernel-mode``; None for other methods."""
    who = "lab means" if m.consensus_labs is None else "lab means of the labs named in the round file"
    if m.assigned == "q-hampel":
        e = alt.q_hampel
        if e is None or not e.sd > 0:
            return np.nan, np.nan, "consensus (Q/Hampel, not computable)", [
                "Q/Hampel: " + (e.note if e is not None and e.note else "too few results")]
        return (e.mean, e.u_mean, f"Hampel estimate of {p} {who} with s* by the Q method on {e.n_results} "
                f"results; u = 1.25·s*/√p", [f"Q/Hampel: {e.note}"] if e.note else [])
    if m.assigned == "kernel-mode":
        k = alt.kernel
        if k is None:
            return np.nan, np.nan, "consensus (kernel mode, not computable)", [alt.kernel_note or
                                                                             "kernel mode: too few results"]
        notes = []
        if k.others:
            notes.append("kernel density: other modes at " + ", ".join(f"{v:.6g}" for v in k.others)
                         + f" (density ≥ {k.fraction:g} of the highest): possibly a group of labs")
        return (k.mode, k.se, f"highest mode of the kernel density of {p} {who} (h = {k.h:.4g}); u = "
                f"bootstrap SE ({k.bootstrap} resamples)", notes)
    return None


def _rows(mr, alt: Alternatives) -> list[dict]:
    e, q, k = mr.robust, alt.q_hampel, alt.kernel
    p = mr.p
    u_med = robust.CONSENSUS_U_FACTOR * mr.made / np.sqrt(p) if p else np.nan
    rows = [
        ("algorithm-a", e.mean if e else np.nan, e.u_mean if e else np.nan, e.sd if e else np.nan),
        ("q-hampel", q.mean if q else np.nan, q.u_mean if q else np.nan, q.sd if q else np.nan),
        ("median", mr.median if p >= 3 else np.nan, u_med if p >= 3 else np.nan, mr.made if p >= 3 else np.nan),
        ("kernel-mode", k.mode if k else np.nan, k.se if k else np.nan, np.nan),
    ]
    m = mr.settings
    chosen = m.assigned if m.is_consensus else "stated value"
    out = [{"measurand": m.name, "method": _METHOD_WORDS[name], "value": v, "u": u, "robust_sd": sd,
            "sigma_pt": mr.sigma_pt, "chosen": name == chosen and m.consensus_labs is None, "n": p}
           for name, v, u, sd in rows]
    label = (f"chosen: {_METHOD_WORDS.get(chosen, chosen)}" + (" of the named labs" if m.consensus_labs else "")
             if m.is_consensus else "chosen: stated value")
    out.append({"measurand": m.name, "method": label, "value": mr.assigned, "u": mr.u_assigned,
                "robust_sd": np.nan, "sigma_pt": mr.sigma_pt, "chosen": True, "n": p})
    return out


def _flag(rows: list[dict], sigma_pt: float) -> str:
    """The first pair of estimates breaking the rule, in words ("" when none does)."""
    ok = [r for r in rows if np.isfinite(r["value"])]
    for i, a in enumerate(ok):
        for b in ok[i + 1:]:
            d = abs(a["value"] - b["value"])
            ua, ub = a["u"], b["u"]
            lim_u = SENSITIVITY_U_FACTOR * np.hypot(ua, ub)  # NaN unless both are known
            if np.isfinite(lim_u) and above(d, lim_u) and (ua > 0 or ub > 0):  # the one limits comparison
                return (f"{a['method']} and {b['method']} differ by {d:.3g}, more than 2·√(u₁² + u₂²) = "
                        f"{lim_u:.3g}")
            if np.isfinite(sigma_pt) and above(d, SENSITIVITY_SIGMA_FACTOR * sigma_pt):
                return (f"{a['method']} and {b['method']} differ by {d:.3g}, more than 0.3 σ_pt = "
                        f"{SENSITIVITY_SIGMA_FACTOR * sigma_pt:.3g}")
    return ""


def _reference(mr) -> dict | None:
    m = mr.settings
    if m.reference is None:
        return None
    x_ref, u_ref = m.reference
    if m.is_consensus:
        x, u = mr.assigned, mr.u_assigned
    else:  # the assigned value is stated: compare Algorithm A's consensus with the reference
        x = mr.robust.mean if mr.robust else np.nan
        u = mr.robust.u_mean if mr.robust else np.nan
    d = x - x_ref
    u_d = float(np.hypot(u, u_ref))
    ratio = d / (2.0 * u_d) if u_d > 0 else np.nan
    if not np.isfinite(d):
        agrees, words = None, "no consensus value to compare with the reference"
    elif not np.isfinite(ratio):
        agrees, words = d == 0, "both uncertainties are zero: the difference cannot be judged"
    elif abs(ratio) <= REFERENCE_LIMIT:
        agrees, words = True, (f"the consensus and the reference value agree within their uncertainties "
                               f"(|D| ≤ 2u(D), ratio {ratio:.2f})")
    else:
        agrees, words = False, (f"the consensus differs from the reference value by more than twice the "
                                f"uncertainty of the difference (ratio {ratio:.2f}): look for a bias of the "
                                "consensus (a method group, a common error) or of the reference before "
                                "relying on either")
    return {"measurand": m.name, "consensus": x, "u_consensus": u, "reference": x_ref, "u_reference": u_ref,
            "difference": d, "u_difference": u_d, "ratio": ratio, "agrees": agrees, "conclusion": words}


def stage(results: dict, alts: dict[str, Alternatives]) -> tuple[dict[str, pd.DataFrame], dict[str, tuple[str, ...]]]:
    """``consensus`` (and ``reference`` when a measurand states one) tables, and a note per flagged measurand."""
    rows: list[dict] = []
    ref_rows: list[dict] = []
    notes: dict[str, tuple[str, ...]] = {}
    for name, mr in results.items():
        mine = _rows(mr, alts[name])
        why = _flag(mine, mr.sigma_pt)
        for r in mine:
            r["flag"], r["why"] = bool(why), why
        rows += mine
        extra = []
        if why:
            extra.append(f"the assigned value is sensitive to the method: {why} (consensus.csv)")
        ref = _reference(mr)
        if ref is not None:
            ref_rows.append(ref)
            if ref["agrees"] is False:
                extra.append(f"reference check: {ref['conclusion']}")
        if extra:
            notes[name] = tuple(extra)
    tables = {"consensus": pd.DataFrame(rows, columns=list(CONSENSUS_COLUMNS))}
    if ref_rows:
        tables["reference"] = pd.DataFrame(ref_rows, columns=list(REFERENCE_COLUMNS))
    return tables, notes
