"""The precision stage (roundscore.evaluation.precision) end to end through evaluate and the pipeline.

Rounds are invented and built in tmp_path, plus the demo round (invented) and
the NIST StRD SmLs09 data set run as a round. Expected values come from the
ISO 5725-2 formulas worked here by hand on the test's own numbers, from
scipy / statsmodels, from NIST's certified values, or from ISO 5725-2 tables
(marked "from memory") — never from roundscore's own output.
"""

from __future__ import annotations

import math
import re
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from statsmodels.stats.multitest import multipletests

from roundscore.errors import RoundFileError
from roundscore.evaluation.evaluate import evaluate
from roundscore.intake.readers import read_participants, read_results
from roundscore.intake.roundfile import load_round
from roundscore.pipeline import load_and_evaluate, run_round
from roundscore.evaluation.precision import (MANDEL_COLUMNS, METHODS_COLUMNS, NEEDS_REPLICATES, PRECISION_COLUMNS,
                                             SCREENS_COLUMNS)

from .conftest import DEMO
from .refdata import nist_anova

# Ten invented lab means: nine around 20 and a tenth chosen to be a Grubbs straggler or outlier.
BASE9 = [20.1, 19.8, 20.4, 19.9, 20.0, 20.3, 19.7, 20.2, 20.0]
HALF_SPREAD = [0.05, 0.04, 0.06, 0.05, 0.03, 0.05, 0.04, 0.06, 0.05, 0.04]  # replicates = mean ± d


def _toml(extra: str = "", measurand: str = "cu", sigma: str = "0.5") -> str:
    return f'[round]\nid = "P1"\n{extra}\n[measurand.{measurand}]\nunit = "mg/kg"\nsigma_pt = {sigma}\n'


def _pairs(means: list[float], methods: list[str] | None = None, measurand: str = "cu") -> str:
    """results.csv with two replicates per lab, mean ± HALF_SPREAD (exact two-decimal texts)."""
    lines = ["lab,measurand,replicate,value,method"]
    for i, m in enumerate(means):
        d = HALF_SPREAD[i % len(HALF_SPREAD)]
        meth = methods[i] if methods else ""
        lines.append(f"L{i + 1},{measurand},1,{m + d:.2f},{meth}")
        lines.append(f"L{i + 1},{measurand},2,{m - d:.2f},{meth}")
    return "\n".join(lines) + "\n"


def _grubbs_high(means: list[float]) -> float:
    x = np.asarray(means)
    return float((x.max() - x.mean()) / x.std(ddof=1))


# ----------------------------------------------------------------------------- demo round


@pytest.fixture
def demo_ev(scored_demo):
    """The demo round's evaluation (the session's shared scored demo, conftest.py): read only."""
    return scored_demo.evaluation


def test_demo_outlier_flagged_and_left_out_of_precision(demo_ev):
    ev = demo_ev
    scr = ev.extras["screens"]
    iod = scr[scr["measurand"] == "iodine"]
    hit = iod[iod["labs"] == "K07"].iloc[0]
    assert (hit["test"], hit["outcome"], bool(hit["excluded"])) == ("grubbs_high", "outlier", True)
    # ISO 5725-2:1994 Table 5, single Grubbs for p = 31 (from memory): 5 % 2.924, 1 % 3.253.
    assert hit["critical_5"] == pytest.approx(2.924, abs=1e-3)
    assert hit["critical_1"] == pytest.approx(3.253, abs=1e-3)
    row = ev.extras["precision"].set_index("measurand").loc["iodine"]
    assert row["excluded"] == "K07" and row["p"] == 30
    # Balanced duplicates, by hand (ISO 5725-2 §7.4.4): s_r² = mean of the cell variances,
    # s_L² = var(cell means) − s_r²/2, on the 30 labs left, from the demo's results.csv.
    raw = pd.read_csv(DEMO / "results.csv")
    iodine = raw[(raw["measurand"] == "iodine") & (raw["lab"] != "K07")].astype({"value": float})
    cells = iodine.groupby("lab")["value"]
    s_r2 = cells.var(ddof=1).mean()
    assert row["s_r"] == pytest.approx(math.sqrt(s_r2), rel=1e-12)
    assert row["s_L"] == pytest.approx(math.sqrt(cells.mean().var(ddof=1) - s_r2 / 2), rel=1e-12)
    assert row["r"] == pytest.approx(2.8 * row["s_r"]) and row["R"] == pytest.approx(2.8 * row["s_R"])
    audit = ev.audit[(ev.audit["measurand"] == "iodine") & (ev.audit["step"] == "screen")]
    k07 = audit[audit["lab"] == "K07"].iloc[0]
    assert k07["action"] == "outlier"
    assert re.match(r"Grubbs G \(highest mean\) = [\d.]+ \(5 % 2\.92\d* / 1 % 3\.25\d*\), 31 labs: left out",
                    k07["reason"])
    # The screens do not touch the consensus: K07 is still used for the assigned value and scored.
    assert bool(ev.measurands["iodine"].labs.set_index("lab").loc["K07", "used"])
    assert np.isfinite(ev.scores.set_index(["measurand", "lab"]).loc[("iodine", "K07"), "z"])


