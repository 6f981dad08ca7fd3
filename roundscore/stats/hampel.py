"""The Q method (robust SD from between-lab differences) and the Hampel estimator (robust location).

ISO 13528 Annex C.5 (the 2015 edition's clause; the 2022 edition keeps the
method; clause numbers and formulas below as recalled, from memory, after
Müller and Uhlig [2]):

* **Q method** (C.5.2). For p labs, lab i with n_i results y_ik, the
  empirical distribution of the absolute differences between results of
  *different* labs, each pair of labs weighted equally::

      H1(x) = 2/(p(p-1)) · Σ_{i<j} 1/(n_i n_j) · Σ_k Σ_m  I(|y_ik − y_jm| ≤ x)

  H1 is a step function; G1 joins the points (x_i, ½(H1(x_i) + H1(x_{i−1})))
  at its jumps x_1 < x_2 < ... (and (0, 0)) by straight lines, and::

      s* = G1⁻¹(0.25 + 0.75·H1(0)) / (√2 · Φ⁻¹(0.625 + 0.375·H1(0)))

  (H1(0) is the share of pairs with identical results; for normal data
  G1⁻¹(0.25) is the quartile of |difference|, √2·σ·Φ⁻¹(0.625)).
* **Hampel estimator** (C.5.3). x* is the solution of
  Σ ψ((ȳ_i − x)/s*) = 0 on the lab means ȳ_i, with Hampel's three-part
  redescending ψ (linear to 1.5, flat to 3, back to zero at 4.5). ψ is
  piecewise linear, so the sum is piecewise linear in x between the nodes
  ȳ_i ± {1.5, 3, 4.5}·s*, and every solution is found exactly by sorting the
  nodes, accumulating the slope changes and interpolating where the sum
  falls through zero. If there are several, the one nearest the median is
  taken; if there is none, the median (the standard's rule, from memory).

What the O(p²) pairs cost, and what is done about it. With p labs of n
results, there are about (pn)²/2 differences (2000 labs × 2 replicates: 8
million per measurand). They are never formed: the results are sorted once,
and H1(x) at any x is a weighted count of pairs with difference ≤ x, found
for every result at once by binary search in the sorted results and prefix
sums of the weights, O(N log N) for N = Σn_i results (the pairs of one
lab's own results are counted separately, O(N·n), and subtracted). The jump
of G1 that holds the quantile is bracketed in a few counts: a fixed sample
of between-lab differences guesses where it lies, points either side of a
secant estimate are checked by H1 (bisection when a round does not halve
the bracket), until the band of differences left is small; only that band
is listed, with each tie group whole at both ends. The guesses only decide
where to count: the result is the exact G1⁻¹ of the definition (the tests
compare it with a plain loop over all pairs, also with the guess made
useless).

References
----------
.. [1] ISO 13528:2015 Statistical methods for use in proficiency testing by
   interlaboratory comparison, Annex C.5 (Q method and Hampel estimator).
.. [2] J. Müller, S. Uhlig, "Estimation of variance components with high
   breakdown point and high efficiency", Biometrika 88 (2001) 353-366.
.. [3] F. R. Hampel, "The influence curve and its role in robust
   estimation", J. Am. Stat. Assoc. 69 (1974) 383-393.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from roundscore.errors import StatisticsError
from roundscore.stats.distributions import norm_ppf
from roundscore.stats.robust import CONSENSUS_U_FACTOR

__all__ = ["QHampelEstimate", "q_method", "hampel", "q_hampel", "hampel_psi", "HAMPEL_A", "HAMPEL_B", "HAMPEL_C"]

#: Hampel ψ: linear up to a = 1.5, constant to b = 3, falls to 0 at c = 4.5 (ISO 13528 C.5.3, from memory).
HAMPEL_A, HAMPEL_B, HAMPEL_C = 1.5, 3.0, 4.5
#: Differences that agree to this fraction of the largest |result| are tied (one jump of H1), and results
#: that close are identical: the computed difference of two results read as decimals carries rounding of
#: about 1e-16 of their size, which must not split a tie (common practice for numbers read from text).
TIE_TOLERANCE = 1e-12
#: The band of differences listed at the end of the bisection holds at most this many pairs per result.
_BAND_PAIRS_PER_RESULT = 4
#: Bisection steps on x before listing whatever band is left (each halves the band; 200 is far more than
#: the 64 or so that float resolution allows).
_MAX_BISECTIONS = 200
#: Steps of one position each that a count near a kept one may take before it is searched instead.
_WALK_STEPS = 6
#: The fixed sample of between-lab differences that guesses where the quantile lies (a guess only: the
#: bracket it suggests is checked by H1), its seed, and the step in H1 over which it estimates the slope.
_SAMPLE_PAIRS = 4096
_SAMPLE_SEED = 13528
_SAMPLE_STEP = 0.02


@dataclass(frozen=True, slots=True, kw_only=True)
class QHampelEstimate:
    """Q method and Hampel estimator for one set of results.

    Attributes
    ----------
    mean : float
        Hampel's x* on the lab means (NaN with fewer than 2 labs).
    sd : float
        s* by the Q method on the labs' individual results.
    n : int
        Number of labs (p).
    n_results : int
        Number of individual results the Q method used.
    ties : float
        H1(0): the share of between-lab pairs of identical results.
    solutions : int
        How many solutions the Hampel equation had (the one nearest the median is x*).
    note : str
        Empty, or what happened (zero spread, no solution: the median...).
    """

    mean: float
    sd: float
    n: int
    n_results: int
    ties: float
    solutions: int
    note: str = ""

    @property
    def u_mean(self) -> float:
        """Standard uncertainty of x* as an assigned value: 1.25 s*/√p (ISO 13528 §7.7.3, robust consensus)."""
        return CONSENSUS_U_FACTOR * self.sd / np.sqrt(self.n) if self.n else np.nan


def hampel_psi(q: np.ndarray) -> np.ndarray:
    """Hampel's ψ with a = 1.5, b = 3, c = 4.5: q, ±1.5, ±(4.5 − |q|), 0 (ISO 13528 C.5.3)."""
    q = np.asarray(q, dtype=float)
    aq = np.abs(q)
    mid = np.where(aq <= HAMPEL_B, HAMPEL_A, np.maximum(HAMPEL_C - aq, 0.0) * HAMPEL_A / (HAMPEL_C - HAMPEL_B))
    return np.where(aq <= HAMPEL_A, q, np.sign(q) * mid)


