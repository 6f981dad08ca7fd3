"""The qualitative stage of the evaluation (roundscore.evaluation.qualitative), on small invented rounds."""

from __future__ import annotations

import pytest
from scipy import stats

from roundscore.evaluation.evaluate import evaluate
from roundscore.intake.readers import read_results
from roundscore.intake.roundfile import load_round
from roundscore.model.qualitative import QUALITATIVE_COLUMNS, QUALITATIVE_SUMMARY_COLUMNS

TOML = '''[round]
id = "Q1"
[measurand.lead]
unit = "mg/kg"
assigned = 1.0
u_assigned = 0.01
sigma_pt = 0.1
[measurand.salmonella]
kind = "nominal"
categories = ["detected", "not detected"]
assigned = { "QA-1" = "detected", "QA-2" = "not detected" }
aliases = { "+" = "detected", "ND" = "not detected" }
[measurand.grade]
kind = "ordinal"
categories = ["negative", "weak", "positive", "strong"]
'''
RESULTS = """lab,measurand,replicate,value,item,method
L1,lead,1,1.02,,
L1,salmonella,1,+,QA-1,culture
L1,salmonella,1,ND,QA-2,culture
L1,grade,1,weak,,
L2,salmonella,1,+,QA-1,pcr
L2,salmonella,1,+,QA-2,pcr
L2,grade,1,positive,,
L3,salmonella,1,ND,QA-1,pcr
L3,salmonella,1,ND,QA-2,culture
L3,grade,1,weak,,
L4,salmonella,1,+,QA-1,culture
L4,grade,1,strong,,
L5,grade,1,negative,,
"""


@pytest.fixture(scope="module")
def ev(tmp_path_factory):
    from tests.conftest import write_round

    folder = write_round(tmp_path_factory.mktemp("q") / "r", TOML, RESULTS)
    rnd = load_round(folder)
    return evaluate(rnd, read_results(rnd))


def _row(frame, **key):
    hit = frame
    for k, v in key.items():
        hit = hit[hit[k] == v]
    assert len(hit) == 1, key
    return hit.iloc[0]


def test_columns_are_the_contract(ev):
    assert tuple(ev.extras["qualitative"].columns) == QUALITATIVE_COLUMNS
    assert tuple(ev.extras["qualitative_summary"].columns) == QUALITATIVE_SUMMARY_COLUMNS


def test_nominal_agreement_false_positives_and_negatives(ev):
    q = ev.extras["qualitative"]
    assert _row(q, lab="L3", measurand="salmonella", item="QA-1")["agreement"] == "false negative"
    assert _row(q, lab="L2", measurand="salmonella", item="QA-2")["agreement"] == "false positive"
    assert _row(q, lab="L2", measurand="salmonella", item="QA-2")["signal"] == "action"
    assert _row(q, lab="L1", measurand="salmonella", item="QA-1")["signal"] == "acceptable"
    missing = _row(q, lab="L4", measurand="salmonella", item="QA-2")
    assert (missing["reported"], missing["signal"], missing["note"]) == ("", "not-scored", "not reported")
    s = _row(ev.extras["qualitative_summary"], measurand="salmonella", item="QA-1")
    assert (s["n"], s["agreeing"], s["false_positives"], s["false_negatives"]) == (4, 3, 0, 1)
    ci = stats.binomtest(3, 4).proportion_ci(confidence_level=0.95, method="wilson")  # the reference library
    assert (s["ci_low"], s["ci_high"]) == (pytest.approx(ci.low), pytest.approx(ci.high))


def test_ordinal_median_deviation_and_signals(ev):
    # grade reported: negative, weak, weak, positive, strong → ranks 0 1 1 2 3: median weak (rank 1)
    q = ev.extras["qualitative"]
    got = {r.lab: (r.assigned, r.deviation, r.signal) for r in q[q["measurand"] == "grade"].itertuples()}
    assert got == {"L1": ("weak", 0, "acceptable"), "L2": ("weak", 1, "warning"), "L3": ("weak", 0, "acceptable"),
                   "L4": ("weak", 2, "action"), "L5": ("weak", -1, "warning")}
    d = ev.extras["qualitative_distribution"]
    g = d[d["measurand"] == "grade"]
    assert list(g["count"]) == [1, 2, 1, 1] and list(g["assigned"]) == [False, True, False, False]
    (item,) = ev.details["qualitative"]["grade"]
    assert (item.mode, item.mode_agreement) == ("weak", pytest.approx(2 / 5))


def test_method_groups_fisher(ev):
    m = ev.extras["qualitative_methods"]
    r = _row(m, measurand="salmonella", item="QA-1")
    # culture 2 of 2 agree, pcr 1 of 2: Fisher's exact test on [[2, 0], [1, 1]] (scipy, the reference library)
    assert r["test"] == "fisher-exact"
    assert r["p_value"] == pytest.approx(stats.fisher_exact([[2, 0], [1, 1]]).pvalue)


def test_audit_records_aliases_assigned_and_tests(ev):
    a = ev.audit
    reasons = " | ".join(a["reason"])
    assert "'+' read as 'detected'" in reasons and "'ND' read as 'not detected'" in reasons
    assert "median category of 5 results" in reasons
    assert (a["step"] == "method groups").any() and (a["step"] == "agreement").any()


def test_quantitative_scores_untouched(ev):
    assert list(ev.scores["measurand"].unique()) == ["lead"]
    assert set(ev.scores["lab"]) == {"L1", "L2", "L3", "L4", "L5"}


def test_mode_tie_and_exclusion(make_round):
    toml = TOML.replace('assigned = { "QA-1" = "detected", "QA-2" = "not detected" }', 'assigned = "mode"') + (
        '[[exclude]]\nlab = "L4"\nmeasurand = "salmonella"\nreason = "sample thawed"\nscored = false\n')
    rnd = load_round(make_round(toml, RESULTS))
    ev = evaluate(rnd, read_results(rnd))
    s = ev.extras["qualitative_summary"]
    # QA-1 without L4: detected ×2 (L1, L2), not detected ×1 (L3) → mode detected; QA-2: 2 ND, 1 + → ND
    assert list(s.loc[s["measurand"] == "salmonella", "assigned"]) == ["detected", "not detected"]
    w = _row(ev.extras["qualitative"], lab="L4", item="QA-1")
    assert w["signal"] == "not-scored" and w["note"].startswith("not scored: withheld")
    tie = TOML.replace('assigned = { "QA-1" = "detected", "QA-2" = "not detected" }', 'assigned = "mode"')
    # QA-1: +, +, ND, ND: two categories tie, so no mode and no assigned category: no signals
    rnd = load_round(make_round(tie, RESULTS.replace("L4,salmonella,1,+,QA-1", "L4,salmonella,1,ND,QA-1")))
    ev = evaluate(rnd, read_results(rnd))
    q1 = _row(ev.extras["qualitative_summary"], measurand="salmonella", item="QA-1")
    assert q1["assigned"] == "" and q1["n"] == 0
    assert set(ev.extras["qualitative"].query("item == 'QA-1'")["signal"]) == {"not-scored"}
    assert any("tie" in n for n in ev.stage_notes["salmonella"])