def test_demo_cochran_outlier_repeated_on_remaining_cells(demo_ev):
    ev = demo_ev
    cad = ev.extras["screens"]
    cad = cad[(cad["measurand"] == "cadmium") & (cad["test"] == "cochran")]
    # K19 reported µg/kg under mg/kg (planted unit slip): huge within-lab spread, then Cochran is repeated.
    assert cad["labs"].tolist()[0] == "K19" and cad["outcome"].tolist()[0] == "outlier"
    assert cad["p"].tolist() == [31, 30]
    # ISO 5725-2:1994 Table 4, Cochran n = 2 (from memory): p = 30: 5 % 0.293, 1 % 0.363.
    assert cad["critical_5"].iloc[1] == pytest.approx(0.293, abs=1e-3)
    assert cad["critical_1"].iloc[1] == pytest.approx(0.363, abs=1e-3)
    row = ev.audit[(ev.audit["measurand"] == "cadmium") & (ev.audit["lab"] == "K19")
                   & (ev.audit["step"] == "screen")].iloc[0]
    assert re.match(r"Cochran C = [\d.]+ \(5 % 0\.28\d* / 1 % 0\.35\d*\)", row["reason"])


def test_demo_outliers_keep(demo_round):
    toml = (demo_round / "round.toml").read_text(encoding="utf-8")
    (demo_round / "round.toml").write_text(toml.replace("replicates = 2", 'replicates = 2\noutliers = "keep"', 1),
                                           encoding="utf-8")
    ev = load_and_evaluate(demo_round)
    row = ev.extras["precision"].set_index("measurand").loc["iodine"]
    assert row["excluded"] == "" and row["p"] == 31 and row["outliers"] == "K07"
    step = ev.extras["screens"].query("measurand == 'iodine' and labs == 'K07'").iloc[0]
    assert step["outcome"] == "outlier" and not bool(step["excluded"])
    reason = ev.audit.query("measurand == 'iodine' and lab == 'K07' and step == 'screen'")["reason"].iloc[0]
    assert reason.endswith('kept and flagged (round.outliers = "keep")')