def _stable_argsort(x: np.ndarray) -> np.ndarray:
    """np.argsort(x, kind="stable"), by the faster unstable sort when x has no equal values (the same order)."""
    order = np.argsort(x)
    xs = x[order]
    if (xs[1:] == xs[:-1]).any():
        return np.argsort(x, kind="stable")
    return order


class _Pairs:
    """The between-lab differences of one set of results, counted without forming them.

    ``v`` sorted results, ``lab`` their lab index, ``w`` their weight 1/n_i.
    """

    def __init__(self, values: np.ndarray, labs: np.ndarray, tol: float) -> None:
        self.tol = tol
        order = _stable_argsort(values)
        self.v = values[order]
        self.lab = labs[order]
        counts = np.bincount(labs)
        self.w = 1.0 / counts[self.lab]
        self.cw = np.concatenate([[0.0], np.cumsum(self.w)])  # prefix sums of the weights
        self.cw_own = self.cw[1:]  # up to each result itself
        self.most = int(counts.max())
        self.equal = bool(counts.min() == self.most)  # every lab has as many results
        self.idx = np.arange(self.v.size)
        p = int(np.count_nonzero(counts))
        self.total = p * (p - 1) / 2.0  # Σ_{i<j} 1/(n_i n_j) · n_i n_j
        # The pairs of one lab's own results (positions a < b in sorted order), counted and subtracted:
        # the k-th and m-th result of every lab with more than m results, for each k < m.
        # (a stable sort of small integers is a radix sort in numpy: the codes fit 16 bits in most rounds)
        small = self.lab.astype(np.int16) if counts.size < 2 ** 15 else self.lab
        by_lab = np.argsort(small, kind="stable")
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
        same_a, same_b = [np.zeros(0, dtype=int)], [np.zeros(0, dtype=int)]
        for m in range(1, self.most):
            has = np.flatnonzero(counts > m)
            for k in range(m):
                a, b = by_lab[starts[has] + k], by_lab[starts[has] + m]
                same_a.append(np.minimum(a, b))
                same_b.append(np.maximum(a, b))
        self.sa, self.sb = np.concatenate(same_a), np.concatenate(same_b)
        self.sw = self.w[self.sa] * self.w[self.sb]
        self.vsa, self.vsb = self.v[self.sa], self.v[self.sb]
        # _upto's answers by (x, side): the bisection asks for the same ends again (count(lo, hi)), and
        # H(x) and H(x−) share one search. The arrays are never changed in place by their users.
        self._found: dict[tuple[float, str], tuple[np.ndarray, bool]] = {}
        #: Whether a new count may start from the nearest kept one (:meth:`_walk`): set once the band is
        #: narrow, where the ends move by a position or two.
        self.walk = False
        # No two results within tol of each other (fl(v[b] − v[a]) grows with b): the count up to tol is
        # each result itself, known without a search.
        if self.v.size < 2 or float(np.min(np.diff(self.v))) > tol:
            self._found[(tol, "right")] = (self.idx.copy(), True)

    def _upto(self, x: float, side: str) -> np.ndarray:
        """For each result a: the last position b with v[b] − v[a] ≤ x ('right') or < x ('left').

        The difference is compared as computed, fl(v[b] − v[a]), the same number the listed band holds;
        the binary search on v[a] + x can miss it by a rounding, so the ends are corrected (over ties).
        Each answer is kept: the same (x, side) is not searched again. The 'left' answer is the 'right'
        one wherever no computed difference at the 'right' end equals x exactly (fl(v[b] − v[a]) grows
        with b, so the positions with a difference < x are those with one ≤ x, less those equal to x):
        it is then taken from the 'right' answer without a search, the same array.
        """
        key = (x, side)
        got = self._found.get(key)
        if got is None:
            right = self._found.get((x, "right")) if side == "left" else None
            if right is not None and right[1]:
                r = right[0]
                at = np.maximum(r, 0)
                if not ((r >= 0) & (self.v[at] - self.v == x)).any():
                    got = right
            if got is None and self.walk:
                got = self._walk(x, side)
            if got is None:
                got = self._search(x, side)
            self._found[key] = got
        return got[0]

    def _walk(self, x: float, side: str) -> tuple[np.ndarray, bool] | None:
        """:meth:`_upto` from the kept answer at the nearest x, one position at a time (the last position
        with a difference inside is one and the same however it is reached: fl(v[b] − v[a]) grows with b);
        None when that takes more than a few steps (then it is searched)."""
        kept = [(abs(x0 - x), got) for (x0, _), got in self._found.items() if got[1]]
        if not kept:
            return None
        r = min(kept, key=lambda e: e[0])[1][0].copy()
        v, last = self.v, self.v.size - 1
        inside = (lambda d: d <= x) if side == "right" else (lambda d: d < x)
        for _ in range(_WALK_STEPS):
            up = (r < last) & inside(v[np.minimum(r + 1, last)] - v)
            if not up.any():
                break
            r[up] += 1
        else:
            return None
        for _ in range(_WALK_STEPS):
            down = (r >= 0) & ~inside(v[np.maximum(r, 0)] - v)
            if not down.any():
                return r, True
            r[down] -= 1
        return None

    def _search(self, x: float, side: str) -> tuple[np.ndarray, bool]:
        """:meth:`_upto` searched: the positions, and whether both corrections settled (they always do in
        practice: each pass moves past one group of equal results)."""
        v = self.v
        inside = (lambda d: d <= x) if side == "right" else (lambda d: d < x)
        r = np.searchsorted(v, v + x, side=side) - 1  # type: ignore[call-overload]  # side is a Literal
        settled_up = settled_down = False
        for _ in range(64):
            nxt = np.minimum(r + 1, v.size - 1)
            up = (r + 1 < v.size) & inside(v[nxt] - v)
            if not up.any():
                settled_up = True
                break
            r[up] = np.searchsorted(v, v[nxt[up]], side="right") - 1
        for _ in range(64):
            at = np.maximum(r, 0)
            down = (r >= 0) & ~inside(v[at] - v)
            if not down.any():
                settled_down = True
                break
            r[down] = np.searchsorted(v, v[at[down]], side="left") - 1
        return r, settled_up and settled_down

    def H(self, x: float, strict: bool = False) -> float:
        """H1(x) (or H1 just below x, ``strict``): the weighted share of between-lab pairs with |d| ≤ x."""
        r = self._upto(x, "left" if strict else "right")
        r = np.maximum(r, self.idx)
        s = float(np.dot(self.w, self.cw[r + 1] - self.cw_own))
        if self.sa.size:
            d_ok = (self.vsb < self.vsa + x) if strict else (self.vsb <= self.vsa + x)
            s -= float(self.sw[d_ok].sum())
        return s / self.total

    def mid_jump(self, x: float) -> float:
        """½(H1(x) + H1(x−)); H1(x) itself (one count) where no between-lab difference equals x."""
        r = self._upto(x, "right")
        if self._upto(x, "left") is r and not (self.sa.size and (self.vsb == self.vsa + x).any()):
            return self.H(x)
        return 0.5 * (self.H(x) + self.H(x, strict=True))

    def count(self, lo: float, hi: float) -> int:
        """Pairs (any labs) with lo < d ≤ hi: an upper bound of the band's size."""
        r_hi = np.maximum(self._upto(hi, "right"), self.idx)
        r_lo = np.maximum(self._upto(lo, "right"), self.idx)
        return int(np.sum(r_hi - r_lo))

    def band(self, lo: float, hi: float, *, with_lo: bool = False) -> tuple[np.ndarray, np.ndarray]:
        """The between-lab differences d with lo < d ≤ hi (lo ≤ d ≤ hi ``with_lo``), as the counts see them.

        Returns the differences and their weights (as shares of H1).
        """
        r_hi = np.maximum(self._upto(hi, "right"), self.idx)
        r_lo = np.maximum(self._upto(lo, "left" if with_lo else "right"), self.idx)
        n = r_hi - r_lo
        a = np.repeat(self.idx, n)
        b = np.repeat(r_lo + 1, n) + (np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n))
        keep = self.lab[a] != self.lab[b]
        a, b = a[keep], b[keep]
        return self.v[b] - self.v[a], self.w[a] * self.w[b] / self.total

    def node_at_or_below(self, x: float, strict: bool = False) -> float:
        """The largest between-lab difference ≤ x (< x ``strict``; 0.0 when there is none above 0)."""
        return max(0.0, self._nearest_other(self._upto(x, "left" if strict else "right"), -1))

    def node_above(self, x: float) -> float:
        """The smallest between-lab difference > x (x itself when there is none)."""
        best = -self._nearest_other(self._upto(x, "right") + 1, 1)
        return best if np.isfinite(best) else x

    def _nearest_other(self, r: np.ndarray, step: int) -> float:
        """From position r[a] for each result a, stepping by ``step`` (−1 down, +1 up) past the results of
        a's own lab: the first result b of another lab (b > a, b < N), and the largest v[b] − v[a] going
        down (the smallest going up, negated); −inf when there is none. v[b] − v[a] is monotone in b, so
        the first such b on each row is that row's extreme; a lab has ``most`` results at most."""
        v, lab, n = self.v, self.lab, self.v.size
        rows = self.idx
        best = -np.inf
        for _ in range(self.most + 1):
            ok = (r > rows) & (r < n)
            at = np.where(ok, r, 0)
            other = ok & (lab[at] != lab[rows])
            d = v[at] - v[rows]
            found = np.max(d, where=other, initial=-np.inf) if step < 0 else -np.min(d, where=other, initial=np.inf)
            best = max(best, float(found))
            again = ok & ~other  # the same lab: one more step on these rows only
            if not again.any():
                break
            rows, r = rows[again], r[again] + step
        return best


