"""The check of the laboratories' reported uncertainties and the joint reading of z and ζ.

roundscore.stats.uncertainty (the range and the verdicts on arrays) and roundscore.evaluation.uncertainty
(the ``uncertainties`` table of a round). Expected values are worked by hand from the definitions: the
plausible range from u(x_pt) (or 0.3 s_R when larger) to 1.5 σ_pt (ISO 13528:2015 §9.8, from memory; the
0.3 s_R bound is roundscore's rule), the signals of z and ζ by ISO 13528 §9.4/§9.6 (|score| ≤ 2 acceptable,
≥ 3 action), and their joint reading (ISO 13528:2015 §9.6/§9.8, from memory). The round is invented
(tests/uncertainty_round.py).
"""

from __future__ import annotations

import numpy as np
import pytest

from roundscore.commands.round_commands import summary_text
from roundscore.evaluation.uncertainty import UNCERTAINTY_COLUMNS, counts
from roundscore.pipeline import load_and_evaluate
from roundscore.stats.limits import LIMIT_RTOL
from roundscore.stats.uncertainty import (U_MAX_SIGMA_FACTOR, U_MIN_REPRODUCIBILITY_FACTOR, check_uncertainties,
                                          joint_reading)

from . import uncertainty_round as ur

# ------------------------------------------------------------------------------------------ the arrays


def test_the_range_is_u_x_pt_to_one_and_a_half_sigma_pt() -> None:
    # u(x_pt) = 0.01, σ_pt = 0.1: the range is 0.01 to 0.15 (ISO 13528:2015 §9.8, from memory).
    c = check_uncertainties([0.005, 0.01, 0.05, 0.15, 0.2, np.nan], u_x_pt=0.01, sigma_pt=0.1)
    assert c.u_min.tolist() == [0.01] * 6 and c.u_max == pytest.approx([0.15] * 6)
    assert c.small.tolist() == [True, False, False, False, False, False]
    assert c.large.tolist() == [False, False, False, False, True, False]
    assert c.checked.tolist() == [True] * 5 + [False]  # NaN: not reported, not checked


def test_on_a_limit_within_the_shared_tolerance_is_within_the_range() -> None:
    # 1.5 × 0.1 = 0.15000000000000002 in floating point; 0.15 reported is on the limit, not above it
    # (roundscore.stats.limits); a u 1e-6 (far beyond LIMIT_RTOL) past either limit is outside.
    step = 1e3 * LIMIT_RTOL
    c = check_uncertainties([0.15, 0.15 * (1 + step), 0.01, 0.01 * (1 - step)], u_x_pt=0.01, sigma_pt=0.1)
    assert c.large.tolist() == [False, True, False, False]
    assert c.small.tolist() == [False, False, False, True]


def test_the_reproducibility_bound_replaces_u_x_pt_only_when_larger() -> None:
    # 0.3 s_R = 0.03 > u(x_pt) = 0.01 in the first two; 0.3 s_R = 0.003 < 0.01 in the third; no s_R in the last.
    c = check_uncertainties([0.02, 0.005, 0.005, 0.005], u_x_pt=0.01, sigma_pt=0.1,
                            s_R=[0.1, 0.1, 0.01, np.nan])
    assert c.u_min == pytest.approx([U_MIN_REPRODUCIBILITY_FACTOR * 0.1] * 2 + [0.01, 0.01])
    assert c.from_reproducibility.tolist() == [True, True, False, False]
    assert c.small.tolist() == [True, True, True, True]
    # 0.02 is below 0.3 s_R but not below u(x_pt); 0.005 is below both
    assert c.below_u_x_pt.tolist() == [False, True, True, True]


def test_zero_is_too_small_even_when_the_lower_limit_is_zero() -> None:
    # A stated assigned value with u(x_pt) = 0: the lower limit is 0, and u = 0 is still no uncertainty.
    c = check_uncertainties([0.0, 0.01], u_x_pt=0.0, sigma_pt=0.1)
    assert c.small.tolist() == [True, False]


