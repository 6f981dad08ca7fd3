"""Precision, outlier screens and method groups in the round (ISO 5725-2, ISO 13528).

The stage reads the evaluation's lab table (which labs are used) and the
replicates of :class:`~roundscore.model.table.ResultTable`, and adds four tables:

``precision``
    One row per measurand: p, n̄, s_r, s_L, s_R, r, R after the ISO 5725-2
    screens, Algorithm S as a robust s_r, the labs left out, and a note.
``screens``
    Every test of the ISO 5725-2 §7.3 sequence: Cochran's C repeated on the
    remaining cells, then Grubbs' single (and, when nothing was removed,
    double) test on the cell means, each with both critical values.
``mandel``
    Mandel's h and k per lab with the 5 % and 1 % indicator values.
``methods``
    Method groups compared on lab means: two groups by an F test of the
    variances followed by the pooled-SD or Welch t test; three or more by a
    one-way ANOVA and Holm-adjusted pairwise tests.

What enters, and what is assumed
--------------------------------
- Precision uses the replicates of the labs the evaluation *uses* for the
  consensus (``MeasurandResult.labs.used``): censored results and the
  coordinator's ``[[exclude]]`` decisions stay out, as for the assigned value.
- The screens act on the precision estimates only: an outlier by Cochran or
  Grubbs is left out of s_r, s_L, s_R (``round.outliers = "exclude"``,
  default) or kept (``"keep"``); stragglers are kept and flagged
  (``round.stragglers = "keep"``, default) or left out (``"exclude"``, which
  then also leaves out outliers).  The assigned value and the scores are
  *not* changed by the screens.
- Mandel's h and k and Algorithm S are computed on every lab used, before the
  screens: they are consistency displays and a robust estimate that need no
  outlier removal.  Algorithm S needs SDs with the same degrees of freedom;
  with unequal replicate counts it uses the labs with the most frequent count
  (said in the note).
- The replicates are centred exactly from the text as typed (the ``text``
  column), so results with many constant leading digits keep every digit.
  The cell statistics are computed once per measurand; the precision after
  the screens takes the kept labs' cells, centred on the median of *all*
  used labs (against centring the kept labs afresh this can move the last
  bit of a result, e.g. the general mean by 1 ulp).
- Method groups compare the lab means as floats (the evaluation's means);
  method names are grouped ignoring case and surrounding spaces, shown as
  first spelled (in lab order).  Labs with no method are left out of the
  comparison and counted.
- The double Grubbs test is skipped (with a note) above
  :data:`DOUBLE_GRUBBS_MAX_LABS` labs: its critical values are simulated.

The results support, and do not replace, the provider's documented
procedures, ISO/IEC 17043 and the accreditation body's rules; ISO 5725-2
§7.3.2 asks that every flagged lab be investigated for a technical cause.

References
----------
.. [1] ISO 5725-2:1994, §7.3 (Mandel's h and k, Cochran, Grubbs), §7.4
   (s_r, s_L, s_R; n̄ for unbalanced data; a negative s_L² set to zero).
.. [2] ISO 5725-6:1994, §4.1.4 (r = 2.8 s_r, R = 2.8 s_R).
.. [3] ISO 13528:2022, Annex C (Algorithm S).
.. [4] Welch (1947); Holm (1979): see :mod:`roundscore.stats.compare`.
"""

from __future__ import annotations

import functools
import itertools
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from roundscore.errors import RoundFileError, StatisticsError
from roundscore.model.round import Round
from roundscore.stats import compare as cmp
from roundscore.stats import outliers as ol
from roundscore.stats import precision as pr
from roundscore.model.table import ResultTable
from roundscore.text import shown_number

if TYPE_CHECKING:
    from roundscore.model.evaluation import MeasurandResult