def test_demo_method_note_only_where_groups_differ(demo_ev):
    ev = demo_ev
    notes = ev.stage_notes
    assert any(n.startswith("method groups differ") and "may not suit every lab" in n for n in notes["iodine"])
    # the difference and its interval to the measurand's decimals (people read the note), not significant digits
    (note,) = [n for n in notes["iodine"] if n.startswith("method groups differ")]
    d = ev.round.measurands["iodine"].decimals
    c = ev.extras["methods"].set_index("measurand").loc["iodine"]
    assert f"= {c['difference']:.{d}f} mg/kg" in note and f"CI {c['ci_low']:.{d}f} to {c['ci_high']:.{d}f}" in note
    assert not any("method groups" in n for n in notes.get("arsenic", ()))  # two groups, no difference
    methods = ev.extras["methods"].set_index("measurand")
    assert bool(methods.loc["iodine", "significant"]) and not bool(methods.loc["arsenic", "significant"])
    # Independent: scipy's t test on the same lab means (the F test decides pooled vs Welch).
    labs = ev.measurands["iodine"].labs
    labs = labs[labs["used"]]
    a = labs.loc[labs["method"] == "ICP-MS after alkaline extraction", "mean"]
    b = labs.loc[labs["method"] == "iodometric titration", "mean"]
    f = a.var(ddof=1) / b.var(ddof=1)
    f_p = 2 * min(stats.f.cdf(f, a.size - 1, b.size - 1), stats.f.sf(f, a.size - 1, b.size - 1))
    pooled = f_p >= 0.05
    ref = stats.ttest_ind(a, b, equal_var=pooled)
    assert methods.loc["iodine", "test"] == ("pooled t" if pooled else "Welch t")
    assert methods.loc["iodine", "statistic"] == pytest.approx(ref.statistic, rel=1e-10)
    assert methods.loc["iodine", "p_value"] == pytest.approx(ref.pvalue, rel=1e-8)
    assert methods.loc["iodine", "difference"] == pytest.approx(a.mean() - b.mean(), rel=1e-12)
    ci = ref.confidence_interval(0.95)
    assert (methods.loc["iodine", "ci_low"], methods.loc["iodine", "ci_high"]) == (
        pytest.approx(ci.low, rel=1e-8), pytest.approx(ci.high, rel=1e-8))
    assert "F test" in methods.loc["iodine", "reason"]


def test_demo_csv_columns_exactly(scored_demo):
    out = scored_demo.out
    expected = {"precision": PRECISION_COLUMNS, "screens": SCREENS_COLUMNS, "mandel": MANDEL_COLUMNS,
                "methods": METHODS_COLUMNS}
    # The column lists of the issue, written out here so a renamed constant cannot hide a change.
    assert expected == {
        "precision": ("measurand", "p", "n_bar", "s_r", "s_L", "s_R", "r", "R", "s_r_robust", "excluded"),
        "screens": ("measurand", "step", "test", "labs", "statistic", "critical_5", "critical_1", "outcome"),
        "mandel": ("lab", "measurand", "h", "k", "flag"),
        "methods": ("measurand", "groups", "test", "statistic", "df", "p_value", "difference", "ci_low",
                    "ci_high", "significant"),
    }
    for name, cols in expected.items():
        header = (out / f"{name}.csv").read_text(encoding="utf-8").splitlines()[0].split(",")
        assert tuple(header[: len(cols)]) == cols, name
    mandel = pd.read_csv(out / "mandel.csv")
    assert {"h_crit_5", "h_crit_1", "k_crit_5", "k_crit_1"} <= set(mandel.columns)
    screens = pd.read_csv(out / "screens.csv")
    assert set(screens["outcome"]) <= {"pass", "straggler", "outlier"}


# ----------------------------------------------------------------------------- invented rounds


