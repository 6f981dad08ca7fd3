"""The evaluation (roundscore.evaluation.evaluate): assigned values, σ_pt, scores, signals, notes and the audit trail.

Expected values are worked by hand from the ISO 13528 formulas in each test. The evaluation itself reads no
file: the item tables come from intake, and the public roundscore.evaluate reads them first.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import roundscore
from roundscore.errors import InputError
from roundscore.evaluation.evaluate import evaluate
from roundscore.intake.inputs import read_inputs
from roundscore.intake.readers import read_participants, read_results
from roundscore.intake.roundfile import load_round
from roundscore.stats.robust import algorithm_a
from roundscore.stats.sigma import horwitz_thompson


def _ev(folder):
    rnd = load_round(folder)
    return evaluate(rnd, read_results(rnd), read_participants(rnd))


def _results(values: dict[str, list], measurand="cu", extra=""):
    lines = ["lab,measurand,replicate,value" + ("," + extra.split("=")[0] if extra else "")]
    for lab, vals in values.items():
        for i, v in enumerate(vals, start=1):
            lines.append(f"{lab},{measurand},{i},{v}")
    return "\n".join(lines) + "\n"


LABS = {f"L{i}": [10 + 0.1 * ((i * 7) % 11 - 5), 10 + 0.1 * ((i * 5) % 11 - 5)] for i in range(1, 13)}


def test_consensus_sigma_and_z(make_round):
    folder = make_round('[round]\nid="E1"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.5\n', _results(LABS))
    ev = _ev(folder)
    m = ev.measurands["cu"]
    means = np.array([np.mean(v) for v in LABS.values()])
    est = algorithm_a(means)
    assert m.assigned == est.mean and m.p == 12
    assert m.u_assigned == pytest.approx(1.25 * est.sd / np.sqrt(12))  # ISO 13528 §7.7.3
    sc = ev.scores.set_index("lab")
    assert sc.loc["L3", "z"] == pytest.approx((np.mean(LABS["L3"]) - est.mean) / 0.5)
    assert sc.loc["L3", "n_replicates"] == 2
    assert set(ev.statistics.columns) >= {"robust_mean", "robust_sd", "iterations", "u_check_passed"}


def test_horwitz_sigma_uses_unit(make_round):
    folder = make_round('[round]\nid="E2"\n[measurand.cu]\nunit="µg/kg"\nsigma_pt="horwitz"\n',
                        _results({k: [v[0] * 100, v[1] * 100] for k, v in LABS.items()}))
    m = _ev(folder).measurands["cu"]
    c = m.assigned * 1e-9  # µg/kg → mass fraction
    assert m.sigma_pt == pytest.approx(horwitz_thompson(c) / 1e-9)


def test_u_check_fails_and_suggests_z_prime(make_round):
    labs = {f"L{i}": [10 + (i % 5 - 2) * 0.8] for i in range(1, 9)}
    folder = make_round('[round]\nid="E3"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.3\n', _results(labs))
    ev = _ev(folder)
    m = ev.measurands["cu"]
    assert m.u_check_passed is False
    assert any("z′" in n for n in m.notes)
    assert ev.failed_checks == ["cu: u(x_pt) exceeds 0.3 σ_pt"]


def test_censored_false_negative_and_unit_slip(make_round):
    labs = dict(LABS)
    labs["L20"] = ["<2"]  # limit below x_pt − 3σ_pt = 10 − 1.5: a false negative (common practice)
    labs["L21"] = ["<50"]  # limit above the level: just not scored
    labs["L22"] = [10000.0, 10010.0]  # a factor 1000: unit slip
    folder = make_round('[round]\nid="E4"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.5\n', _results(labs))
    ev = _ev(folder)
    sc = ev.scores.set_index("lab")
    assert sc.loc["L20", "signal"] == "action" and "false negative" in sc.loc["L20", "note"]
    assert sc.loc["L20", "result"] == "<2"
    assert sc.loc["L21", "signal"] == "not-scored" and "censored result <50" in sc.loc["L21", "note"]
    assert sc.loc["L22", "signal"] == "action" and "possible unit or decimal slip" in sc.loc["L22", "note"]
    audit = ev.audit
    assert ((audit.lab == "L21") & audit.reason.str.contains("censored")).any()
    assert ev.measurands["cu"].p == 13  # censored results are left out of the statistics


def test_reference_value_zeta_and_en(make_round):
    res = ("lab,measurand,replicate,value,u,U,k\n"
           "A,pb,1,0.55,0.02,,\nB,pb,1,0.45,,0.06,3\nC,pb,1,0.50,,0.05,\nD,pb,1,0.52,,,\n")
    toml = ('[round]\nid="E5"\n[measurand.pb]\nunit="mg/kg"\nassigned=0.5\nu_assigned=0.01\n'
            'sigma_pt=0.05\nscore="{score}"\n')
    ev = _ev(make_round(toml.format(score="zeta"), res))
    sc = ev.scores.set_index("lab")
    assert sc.loc["A", "zeta"] == pytest.approx(0.05 / np.hypot(0.02, 0.01))
    assert sc.loc["B", "zeta"] == pytest.approx(-0.05 / np.hypot(0.02, 0.01))  # u = U/k = 0.06/3
    assert sc.loc["C", "zeta"] == pytest.approx(0.0)  # u = U/2 with k = 2 assumed (common practice)
    assert sc.loc["D", "signal"] == "not-scored" and "ζ needs u" in sc.loc["D", "note"]
    ev = _ev(make_round(toml.format(score="en"), res))
    sc = ev.scores.set_index("lab")
    # En with U(x_pt) = 2u(x_pt) (ISO 13528 §9.7); lab A's U = 2u (k = 2 assumed).
    assert sc.loc["A", "en"] == pytest.approx(0.05 / np.hypot(0.04, 0.02))
    assert sc.loc["B", "en"] == pytest.approx(-0.05 / np.hypot(0.06, 0.02))
    assert ev.measurands["pb"].assigned_source.startswith("reference value")


def test_exclusion_and_not_reported(make_round):
    labs = dict(LABS)
    labs["L30"] = [""]
    toml = ('[round]\nid="E6"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.5\n'
            '[[exclude]]\nlab="L1"\nreason="bottle broken in transit"\n')
    ev = _ev(make_round(toml, _results(labs)))
    m = ev.measurands["cu"]
    assert m.p == 11  # L1 left out of the consensus, L30 gave nothing
    sc = ev.scores.set_index("lab")
    assert "excluded by the coordinator: bottle broken in transit" in sc.loc["L1", "note"]
    assert np.isfinite(sc.loc["L1", "z"])  # still scored (scored = true by default)
    assert sc.loc["L30", "signal"] == "not-scored" and "not reported" in sc.loc["L30", "note"]
    others = [np.mean(v) for k, v in LABS.items() if k != "L1"]
    assert m.assigned == pytest.approx(algorithm_a(others).mean)


def test_too_few_results_not_scored_with_message(make_round):
    ev = _ev(make_round('[round]\nid="E7"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.5\n',
                        _results({"A": [1.0], "B": [1.1]})))
    m = ev.measurands["cu"]
    assert not m.scored and any("at least 3" in n for n in m.notes)
    assert (ev.scores.signal == "not-scored").all()


def test_robust_sd_sigma(make_round):
    ev = _ev(make_round('[round]\nid="E8"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt="robust-sd"\nscore="z-prime"\n',
                        _results(LABS)))
    m = ev.measurands["cu"]
    assert m.sigma_pt == m.robust.sd
    sc = ev.scores.set_index("lab")
    x = np.mean(LABS["L2"])
    assert sc.loc["L2", "z_prime"] == pytest.approx((x - m.assigned) / np.hypot(m.sigma_pt, m.u_assigned))


def test_replaced_evaluation_does_not_share_per_lab_splits(make_round):
    # dataclasses.replace() of an evaluation (done by callers cutting a round down) must not reuse the
    # original's per-lab split of its tables.
    import dataclasses

    folder = make_round('[round]\nid="E9"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.5\n', _results(LABS))
    ev = _ev(folder)
    assert len(ev.lab_scores("L3")) == 1  # the split is made and kept
    cut = dataclasses.replace(ev, scores=ev.scores[ev.scores["lab"] != "L3"])
    assert len(cut.lab_scores("L3")) == 0 and len(ev.lab_scores("L3")) == 1
    assert cut.labs == [lab for lab in ev.labs if lab != "L3"]


def test_public_evaluate_reads_item_tables_and_the_evaluation_reads_no_file(make_round):
    # Ten items measured twice (invented values); the item table is named in round.toml.
    hom = "item,replicate,value\n" + "".join(f"I{i},{r},{10 + 0.01 * ((i * 3 + r) % 5)}\n"
                                              for i in range(1, 11) for r in (1, 2))
    folder = make_round('[round]\nid="E10"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.5\nhomogeneity="hom.csv"\n',
                        _results(LABS), hom__csv=hom)
    rnd = load_round(folder)
    public = roundscore.evaluate(rnd, read_results(rnd))  # reads hom.csv itself
    assert public.measurands["cu"].item_checks.homogeneity.g == 10
    inputs = read_inputs(rnd)
    for f in folder.iterdir():  # nothing left to read: the evaluation must work from what intake read
        f.unlink()
    pure = evaluate(inputs.round, inputs.table, inputs.participants, items=inputs.items)
    pd.testing.assert_frame_equal(pure.scores, public.scores)
    pd.testing.assert_frame_equal(pure.extras["items"], public.extras["items"])
    with pytest.raises(ValueError, match="cu: its homogeneity table was not read"):
        evaluate(inputs.round, inputs.table)
    with pytest.raises(InputError, match="homogeneity file named in the round file was not found"):
        roundscore.evaluate(rnd, inputs.table)


@pytest.mark.parametrize("method, sigma", [("algorithm-a", "0.5"), ("median", "0.5"), ("algorithm-a", '"robust-sd"')])
def test_a_consensus_with_zero_spread_is_a_finding(make_round, method, sigma):
    # Lab means 10, 10, 10, 10, 13: more than half identical, so MADe = s* = 0 and u(x_pt) = 1.25 s*/√p = 0
    # (ISO 13528 §7.7.3). A u check on it would pass while saying nothing: it is reported as a finding.
    labs = {f"L{i}": [v] for i, v in enumerate([10, 10, 10, 10, 13], start=1)}
    toml = f'[round]\nid="E9"\n[measurand.cu]\nunit="mg/kg"\nassigned="{method}"\nsigma_pt={sigma}\n'
    ev = _ev(make_round(toml, _results(labs)))
    m = ev.measurands["cu"]
    assert m.u_assigned == 0 and m.u_check_passed is None
    assert len(m.findings) == 1 and "robust SD is zero" in m.findings[0]
    assert ev.failed_checks == [f"cu: {m.findings[0]}"]
    audit = ev.audit[(ev.audit["measurand"] == "cu") & (ev.audit["action"] == "finding")]
    assert len(audit) == 1 and "u(x_pt)" in audit["reason"].iloc[0]
    if sigma == '"robust-sd"':  # never scored against σ_pt = robust SD = 0
        assert not np.isfinite(m.sigma_pt) and ev.scores["z"].isna().all()


def test_a_consensus_with_spread_has_no_zero_spread_finding(make_round):
    labs = {f"L{i}": [v] for i, v in enumerate([10, 10, 10, 10.5, 13], start=1)}  # MADe > 0
    ev = _ev(make_round('[round]\nid="E9"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.5\n', _results(labs)))
    assert ev.measurands["cu"].findings == () and ev.measurands["cu"].u_check_passed is not None


def test_a_conversion_factor_is_said_in_full_in_the_audit_only_when_the_note_rounds_it():
    # 1 lb = 0.45359237 kg exactly (the international avoirdupois pound of 1959, a definition): mg/lb → mg/kg is
    # ×2.20462262185..., which the note's 6 digits round; ×1000 is exact and said once.
    from types import SimpleNamespace

    from roundscore.evaluation.evaluate import _conversions

    frame = pd.DataFrame({"measurand": ["cu", "cu"], "lab": ["L1", "L2"], "unit_given": ["mg/lb", "g/kg"],
                          "factor": [1 / 0.45359237, 1000.0], "unit": ["mg/kg", "mg/kg"]})
    audit: list[tuple] = []
    notes = _conversions(SimpleNamespace(frame=frame), audit)
    assert notes == {"cu": {"L1": "entered in mg/lb, converted ×2.20462 to mg/kg",
                            "L2": "entered in g/kg, converted ×1000 to mg/kg"}}
    reasons = {row[1]: row[4] for row in audit}
    assert reasons == {"L1": "entered in mg/lb, converted ×2.20462 to mg/kg (factor 2.20462262185)",
                       "L2": "entered in g/kg, converted ×1000 to mg/kg"}


def _frames(ev):
    return {"scores": ev.scores, "statistics": ev.statistics, "audit": ev.audit, **ev.extras}


def test_measurands_evaluated_in_worker_processes_give_the_same_evaluation(demo_round, monkeypatch):
    """A large round's measurands are evaluated in worker processes (a share here, the rest in batches, each batch's
    score rows built here as it comes in, back in order): every table, note and detail is the same as evaluated
    here, one after another (common practice for parallel work: the result must not depend on the number of
    workers)."""
    import roundscore.evaluation.evaluate as ev_mod

    rnd = load_round(demo_round)
    table, parts = read_results(rnd), read_participants(rnd)
    here = roundscore.evaluate(rnd, table, parts)
    monkeypatch.setattr(ev_mod, "PARALLEL_MIN_RESULTS", 0)  # the demo is small: make it "large"
    calls = []
    real = ev_mod.run_batches

    def spy(fn, items, **kw):
        calls.append((kw["jobs"], kw["here"]))
        return real(fn, items, **kw)

    monkeypatch.setattr(ev_mod, "run_batches", spy)
    apart = roundscore.evaluate(rnd, table, parts, jobs=2)
    assert calls == [(2, ev_mod._shares(len(rnd.measurands), 2)[0])] and 0 < calls[0][1] < len(rnd.measurands)
    a, b = _frames(here), _frames(apart)
    assert a.keys() == b.keys() and len(a) > 5
    for name in a:
        pd.testing.assert_frame_equal(a[name], b[name], check_exact=True, obj=name)
    assert here.stage_notes == apart.stage_notes
    assert here.details.keys() == apart.details.keys()
    for n, mr in here.measurands.items():
        other = apart.measurands[n]
        assert other.settings is rnd.measurands[n]  # the round's own settings, not a worker's copy
        assert (other.assigned, other.u_assigned, other.sigma_pt, other.notes) == (
            mr.assigned, mr.u_assigned, mr.sigma_pt, mr.notes)
        pd.testing.assert_frame_equal(mr.labs, other.labs, check_exact=True)


@pytest.mark.parametrize("n", [1, 2, 5, 40, 400])
@pytest.mark.parametrize("workers", [1, 2, 3, 8])
def test_the_share_evaluated_here_leaves_room_for_handling_the_workers_results(n, workers):
    """This process takes fewer measurands than a worker (it also handles every worker's results), none beside
    many workers, and the workers' batches cover the rest (the module's own balance, HANDLING_SHARE)."""
    import roundscore.evaluation.evaluate as ev_mod

    here, size = ev_mod._shares(n, workers)
    if workers == 1:
        assert here is None and size == n
        return
    assert 0 <= here <= n and size >= 1
    per_worker = (n - here) / (workers - 1)
    assert here <= per_worker + 1  # never more than a worker's own share (rounding aside)
    mine = here + ev_mod.HANDLING_SHARE * (n - here)  # what this process does, in measurands
    assert abs(mine - per_worker) <= 1 or (here == 0 and mine > per_worker)  # balanced, to one measurand
    assert -(-(n - here) // size) <= 4 * (workers - 1)  # about four batches per worker


def test_an_error_in_a_measurand_worker_reaches_the_caller(demo_round, monkeypatch):
    import roundscore.evaluation.evaluate as ev_mod
    from roundscore.errors import StatisticsError

    rnd = load_round(demo_round)
    table, parts = read_results(rnd), read_participants(rnd)
    monkeypatch.setattr(ev_mod, "PARALLEL_MIN_RESULTS", 0)

    def broken(*args, **kwargs):
        raise StatisticsError("deliberately broken for the test")

    monkeypatch.setattr(ev_mod, "measurand_part", broken)  # inherited by the forked workers
    with pytest.raises(StatisticsError, match="deliberately broken"):
        roundscore.evaluate(rnd, table, parts, jobs=2)