__all__ = [
    "PRECISION_COLUMNS", "SCREENS_COLUMNS", "MANDEL_COLUMNS", "METHODS_COLUMNS", "DOUBLE_GRUBBS_MAX_LABS",
    "NEEDS_REPLICATES", "MeasurandPrecision", "MethodGroups", "PrecisionStage", "drop_choice",
    "MeasurandPart", "measurand_part", "assemble", "replicate_rows",
]

#: precision.csv columns (fixed by the issue); extra columns follow.
PRECISION_COLUMNS = ("measurand", "p", "n_bar", "s_r", "s_L", "s_R", "r", "R", "s_r_robust", "excluded")
#: screens.csv columns (fixed by the issue); ``outcome`` is pass, straggler or outlier.
SCREENS_COLUMNS = ("measurand", "step", "test", "labs", "statistic", "critical_5", "critical_1", "outcome")
#: mandel.csv columns (fixed by the issue); the indicator values follow as extra columns.
MANDEL_COLUMNS = ("lab", "measurand", "h", "k", "flag")
#: methods.csv columns (fixed by the issue).
METHODS_COLUMNS = ("measurand", "groups", "test", "statistic", "df", "p_value", "difference", "ci_low",
                   "ci_high", "significant")

_PRECISION_EXTRA = ("labs_screened", "balanced", "s_L_truncated", "general_mean", "robust_labs", "outliers",
                    "stragglers", "note")
_SCREENS_EXTRA = ("p", "excluded", "action")
_MANDEL_EXTRA = ("n", "mean", "sd", "h_crit_5", "h_crit_1", "k_crit_5", "k_crit_1")
_METHODS_EXTRA = ("df2", "p_adjusted", "t_critical", "f_statistic", "f_p_value", "confidence", "reason",
                  "untested", "conclusion")

#: Largest number of labs given the double Grubbs test (its critical values are simulated, about
#: 0.7 s per new p at p = 100 and growing with p; project choice, ISO 5725-2 Table 5 stops at p = 40).
DOUBLE_GRUBBS_MAX_LABS = 100

#: Fewest laboratories for a precision estimate worth the name: ISO 5725-1 recommends at least 8 (from
#: memory: ISO 5725-1:1994 §6.3.4); fewer are reported with :func:`few_labs_caution`.
MIN_PRECISION_LABS = 8


def few_labs_caution(p: int) -> str:
    """The caution of a precision estimate from fewer than :data:`MIN_PRECISION_LABS` labs."""
    text = (f"only {p} labs: s_L and s_R rest on {p - 1} degree{'s' if p != 2 else ''} of freedom "
            f"(ISO 5725-1 recommends at least {MIN_PRECISION_LABS} laboratories); read them as rough estimates")
    if p == 2:
        text += ", and Grubbs' tests, which need 3 labs, screen nothing"
    return text


#: The message of a measurand without replicates (stage note, audit and precision.csv note).
NEEDS_REPLICATES = ("precision needs replicates: every lab reported a single result, so no repeatability "
                    "or reproducibility can be estimated (ask for 2 or more replicates on the forms)")

#: Said when method groups differ, next to the assigned value.
MIXED_METHODS = "a consensus value over mixed methods may not suit every lab"

#: Names of the screening tests in words, for the audit trail.
_TEST_WORDS = {
    "cochran": "Cochran C", "grubbs_high": "Grubbs G (highest mean)", "grubbs_low": "Grubbs G (lowest mean)",
    "grubbs_double_high": "double Grubbs G (two highest means)",
    "grubbs_double_low": "double Grubbs G (two lowest means)",
}