def _sample_guess(pairs: _Pairs, target: float) -> tuple[float, float, float]:
    """A guess of G1⁻¹(target), of dx/dH1 there and of the guess's error in H1 (4 standard errors), from a
    fixed sample of between-lab differences.

    Only a starting point: :func:`_bracket` checks every point it keeps by H1 itself.
    """
    v, lab, w = pairs.v, pairs.lab, pairs.w
    rng = np.random.default_rng(_SAMPLE_SEED)
    a = rng.integers(0, v.size, _SAMPLE_PAIRS)
    b = rng.integers(0, v.size, _SAMPLE_PAIRS)
    keep = lab[a] != lab[b]
    a, b = a[keep], b[keep]
    if a.size < 2:
        return np.nan, np.nan, np.nan
    d = np.abs(v[b] - v[a])
    if pairs.equal:  # every pair weighs the same
        d.sort()
        cdf = np.arange(1, d.size + 1) / d.size
        effective = float(d.size)
    else:
        order = np.argsort(d)
        d = d[order]
        ww = (w[a] * w[b])[order]
        cdf = np.cumsum(ww)
        cdf /= cdf[-1]
        effective = float(ww.sum() ** 2 / np.dot(ww, ww))
    x = np.interp([target - _SAMPLE_STEP, target, target + _SAMPLE_STEP], cdf, d)
    spread = 4.0 * np.sqrt(target * (1.0 - target) / effective)
    return float(x[1]), float((x[2] - x[0]) / (2.0 * _SAMPLE_STEP)), float(spread)


