"""The consensus stage (roundscore.evaluation.consensus) and its round-file keys (intake/consensus_keys.py).

Expected values: the estimators of roundscore.stats (tested against outside references in test_hampel.py,
test_kernel.py, test_robust.py) applied by hand to the round's results; the sensitivity rule and the
reference ratio worked by hand from their definitions (README, "Consensus").
"""

from __future__ import annotations

import numpy as np
import pytest

from roundscore.errors import RoundFileError
from roundscore.evaluation.evaluate import evaluate
from roundscore.intake.readers import read_participants, read_results
from roundscore.intake.roundfile import load_round
from roundscore.stats.hampel import q_hampel
from roundscore.stats.kernel import kernel_mode
from roundscore.stats.robust import algorithm_a

LABS = {f"L{i}": [10 + 0.1 * ((i * 7) % 11 - 5), 10 + 0.1 * ((i * 5) % 11 - 5)] for i in range(1, 13)}


def _results(values, measurand="cu"):
    lines = ["lab,measurand,replicate,value"]
    for lab, vals in values.items():
        lines += [f"{lab},{measurand},{i},{v}" for i, v in enumerate(vals, start=1)]
    return "\n".join(lines) + "\n"


def _ev(folder):
    rnd = load_round(folder)
    return evaluate(rnd, read_results(rnd), read_participants(rnd))


def _flat(labs):
    return (np.array([v for r in labs.values() for v in r]),
            np.array([k for k, r in labs.items() for _ in r]))


def test_q_hampel_assigned_and_q_method_sigma(make_round):
    folder = make_round('[round]\nid="C1"\n[measurand.cu]\nunit="mg/kg"\nassigned="q-hampel"\n'
                        'sigma_pt="q-method"\n', _results(LABS))
    ev = _ev(folder)
    m = ev.measurands["cu"]
    ref = q_hampel(*_flat(LABS))  # on the individual results, as ISO 13528 C.5.2 describes
    assert m.assigned == pytest.approx(ref.mean, abs=1e-12)
    assert m.sigma_pt == pytest.approx(ref.sd, rel=1e-12)
    assert m.u_assigned == pytest.approx(1.25 * ref.sd / np.sqrt(12))
    assert "Q method on 24 results" in m.assigned_source
    c = ev.extras["consensus"]
    assert list(c["method"]) == ["Algorithm A", "Q/Hampel", "median", "kernel mode", "chosen: Q/Hampel"]
    assert c.loc[c["method"] == "Q/Hampel", "chosen"].item()
    assert c.loc[c["method"] == "Algorithm A", "value"].item() == pytest.approx(
        algorithm_a(np.array([np.mean(v) for v in LABS.values()])).mean)


def test_kernel_mode_assigned(make_round):
    folder = make_round('[round]\nid="C2"\n[measurand.cu]\nunit="mg/kg"\nassigned="kernel-mode"\nsigma_pt=0.4\n',
                        _results(LABS))
    m = _ev(folder).measurands["cu"]
    km = kernel_mode(np.array([np.mean(v) for v in LABS.values()]), 0.75 * 0.4)  # h = 0.75 σ_pt
    assert m.assigned == pytest.approx(km.mode, abs=1e-12) and m.u_assigned == pytest.approx(km.se)
    assert "bootstrap SE" in m.assigned_source


@pytest.mark.parametrize("how", ["labs", "labs_file"])
def test_subset_consensus(make_round, how):
    subset = ["L1", "L2", "L3", "L5", "L8"]
    key = (f'assigned = {{ method = "algorithm-a", labs = {subset!r} }}'.replace("'", '"') if how == "labs" else
           'assigned = { method = "algorithm-a", labs_file = "experts.csv" }')
    folder = make_round(f'[round]\nid="C3"\n[measurand.cu]\nunit="mg/kg"\n{key}\nsigma_pt=0.4\n', _results(LABS),
                        experts__csv="lab\n" + "\n".join(subset) + "\n")
    ev = _ev(folder)
    m = ev.measurands["cu"]
    est = algorithm_a(np.array([np.mean(LABS[k]) for k in subset]))
    assert m.p == 5 and m.assigned == pytest.approx(est.mean)
    assert m.u_assigned == pytest.approx(1.25 * est.sd / np.sqrt(5))
    assert ev.scores["z"].notna().sum() == 12  # every lab is scored against the experts' consensus


def test_subset_round_file_errors(make_round):
    folder = make_round('[round]\nid="C4"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.4\n'
                        'assigned = { method = "algorithm-a", labs = ["L1", "L2"] }\n'
                        'reference = { value = 10 }\n', _results(LABS))
    with pytest.raises(RoundFileError) as exc:
        load_round(folder)
    text = str(exc.value)
    assert "measurand.cu.assigned" in text and "at least 3 labs" in text
    assert "measurand.cu.reference" in text and "value = number" in text
    folder = make_round('[round]\nid="C5"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.4\n'
                        'assigned = { method = "algorithm-a", labs_file = "../outside.csv" }\n', _results(LABS))
    with pytest.raises(RoundFileError, match="inside the round folder"):
        load_round(folder)