@dataclass(frozen=True, slots=True, kw_only=True)
class MeasurandPrecision:
    """Precision and screens of one measurand, kept for figures and reports.

    Attributes
    ----------
    measurand : str
    labs : tuple of str
        Labs whose replicates entered (used labs with numeric results), in lab order.
    cells : CellStatistics or None
        Cell statistics of those labs (before the screens); None without data.
    mandel : MandelResult or None
        h and k of those labs with the indicator values.
    screening : Screening or None
        The ISO 5725-2 screens.
    precision : PrecisionResult or None
        s_r, s_L, s_R... from the labs kept after the screens (None when not computable).
    robust : AlgorithmSResult or None
        Algorithm S on the cell SDs of ``robust_labs`` labs (before the screens).
    robust_labs : int
        Labs entering Algorithm S.
    notes : tuple of str
        Why something was not computed, truncations, approximations.
    """

    measurand: str
    labs: tuple[str, ...]
    cells: pr.CellStatistics | None
    mandel: pr.MandelResult | None
    screening: ol.Screening | None
    precision: pr.PrecisionResult | None
    robust: pr.AlgorithmSResult | None
    robust_labs: int
    notes: tuple[str, ...]


@dataclass(frozen=True, slots=True, kw_only=True)
class MethodGroups:
    """The method groups of one measurand and their comparison.

    Attributes
    ----------
    measurand : str
    groups : dict of str to tuple of str
        Method name → labs (used labs with a method), names sorted.
    no_method : tuple of str
        Used labs that gave no method.
    untested : tuple of str
        Groups with fewer than :data:`~roundscore.stats.compare.MIN_GROUP_SIZE` labs (listed, not tested).
    comparison : TwoSampleComparison, GroupComparison or None
        None when fewer than two groups can be tested or the test is undefined.
    significant : bool
        The groups differ at ``Round.confidence`` (two groups: the t test;
        more: the ANOVA or any Holm-adjusted pair).
    conclusion : str
        One line in words.
    """

    measurand: str
    groups: dict[str, tuple[str, ...]]
    no_method: tuple[str, ...]
    untested: tuple[str, ...]
    comparison: cmp.TwoSampleComparison | cmp.GroupComparison | None
    significant: bool
    conclusion: str


@dataclass(frozen=True, slots=True, kw_only=True)
class PrecisionStage:
    """Everything the stage adds to the evaluation.

    Attributes
    ----------
    extras : dict of str to DataFrame
        ``precision``, ``screens``, ``mandel`` and ``methods`` (empty tables keep their columns).
    stage_notes : dict of str to tuple of str
        Notes by measurand (no replicates; method groups differ).
    details : dict
        ``details["precision"][m]`` :class:`MeasurandPrecision`, ``details["screens"][m]``
        Screening, ``details["mandel"][m]`` MandelResult, ``details["methods"][m]`` :class:`MethodGroups`.
    audit : tuple of tuple
        Audit rows (measurand, lab, step, action, reason).
    """

    extras: dict[str, pd.DataFrame]
    stage_notes: dict[str, tuple[str, ...]]
    details: dict[str, dict[str, Any]]
    audit: tuple[tuple[str, str, str, str, str], ...]

    def merge_into(self, *, extras: dict, stage_notes: dict, details: dict, audit: list) -> None:
        """Add this stage's tables, notes, details and audit rows to the evaluation's collections."""
        extras.update(self.extras)
        for name, notes in self.stage_notes.items():
            stage_notes[name] = tuple(stage_notes.get(name, ())) + notes
        details.update(self.details)
        audit.extend(self.audit)


def drop_choice(rnd: Round) -> ol.DropChoice:
    """What the screens remove, from ``round.outliers`` and ``round.stragglers``.

    Raises
    ------
    RoundFileError
        ``stragglers = "exclude"`` with ``outliers = "keep"``: an outlier is
        beyond a straggler, so removing stragglers but keeping outliers contradicts itself.
    """
    if rnd.stragglers == "exclude" and rnd.outliers == "keep":
        raise RoundFileError.key(
            str(rnd.path), "round.stragglers", "exclude",
            "'keep' when round.outliers = 'keep' (an outlier lies beyond a straggler: excluding stragglers "
            "while keeping outliers contradicts itself; set outliers = \"exclude\" too)")
    if rnd.stragglers == "exclude":
        return "straggler"
    return "outlier" if rnd.outliers == "exclude" else "none"


