"""The mode of a kernel density as an assigned value (AMC Technical Brief), with a bootstrap standard error.

The density of the lab means x_1..x_n with a normal kernel of bandwidth h is
f(t) = 1/(n h) · Σ φ((t − x_i)/h). The Analytical Methods Committee's
technical brief on kernel densities (AMC TB 4, 2006, as recalled: from
memory) recommends h of about 0.75 σ_pt and takes the highest mode as the
consensus, with a bootstrap standard error; a second mode is often a group of
labs using another method, so every mode whose density is at least
:data:`MODE_FRACTION` of the highest is reported.

How the modes are found: the density is evaluated on a grid of spacing
h/10 over [min − 3h, max + 3h] (coarser when that grid would exceed
:data:`GRID_MAX` points), each local maximum of the grid is refined by the
mean-shift iteration t ← Σ φ_i x_i / Σ φ_i (which climbs a normal-kernel
density to the nearest mode) and then Newton's steps on f′ = 0 to 1e-12 h,
and modes closer than 1e-6 h are one. Without the bootstrap the grid's local
maxima are found without the n × grid exponentials (see ``_grid_maxima``: a
Taylor-binned sum within a stated bound, the density itself only where the
bound cannot decide), the very grid points the whole grid gives.
The bootstrap resamples the labs with replacement :data:`BOOTSTRAP_SAMPLES`
times from a fixed seed (the same round gives the same SE), takes each
sample's highest grid point and refines it by mean shift.

References
----------
.. [1] Analytical Methods Committee, "Representing data distributions with
   kernel density estimates", AMC Technical Brief No. 4 (2006), Royal
   Society of Chemistry.
.. [2] B. W. Silverman, Density Estimation for Statistics and Data
   Analysis, Chapman & Hall 1986 (the normal kernel; mean shift: Fukunaga &
   Hostetler 1975).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from roundscore.errors import StatisticsError

__all__ = ["KernelMode", "kernel_density", "kernel_mode", "BANDWIDTH_FACTOR", "MODE_FRACTION",
           "BOOTSTRAP_SAMPLES", "BOOTSTRAP_SEED"]

#: h = 0.75 σ_pt (AMC Technical Brief No. 4, from memory).
BANDWIDTH_FACTOR = 0.75
#: Modes reported: every mode with a density at least this share of the highest (a choice of roundscore).
MODE_FRACTION = 0.25
#: Bootstrap resamples of the labs for the SE of the highest mode, and the fixed seed (reproducible SE).
BOOTSTRAP_SAMPLES = 500
BOOTSTRAP_SEED = 13528
#: Grid points at most (per measurand; the bootstrap's kernel matrix holds n × grid numbers).
GRID_MAX = 4001
_GRID_CELLS = 4_000_000
_SHIFT_TOL = 1e-12
_SHIFT_MAXITER = 1000
#: Mean shift hands over to Newton's steps once no seed moves by more than this share of h (a few
#: quadratic steps then reach _SHIFT_TOL).
_SHIFT_SETTLE = 1e-3
_BOOT_SHIFTS = 3
_BOOT_NEWTON = 6
_BOOT_GRID = 512
#: The seeds' grid without the whole grid's n × grid exponentials (see _grid_maxima): used where the grid
#: spacing is at most this share of h, with a Taylor series of this order, the kernel sampled to this
#: many h (beyond it a term is below 1e-290 of its peak).
_SEED_SPACING = 0.1 * (1 + 1e-9)
_SEED_ORDER = 6
_SEED_REACH = 36.6


@dataclass(frozen=True, slots=True, kw_only=True)
class KernelMode:
    """The highest mode of a normal-kernel density and the other large modes.

    Attributes
    ----------
    mode : float
        The highest mode (the assigned value when ``assigned = "kernel-mode"``).
    se : float
        Bootstrap standard error of the highest mode (NaN with fewer than 3 labs).
    h : float
        The bandwidth.
    n : int
        Number of lab means.
    modes, densities : tuple of float
        Every mode with density ≥ ``fraction`` × the highest, by position, and their densities.
    fraction : float
    bootstrap : int
        Resamples used.
    """

    mode: float
    se: float
    h: float
    n: int
    modes: tuple[float, ...]
    densities: tuple[float, ...]
    fraction: float
    bootstrap: int

    @property
    def others(self) -> tuple[float, ...]:
        """The reported modes other than the highest."""
        return tuple(m for m in self.modes if m != self.mode)


def kernel_density(x: np.ndarray, t: np.ndarray, h: float) -> np.ndarray:
    """f(t) = 1/(n h) Σ φ((t − x_i)/h): the normal-kernel density of ``x`` at the points ``t``."""
    x = np.asarray(x, dtype=float)
    t = np.asarray(t, dtype=float)
    z = (t[..., None] - x) / h
    return np.exp(-0.5 * z * z).sum(axis=-1) / (x.size * h * np.sqrt(2.0 * np.pi))


def _shift(x: np.ndarray, w: np.ndarray, t: np.ndarray, h: float, steps: int, tol: float,
           newton: int = 20, settle: float = 1e-6) -> np.ndarray:
    """Mean shift of the points ``t`` (one per row of weights ``w`` over ``x``) towards the nearest mode
    until no point moves by more than ``settle`` h, then Newton steps on f′(t) = 0 where the density is
    concave (mean shift slows down near a flat top; Newton converges there in a few steps)."""
    for _ in range(steps):
        z = (x[None, :] - t[:, None]) / h
        k = w * np.exp(-0.5 * z * z)
        new = (k @ x) / k.sum(axis=1)
        done = np.max(np.abs(new - t)) <= settle * h
        t = new
        if done:
            break
    for _ in range(newton):
        z = (x[None, :] - t[:, None]) / h
        k = w * np.exp(-0.5 * z * z)
        d1 = (k * z).sum(axis=1)  # ∝ h·f′(t)
        d2 = (k * (z * z - 1.0)).sum(axis=1)  # ∝ h²·f″(t)
        step = np.where(d2 < 0, -h * d1 / np.where(d2 < 0, d2, -1.0), 0.0)
        step = np.clip(step, -0.5 * h, 0.5 * h)
        t = t + step
        if np.max(np.abs(step)) <= tol * h:
            break
    return t


def _taylor_bound(delta: float, order: int, reach: float, cut: bool) -> float:
    """The largest error of one term exp(−½(kδ − r)²), |r| ≤ δ/2, taken as exp(−½(kδ)²)·exp(−½r²)·Σ_{p≤order}
    (kδ r)^p/p! with |kδ| ≤ ``reach`` (the remainder of the series), or left out beyond ``reach`` where
    the kernel is ``cut`` there (in units of the term's largest value, 1)."""
    dist = np.linspace(0.0, reach, 4001)
    a = dist * delta * 0.5001  # |r| ≤ δ/2, with room for the grid's rounding
    remainder = np.exp(-0.5 * dist * dist + a) * a ** (order + 1) / math.factorial(order + 1)
    beyond = math.exp(-0.5 * reach * reach + reach * delta / 2) if cut else 0.0
    return float(max(remainder.max(), beyond))


def _grid_maxima(x: np.ndarray, grid: np.ndarray, h: float) -> np.ndarray:
    """The inner local maxima of ``kernel_density(x, grid, h)`` (and its first largest value when there are
    none), the very indices the density on the whole grid gives, found without it.

    A grid of spacing δ ≤ h/10 (in units of h): each x_i is r_i from its nearest grid point b_i, and
    exp(−½(t_j − x_i)²) = exp(−½(kδ)²)·exp(−½r_i²)·exp(kδ r_i) with k = j − b_i; the last factor as a short
    Taylor series makes the sum over i a few convolutions of per-point sums with a sampled kernel (a few
    n + grid·reach/δ products instead of n·grid exponentials). That sum is within a bound ε of the density
    on the grid (:func:`_taylor_bound`, rounding included). Only where it cannot rule out a local maximum
    (or the largest value) within ±ε is the density evaluated as :func:`kernel_density` does on the whole
    grid (the same numbers, the same comparisons), so the indices are exactly those of the whole grid.
    """
    n = x.size
    step = (grid[-1] - grid[0]) / (grid.size - 1)
    delta = step / h
    b = np.clip(np.rint((x - grid[0]) / step), 0, grid.size - 1).astype(np.int64)
    r = (x - grid[b]) / h  # in units of h, |r| ≤ δ/2 (to a rounding), from the grid point itself
    base = np.exp(-0.5 * r * r)
    kmax = min(int(np.floor(_SEED_REACH / delta)), grid.size - 1)
    reach = kmax * delta
    kd = np.arange(-kmax, kmax + 1) * delta
    bell = np.exp(-0.5 * kd * kd)
    approx = np.zeros(grid.size)
    moment = base.copy()
    power = bell.copy()
    for p in range(_SEED_ORDER + 1):
        if p:
            moment = moment * r / p
            power = power * kd
        sums = np.bincount(b, weights=moment, minlength=grid.size)
        approx += np.convolve(sums, power)[kmax:kmax + grid.size]
    scale = 1.0 / (n * h * np.sqrt(2.0 * np.pi))
    approx *= scale
    # Every term is at most 1 (before the scale): twice the series' bound; the sums' rounding (n terms
    # added in turn) with room; and the grid points' own rounding, a few ulps of |t| (kδ is t_j − t_b to
    # that), which moves a term by at most as much in units of h (|d/dz exp(−½z²)| < 1).
    drift = 8 * np.finfo(float).eps * float(np.max(np.abs(grid[[0, -1]]))) / h
    slack = 2.0 * _taylor_bound(delta, _SEED_ORDER, reach, kmax < grid.size - 1) + 1e-12 + 1e-15 * n + drift
    eps = slack * n * scale
    mid = approx[1:-1]
    maybe = np.flatnonzero((mid - approx[:-2] > -2 * eps) & (mid - approx[2:] >= -2 * eps)) + 1
    near = np.unique(np.concatenate([maybe - 1, maybe, maybe + 1]))
    exact = np.full(grid.size, np.nan)
    exact[near] = kernel_density(x, grid[near], h)
    d0, d1, d2 = exact[maybe - 1], exact[maybe], exact[maybe + 1]
    inner = maybe[(d1 > d0) & (d1 >= d2)]
    if inner.size:
        return inner
    top = np.flatnonzero(approx >= approx.max() - 2 * eps)
    return top[[int(np.argmax(kernel_density(x, grid[top], h)))]]


def kernel_mode(x: np.ndarray, h: float, *, fraction: float = MODE_FRACTION,
                bootstrap: int = BOOTSTRAP_SAMPLES, seed: int = BOOTSTRAP_SEED) -> KernelMode:
    """The highest mode of the normal-kernel density of ``x`` with bandwidth ``h``, its SE and the other modes.

    Examples
    --------
    >>> km = kernel_mode(np.array([9.9, 10.0, 10.1, 10.2, 12.0, 12.1]), 0.3, bootstrap=0)
    >>> round(km.mode, 3), [round(m, 2) for m in km.modes]
    (10.05, [10.05, 12.05])
    """
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x)]
    if not h > 0 or not np.isfinite(h):
        raise StatisticsError(f"the kernel bandwidth must be a number > 0, got {h!r}")
    if x.size == 0:
        raise StatisticsError("the kernel mode needs at least one result")
    n = x.size
    lo, hi = x.min() - 3 * h, x.max() + 3 * h
    points = int(min(GRID_MAX, max(3, _GRID_CELLS // n), np.ceil((hi - lo) / (h / 10)) + 1))
    grid = np.linspace(lo, hi, points)
    fine = grid.size > 2 and (grid[1] - grid[0]) <= _SEED_SPACING * h
    if fine and not bootstrap:
        starts = grid[_grid_maxima(x, grid, h)]
    else:
        dens = kernel_density(x, grid, h)
        inner = np.flatnonzero((dens[1:-1] > dens[:-2]) & (dens[1:-1] >= dens[2:])) + 1
        starts = grid[inner] if inner.size else grid[[int(np.argmax(dens))]]
    ones = np.ones((starts.size, n))
    peaks = np.sort(_shift(x, ones, starts, h, _SHIFT_MAXITER, _SHIFT_TOL, settle=_SHIFT_SETTLE))
    peaks = peaks[np.concatenate([[True], np.diff(peaks) > 1e-6 * h])]
    pd_ = kernel_density(x, peaks, h)
    top = int(np.argmax(pd_))
    keep = pd_ >= fraction * pd_[top]
    se = np.nan
    if bootstrap and n >= 3:
        rng = np.random.default_rng(seed)
        idx = rng.integers(0, n, (bootstrap, n))
        w = np.bincount((idx + n * np.arange(bootstrap)[:, None]).ravel(),
                        minlength=bootstrap * n).reshape(bootstrap, n).astype(float)  # times each lab is drawn
        # Where a resample's highest mode can lie: the grid points where the full density is not negligible
        # (an outlier far away leaves the rest of a wide grid empty), thinned to at most _BOOT_GRID points.
        near = grid[dens >= 1e-3 * dens.max()]
        coarse = near[::max(1, int(np.ceil(near.size / _BOOT_GRID)))]
        z = (coarse[None, :] - x[:, None]) / h
        kmat = np.exp(-0.5 * z * z)  # n × grid
        boot = coarse[np.argmax(w @ kmat, axis=1)]
        boot = _shift(x, w, boot, h, _BOOT_SHIFTS, 1e-9, _BOOT_NEWTON)
        se = float(np.std(boot, ddof=1))
    return KernelMode(mode=float(peaks[top]), se=se, h=float(h), n=n, modes=tuple(map(float, peaks[keep])),
                      densities=tuple(map(float, pd_[keep])), fraction=fraction, bootstrap=int(bootstrap))