def test_straggler_kept_and_flagged_then_excluded_on_request(make_round):
    means = BASE9 + [21.1]
    # G by hand lies between ISO 5725-2 Table 5 values 2.290 (5 %) and 2.482 (1 %) for p = 10 (from memory).
    assert 2.290 < _grubbs_high(means) < 2.482
    ev = load_and_evaluate(make_round(_toml(), _pairs(means)))
    step = ev.extras["screens"].query("test == 'grubbs_high'").iloc[0]
    assert (step["labs"], step["outcome"], bool(step["excluded"])) == ("L10", "straggler", False)
    row = ev.extras["precision"].iloc[0]
    assert row["p"] == 10 and row["excluded"] == "" and row["stragglers"] == "L10"
    # By hand: each cell SD is d·√2, so s_r² = 2·mean(d²) (balanced, ISO 5725-2 §7.4.4).
    d = np.asarray(HALF_SPREAD)
    assert row["s_r"] == pytest.approx(math.sqrt(2 * np.mean(d * d)), rel=1e-12)
    assert row["s_L"] == pytest.approx(math.sqrt(np.var(means, ddof=1) - np.mean(d * d)), rel=1e-12)
    audit = ev.audit.query("lab == 'L10' and step == 'screen'").iloc[0]
    assert audit["action"] == "straggler" and audit["reason"].endswith('kept and flagged (round.stragglers = "keep")')
    flag = ev.extras["mandel"].set_index("lab").loc["L10"]
    assert abs(flag["h"]) == pytest.approx(_grubbs_high(means), rel=1e-12)  # h of the top lab is its G
    excl = load_and_evaluate(make_round(_toml('stragglers = "exclude"'), _pairs(means)))
    row = excl.extras["precision"].iloc[0]
    assert row["excluded"] == "L10" and row["p"] == 9
    assert row["s_L"] == pytest.approx(math.sqrt(np.var(BASE9, ddof=1) - np.mean(d[:9] ** 2)), rel=1e-12)


def test_contradictory_outlier_settings_refused(make_round):
    folder = make_round(_toml('outliers = "keep"\nstragglers = "exclude"'), _pairs(BASE9 + [21.1]))
    with pytest.raises(RoundFileError, match=r"round\.stragglers.*'exclude'.*outliers = \"exclude\""):
        load_and_evaluate(folder)


def test_single_results_round_says_precision_needs_replicates(make_round, tmp_path):
    lines = ["lab,measurand,replicate,value"] + [f"L{i + 1},cu,1,{m}" for i, m in enumerate(BASE9)]
    folder = make_round(_toml("replicates = 1"), "\n".join(lines) + "\n")
    ev = load_and_evaluate(folder)
    assert ev.stage_notes["cu"] == (NEEDS_REPLICATES,)
    assert "needs replicates" in NEEDS_REPLICATES
    row = ev.extras["precision"].iloc[0]
    assert row["note"] == NEEDS_REPLICATES and math.isnan(row["s_r"])
    assert ev.extras["screens"].empty and ev.extras["mandel"].empty
    audit = ev.audit.query("step == 'precision'").iloc[0]
    assert (audit["action"], audit["reason"]) == ("not computed", NEEDS_REPLICATES)
    run_round(folder, tmp_path / "out")  # the outputs are still written, with their columns
    header = (tmp_path / "out" / "screens.csv").read_text(encoding="utf-8").splitlines()
    assert header == [",".join(SCREENS_COLUMNS + ("p", "excluded", "action"))]


def test_unbalanced_layout_against_statsmodels(make_round):
    import statsmodels.api as sm
    from statsmodels.formula.api import ols

    text = _pairs(BASE9[:6]) + "L1,cu,3,20.12\nL4,cu,3,19.93\nL4,cu,4,19.88\n"
    ev = load_and_evaluate(make_round(_toml(), text))
    row = ev.extras["precision"].iloc[0]
    raw = pd.read_csv(make_round(_toml(), text) / "results.csv")
    # Reference: statsmodels one-way ANOVA mean squares; n̄ and s_L² by ISO 5725-2 §7.4.4 formulas by hand.
    table = sm.stats.anova_lm(ols("value ~ C(lab)", data=raw).fit())
    ms_b, ms_w = table["mean_sq"].iloc[0], table["mean_sq"].iloc[1]
    n = raw.groupby("lab").size().to_numpy(float)
    n_bar = (n.sum() - (n * n).sum() / n.sum()) / (n.size - 1)
    assert row["n_bar"] == pytest.approx(n_bar, rel=1e-12) and not bool(row["balanced"])
    assert row["s_r"] == pytest.approx(math.sqrt(ms_w), rel=1e-10)
    assert row["s_L"] == pytest.approx(math.sqrt((ms_b - ms_w) / n_bar), rel=1e-10)
    # Algorithm S needs SDs of equal df: it uses the 4 labs with the most frequent n (2), and says so.
    assert row["robust_labs"] == 4 and "Algorithm S on the 4 labs with 2 replicates" in row["note"]