def _g(x: float) -> str:
    return f"{x:.4g}" if math.isfinite(x) else "n/a"


# ----------------------------------------------------------------------------- precision and screens


def _replicates(rows: pd.DataFrame, used: list[str]) -> tuple[np.ndarray, np.ndarray, list[str] | None]:
    """The used labs' numeric replicates in lab order: values, lab codes, texts (None if any is missing)."""
    lab = rows["lab"].to_numpy(dtype=object)
    pos = pd.Index(used).get_indexer(pd.Index(lab))  # the lab's place in ``used``; -1 when not used
    found = np.flatnonzero(pos >= 0)
    pick = found[np.argsort(pos[found], kind="stable")]
    texts = rows["text"].to_numpy(dtype=object)[pick].tolist()
    ok = all(map(isinstance, texts, itertools.repeat(str))) and "" not in texts
    return rows["value"].to_numpy(float)[pick], lab[pick].astype(str), texts if ok else None


def _algorithm_s(cells: pr.CellStatistics) -> tuple[pr.AlgorithmSResult | None, int, str]:
    has = cells.n > 1
    if not has.any():
        return None, 0, ""
    values, counts = np.unique(cells.n[has], return_counts=True)
    n_mode = int(values[np.argmax(counts)])  # ties: the smaller n
    pick = cells.n == n_mode
    res = pr.algorithm_s(cells.sds[pick], n_mode - 1)
    k = int(pick.sum())
    note = "" if k == int(has.sum()) else (
        f"Algorithm S on the {k} labs with {n_mode} replicates (it needs SDs with equal degrees of freedom)")
    return res, k, note


def _step_reason(s: ol.ScreenStep, rnd: Round) -> str:
    text = f"{_TEST_WORDS.get(s.test, s.test)} = {_g(s.statistic)} (5 % {_g(s.critical_5)} / 1 % {_g(s.critical_1)})"
    text += f", {s.p} labs"
    if s.test.startswith("grubbs_double"):
        text += ", small values are suspicious"
    if s.excluded:
        return text + ": left out of the precision estimates (not of the assigned value or the scores)"
    if s.outcome == "straggler":
        return text + f": kept and flagged (round.stragglers = \"{rnd.stragglers}\")"
    if s.outcome == "outlier":
        return text + ": kept and flagged (round.outliers = \"keep\")"
    return text


