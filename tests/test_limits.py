"""A computed value on a limit: one comparison rule for signals, item checks, the u check and trend rules.

The cases are the ones an independent re-implementation of the standards found decided by floating point
(x_pt = 1.0, σ_pt = 0.3: results 1.6 and 0.4 give z = 2.0000000000000004 and −2 exactly; a stability
difference of 1.1 − 0.95 = 0.15000000000000013 against 0.3 σ_pt = 0.15). The limits are those of
ISO 13528:2022 §9.4 (|z| ≤ 2 acceptable, ≥ 3 action) and §9.7 (|En| ≤ 1 acceptable); the stability
criterion |y1 − y2| ≤ 0.3 σ_pt is ISO 13528 B.5. Deciding on the value as reported is common practice.
"""

from __future__ import annotations

import numpy as np
import pytest

from roundscore.model.scores import SCORE_FAMILIES
from roundscore.stats import items, scores, trends
from roundscore.stats.limits import LIMIT_RTOL, above, reaches, within


def test_the_floating_point_case_is_the_one_found() -> None:
    # The premise of the module: plain arithmetic puts these on either side of 2 and of 0.15.
    z_hi, z_lo = scores.z_score([1.6, 0.4], 1.0, 0.3)
    assert z_hi > 2.0 and z_lo == -2.0
    assert 1.1 - 0.95 > 0.3 * 0.5


def test_z_on_the_warning_limit_is_acceptable_on_both_sides() -> None:
    z = scores.z_score([1.6, 0.4], 1.0, 0.3)
    assert scores.signal(z).tolist() == ["acceptable", "acceptable"]
    assert SCORE_FAMILIES["z-like"].signals(z).tolist() == ["acceptable", "acceptable"]


def test_z_on_the_action_limit_is_an_action_signal_on_both_sides() -> None:
    z = scores.z_score([1.9, 0.1], 1.0, 0.3)  # ±3 up to rounding noise
    assert scores.signal(z).tolist() == ["action", "action"]


def test_beyond_the_tolerance_decides_as_before() -> None:
    two = 2.0 * (1 + 10 * LIMIT_RTOL)
    assert scores.signal([two, -two, 3.0 * (1 - 10 * LIMIT_RTOL)]).tolist() == ["warning", "warning", "warning"]
    assert scores.signal([2.01, 1.99, 2.99, 3.0]).tolist() == ["warning", "acceptable", "warning", "action"]


def test_en_exactly_one_is_acceptable_in_the_scores_and_the_trend_rule() -> None:
    # ISO 13528 §9.7.3: |En| ≤ 1 acceptable; the archive's rule 1 must read the same limit.
    en = scores.en_score([2.0, 0.0], 1.0, 0.6, 0.8)  # (±1)/√(0.36 + 0.64) = ±1
    assert np.all(np.abs(en) == 1.0)
    fam = SCORE_FAMILIES["en"]
    assert fam.signals(en).tolist() == ["acceptable", "acceptable"]
    assert trends.action_signals(en, limit=fam.action, strict=fam.strict).size == 0
    assert trends.action_signals([1.01], limit=fam.action, strict=fam.strict).tolist() == [0]


def test_every_family_agrees_with_rule_one_on_and_near_its_limit() -> None:
    for fam in SCORE_FAMILIES.values():
        probe = np.array([fam.action * (1 - 1e-15), fam.action, fam.action * (1 + 1e-15), fam.action * 1.001])
        acted = fam.signals(probe) == "action"
        fired = np.zeros(probe.size, dtype=bool)
        fired[trends.action_signals(probe, limit=fam.action, strict=fam.strict)] = True
        assert acted.tolist() == fired.tolist(), fam


def test_two_of_three_ignores_scores_on_the_warning_limit() -> None:
    z = scores.z_score([1.6, 1.6, 1.6], 1.0, 0.3)  # 2.0000000000000004 three times
    assert trends.two_of_three(z) == []
    assert trends.two_of_three([2.1, 2.1]) == [(1, "high")]


def test_stability_difference_on_the_criterion_passes() -> None:
    res = items.stability([1.1], [0.95], 0.5, u_first=0.0, u_second=0.0, criterion="simple")
    assert res.passed_simple is True and res.passed is True
    res = items.stability([1.1], [0.949], 0.5, u_first=0.0, u_second=0.0, criterion="simple")
    assert res.passed_simple is False


@pytest.mark.parametrize("value, limit, a, r, w", [
    (2.0, 2.0, False, True, True),
    (2.0 + 1e-15, 2.0, False, True, True),
    (2.0 - 1e-15, 2.0, False, True, True),
    (2.001, 2.0, True, True, False),
    (1.999, 2.0, False, False, True),
    (float("nan"), 2.0, False, False, False),
])
def test_the_three_comparisons(value, limit, a, r, w) -> None:
    assert (bool(above(value, limit)), bool(reaches(value, limit)), bool(within(value, limit))) == (a, r, w)