def _bracket(pairs: _Pairs, target: float) -> tuple[float, float]:
    """lo < hi with mid-jump(lo) ≤ target < mid-jump(hi) and few differences between them, for :func:`_g1_inverse`.

    Each point kept is checked by H1 (the bracket is exact whatever the guesses). Points are placed a
    little either side of a secant estimate of G1⁻¹(target) (from a fixed sample of differences at first,
    then from the values of H1 already found), so that the band between them holds about half of what
    may be listed; a round that does not halve the bracket is followed by a bisection step, so the search
    never does worse than bisection. It stops when the band is small enough to list, when the bracket holds
    at most one distinct difference (a tie that alone is larger than the limit), or at float resolution.
    """
    tol = pairs.tol
    lo, hi = tol, float(pairs.v[-1] - pairs.v[0])
    limit = _BAND_PAIRS_PER_RESULT * pairs.v.size
    n = pairs.v.size
    per_h = 0.5 * n * (n - 1)  # pairs counted by count() per unit of H1, about (equal weights: exactly)
    est, slope, spread = _sample_guess(pairs, target)
    seen: list[tuple[float, float]] = []  # (x, mid-jump(x)) evaluated

    def probe(x: float) -> None:  # count at x, and move the end of the bracket it replaces
        nonlocal lo, hi
        g = pairs.mid_jump(x)
        seen.append((x, g))
        if g <= target:
            lo = x
        else:
            hi = x

    for _ in range(_MAX_BISECTIONS):
        if hi - lo <= tol or pairs.count(lo, hi) <= limit:
            break
        width = hi - lo
        # The secant estimate through the two evaluated points nearest the target (the sample's guess at first).
        if len(seen) >= 2:
            (x0, g0), (x1, g1) = sorted(seen, key=lambda e: abs(e[1] - target))[:2]
            if g1 != g0 and x1 != x0:
                slope = (x1 - x0) / (g1 - g0)
                est = x0 + (target - g0) * slope
        if np.isfinite(est) and np.isfinite(slope) and slope > 0:
            half = max(0.25 * limit / per_h, 0.0 if seen else spread) * slope
            for x in (est - half, est + half):
                if lo < x < hi:
                    probe(x)
        if hi - lo > 0.5 * width:  # the estimate did not halve the bracket: bisect as well
            if pairs.node_above(lo) >= pairs.node_at_or_below(hi):
                break  # one distinct difference (or tie group) in (lo, hi]: nothing to narrow
            probe(0.5 * (lo + hi))
    return lo, hi