def _measurand_precision(rnd: Round, name: str, rows: pd.DataFrame | None, used: list[str],
                         drop: ol.DropChoice, audit: list) -> tuple[MeasurandPrecision, dict, list[dict], list[str]]:
    """Precision, screens and Mandel of one measurand: details, the precision row, screen rows, stage notes."""
    notes: list[str] = []
    stage: list[str] = []
    empty = functools.partial(MeasurandPrecision, measurand=name, labs=(), cells=None, mandel=None, screening=None,
                              precision=None, robust=None, robust_labs=0)
    row: dict[str, Any] = {"measurand": name, "p": 0, "excluded": "", "labs_screened": 0}
    if rows is None or not len(rows):
        values = np.empty(0)
    else:
        values, labs, texts = _replicates(rows, used)
    present = set(labs.tolist()) if values.size else set()
    if len(present) < 2:
        msg = f"precision needs at least 2 labs with numeric results; {len(present)} here"
        audit.append((name, "", "precision", "not computed", msg))
        return empty(notes=(msg,)), row | {"note": msg}, [], [msg]
    row["labs_screened"] = len(present)
    if len(present) == values.size:  # one result per lab
        audit.append((name, "", "precision", "not computed", NEEDS_REPLICATES))
        return (empty(notes=(NEEDS_REPLICATES,), labs=tuple(lab for lab in used if lab in present)),
                row | {"note": NEEDS_REPLICATES}, [], [NEEDS_REPLICATES])
    # The cell statistics are computed once: precision of every used lab (Mandel's h and k before the
    # screens, and the final result when the screens leave nobody out), the screens, and the precision
    # of the labs kept (their cells, same offset).
    cells = pr.cell_statistics(values, labs, texts=texts)
    unscreened = pr.precision(cells=cells)
    mandel = unscreened.mandel
    robust: pr.AlgorithmSResult | None
    if unscreened.robust_s_r is not None:
        robust, robust_labs = unscreened.robust_s_r, cells.p
    else:
        robust, robust_labs, rnote = _algorithm_s(cells)
        if rnote:
            notes.append(rnote)
    screening = ol.screen(cells=cells, drop=drop, double_max_p=DOUBLE_GRUBBS_MAX_LABS)
    steps = []
    for s in screening.steps:
        steps.append({"measurand": name, "step": s.step, "test": s.test, "labs": "; ".join(s.labs),
                      "statistic": s.statistic, "critical_5": s.critical_5, "critical_1": s.critical_1,
                      "outcome": s.outcome, "p": s.p, "excluded": s.excluded,
                      "action": "left out of the precision estimates" if s.excluded else
                      ("kept and flagged" if s.outcome != "pass" else "")})
        audit.append((name, ", ".join(s.labs), "screen", s.outcome, _step_reason(s, rnd)))
    audit.extend((name, "", "screen", "note", n) for n in screening.notes)
    prec = None if screening.excluded else unscreened
    left_labs = len(screening.retained)
    try:
        if left_labs < 2:
            raise StatisticsError(f"fewer than 2 labs remain ({left_labs} of {len(present)})")
        if prec is None:
            # Mandel's h, k and Algorithm S are of all labs (above); the kept labs' result needs neither.
            prec = pr.precision(cells=cells.subset(screening.retained), consistency=False)
    except StatisticsError as exc:
        left = f"after leaving out {', '.join(screening.excluded)}: " if screening.excluded else ""
        msg = f"precision not computed {left}{exc}"
        notes.append(msg)
        stage.append(msg)
        audit.append((name, "", "precision", "not computed", msg))
    row |= {"excluded": "; ".join(screening.excluded), "outliers": "; ".join(screening.outliers),
            "stragglers": "; ".join(screening.stragglers),
            "s_r_robust": robust.value if robust is not None else np.nan, "robust_labs": robust_labs}
    if prec is not None:
        if prec.s_L_truncated:
            notes.append("the between-lab variance estimate s_L² was negative (between-lab mean square below "
                         "the within-lab one): s_L set to 0 and s_R = s_r (ISO 5725-2 §7.4)")
        row |= {"p": prec.p, "n_bar": prec.n_bar, "s_r": prec.s_r, "s_L": prec.s_L, "s_R": prec.s_R,
                "r": prec.r, "R": prec.R, "balanced": prec.balanced, "s_L_truncated": prec.s_L_truncated,
                "general_mean": prec.general_mean}
        left = f"; left out by the screens: {', '.join(screening.excluded)}" if screening.excluded else ""
        settings = rnd.measurands.get(name)
        d = settings.decimals if settings is not None else None

        def sd(x: float) -> str:  # a standard deviation: one decimal more than the measurand's values
            return shown_number(x, d, more=1)

        audit.append((name, "", "precision", "computed",
                       f"s_r = {sd(prec.s_r)}, s_L = {sd(prec.s_L)}, s_R = {sd(prec.s_R)} from {prec.p} labs, "
                       f"n̄ = {prec.n_bar:.4g}{left}" + ("; s_L² < 0 set to 0" if prec.s_L_truncated else "")))
        if prec.p < MIN_PRECISION_LABS:
            caution = few_labs_caution(prec.p)
            notes.append(caution)
            stage.append(caution)
            audit.append((name, "", "precision", "caution", caution))
    row["note"] = "; ".join(notes)
    detail = MeasurandPrecision(measurand=name, labs=cells.labs, cells=cells, mandel=mandel, screening=screening,
                                precision=prec, robust=robust, robust_labs=robust_labs, notes=tuple(notes))
    return detail, row, steps, stage


