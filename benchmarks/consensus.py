"""Q/Hampel and the kernel mode against Algorithm A, measured in the same run (invented data).

Run (from the repository root)::

    python benchmarks/consensus.py                       # 2000 labs × 40 measurands × 2 replicates
    python benchmarks/consensus.py --labs 500 --measurands 10

Prints seconds for Algorithm A (one vectorised call on the lab means), the Q method (per measurand, on
the individual results: sorting and counting, never the ~(2p)²/2 pairs), Hampel (one vectorised call),
the kernel mode with its bootstrap SE, and, for scale, the plain O(p²) Q method on the first measurand
(every between-lab difference formed and sorted with numpy), each as a ratio to Algorithm A.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from roundscore.stats.hampel import hampel, q_method
from roundscore.stats.kernel import kernel_mode
from roundscore.stats.robust import algorithm_a


def _all_pairs_quartile(values: np.ndarray, labs: np.ndarray) -> float:
    """The O(N²) way: every between-lab |difference| formed and its quartile taken (memory ~ 8·N²/2 bytes)."""
    i, j = np.triu_indices(values.size, 1)
    keep = labs[i] != labs[j]
    return float(np.quantile(np.abs(values[i[keep]] - values[j[keep]]), 0.25))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--labs", type=int, default=2000)
    ap.add_argument("--measurands", type=int, default=40)
    ap.add_argument("--replicates", type=int, default=2)
    a = ap.parse_args()
    rng = np.random.default_rng(13528)
    p, m, n = a.labs, a.measurands, a.replicates
    lab_effect = rng.normal(0, 1, (m, p, 1))
    results = 50 + lab_effect + rng.normal(0, 0.3, (m, p, n))
    results[:, : p // 20] += 8  # 5 % outlying labs
    means = results.mean(axis=2)
    labs = np.repeat(np.arange(p), n)

    t0 = time.perf_counter()
    est = algorithm_a(means)
    t_a = time.perf_counter() - t0
    t0 = time.perf_counter()
    sds = np.array([q_method(results[k].ravel(), labs)[0] for k in range(m)])
    t_q = time.perf_counter() - t0
    t0 = time.perf_counter()
    hampel(means, sds)
    t_h = time.perf_counter() - t0
    t0 = time.perf_counter()
    for k in range(m):
        kernel_mode(means[k], 0.75 * est[k].sd)
    t_k = time.perf_counter() - t0
    t0 = time.perf_counter()
    _all_pairs_quartile(results[0].ravel(), labs)
    t_pairs = (time.perf_counter() - t0) * m  # one measurand, scaled to all

    print(f"{p} labs × {m} measurands × {n} replicates")
    for name, t in [("Algorithm A (vectorised)", t_a), ("Q method (sorted counts)", t_q),
                    ("Hampel (vectorised, exact)", t_h), ("kernel mode + bootstrap SE", t_k),
                    ("Q method's pairs formed (1 measurand × m)", t_pairs)]:
        print(f"  {name:<44} {t:8.3f} s   ratio to Algorithm A {t / t_a:8.1f}")


if __name__ == "__main__":
    main()