@pytest.mark.parametrize("ref, agrees", [(10.0, True), (11.0, False)])
def test_reference_check(make_round, ref, agrees):
    folder = make_round(f'[round]\nid="C6"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.4\n'
                        f'reference = {{ value = {ref}, u = 0.05 }}\n', _results(LABS))
    ev = _ev(folder)
    m = ev.measurands["cu"]
    r = ev.extras["reference"].iloc[0]
    u_d = np.hypot(m.u_assigned, 0.05)
    assert r["difference"] == pytest.approx(m.assigned - ref)
    assert r["u_difference"] == pytest.approx(u_d)
    assert r["ratio"] == pytest.approx((m.assigned - ref) / (2 * u_d))  # En-like, k = 2
    assert bool(r["agrees"]) is agrees
    flagged = [c for c in ev.failed_checks if "reference value" in c]
    assert bool(flagged) is (not agrees)


def _skewed(copies: int) -> dict[str, list[float]]:
    """A skewed round: ten labs near 10 and a tail of five high ones, each ``copies`` times."""
    labs = {f"L{i}": [10.0 + 0.01 * (i % 10 + 1)] * 2 for i in range(1, 10 * copies + 1)}
    labs.update({f"H{i}": [10.6 + 0.05 * (i % 5 + 1)] * 2 for i in range(1, 5 * copies + 1)})
    return labs


@pytest.mark.parametrize("copies, sigma_pt, rule", [
    # 15 labs, σ_pt = 0.2: Algorithm A and Q/Hampel differ by more than 0.3 σ_pt = 0.06 but by less than
    # 2·√(u₁² + u₂²) (the u are large with 15 labs): the σ_pt rule fires.
    (1, 0.2, "sigma"),
    # 45 labs, σ_pt = 2: the same difference, now below 0.3 σ_pt = 0.6 but above 2·√(u₁² + u₂²) (u shrink
    # with √p): the u rule fires.
    (3, 2.0, "u"),
])
def test_sensitivity_flag_fires_by_the_rule_that_holds_and_is_printed(make_round, copies, sigma_pt, rule):
    folder = make_round(f'[round]\nid="C7"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt={sigma_pt}\n',
                        _results(_skewed(copies)))
    ev = _ev(folder)
    c = ev.extras["consensus"]
    assert c["flag"].all()
    by = c.set_index("method")
    a, q = by.loc["Algorithm A"], by.loc["Q/Hampel"]  # the first pair of the table, so the first checked
    d = abs(a["value"] - q["value"])
    lim_u, lim_s = 2 * np.hypot(a["u"], q["u"]), 0.3 * sigma_pt  # the rule (README, "Sensitivity table")
    if rule == "sigma":
        assert lim_s < d <= lim_u
        want = f"Algorithm A and Q/Hampel differ by {d:.3g}, more than 0.3 σ_pt = {lim_s:.3g}"
    else:
        assert lim_u < d <= lim_s
        want = f"Algorithm A and Q/Hampel differ by {d:.3g}, more than 2·√(u₁² + u₂²) = {lim_u:.3g}"
    assert (c["why"] == want).all()
    assert ev.stage_notes["cu"] == (f"the assigned value is sensitive to the method: {want} (consensus.csv)",)
    from roundscore.commands.round_commands import summary_text
    assert f"cu: the assigned value is sensitive to the method: {want}" in summary_text(ev)


def test_no_flag_when_the_estimates_agree(make_round):
    folder = make_round('[round]\nid="C8"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=2.0\n', _results(LABS))
    ev = _ev(folder)
    c = ev.extras["consensus"]
    assert not c["flag"].any() and (c["why"] == "").all()
    # The rule, by hand: every pair within 2·√(u₁² + u₂²) and within 0.3 σ_pt.
    ok = c[np.isfinite(c["value"])]
    for a in ok.itertuples():
        for b in ok.itertuples():
            if np.isfinite(a.u) and np.isfinite(b.u):  # the kernel mode has no u unless it is the assigned value
                assert abs(a.value - b.value) <= max(2 * np.hypot(a.u, b.u), 1e-15)
            assert abs(a.value - b.value) <= 0.3 * 2.0


def test_demo_writes_consensus_csv(scored_demo):
    text = (scored_demo.out / "consensus.csv").read_text(encoding="utf-8")
    assert text.splitlines()[0] == "measurand,method,value,u,robust_sd,sigma_pt,chosen,n,flag,why"
    assert sum(1 for line in text.splitlines() if line.startswith("iodine,")) == 5
