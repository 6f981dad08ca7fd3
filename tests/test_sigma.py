"""σ_pt sources (roundscore.stats.sigma) and unit handling (roundscore.model.units)."""

from __future__ import annotations

import pytest

from roundscore.stats.sigma import horwitz_thompson, sigma_from_precision
from roundscore.model.units import UnitError, factor, mass_fraction


@pytest.mark.parametrize("c, rsd", [
    # AMC Technical Brief No. 17 (2004): Horwitz RSD_R 2 % at c = 1 ... 16 % at 1e-6 (rounded doubling rule).
    (1e-2, 0.04), (1e-4, 0.08), (1e-6, 0.16),
])
def test_horwitz_doubling_rule(c, rsd):
    assert horwitz_thompson(c) / c == pytest.approx(rsd, rel=0.03)


def test_horwitz_at_unity_uses_thompson_branch():
    # The original Horwitz curve gives 2 % at c = 1 (AMC TB 17); Thompson (Analyst 125 (2000) 385)
    # replaces it above c = 0.138 by σ = 0.01 c^0.5, i.e. 1 % at c = 1.
    assert 0.02 * 1.0**0.8495 == pytest.approx(0.02)
    assert horwitz_thompson(1.0) == pytest.approx(0.01)


def test_thompson_branches():
    # Thompson (2000): σ = 0.22 c below 1.2e-7; 0.02 c^0.8495 between; 0.01 c^0.5 above 0.138.
    assert horwitz_thompson(1e-8) == pytest.approx(0.22e-8)
    assert horwitz_thompson(1e-3) == pytest.approx(0.02 * 1e-3**0.8495)
    assert horwitz_thompson(0.5) == pytest.approx(0.01 * 0.5**0.5)
    # At 1.2e-7 the Horwitz value is 0.02·(1.2e-7)^0.8495 ≈ 0.22·1.2e-7 (within 2 %): the branches meet.
    c = 1.2e-7
    assert 0.02 * c**0.8495 == pytest.approx(0.22 * c, rel=0.02)


def test_horwitz_refuses_non_positive():
    with pytest.raises(ValueError):
        horwitz_thompson(0.0)


def test_sigma_from_precision_formula():
    # ISO 13528 §8.4: σ_pt = √(s_R² − s_r²(1 − 1/n)); hand check: s_R = 5, s_r = 3, n = 2 → √(25 − 4.5).
    assert sigma_from_precision(5.0, 3.0, 2) == pytest.approx(20.5**0.5)
    assert sigma_from_precision(5.0, 3.0, 1) == pytest.approx(5.0)
    with pytest.raises(ValueError):
        sigma_from_precision(1.0, 3.0, 2)


@pytest.mark.parametrize("a, b, f", [
    ("µg/g", "mg/kg", 1.0), ("ug/kg", "mg/kg", 1e-3), ("g/100 g", "g/kg", 10.0), ("%", "g/100 g", 1.0),
    ("mg/kg", "µg/kg", 1000.0), ("ppm", "mg/kg", 1.0), ("μg/L", "mg/L", 1e-3),  # Greek mu accepted too
])
def test_unit_factors(a, b, f):
    # SI prefixes (BIPM SI Brochure, 9th ed.); ppm = 1e-6 as a mass fraction (common practice).
    assert factor(a, b) == pytest.approx(f, rel=1e-12)


def test_unit_errors_are_clear():
    with pytest.raises(UnitError, match="cannot be converted"):
        factor("mg/L", "mg/kg")
    with pytest.raises(UnitError, match="not understood"):
        factor("furlongs per bushel of", "mg/kg")
    with pytest.raises(UnitError, match="not a mass fraction"):
        mass_fraction("mg/L")
    assert mass_fraction("mg/kg") == pytest.approx(1e-6)