def _g1_inverse(pairs: _Pairs, target: float, h0: float) -> float:
    """G1⁻¹(target): the point where the polygon through (0, 0) and the mid-jumps of H1 reaches ``target``."""
    tol = pairs.tol
    lo, hi = _bracket(pairs, target)
    pairs.walk = True
    # Every jump of G1 that can bound the target lies between the last node ≤ lo and the first node > hi;
    # the band is widened by the tie tolerance at both ends so no group of tied differences is cut.
    below = pairs.node_at_or_below(lo)  # (lo's count is kept: no search) the same node unless one lies within tol
    if below > lo - tol:
        below = pairs.node_at_or_below(lo - tol)
    # ... and from the first of its tie group: a node within tol below it is the same jump of H1 (the
    # listed band must hold the whole group). The count below ``below`` is the one the band takes anyway.
    while below > tol:
        prev = pairs.node_at_or_below(below, strict=True)
        if below - prev > tol:
            break
        below = prev
    # ``above`` begins the first tie group past hi's; the band runs to tol beyond it, so the group is whole
    # too (its mid-jump closes the segment that holds the target).
    above = pairs.node_above(pairs.node_above(hi) + tol) + tol
    if below > tol:
        d, w = pairs.band(below, above, with_lo=True)
        base = pairs.H(below, strict=True)
    else:
        d, w = pairs.band(tol, above)
        base = h0
    order = _stable_argsort(d)
    d, w = d[order], w[order]
    # Differences within the tie tolerance are one jump of H1 (see q_method).
    start = np.flatnonzero(np.concatenate([[True], np.diff(d) > tol])) if d.size else np.zeros(0, dtype=int)
    cum = np.concatenate([[0.0], np.cumsum(w)])
    before = base + cum[start]  # H1 just below each jump
    at = base + cum[np.concatenate([start[1:], [d.size]])]  # H1 at each jump
    nodes = np.concatenate([[0.0], d[start]])
    g = np.concatenate([[0.0], 0.5 * (before + at)])
    k = int(np.clip(np.searchsorted(g, target, side="right"), 1, g.size - 1))  # g[k-1] ≤ target < g[k]
    x0, x1, g0, g1 = nodes[k - 1], nodes[k], g[k - 1], g[k]
    return float(x0 + (target - g0) * (x1 - x0) / (g1 - g0))