def test_negative_between_lab_variance_truncated_and_said(make_round):
    # Means almost equal, replicates far apart: MS_between < MS_within, so s_L² < 0 → 0 (ISO 5725-2 §7.4).
    shifts, half = [0.0, 0.01, -0.01, 0.02, -0.02], [0.5, 0.4, 0.6, 0.5, 0.45]
    text = "lab,measurand,replicate,value\n" + "".join(
        f"L{i},cu,1,{10 + c + a:.2f}\nL{i},cu,2,{10 + c - a:.2f}\n" for i, (c, a) in enumerate(zip(shifts, half), 1))
    # By hand: MS_within = mean(2a²) = 0.487, MS_between = 2·var(shifts) = 0.0005, so s_L² < 0.
    ev = load_and_evaluate(make_round(_toml(), text))
    row = ev.extras["precision"].iloc[0]
    assert bool(row["s_L_truncated"]) and row["s_L"] == 0.0 and row["s_R"] == row["s_r"]
    assert "s_L set to 0" in row["note"]
    assert "s_L² < 0 set to 0" in ev.audit.query("step == 'precision'")["reason"].iloc[0]


def test_excluded_and_censored_labs_stay_out_of_precision(make_round):
    toml = _toml() + '[[exclude]]\nlab = "L2"\nreason = "sample thawed in transit"\n'
    text = _pairs(BASE9) + "L10,cu,1,<0.5\nL10,cu,2,<0.5\n"
    ev = load_and_evaluate(make_round(toml, text))
    assert set(ev.extras["mandel"]["lab"]) == {f"L{i}" for i in range(1, 10)} - {"L2"}
    assert ev.extras["precision"].iloc[0]["labs_screened"] == 8


def test_three_method_groups_anova_and_holm(make_round):
    means = [20.0, 20.1, 19.9, 20.05, 20.6, 20.7, 20.5, 20.65, 20.02, 20.08, 19.95, 20.3]
    methods = ["A"] * 4 + ["B"] * 4 + ["C"] * 3 + ["D"]
    ev = load_and_evaluate(make_round(_toml(), _pairs(means, methods)))
    rows = ev.extras["methods"]
    anova = rows.iloc[0]
    assert anova["test"] == "one-way ANOVA" and anova["untested"] == "D (n=1)"  # D listed, not tested
    groups = {g: np.asarray([m for m, x in zip(means, methods) if x == g]) for g in "ABC"}
    ref = stats.f_oneway(groups["A"], groups["B"], groups["C"])  # scipy reference, on the lab means
    assert anova["statistic"] == pytest.approx(ref.statistic, rel=1e-9)
    assert anova["p_value"] == pytest.approx(ref.pvalue, rel=1e-7)
    assert (anova["df"], anova["df2"]) == (2, 8)
    pairs = rows.iloc[1:]
    assert pairs["groups"].tolist() == ["A vs B", "A vs C", "B vs C"]
    raw_p = [stats.ttest_ind(groups[a], groups[b], equal_var=t.startswith("pooled")).pvalue
             for (a, b), t in zip([("A", "B"), ("A", "C"), ("B", "C")], pairs["test"])]
    assert pairs["p_value"].to_numpy() == pytest.approx(raw_p, rel=1e-8)
    holm = multipletests(raw_p, alpha=0.05, method="holm")  # statsmodels reference
    assert pairs["p_adjusted"].to_numpy() == pytest.approx(holm[1], rel=1e-8)
    assert pairs["significant"].astype(bool).tolist() == holm[0].tolist()
    note = " ".join(ev.stage_notes["cu"])
    assert "method groups differ (one-way ANOVA" in note and "A vs B" in note


def test_no_note_when_groups_agree(make_round):
    means = [20.0, 20.02, 20.1, 19.95, 19.9, 20.08, 20.05, 20.03]
    methods = ["A", "B"] * 4
    ev = load_and_evaluate(make_round(_toml(), _pairs(means, methods)))
    row = ev.extras["methods"].iloc[0]
    assert not bool(row["significant"]) and row["groups"] == "A (n=4) vs B (n=4)"
    assert "cu" not in ev.stage_notes
    assert ev.audit.query("step == 'method groups'")["action"].iloc[0] == "compared"


