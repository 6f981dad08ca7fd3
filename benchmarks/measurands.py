"""Cost per measurand: ``roundscore score`` on rounds of many measurands, and loading a huge round file.

Run (from the repository root)::

    python benchmarks/measurands.py                          # 500, 1000, 2000, 5000 measurands × 10 labs
    python benchmarks/measurands.py --sizes 100 200 --labs 5 # other sizes
    python benchmarks/measurands.py --load 200000            # also load a round file of 200,000 measurand tables
    python benchmarks/measurands.py --package /tmp/old       # time another copy of the package (a checkout)
    python benchmarks/measurands.py --against /tmp/old       # both, size by size, with their ratio

Each run is a fresh ``python -m roundscore score`` subprocess (invented data:
a seeded generator writes ``round.toml`` and a long-layout ``results.csv``),
stopped after ``--timeout`` seconds. It prints seconds per size, the ratio of
each size's time to the smallest size's time against the ratio of their
measurand counts (1.0 per unit of measurand ratio means linear growth), and
the least-squares growth exponent of time on measurand count. ``--load N``
times ``load_round`` on a file of N measurand tables and prints its peak
resident memory (``ru_maxrss`` of that subprocess).
"""

from __future__ import annotations

import argparse
import math
import os
import random
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent


def make_round(folder: Path, measurands: int, labs: int, *, seed: int = 14) -> Path:
    """A round folder of ``measurands`` measurands and ``labs`` labs, two replicates each (invented data)."""
    rng = random.Random(seed)
    folder.mkdir(parents=True, exist_ok=True)
    toml = ['[round]', 'id = "BENCH-M"', 'results = "results.csv"', '']
    rows = ["lab,measurand,replicate,value"]
    for i in range(measurands):
        name = f"m{i:05d}"
        toml += [f"[measurand.{name}]", 'unit = "mg/kg"', 'sigma_pt = 0.5', ""]
        centre = 5 + 10 * rng.random()
        for j in range(labs):
            bias = rng.gauss(0, 0.4)
            for rep in (1, 2):
                rows.append(f"L{j + 1:02d},{name},{rep},{centre + bias + rng.gauss(0, 0.1):.4f}")
    (folder / "round.toml").write_text("\n".join(toml) + "\n", encoding="utf-8")
    (folder / "results.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    return folder


def _env(package: str | None) -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = (package or str(ROOT)) + os.pathsep + env.get("PYTHONPATH", "")
    return env


def time_score(folder: Path, *, jobs: int, timeout: float, package: str | None) -> tuple[float, str]:
    """Seconds of one ``roundscore score`` run, and how it ended ("ok", "exit N" or "timeout")."""
    t = time.perf_counter()
    try:
        # Run in the round folder: ``python -m`` puts the working folder first on sys.path, so run from the
        # repository it would time the checkout's package whatever --package says.
        res = subprocess.run([sys.executable, "-m", "roundscore", "score", str(folder), "--out",
                              str(folder / "out"), "--jobs", str(jobs), "--quiet"],
                             capture_output=True, text=True, timeout=timeout, env=_env(package), cwd=folder)
    except subprocess.TimeoutExpired:
        return time.perf_counter() - t, "timeout"
    status = "ok" if res.returncode == 0 else f"exit {res.returncode}: {res.stderr.strip()[-300:]}"
    return time.perf_counter() - t, status


_LOAD = """
import resource, sys, time
import roundscore
print(roundscore.__file__, file=sys.stderr)
from roundscore.errors import RoundscoreError
from roundscore.model.round import load_round
t = time.perf_counter()
try:
    r = load_round(sys.argv[1]); what = f"loaded {len(r.measurands)} measurands"
except RoundscoreError as exc:
    what = "refused: " + str(exc).splitlines()[0][:200]
print(f"{time.perf_counter() - t:.2f} {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} {what}")
"""


def time_load(folder: Path, n: int, *, timeout: float, package: str | None) -> str:
    toml = ['[round]', 'id = "BENCH-LOAD"', '']
    for i in range(n):
        toml += [f"[measurand.m{i:06d}]", 'unit = "mg/kg"', 'sigma_pt = 0.5', ""]
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "round.toml"
    path.write_text("\n".join(toml), encoding="utf-8")
    size = path.stat().st_size / 2**20
    t = time.perf_counter()
    try:
        res = subprocess.run([sys.executable, "-c", _LOAD, str(path)], capture_output=True, text=True,
                             timeout=timeout, env=_env(package), cwd=folder)
    except subprocess.TimeoutExpired:
        return f"load {n} measurand tables ({size:.1f} MiB): timeout after {time.perf_counter() - t:.0f} s"
    if res.returncode:
        return f"load {n} measurand tables ({size:.1f} MiB): exit {res.returncode}: {res.stderr[-300:]}"
    secs, mb, what = res.stdout.strip().split(" ", 2)
    return f"load {n} measurand tables ({size:.1f} MiB): {secs} s, peak {mb} MB, {what}"


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sizes", type=int, nargs="*", default=[500, 1000, 2000, 5000], help="measurand counts")
    ap.add_argument("--labs", type=int, default=10)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--timeout", type=float, default=900.0, help="seconds per run before it is stopped")
    ap.add_argument("--load", type=int, default=0, help="also load a round file of this many measurand tables")
    ap.add_argument("--package", default=None, help="folder holding the roundscore package to time")
    ap.add_argument("--against", default=None, metavar="FOLDER",
                    help="also time the package in FOLDER (e.g. an older checkout) at each size, right after "
                         "the first, and print the ratio of the two")
    ap.add_argument("--work", default=None, help="working folder (default: a temporary one)")
    a = ap.parse_args(argv)
    work = Path(a.work) if a.work else Path(tempfile.mkdtemp(prefix="rs-measurands-"))
    work.mkdir(parents=True, exist_ok=True)
    which = subprocess.run([sys.executable, "-c", "import roundscore; print(roundscore.__file__)"],
                           capture_output=True, text=True, env=_env(a.package), cwd=work)
    print(f"package: {which.stdout.strip() or which.stderr.strip()[-200:]}", flush=True)
    times: dict[int, float] = {}
    for n in a.sizes:
        folder = make_round(work / f"m{n}", n, a.labs)
        secs, status = time_score(folder, jobs=a.jobs, timeout=a.timeout, package=a.package)
        print(f"score {n:>6} measurands × {a.labs} labs: {secs:8.1f} s  {status}", flush=True)
        if status == "ok":
            times[n] = secs
        if a.against:
            other, why = time_score(folder, jobs=a.jobs, timeout=a.timeout, package=a.against)
            ratio = f"  this/that = {secs / other:.2f}" if status == why == "ok" else ""
            print(f"      {n:>6} measurands, {a.against}: {other:8.1f} s  {why}{ratio}", flush=True)
    ok = sorted(times)
    if len(ok) >= 2:
        base = ok[0]
        for n in ok[1:]:
            print(f"ratio {n}/{base}: time {times[n] / times[base]:.2f} for {n / base:.2f}× the measurands")
        xs = [math.log(n) for n in ok]
        ys = [math.log(times[n]) for n in ok]
        mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
        slope = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)
        print(f"exponent={slope:.2f}")
    if a.load:
        print(time_load(work / "load", a.load, timeout=a.timeout, package=a.package), flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
