"""The kernel-density mode (roundscore.stats.kernel) against scipy's gaussian_kde and a plain definition.

References: scipy.stats.gaussian_kde (a normal kernel whose SD is bw_method × the data's SD, so
bw_method = h / SD gives bandwidth h) for the density; the mode found by scipy.optimize on that density;
the bootstrap SE recomputed by a plain loop (resample, maximise scipy's density, SD of the modes).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.optimize import minimize_scalar
from scipy.stats import gaussian_kde

from roundscore.errors import StatisticsError
from roundscore.stats.kernel import kernel_density, kernel_mode


def _scipy_kde(x, h):
    return gaussian_kde(x, bw_method=h / np.std(x, ddof=1))


def _scipy_mode(x, h):
    kde = _scipy_kde(x, h)
    grid = np.linspace(x.min() - 3 * h, x.max() + 3 * h, 4001)
    g = grid[np.argmax(kde(grid))]
    return minimize_scalar(lambda t: -kde(t)[0], bounds=(g - h / 5, g + h / 5), method="bounded",
                           options={"xatol": 1e-12}).x


@pytest.mark.parametrize("seed", range(4))
def test_density_equals_gaussian_kde(seed):
    rng = np.random.default_rng(seed)
    x = rng.normal(3, 0.4, 25)
    t = np.linspace(1, 5, 101)
    assert np.allclose(kernel_density(x, t, 0.3), _scipy_kde(x, 0.3)(t), rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("seed", range(4))
def test_mode_equals_scipy_maximum(seed):
    rng = np.random.default_rng(seed)
    x = np.concatenate([rng.normal(10, 0.5, 20), rng.normal(12, 0.3, 6)])
    km = kernel_mode(x, 0.375, bootstrap=0)
    assert km.mode == pytest.approx(_scipy_mode(x, 0.375), abs=1e-6)


def test_second_mode_reported_above_the_fraction():
    # Two groups of labs (a method group): both modes reported, the higher one is the mode.
    x = np.array([9.8, 9.9, 10.0, 10.0, 10.1, 10.2, 10.1, 12.0, 12.1, 11.9, 12.0])
    km = kernel_mode(x, 0.2, bootstrap=0)
    assert len(km.modes) == 2 and km.mode == pytest.approx(10.0286, abs=0.01)
    assert km.others[0] == pytest.approx(12.0, abs=0.01)
    kde = _scipy_kde(x, 0.2)
    assert km.densities[1] / km.densities[0] == pytest.approx(kde(km.others[0])[0] / kde(km.mode)[0], rel=1e-9)
    # A stricter fraction drops the smaller mode.
    assert kernel_mode(x, 0.2, bootstrap=0, fraction=0.9).modes == (km.mode,)


def test_bootstrap_se_equals_plain_loop_and_is_reproducible():
    rng = np.random.default_rng(4)
    x = rng.normal(5, 1, 15)
    km = kernel_mode(x, 0.75, bootstrap=60, seed=9)
    again = kernel_mode(x, 0.75, bootstrap=60, seed=9)
    assert km.se == again.se
    # The same resamples (same generator calls) maximised by scipy, one at a time.
    idx = np.random.default_rng(9).integers(0, 15, (60, 15))
    modes = [_scipy_mode(x[i], 0.75) for i in idx]
    assert km.se == pytest.approx(np.std(modes, ddof=1), rel=1e-4)


def test_bad_input():
    with pytest.raises(StatisticsError, match="bandwidth"):
        kernel_mode(np.array([1.0, 2.0]), 0.0)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.integers(-500, 500), min_size=5, max_size=20), st.floats(-1e3, 1e3), st.floats(0.1, 10))
def test_location_and_scale_equivariance(values, shift, scale):
    x = np.array(values, dtype=float) / 10
    base = kernel_mode(x, 0.5, bootstrap=0)
    moved = kernel_mode(scale * x + shift, 0.5 * scale, bootstrap=0)
    top = sorted(base.densities)
    if len(top) > 1 and top[-2] > top[-1] * (1 - 1e-6):
        return  # two modes of (nearly) equal height: either may be the highest
    z = (x - base.mode) / 0.5
    if np.sum((z * z - 1) * np.exp(-z * z / 2)) > -0.05 * np.sum(np.exp(-z * z / 2)):
        return  # a flat top (two groups about 2h apart): the mode is ill-conditioned, not a point
    assert moved.mode == pytest.approx(scale * base.mode + shift, abs=1e-6 * scale + 1e-9 * abs(shift))


def test_far_outliers_move_the_mode_by_a_bounded_amount():
    # A third of the labs far away (any distance beyond 20 h): the highest mode stays in the main group.
    rng = np.random.default_rng(2)
    good = rng.normal(0, 1, 20)
    base = kernel_mode(good, 0.75, bootstrap=0).mode
    for far in (20.0, 1e3, 1e6):
        bad = np.concatenate([good, far + rng.normal(0, 5, 7)])
        assert abs(kernel_mode(bad, 0.75, bootstrap=0).mode - base) < 1e-3


# The seeds of the mean shift: the local maxima of the density on the grid, found without evaluating it on
# the whole grid (a bounded Taylor-binned sum, the density itself only where the bound cannot decide). The
# reference is the plain way: kernel_density (checked against scipy above) on every grid point.

def _plain_grid_maxima(x, grid, h):
    dens = kernel_density(x, grid, h)
    inner = np.flatnonzero((dens[1:-1] > dens[:-2]) & (dens[1:-1] >= dens[2:])) + 1
    return inner if inner.size else np.array([int(np.argmax(dens))])


def _grid(x, h):
    lo, hi = x.min() - 3 * h, x.max() + 3 * h
    return np.linspace(lo, hi, int(np.ceil((hi - lo) / (h / 10)) + 1))


def _kernel_sets():
    rng = np.random.default_rng(17025)
    return {
        # two groups 0.7 apart, each with kernel-and-spread SD √(0.3² + 0.05²) ≈ 0.30: just two modes
        # (a mixture of two equal normals is bimodal when they lie more than 2 SD apart, common practice)
        "close modes": (np.concatenate([rng.normal(0, 0.05, 40), rng.normal(0.7, 0.05, 40)]), 0.3),
        "modes at the edge of merging": (np.concatenate([rng.normal(0, 0.05, 30), rng.normal(2.0, 0.05, 30)]), 1.0),
        "small far mode at 25 %": (np.concatenate([rng.normal(0, 0.2, 80), rng.normal(6, 0.2, 20)]), 0.3),
        "outliers": (np.concatenate([rng.normal(50, 1, 2000), [58.0, 61.0, 35.0]]), 0.75),
        "ties": (np.round(rng.normal(10, 1, 300), 1), 0.2),
        "all equal": (np.full(12, 4.2), 0.5),
        "n = 3": (np.array([1.0, 1.4, 3.0]), 0.3),
        "n = 1": (np.array([7.0]), 0.1),
        "flat top": (np.linspace(0, 10, 101), 2.0),
        "far gap": (np.array([0.0, 0.1, 0.2, 30.0, 30.1]), 0.2),
        # results far from zero against h: the grid points' rounding is a visible share of h
        "large values, small h": (np.round(1e6 + rng.normal(0, 0.05, 300), 3), 0.004),
    }


@pytest.mark.parametrize("name", list(_kernel_sets()))
def test_seed_maxima_equal_the_whole_grid(name):
    from roundscore.stats.kernel import _grid_maxima

    x, h = _kernel_sets()[name]
    grid = _grid(x, h)
    assert np.array_equal(_grid_maxima(x, grid, h), _plain_grid_maxima(x, grid, h))


@pytest.mark.parametrize("name", list(_kernel_sets()))
def test_kernel_mode_equals_the_whole_grids_seeds(monkeypatch, name):
    # The same modes, densities and highest mode as when the seeds come from the density on every point.
    from roundscore.stats import kernel as module

    x, h = _kernel_sets()[name]
    km = kernel_mode(x, h, bootstrap=0)
    monkeypatch.setattr(module, "_grid_maxima", _plain_grid_maxima)
    ref = kernel_mode(x, h, bootstrap=0)
    assert km.modes == ref.modes and km.densities == ref.densities and km.mode == ref.mode
    if name == "small far mode at 25 %":
        assert len(km.modes) == 2
    if name == "close modes":
        assert len(km.modes) == 2 and km.modes[1] - km.modes[0] < 2.5 * h


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-50, 50, allow_nan=False), min_size=1, max_size=60), st.floats(0.02, 5.0),
       st.integers(0, 3))
def test_seed_maxima_equal_the_whole_grid_on_any_set(values, h, decimals):
    from roundscore.stats.kernel import _grid_maxima

    x = np.round(np.array(values), decimals)
    grid = _grid(x, h)
    if grid.size < 3:
        return
    assert np.array_equal(_grid_maxima(x, grid, h), _plain_grid_maxima(x, grid, h))
