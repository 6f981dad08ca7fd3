"""Property tests (hypothesis): invariances the standards imply, and a parser that only says no politely.

* The cell parser raises nothing but :class:`~roundscore.intake.cells.CellError`.
* Algorithm A (ISO 13528 C.3.1) is a function of the set of results:
  permutation invariant, and location/scale equivariant (x → a·x + b gives
  x* → a·x* + b, s* → |a|·s*), since its start (median, MADe) and its
  winsorising steps are.
* z-scores do not depend on the unit the round is run in (mg/kg vs µg/kg).
* ISO 5725-2 precision estimates (s_r, s_L, s_R) are unchanged by adding a
  constant to every result (they are built from deviations).
"""

from __future__ import annotations

import datetime as dt
import math
import textwrap
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from roundscore.intake.cells import AmbiguousNumber, CellError, parse_cell
from roundscore.evaluation.evaluate import evaluate
from roundscore.intake.roundfile import load_round
from roundscore.stats.precision import precision
from roundscore.stats.robust import algorithm_a
from roundscore.model.table import Record
from roundscore.intake.validate import build_table

FAST = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# Text that looks like what labs type, plus anything at all.
_numberish = st.text(alphabet="0123456789.,eE+-−<>≤= \u00a0\u202f'ndNDLOQlo/", max_size=24)
_cells = st.one_of(
    st.none(), st.booleans(), st.integers(), st.integers(min_value=-10 ** 500, max_value=10 ** 500),
    st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=80), _numberish,
    st.datetimes(), st.dates(), st.times(), st.timedeltas(), st.binary(max_size=8),
    st.decimals(allow_nan=True), st.fractions(), st.complex_numbers(),
)


@FAST
@given(_cells)
def test_parse_cell_raises_only_cell_error(raw):
    try:
        cell = parse_cell(raw)
    except CellError as exc:
        assert str(exc)  # a message, always
        return
    assert cell.kind in ("value", "censored", "blank")
    if cell.kind == "value":
        assert math.isfinite(cell.value)
        assert float(cell.text) == pytest.approx(cell.value, rel=1e-12, abs=0)
    if cell.kind == "censored" and cell.limit is not None:
        assert math.isfinite(cell.limit)


@FAST
@given(st.floats(min_value=-1e6, max_value=1e6, allow_nan=False).map(lambda v: round(v, 6)))
def test_typed_number_reads_back(v):
    # What a spreadsheet shows for a number, typed back as text, gives the same number when the decimal
    # mark is declared; undeclared, it gives the same number or is refused as ambiguous (1.234), never another.
    for text, mark in ((repr(v), "point"), (f"{v:.6f}", "point"), (f"{v:e}".replace("e", "E"), "point"),
                       (repr(v).replace(".", ","), "comma")):
        expected = float(text.replace(",", "."))
        assert parse_cell(text, decimal=mark).value == pytest.approx(expected, rel=1e-15, abs=0)
        try:
            cell = parse_cell(text)
        except AmbiguousNumber:
            continue
        assert cell.value == pytest.approx(expected, rel=1e-15, abs=0)


# Results on a 0.001 grid, as labs report them (a value like 1e-194 next to 1.0 would vanish when
# shifted, changing the data rather than testing the estimator).
_results = st.lists(st.integers(min_value=-10 ** 6, max_value=10 ** 6).map(lambda k: k / 1000),
                    min_size=3, max_size=40)


def _spread_ok(x: np.ndarray) -> bool:
    return np.ptp(x) > 1e-6 * max(1.0, float(np.max(np.abs(x)))) and len(np.unique(x)) >= 3


@FAST
@given(_results, st.randoms(use_true_random=False))
def test_algorithm_a_permutation_invariant(values, rnd):
    x = np.array(values)
    assume(_spread_ok(x))
    y = x.copy()
    rnd.shuffle(y)
    a, b = algorithm_a(x), algorithm_a(y)
    scale = max(a.sd, 1e-300)
    assert abs(a.mean - b.mean) <= 1e-9 * scale
    assert b.sd == pytest.approx(a.sd, rel=1e-9)


