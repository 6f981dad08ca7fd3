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
density to the nearest mode) to 1e-12 h, and modes closer than 1e-6 h are one.
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
_BOOT_SHIFTS = 3
_BOOT_NEWTON = 6
_BOOT_GRID = 512


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
           newton: int = 20) -> np.ndarray:
    """Mean shift of the points ``t`` (one per row of weights ``w`` over ``x``) towards the nearest mode,
    then Newton steps on f′(t) = 0 where the density is concave (mean shift slows down near a flat top)."""
    for _ in range(steps):
        z = (x[None, :] - t[:, None]) / h
        k = w * np.exp(-0.5 * z * z)
        new = (k @ x) / k.sum(axis=1)
        done = np.max(np.abs(new - t)) <= 1e-6 * h
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
    dens = kernel_density(x, grid, h)
    inner = np.flatnonzero((dens[1:-1] > dens[:-2]) & (dens[1:-1] >= dens[2:])) + 1
    starts = grid[inner] if inner.size else grid[[int(np.argmax(dens))]]
    ones = np.ones((starts.size, n))
    peaks = np.sort(_shift(x, ones, starts, h, _SHIFT_MAXITER, _SHIFT_TOL))
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