def _mandel_frame(name: str, d: MeasurandPrecision) -> pd.DataFrame | None:
    m, c = d.mandel, d.cells
    if m is None or c is None:
        return None
    ah, k = np.abs(m.h), m.k
    with np.errstate(invalid="ignore"):
        hf = np.where(ah > m.h_critical_1, "h beyond 1 % indicator",
                      np.where(ah > m.h_critical_5, "h beyond 5 % indicator", ""))
        kf = np.where(k > m.k_critical_1, "k beyond 1 % indicator",
                      np.where(k > m.k_critical_5, "k beyond 5 % indicator", ""))
    sep = np.where((hf != "") & (kf != ""), "; ", "")
    return pd.DataFrame({
        "lab": list(m.labs), "measurand": name, "h": m.h, "k": k,
        "flag": np.char.add(np.char.add(hf.astype(str), sep), kf.astype(str)),
        "n": c.n, "mean": c.means, "sd": c.sds,
        "h_crit_5": m.h_critical_5, "h_crit_1": m.h_critical_1,
        "k_crit_5": m.k_critical_5, "k_crit_1": m.k_critical_1,
    })


# ----------------------------------------------------------------------------- method groups


def _method_groups(rnd: Round, mr: MeasurandResult, audit: list) -> tuple[MethodGroups | None, list[dict], list[str]]:
    """Compare the method groups of one measurand on the used labs' means."""
    used = mr.labs["used"].to_numpy(bool)  # the used labs' columns, taken without a frame of them
    # Each distinct method cell once (in order of first appearance; no method: code -1, the last entry).
    codes, distinct = pd.factorize(mr.labs["method"].to_numpy(dtype=object)[used])
    spelled = [str(v).strip() if isinstance(v, str) else "" for v in distinct]
    text = np.array(spelled + [""], dtype=object)[codes]
    given = text != ""
    keys = np.array([word.casefold() for word in spelled] + [""], dtype=object)[codes]
    shown: dict[str, str] = {}
    for word in spelled:
        if word:
            shown.setdefault(word.casefold(), word)
    if len(shown) < 2:
        return None, [], []
    name = mr.name
    lab_codes = mr.labs["lab"].to_numpy(dtype=str)[used]
    means = mr.labs["mean"].to_numpy(float)[used]
    names = sorted(shown.values(), key=str.casefold)
    groups = {g: tuple(lab_codes[given & (keys == g.casefold())].tolist()) for g in names}
    sizes = {g: len(v) for g, v in groups.items()}
    tested = [g for g in names if sizes[g] >= cmp.MIN_GROUP_SIZE]
    untested = tuple(g for g in names if sizes[g] < cmp.MIN_GROUP_SIZE)
    no_method = tuple(lab_codes[~given].tolist())
    listed = [f"{g} (n={sizes[g]})" for g in untested]
    if no_method:
        listed.append(f"no method given (n={len(no_method)})")
    base = {"measurand": name, "untested": "; ".join(listed), "confidence": rnd.confidence}
    rows: list[dict] = []
    comparison: cmp.TwoSampleComparison | cmp.GroupComparison | None = None
    significant = False
    stage: list[str] = []
    unit = mr.settings.unit
    pct = f"{100 * rnd.confidence:g} %"
    group_values = {g: means[given & (keys == g.casefold())] for g in tested}
    try:
        if len(tested) < 2:
            raise StatisticsError("fewer than two method groups have at least 2 labs: the groups are listed, "
                                  "not tested")
        c: cmp.TwoSampleComparison | cmp.GroupComparison
        if len(tested) == 2:
            a, b = tested
            c = cmp.compare_two(group_values[a], group_values[b], confidence=rnd.confidence, labels=(a, b))
            comparison, significant, conclusion = c, c.significant, c.conclusion
            rows.append(base | {
                "groups": f"{a} (n={c.n_a}) vs {b} (n={c.n_b})",
                "test": "pooled t" if c.method == "pooled" else "Welch t",
                "statistic": c.t, "df": c.df, "p_value": c.p_value, "difference": c.difference,
                "ci_low": c.ci_low, "ci_high": c.ci_high, "significant": c.significant,
                "t_critical": c.t_critical, "f_statistic": c.variance_test.f, "f_p_value": c.variance_test.p_value,
                "reason": c.method_reason, "conclusion": c.conclusion,
            })
            if significant:
                test = "pooled-SD t test" if c.method == "pooled" else "Welch t test"
                d = mr.settings.decimals
                stage.append(f"method groups differ: {a} − {b} = {shown_number(c.difference, d)} {unit} ({pct} CI "
                             f"{shown_number(c.ci_low, d)} to {shown_number(c.ci_high, d)}; {test}, "
                             f"p = {c.p_value:.2g}); {MIXED_METHODS}")
        else:
            vals = np.concatenate([group_values[g] for g in tested])
            labels = np.concatenate([[g] * group_values[g].size for g in tested])
            c = cmp.compare_groups(vals, labels, confidence=rnd.confidence)
            anova = c.anova
            assert anova is not None, "three or more groups were tested"
            differing = [pc for pc in c.pairwise if pc.significant]
            comparison, significant, conclusion = c, bool(c.anova_significant or differing), c.conclusion
            rows.append(base | {
                "groups": ", ".join(f"{g} (n={n})" for g, n in zip(c.groups, c.sizes)), "test": "one-way ANOVA",
                "statistic": anova.f, "df": anova.df_between, "df2": anova.df_within, "p_value": anova.p_value,
                "significant": c.anova_significant, "conclusion": c.conclusion,
            })
            for pc in c.pairwise:
                t = pc.comparison
                rows.append(base | {
                    "groups": f"{t.label_a} vs {t.label_b}",
                    "test": ("pooled t" if t.method == "pooled" else "Welch t") + ", Holm-adjusted",
                    "statistic": t.t, "df": t.df, "p_value": t.p_value, "p_adjusted": pc.p_adjusted,
                    "difference": t.difference, "ci_low": t.ci_low, "ci_high": t.ci_high,
                    "significant": pc.significant, "t_critical": t.t_critical, "f_statistic": t.variance_test.f,
                    "f_p_value": t.variance_test.p_value, "reason": t.method_reason, "conclusion": t.conclusion,
                })
            if significant:
                pairs = ", ".join(f"{pc.comparison.label_a} vs {pc.comparison.label_b}" for pc in differing)
                stage.append(f"method groups differ (one-way ANOVA p = {anova.p_value:.2g}"
                             + (f"; after Holm's correction: {pairs}" if pairs else "") + f"); {MIXED_METHODS}")
    except StatisticsError as exc:
        conclusion = f"method groups not compared: {exc}"
        rows.append(base | {"groups": ", ".join(f"{g} (n={sizes[g]})" for g in names), "test": "not tested",
                            "significant": False, "conclusion": conclusion})
    audit.append((name, "", "method groups",
                  "differ" if significant else ("compared" if comparison is not None else "not compared"),
                  conclusion + (f" Listed, not tested: {'; '.join(listed)}." if listed else "")))
    detail = MethodGroups(measurand=name, groups=groups, no_method=no_method, untested=untested,
                          comparison=comparison, significant=significant, conclusion=conclusion)
    return detail, rows, stage