@FAST
@given(_results, st.floats(min_value=0.01, max_value=100), st.booleans(),
       st.integers(min_value=-10 ** 6, max_value=10 ** 6).map(lambda k: k / 1000))
def test_algorithm_a_location_scale_equivariant(values, a, negative, b):
    x = np.array(values)
    assume(_spread_ok(x))
    if negative:
        a = -a
    y = a * x + b
    assume(len(np.unique(y)) == len(np.unique(x)))
    base, moved = algorithm_a(x), algorithm_a(y)
    # Convergence tolerance is 1e-10 s* per step (roundscore.stats.robust); allow for it.
    assert moved.mean == pytest.approx(a * base.mean + b, abs=1e-7 * abs(a) * base.sd + 1e-9 * abs(b))
    assert moved.sd == pytest.approx(abs(a) * base.sd, rel=1e-7)


@FAST
@given(st.lists(st.lists(st.floats(min_value=0, max_value=100, allow_nan=False), min_size=2, max_size=2),
                min_size=3, max_size=12),
       st.floats(min_value=-1e4, max_value=1e4))
def test_precision_unchanged_by_a_constant(cells, c):
    values = np.array([v for cell in cells for v in cell])
    labs = [f"L{i}" for i, cell in enumerate(cells) for _ in cell]
    within = np.array([abs(a - b) for a, b in cells])
    assume(within.max() > 1e-3)
    # Decimal text as typed, so the centring is exact (the recommended use).
    texts = [f"{v:.6f}" for v in values]
    shifted = [f"{float(t) + round(c, 3):.6f}" for t in texts]
    p = precision([float(t) for t in texts], labs, texts=texts)
    q = precision([float(t) for t in shifted], labs, texts=shifted)
    for name in ("s_r", "s_L", "s_R"):
        assert getattr(q, name) == pytest.approx(getattr(p, name), rel=1e-9, abs=1e-9)
    assert q.general_mean == pytest.approx(p.general_mean + round(c, 3), abs=1e-6)


ROUND = """\
[round]
id = "UNIT-1"
decimal = "point"
[measurand.pb]
unit = "{unit}"
assigned = "algorithm-a"
sigma_pt = {sigma}
"""


@pytest.fixture(scope="module")
def unit_rounds(tmp_path_factory):
    out = {}
    for unit, sigma in (("mg/kg", 0.05), ("µg/kg", 50.0)):
        folder = tmp_path_factory.mktemp(unit.replace("/", "_"))
        (folder / "round.toml").write_text(textwrap.dedent(ROUND.format(unit=unit, sigma=sigma)), encoding="utf-8")
        (folder / "results.csv").write_text("lab,measurand,replicate,value\n", encoding="utf-8")
        out[unit] = load_round(folder)
    return out


def _table(rnd, values, factor):
    recs = [Record(lab=f"L{i:02d}", measurand="pb", replicate=1, value=f"{v * factor:.9g}",
                   file="results.csv", sheet=None, row=i + 2) for i, v in enumerate(values)]
    return build_table(rnd, recs, files=["results.csv"])


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.function_scoped_fixture])
@given(st.lists(st.floats(min_value=0.1, max_value=2.0), min_size=6, max_size=25))
def test_z_scores_do_not_depend_on_the_unit(unit_rounds, values):
    values = [round(v, 4) for v in values]
    assume(len(set(values)) >= 4)
    mg = evaluate(unit_rounds["mg/kg"], _table(unit_rounds["mg/kg"], values, 1.0))
    ug = evaluate(unit_rounds["µg/kg"], _table(unit_rounds["µg/kg"], values, 1000.0))
    zm = mg.scores.set_index("lab")["z"].astype(float)
    zu = ug.scores.set_index("lab")["z"].astype(float)
    assert list(zm.index) == list(zu.index)
    np.testing.assert_allclose(zu.to_numpy(), zm.to_numpy(), rtol=1e-8, atol=1e-8)
    assert list(mg.scores["signal"]) == list(ug.scores["signal"])


def test_strategies_cover_dates():
    # The parser strategy includes dates: a date typed in a result cell is refused, not read as a number.
    with pytest.raises(CellError):
        parse_cell(dt.datetime(2026, 3, 1))
    assert Path(__file__).name == "test_properties.py"