def test_small_groups_listed_not_tested(make_round):
    means = [20.0, 20.1, 19.9, 20.05, 20.02]
    methods = ["A", "A", "A", "B", ""]
    ev = load_and_evaluate(make_round(_toml(), _pairs(means, methods)))
    row = ev.extras["methods"].iloc[0]
    assert row["test"] == "not tested" and row["untested"] == "B (n=1); no method given (n=1)"
    # the method-group note is not a stage note (the few-labs caution of the precision is)
    assert not any("method" in n for n in ev.stage_notes.get("cu", ()))


@pytest.mark.parametrize("confidence", [0.9, 0.99])
def test_confidence_level_from_round(make_round, confidence):
    means = [20.0, 20.1, 19.9, 20.05, 20.3, 20.4, 20.2, 20.35]
    methods = ["A"] * 4 + ["B"] * 4
    ev = load_and_evaluate(make_round(_toml(f"confidence = {confidence}"), _pairs(means, methods)))
    row = ev.extras["methods"].iloc[0]
    df = row["df"]
    # The critical t is the two-sided quantile at the round's confidence (scipy).
    assert row["t_critical"] == pytest.approx(stats.t.isf((1 - confidence) / 2, df), rel=1e-12)
    se = row["difference"] / row["statistic"]
    assert row["ci_high"] - row["ci_low"] == pytest.approx(2 * row["t_critical"] * abs(se), rel=1e-10)


# ----------------------------------------------------------------------------- NIST StRD as a round


def test_nist_smls09_through_the_pipeline(make_round, tmp_path):
    # Source: NIST StRD ANOVA SmLs09 (9 groups × 2001 replicates, 13 constant leading digits;
    # tests/data/nist_strd_anova). Certified: residual SD 0.1, MS between 20.01, MS within 0.01 (file header).
    data = nist_anova("SmLs09")
    assert (data.certified["residual_sd"], data.certified["ms_between"], data.certified["ms_within"]) == \
        (0.1, 20.01, 0.01)
    rows, count = ["lab,measurand,replicate,value"], {}
    for group, text in zip(data.groups, data.texts):
        count[group] = count.get(group, 0) + 1
        rows.append(f"T{group},y,{count[group]},{text}")
    folder = make_round(_toml(measurand="y", sigma="0.1"), "\n".join(rows) + "\n")
    ev, _ = run_round(folder, tmp_path / "out")
    row = ev.extras["precision"].iloc[0]
    assert row["p"] == 9 and row["n_bar"] == 2001 and row["excluded"] == ""
    assert row["s_r"] == pytest.approx(1.00000000000000e-01, rel=1e-13)  # certified residual SD
    assert row["s_L"] == pytest.approx(math.sqrt((20.01 - 0.01) / 2001), rel=1e-12)  # from certified MS
    csv = pd.read_csv(tmp_path / "out" / "precision.csv", dtype=str).iloc[0]
    assert csv["s_r"] == "0.1"  # every certified digit survives the 12-digit CSV (no 0.0999999…)


def test_double_grubbs_skipped_above_the_lab_limit(make_round):
    from roundscore.evaluation.precision import DOUBLE_GRUBBS_MAX_LABS

    p = DOUBLE_GRUBBS_MAX_LABS + 20
    means = [20 + 0.01 * ((i * 37) % 101 - 50) for i in range(p)]  # evenly spread: light tails, no outlier
    lines = ["lab,measurand,replicate,value"] + [
        f"L{i + 1},cu,{r},{m + (0.03 if r == 1 else -0.03) * (1 + i % 3):.3f}" for i, m in enumerate(means)
        for r in (1, 2)]
    # Three-decimal texts such as 20.310: the round declares the decimal point (roundscore.intake.cells).
    ev = load_and_evaluate(make_round(_toml('decimal = "point"'), "\n".join(lines) + "\n"))
    assert not ev.extras["screens"]["test"].str.startswith("grubbs_double").any()
    notes = ev.audit.query("step == 'screen' and action == 'note'")["reason"].tolist()
    assert f"double Grubbs' test skipped: {p} labs, more than {DOUBLE_GRUBBS_MAX_LABS}" in " ".join(notes)
    assert ev.extras["precision"].iloc[0]["p"] == p