def test_an_empty_range_says_nothing_and_missing_limits_check_what_they_can() -> None:
    # u(x_pt) = 0.2 above 1.5 σ_pt = 0.15: no u could be plausible, so none is judged.
    c = check_uncertainties([0.1, 0.3], u_x_pt=0.2, sigma_pt=0.1)
    assert c.empty.tolist() == [True, True] and not c.checked.any() and not (c.small | c.large).any()
    # no σ_pt: only the lower limit; neither: nothing
    c = check_uncertainties([0.005, 5.0, 0.005], u_x_pt=[0.01, 0.01, np.nan], sigma_pt=np.nan)
    assert c.small.tolist() == [True, False, False] and not c.large.any()
    assert c.checked.tolist() == [True, True, False]


@pytest.mark.parametrize("z, zeta, reading", [
    (1.5, 3.5, "understated"),    # acceptable z (|z| ≤ 2), action ζ (|ζ| ≥ 3)
    (-2.0, -3.0, "understated"),  # both on their limits: z = 2 is acceptable, ζ = 3 an action signal
    (3.5, 1.7, "not-fit"),        # action z, acceptable ζ
    (-3.0, 2.0, "not-fit"),
    (1.0, 1.0, ""),               # both acceptable
    (2.5, 3.5, ""),               # a warning z: neither case
    (1.0, 2.5, ""),               # a warning ζ
    (3.5, 3.5, ""),               # both action signals
    (1.0, np.nan, ""),            # no ζ (no uncertainty reported): no reading
    (np.nan, 3.5, ""),            # no z
])
def test_joint_reading_both_ways_and_where_it_must_not_appear(z, zeta, reading) -> None:
    assert joint_reading([z], [zeta]).tolist() == [reading]


# ------------------------------------------------------------------------------------------ a round


@pytest.fixture(scope="module")
def round_ev(tmp_path_factory):
    folder = ur.write(tmp_path_factory.mktemp("uncertainty") / "round")
    return load_and_evaluate(folder)


def _expected(ev) -> dict[str, tuple[str, float, float, float]]:
    """lab → (verdict, u, u_min, u_max) from the definitions, for cu."""
    m = ev.measurands["cu"]
    prec = ev.extras["precision"].set_index("measurand").loc["cu"]
    assert prec["p"] >= 8  # the s_R bound applies (ISO 5725-1's minimum of 8 labs, from memory)
    u_min = max(m.u_assigned, 0.3 * prec["s_R"])
    u_max = 1.5 * ur.SIGMA_PT
    out = {}
    for lab, (mean, u) in ur.LABS.items():
        if isinstance(mean, str) or lab == ur.WITHHELD:
            continue  # censored, withheld: no row
        verdict = ("not-reported" if u is None else "too-small" if u <= 0 or u < u_min else
                   "too-large" if u > u_max else "plausible")
        out[lab] = (verdict, np.nan if u is None else u, u_min, u_max)
    return out


def test_the_table_holds_each_case_computed_from_the_definitions(round_ev) -> None:
    ev = round_ev
    t = ev.extras["uncertainties"]
    assert tuple(t.columns) == UNCERTAINTY_COLUMNS
    assert set(t["measurand"]) == {"cu"}  # nobody reported u for zn: no rows
    want = _expected(ev)
    got = t.set_index("lab")
    assert set(got.index) == set(want)  # C1 (censored) and L12 (withheld) have no row
    for lab, (verdict, u, u_min, u_max) in want.items():
        row = got.loc[lab]
        assert row["check"] == verdict, lab
        assert row["u_min"] == pytest.approx(u_min, rel=1e-12) and row["u_max"] == pytest.approx(u_max)
        assert (np.isnan(row["u"]) and np.isnan(u)) or row["u"] == pytest.approx(u)
    # the planted cases are the ones they were planted to be
    assert [want[k][0] for k in ("S1", "R1", "Z1", "B1", "N1", "L01")] == [
        "too-small", "too-small", "too-small", "too-large", "not-reported", "plausible"]
    assert ev.measurands["cu"].u_assigned < 0.055 < 0.3 * ev.extras["precision"]["s_R"].iloc[0]  # R1 in between