# ----------------------------------------------------------------------------- the stage


def _frame(rows: list[dict], columns: tuple[str, ...], extra: tuple[str, ...]) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=list(columns + extra))


@dataclass(frozen=True, slots=True, kw_only=True)
class MeasurandPart:
    """One measurand's share of the stage (computed on its own, in any process); :func:`assemble` joins them.

    Attributes
    ----------
    name : str
    precision : MeasurandPrecision
    row : dict
        Its precision.csv row.
    steps : list of dict
        Its screens.csv rows.
    mandel : DataFrame or None
        Its mandel.csv rows.
    methods : MethodGroups or None
    method_rows : list of dict
        Its methods.csv rows.
    notes : tuple of str
        Its stage notes.
    audit : tuple of tuple
        Its audit rows, in the order the stage writes them.
    """

    name: str
    precision: MeasurandPrecision
    row: dict
    steps: list[dict]
    mandel: pd.DataFrame | None
    methods: MethodGroups | None
    method_rows: list[dict]
    notes: tuple[str, ...]
    audit: tuple[tuple, ...]


def replicate_rows(table: ResultTable, names: list[str], positions: list[np.ndarray]) -> dict[str, pd.DataFrame]:
    """The numeric replicates of ``table`` (lab, text, value), one frame per measurand (in the table's order).

    ``positions``: for each of ``names``, its rows' places among the table's numeric rows, in the table's order
    (as :func:`roundscore.evaluation.consensus.replicates` finds them), so they are not grouped again.
    """
    f = table.frame
    values = f.loc[f["status"].to_numpy() == "value", ["measurand", "lab", "text", "value"]]
    return {n: values.iloc[rows] for n, rows in zip(names, positions) if len(rows)}