def test_cell_statistics_computed_once_per_measurand(monkeypatch):
    # The stage centres each measurand's replicate texts once and reuses the cells for the unscreened
    # precision, the screens and the precision of the labs kept (iodine and cadmium lose a lab in the demo).
    import roundscore.stats.precision as prm

    calls: list[int] = []
    real = prm.centred

    def counting(texts, **kw):
        items = list(texts)
        if items and isinstance(items[0], str):  # replicate texts (method groups compare float means)
            calls.append(len(items))
        return real(texts, **kw)

    monkeypatch.setattr(prm, "centred", counting)
    ev = load_and_evaluate(DEMO)
    prec = ev.extras["precision"]
    computed = prec[prec["p"] > 0]
    assert set(prec.loc[prec["excluded"] != "", "measurand"]) >= {"iodine", "cadmium"}
    assert len(calls) == len(computed)
    # The precision after the screens is the kept labs' cells: same cell means as before the screens.
    d = ev.details["precision"]["iodine"]
    pick = [d.cells.labs.index(lab) for lab in d.precision.labs]
    assert "K07" not in d.precision.labs and d.precision.cells.means.tolist() == d.cells.means[pick].tolist()


@pytest.mark.parametrize("labs, cautioned", [(2, True), (7, True), (8, False)])
def test_few_labs_precision_carries_a_caution(make_round, labs, cautioned):
    # ISO 5725-1 recommends at least 8 laboratories (from memory: ISO 5725-1:1994 §6.3.4); with 2 the
    # between-lab SD rests on one degree of freedom.
    lines = ["lab,measurand,replicate,value"]
    for i in range(labs):
        lines += [f"L{i},lead,1,{10 + 0.1 * i}", f"L{i},lead,2,{10.05 + 0.1 * i - 0.01 * (i % 3)}"]
    rnd = load_round(make_round('[round]\nid="P2"\n[measurand.lead]\nunit="mg/kg"\nassigned=10\n'
                                'u_assigned=0.1\nsigma_pt=0.5\n', "\n".join(lines) + "\n"))
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # and no library warning on the way
        ev = evaluate(rnd, read_results(rnd), read_participants(rnd))
    note = ev.extras["precision"].set_index("measurand").loc["lead", "note"]
    audit = ev.audit[(ev.audit["step"] == "precision") & (ev.audit["action"] == "caution")]
    assert (f"only {labs} labs" in str(note)) is cautioned and (len(audit) == 1) is cautioned
    assert (f"only {labs} labs" in " ".join(ev.stage_notes.get("lead", ()))) is cautioned


def test_a_measurand_with_every_result_censored_raises_no_library_warning(make_round):
    # Every lab reported "<0.5": no lab mean, so no consensus; nothing may reach the terminal but our notes.
    lines = ["lab,measurand,replicate,value"] + [f"L{i},zinc,{r},<0.5" for i in range(5) for r in (1, 2)]
    lines += [f"L{i},lead,{r},{10 + 0.1 * i + 0.01 * r}" for i in range(5) for r in (1, 2)]
    toml = ('[round]\nid="C0"\n[measurand.zinc]\nunit="mg/kg"\nsigma_pt=0.5\n'
            '[measurand.lead]\nunit="mg/kg"\nsigma_pt=0.5\n')
    rnd = load_round(make_round(toml, "\n".join(lines) + "\n"))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        ev = evaluate(rnd, read_results(rnd), read_participants(rnd))
    assert ev.measurands["zinc"].p == 0 and not ev.measurands["zinc"].scored
    assert ev.measurands["lead"].scored