def test_the_readings_say_which_limit_and_the_advice_what_to_look_at(round_ev) -> None:
    t = round_ev.extras["uncertainties"].set_index("lab")
    reading, advice = t["reading"], t["advice"]
    assert reading["S1"] == "too small: below u(x_pt)" and "every significant contribution" in advice["S1"]
    assert reading["R1"] == "too small: below 0.3 s_R" and "uncertainty budget" in advice["R1"]
    assert reading["Z1"] == "too small: zero"
    assert reading["B1"] == "too large: above 1.5 σ_pt" and "expanded uncertainty U" in advice["B1"]
    assert reading["N1"] == "no uncertainty reported" and advice["N1"] == ""
    assert reading["L01"] == "plausible" and advice["L01"] == ""
    # a joint reading adds its sentence to the advice (J2: too large and not fit for purpose)
    assert advice["J2"].startswith("Above 1.5 σ_pt") and "z action signal but ζ acceptable" in advice["J2"]
    assert advice["J1"].startswith("z acceptable but ζ action signal")


def test_joint_readings_follow_z_and_zeta_computed_by_hand(round_ev) -> None:
    ev = round_ev
    m = ev.measurands["cu"]
    got = ev.extras["uncertainties"].set_index("lab")["joint"]
    for lab in got.index:
        mean, u = ur.LABS[lab]
        z = (mean - m.assigned) / ur.SIGMA_PT                                  # ISO 13528 §9.4
        zeta = (mean - m.assigned) / np.hypot(u, m.u_assigned) if u is not None else np.nan  # §9.6
        want = ("understated" if abs(z) <= 2 and abs(zeta) >= 3 else
                "not-fit" if abs(z) >= 3 and abs(zeta) <= 2 else "")
        text = got[lab]
        assert text == {"understated": "uncertainty probably understated",
                        "not-fit": "result may not be fit for purpose", "": ""}[want], lab
    assert got["J1"] and got["J2"] and got["N1"] == "" and got["L01"] == ""  # both ways, and absent


def test_z_prime_is_read_with_zeta_when_the_round_scores_with_it(tmp_path) -> None:
    # The same labs scored with z′: the joint reading names z′ (the z-like score the round uses).
    folder = ur.write(tmp_path / "zprime")
    toml = (folder / "round.toml").read_text(encoding="utf-8").replace('score = "zeta"', 'score = "z-prime"')
    (folder / "round.toml").write_text(toml, encoding="utf-8")
    ev = load_and_evaluate(folder)
    joint = ev.extras["uncertainties"].set_index("lab")["joint"]
    assert joint["J1"] == "uncertainty probably understated"
    advice = ev.extras["uncertainties"].set_index("lab")["advice"]
    assert advice["J1"].startswith("z′ acceptable but ζ action signal")


def test_a_round_without_any_uncertainty_has_no_table(make_round) -> None:
    folder = make_round('[round]\nid="U2"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.4\n',
                        "lab,measurand,replicate,value\n" + "".join(f"L{i},cu,1,{10 + 0.1 * i}\n" for i in range(6)))
    ev = load_and_evaluate(folder)
    assert "uncertainties" not in ev.extras and counts(ev.extras.get("uncertainties")) is None
    assert "reported uncertainties" not in summary_text(ev)


def test_the_terminal_counts_the_flagged_ones(round_ev) -> None:
    want = _expected(round_ev)
    verdicts = [v for v, *_ in want.values()]
    small, large, ok = (verdicts.count(v) for v in ("too-small", "too-large", "plausible"))
    assert (small, large) == (3, 2)  # S1, R1, Z1; B1, J2
    line = next(x for x in summary_text(round_ev).splitlines() if "reported uncertainties" in x)
    assert f"{small + large} of {small + large + ok} checked look implausible ({small} too small" in line
    assert f"{large} too large: above {U_MAX_SIGMA_FACTOR:g} σ_pt" in line
    assert "1 result without one" in line and "2 notes on z and ζ read together" in line
    assert "ISO 13528:2015 §9.8, from memory" in line