def q_method(values: np.ndarray, labs: np.ndarray) -> tuple[float, float]:
    """s* by the Q method (ISO 13528 C.5.2) and H1(0), from individual results and their lab indices.

    Parameters
    ----------
    values : array of float
        Every result of every lab (replicates as separate values; no NaN).
    labs : array of int
        The lab of each value (0..p−1).

    Returns
    -------
    (s*, H1(0)) : tuple of float
        s* = 0 when every between-lab pair is tied (H1(0) = 1).

    Examples
    --------
    >>> s, ties = q_method(np.array([10.0, 10.2, 9.9, 10.4, 10.1, 10.3]), np.arange(6))
    >>> round(s, 4), ties
    (0.2836, 0.0)
    """
    values = np.asarray(values, dtype=float)
    labs = np.asarray(labs)
    if values.shape != labs.shape or values.ndim != 1:
        raise StatisticsError("q_method takes one value and one lab index per result")
    if not np.isfinite(values).all():
        raise StatisticsError("results must be finite numbers")
    if not (labs.dtype.kind in "iu" and labs.size and labs.min() >= 0 and np.bincount(labs).all()):
        _, labs = np.unique(labs, return_inverse=True)  # (codes 0..p−1 with none missing are kept as they are)
    if labs.max(initial=-1) < 1:
        raise StatisticsError("the Q method needs results from at least 2 labs")
    # Shift by the median: the differences are unchanged, and the sums v + x stay small numbers.
    # Two differences within TIE_TOLERANCE of the results' size are the same difference (one jump of H1).
    tol = TIE_TOLERANCE * float(np.max(np.abs(values)))
    pairs = _Pairs(values - np.median(values), labs, tol)
    h0 = pairs.H(tol)
    if h0 >= 1.0 - 1e-12:
        return 0.0, 1.0
    quantile = _g1_inverse(pairs, 0.25 + 0.75 * h0, h0)
    return float(quantile / (np.sqrt(2.0) * norm_ppf(0.625 + 0.375 * h0))), h0