def measurand_part(rnd: Round, mr: MeasurandResult, rows: pd.DataFrame | None, drop: ol.DropChoice
                   ) -> MeasurandPart:
    """Precision, screens, Mandel and method groups of one measurand (``rows``: its numeric replicates)."""
    name = mr.name
    audit: list[tuple] = []
    used = mr.labs.loc[mr.labs["used"].to_numpy(bool), "lab"].astype(str).tolist()
    d, row, steps, notes = _measurand_precision(rnd, name, rows, used, drop, audit)
    mg, mrows, mnotes = _method_groups(rnd, mr, audit)
    return MeasurandPart(name=name, precision=d, row=row, steps=steps, mandel=_mandel_frame(name, d), methods=mg,
                         method_rows=mrows if mg is not None else [], notes=tuple(notes + mnotes),
                         audit=tuple(audit))


def assemble(parts: list[MeasurandPart]) -> PrecisionStage:
    """The stage's tables, notes, details and audit rows from the measurands' parts (in the round's order)."""
    details: dict[str, dict[str, Any]] = {"precision": {}, "screens": {}, "mandel": {}, "methods": {}}
    for part in parts:
        d = part.precision
        details["precision"][part.name] = d
        if d.screening is not None:
            details["screens"][part.name] = d.screening
        if d.mandel is not None:
            details["mandel"][part.name] = d.mandel
        if part.methods is not None:
            details["methods"][part.name] = part.methods
    mandel_cols = list(MANDEL_COLUMNS + _MANDEL_EXTRA)
    mandel_frames = [part.mandel for part in parts if part.mandel is not None]
    extras = {
        "precision": _frame([part.row for part in parts], PRECISION_COLUMNS, _PRECISION_EXTRA),
        "screens": _frame([r for part in parts for r in part.steps], SCREENS_COLUMNS, _SCREENS_EXTRA),
        "mandel": (pd.concat(mandel_frames, ignore_index=True)[mandel_cols] if mandel_frames
                   else pd.DataFrame(columns=mandel_cols)),
        "methods": _frame([r for part in parts for r in part.method_rows], METHODS_COLUMNS, _METHODS_EXTRA),
    }
    return PrecisionStage(extras=extras, stage_notes={part.name: part.notes for part in parts if part.notes},
                          details=details, audit=tuple(row for part in parts for row in part.audit))
