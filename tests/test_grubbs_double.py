"""Tests of roundscore.stats.grubbs_double: simulated critical values of the double Grubbs test."""

from __future__ import annotations

import pytest

from roundscore.stats import outliers
from roundscore.stats.grubbs_double import GRUBBS_DOUBLE_SEED, grubbs_double_table


@pytest.mark.parametrize(
    ("p", "crit_1", "crit_5"),
    [
        # ISO 5725-2:1994 Table 5, double Grubbs, lower critical values (from memory).
        (4, 0.0000, 0.0002),
        (5, 0.0018, 0.0090),
        (8, 0.0563, 0.1101),
        (10, 0.1150, 0.1864),
        (12, 0.1738, 0.2537),
    ],
)
def test_grubbs_double_critical_iso_table(p: int, crit_1: float, crit_5: float) -> None:
    table = grubbs_double_table(p)
    # Table rounding (5e-5) plus three Monte Carlo standard errors.
    assert table.critical_1 == pytest.approx(crit_1, abs=5e-5 + 3 * table.se_1)
    assert table.critical_5 == pytest.approx(crit_5, abs=5e-5 + 3 * table.se_5)
    assert table.se_1 < 3e-4 and table.se_5 < 3e-4


def test_grubbs_double_is_reproducible_and_seed_dependent() -> None:
    a = grubbs_double_table(6)
    assert grubbs_double_table(6) is a  # cached
    b = grubbs_double_table(6, draws=1 << 18, seed=99)
    assert b.critical_5 != a.critical_5
    assert b.critical_5 == pytest.approx(a.critical_5, abs=4 * b.se_5)


def test_re_exported_from_outliers() -> None:
    # The screens import the table from here; the old public names still work.
    assert outliers.grubbs_double_table is grubbs_double_table
    assert outliers.GRUBBS_DOUBLE_SEED == GRUBBS_DOUBLE_SEED == grubbs_double_table(5).seed


@pytest.mark.parametrize("p", [7, 15])
def test_tabulated_values_agree_with_the_run_time_simulation(p: int) -> None:
    # The table (2**25 samples per p) and a fresh simulation with another stream must agree within their
    # standard errors; a wrong table (an edited value, a changed statistic) fails here.
    tab = grubbs_double_table(p)
    assert tab.draws == 1 << 25 and tab.se_5 < 1e-4 and tab.se_1 < 1e-4
    sim = grubbs_double_table(p, draws=1 << 19, seed=GRUBBS_DOUBLE_SEED + 1)
    assert sim.critical_5 == pytest.approx(tab.critical_5, abs=4 * (sim.se_5 + tab.se_5))
    assert sim.critical_1 == pytest.approx(tab.critical_1, abs=4 * (sim.se_1 + tab.se_1))


def test_beyond_the_table_the_simulation_runs() -> None:
    t = grubbs_double_table(41)
    assert t.draws < 1 << 25 and 0 < t.critical_1 < t.critical_5 < 1