def hampel(means: np.ndarray, sd: np.ndarray | float) -> tuple[np.ndarray, np.ndarray]:
    """Hampel's x* for each row of ``means`` (NaN = no lab) with scale ``sd`` per row (ISO 13528 C.5.3).

    Solved exactly (ψ is piecewise linear; see the module notes), vectorised
    over rows: the 6p nodes of each row are sorted once and the sum of ψ is
    accumulated along them.

    Returns
    -------
    (x*, number of solutions) : arrays over rows
        x* is the median where there is no solution or sd is not > 0.
    """
    y = np.atleast_2d(np.asarray(means, dtype=float))
    s = np.broadcast_to(np.asarray(sd, dtype=float), (y.shape[0],)).astype(float)
    med = np.full(y.shape[0], np.nan)
    some = np.isfinite(y).any(axis=1)  # a row with no result (every lab censored) stays NaN, with no warning
    if some.any():
        med[some] = np.nanmedian(y[some], axis=1)
    offsets = np.array([-HAMPEL_C, -HAMPEL_B, -HAMPEL_A, HAMPEL_A, HAMPEL_B, HAMPEL_C])
    # The slope of ψ((y − x)/s) as a function of x changes by these (× 1/s) at x = y + offset·s.
    changes = np.array([1.0, -1.0, -1.0, 1.0, 1.0, -1.0])
    good = np.isfinite(y)
    yc = np.where(good, y - med[:, None], 0.0)  # centred: nodes and sums stay near zero
    sc = np.where(s > 0, s, 1.0)
    nodes = yc[:, :, None] + offsets * sc[:, None, None]
    slope_change = np.broadcast_to(changes, nodes.shape) / sc[:, None, None] * good[:, :, None]
    nodes = np.where(good[:, :, None], nodes, np.inf).reshape(len(y), -1)
    slope_change = slope_change.reshape(len(y), -1)
    order = np.argsort(nodes, axis=1, kind="stable")
    z = np.take_along_axis(nodes, order, axis=1)
    dz = np.take_along_axis(slope_change, order, axis=1)
    slope = np.cumsum(dz, axis=1)  # the slope on [z_k, z_k+1]
    with np.errstate(invalid="ignore"):
        step = np.where(np.isfinite(z[:, 1:]), np.diff(z, axis=1), 0.0) * slope[:, :-1]
    value = np.concatenate([np.zeros((len(y), 1)), np.cumsum(step, axis=1)], axis=1)  # Σψ at each node
    # Where Σψ falls through zero from one node to the next (a descending crossing), the root is linear.
    v0, v1 = value[:, :-1], value[:, 1:]
    scale_v = np.maximum(np.abs(value).max(axis=1, keepdims=True), 1e-300) * 1e-12
    falls = (v0 > scale_v) & (v1 <= scale_v) | (np.abs(v0) <= scale_v) & (v1 < -scale_v)
    falls &= np.isfinite(z[:, 1:])
    with np.errstate(all="ignore"):
        root = np.where(v0 != v1, z[:, :-1] + v0 * (z[:, 1:] - z[:, :-1]) / (v0 - v1), z[:, :-1])
    root = np.where(falls, root, np.nan)
    solutions = np.sum(falls, axis=1)
    dist = np.where(falls, np.abs(root), np.inf)
    pick = np.argmin(dist, axis=1)
    x = np.take_along_axis(root, pick[:, None], axis=1)[:, 0]
    x = np.where((solutions > 0) & (s > 0), x, 0.0) + med
    return x, np.where(s > 0, solutions, 0)


def q_hampel(values: np.ndarray, labs: np.ndarray) -> QHampelEstimate:
    """Q method for s* on the individual results, then Hampel's x* on the lab means (ISO 13528 C.5).

    Parameters
    ----------
    values : array of float
        Every result (replicates separately).
    labs : array
        The lab of each result.

    Examples
    --------
    >>> est = q_hampel(np.array([10.1, 10.3, 9.8, 10.0, 10.2, 14.0]), np.arange(6))
    >>> round(est.mean, 4), round(est.sd, 4)
    (10.08, 0.3884)
    """
    values = np.asarray(values, dtype=float)
    codes, idx = np.unique(np.asarray(labs), return_inverse=True)
    p = codes.size
    n_res = int(values.size)
    if p < 2:
        return QHampelEstimate(mean=np.nan, sd=np.nan, n=p, n_results=n_res, ties=np.nan, solutions=0,
                               note=f"only {p} lab(s): the Q method needs at least 2")
    sd, ties = q_method(values, idx)
    means = np.bincount(idx, weights=values) / np.bincount(idx)
    x, sol = hampel(means[None, :], sd)
    note = ""
    if sd == 0:
        note = "every lab gave the same result: s* is zero, so it cannot serve as σ_pt"
    elif sol[0] == 0:
        note = "the Hampel equation has no solution: x* is the median"
    return QHampelEstimate(mean=float(x[0]), sd=sd, n=p, n_results=n_res, ties=ties, solutions=int(sol[0]),
                           note=note)
