"""Q/Hampel and the kernel mode against Algorithm A, measured in the same run (invented data).

Run (from the repository root)::

    python benchmarks/consensus.py                       # 2000 labs × 40 measurands × 2 replicates
    python benchmarks/consensus.py --labs 500 --measurands 10
    python benchmarks/consensus.py --against 6baf40b     # the Q method and kernel mode of another commit

Prints seconds for Algorithm A (one vectorised call on the lab means), the Q method (per measurand, on
the individual results: sorting and counting, never the ~(2p)²/2 pairs), Hampel (one vectorised call),
the kernel mode with its bootstrap SE, and, for scale, the plain O(p²) Q method on the first measurand
(every between-lab difference formed and sorted with numpy), each as a ratio to Algorithm A.

Then the Q method and the kernel mode without bootstrap (the sensitivity table's) against the same
functions as they were at the commit ``--against`` (default 6baf40b, the last before the bracketed Q
search and the truncated kernel sums; read with ``git show`` into a private module, so the repository's
files are not touched), timed in turns in this run (best of ``--repeat``): the ratio old / new, and the
largest difference between the two answers (s* relative, modes in units of h).

"""

from __future__ import annotations

import argparse
import importlib.util
import subprocess
import sys
import time
from pathlib import Path
from types import ModuleType
from collections.abc import Callable
from typing import Any

import numpy as np

from roundscore.stats.hampel import hampel, q_method
from roundscore.stats.kernel import kernel_mode
from roundscore.stats.robust import algorithm_a


def _all_pairs_quartile(values: np.ndarray, labs: np.ndarray) -> float:
    """The O(N²) way: every between-lab |difference| formed and its quartile taken (memory ~ 8·N²/2 bytes)."""
    i, j = np.triu_indices(values.size, 1)
    keep = labs[i] != labs[j]
    return float(np.quantile(np.abs(values[i[keep]] - values[j[keep]]), 0.25))


def _module_at(rev: str, path: str, name: str) -> ModuleType:
    """The module ``path`` as it was at commit ``rev`` (``git show``), loaded under a private name."""
    root = Path(__file__).resolve().parents[1]
    text = subprocess.run(["git", "show", f"{rev}:{path}"], cwd=root, capture_output=True, text=True, check=True).stdout
    spec = importlib.util.spec_from_loader(name, loader=None)
    assert spec is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module  # dataclasses look their module up while the class is made
    exec(compile(text, f"{rev}:{path}", "exec"), module.__dict__)
    return module


def _best_of(repeat: int, runs: list[tuple[str, Callable[[], Any]]]) -> dict[str, float]:
    """The shortest of ``repeat`` timings of each run, the runs taken in turns (the machine's noise shared)."""
    best = {name: np.inf for name, _ in runs}
    for _ in range(repeat):
        for name, run in runs:
            t0 = time.perf_counter()
            run()
            best[name] = min(best[name], time.perf_counter() - t0)
    return best


def compare(results: np.ndarray, labs: np.ndarray, means: np.ndarray, hs: np.ndarray, against: str,
            repeat: int) -> None:
    """The Q method and the kernel mode (bootstrap 0) now and at commit ``against``: times, ratio, differences."""
    old_q = _module_at(against, "roundscore/stats/hampel.py", "_bench_old_hampel").q_method
    old_k = _module_at(against, "roundscore/stats/kernel.py", "_bench_old_kernel").kernel_mode
    m = len(results)
    new_qs: list[Any] = []
    old_qs: list[Any] = []
    new_ks: list[Any] = []
    old_ks: list[Any] = []

    def run(fn: Callable[..., Any], out: list[Any], args: Callable[[int], tuple[Any, ...]],
            **kw: Any) -> Callable[[], None]:
        def go() -> None:
            out[:] = [fn(*args(k), **kw) for k in range(m)]
        return go

    q_args: Callable[[int], tuple[Any, ...]] = lambda k: (results[k].ravel(), labs)  # noqa: E731
    k_args: Callable[[int], tuple[Any, ...]] = lambda k: (means[k], hs[k])  # noqa: E731
    t = _best_of(repeat, [("q old", run(old_q, old_qs, q_args)), ("q new", run(q_method, new_qs, q_args)),
                          ("k old", run(old_k, old_ks, k_args, bootstrap=0)),
                          ("k new", run(kernel_mode, new_ks, k_args, bootstrap=0))])
    q_diff = max(abs(a[0] - b[0]) / abs(b[0]) for a, b in zip(new_qs, old_qs))
    k_diff = 0.0
    same_modes = True
    for a, b, h in zip(new_ks, old_ks, hs):
        same_modes &= len(a.modes) == len(b.modes)
        if len(a.modes) == len(b.modes):
            k_diff = max(k_diff, float(np.max(np.abs(np.subtract(a.modes, b.modes)))) / h)
    print(f"against {against}, best of {repeat}, {m} measurands")
    print(f"  Q method            old {t['q old']:7.3f} s  new {t['q new']:7.3f} s"
          f"  old/new {t['q old'] / t['q new']:5.2f}   largest |Δs*|/s* {q_diff:.1e}")
    print(f"  kernel mode (no SE) old {t['k old']:7.3f} s  new {t['k new']:7.3f} s"
          f"  old/new {t['k old'] / t['k new']:5.2f}   largest |Δmode|/h {k_diff:.1e},"
          f" same modes {'yes' if same_modes else 'NO'}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--labs", type=int, default=2000)
    ap.add_argument("--measurands", type=int, default=40)
    ap.add_argument("--replicates", type=int, default=2)
    ap.add_argument("--against", default="6baf40b", help="the commit to compare the Q method and kernel mode with")
    ap.add_argument("--repeat", type=int, default=3)
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
    compare(results, labs, means, 0.75 * np.array([e.sd for e in est]), a.against, a.repeat)


if __name__ == "__main__":
    main()
