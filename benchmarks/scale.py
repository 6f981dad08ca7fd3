"""Speed at scale: a large round from returned forms to every circulated file, against floors and a baseline.

Run (from the repository root; takes several minutes at the default size)::

    python benchmarks/scale.py                 # 2000 labs × 40 measurands × 2 replicates
    python benchmarks/scale.py --labs 500      # another size
    python benchmarks/scale.py --labs 12 --measurands 4 --growth 6 --core-sets 40 --core-labs 30   # tiny

What it does, in one run (every measured piece runs in a fresh subprocess, so
times and peak memory are its own):

1. builds the round with the tool's own seeded generator
   (:mod:`roundscore.demo.big_round`): blank forms written by
   ``roundscore.intake.forms.write_form`` (what ``roundscore forms`` writes),
   then filled in;
2. runs the pipeline: read (every form, validated), evaluate, write every
   output (CSV tables, summary workbook, one score sheet per lab, and the
   figures and HTML report when the pipeline writes them);
3. the **floor**: the same forms read by python-calamine in a process pool
   doing nothing else, and the same cells and native charts (the same series over
   the same ranges, with their point fills and markers) of every output
   workbook (plus the same CSV rows and the bytes of any other file)
   written by xlsxwriter in memory in a process pool;
4. the **baseline** (``benchmarks/baseline.py``): pandas.read_excel with
   openpyxl per file, a per-measurand loop for Algorithm A, openpyxl for each
   lab's sheet;
5. the statistics core: Algorithm A vectorised over 10,000 sets of 200 lab
   means against a loop of statsmodels' Huber estimator on the same sets;
6. the growth exponent: the pipeline at the ``--growth`` sizes and at
   ``--labs``, least-squares slope of log(time) on log(labs);
7. the coordinator's re-check (below);
8. with ``--evaluate-pairs N``, evaluate/baseline again from N alternating pairs timed in one process (the
   baseline's loop, then the evaluation, seconds apart; the median of the pairs' ratios), which a machine whose
   speed drifts cannot skew as it skews two parts timed minutes apart.

It prints one line per stage (seconds, ratio to the floor, ratio to the
baseline), the peak memory, and a final line
``read/floor=… write/floor=… total/floor=… recheck/cold=… evaluate/baseline=… exponent=…``.

The re-check (7.) is ``roundscore check`` run twice in one fresh process on
the same round: first cold (no cache yet), then after one ``[[exclude]]`` is
added to round.toml with the forms unchanged (the input cache gives the
forms back); ``recheck/cold`` is the cold time over the re-check's.

Peak memory is the largest sum over the pipeline's process tree (main
process and workers) of the resident set sizes, sampled from /proc every
0.25 s: an upper bound, since pages a forked worker shares with the main
process count in both. The proportional set size (PSS, shared pages split)
is printed beside it, sampled less often because it is costly to read.
Where /proc is missing, the main process's and largest worker's maximum
resident sets are summed.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import re
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

#: Sampling period of the memory monitor (seconds).
MEMORY_SAMPLE_S = 0.25
#: PSS is read on every PSS_EVERY-th sample only (reading it walks the page tables).
PSS_EVERY = 10
#: Targets from the issue, printed beside the results (2-core machine).
TARGETS = {"read/floor": 3.0, "write/floor": 1.5, "total/floor": 1.3, "recheck/cold": 5.0, "evaluate/baseline": 1.2,
           "exponent": 1.1, "memory_gb": 1.5, "core_speedup": 20.0}


# --------------------------------------------------------------------------- parts (run in subprocesses)

def part_generate(a: argparse.Namespace) -> dict:
    from roundscore.demo.big_round import make_big_round

    t = time.perf_counter()
    big = make_big_round(a.round, labs=a.labs, measurands=a.measurands, replicates=a.replicates, jobs=a.jobs)
    return {"seconds": time.perf_counter() - t, "cells": big.cells, "forms": len(big.forms)}


def part_pipeline(a: argparse.Namespace) -> dict:
    from roundscore.evaluation.evaluate import evaluate
    from roundscore.intake.readers import read_participants, read_results
    from roundscore.pipeline import atomic_folder, write_outputs
    from roundscore.intake.roundfile import load_round

    stages: dict[str, float] = {}
    seen: dict[str, list[float]] = {}

    def progress(stage: str, done: int, total: int) -> None:
        now = time.perf_counter()
        seen.setdefault(stage, [now, now])[1] = now

    t0 = time.perf_counter()
    rnd = load_round(a.round)
    table = read_results(rnd, jobs=a.jobs, progress=progress)
    participants = read_participants(rnd)
    t1 = time.perf_counter()
    ev = evaluate(rnd, table, participants, jobs=a.jobs)
    t2 = time.perf_counter()
    del table
    with atomic_folder(Path(a.out)) as tmp:
        write_outputs(ev, tmp, jobs=a.jobs, progress=progress)
    t3 = time.perf_counter()
    stages.update(read=t1 - t0, evaluate=t2 - t1, write=t3 - t2, total=t3 - t0)
    # Seconds from each progress stage's first report to its last (stages of the pool overlap a little).
    spans = {k: v[1] - v[0] for k, v in seen.items()}
    return {"stages": stages, "progress_stages": spans, "files": _count_files(Path(a.out)),
            "maxrss_mb": _maxrss_mb()}


def _count_files(folder: Path) -> dict[str, int]:
    out: dict[str, int] = {}
    for p in folder.rglob("*"):
        if p.is_file():
            out[p.suffix.lower() or "(none)"] = out.get(p.suffix.lower() or "(none)", 0) + 1
    return out


def _maxrss_mb() -> dict[str, float]:
    import resource

    return {"main": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
            "largest_child": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024}


def _floor_read_batch(paths: list[str]) -> list[int]:
    from python_calamine import CalamineWorkbook

    out = []
    for p in paths:
        wb = CalamineWorkbook.from_path(p)
        n = 0
        for name in ("Results", "form-info"):
            n += sum(len(r) for r in wb.get_sheet_by_name(name).to_python(skip_empty_area=False))
        out.append(n)
    return out


def part_evaluate(a: argparse.Namespace) -> dict:
    """The evaluation alone (the forms read first, untimed): for repeating the evaluate/baseline ratio without the
    writing stage."""
    from roundscore.evaluation.evaluate import evaluate
    from roundscore.intake.readers import read_participants, read_results
    from roundscore.intake.roundfile import load_round

    rnd = load_round(a.round)
    table = read_results(rnd, jobs=a.jobs)
    participants = read_participants(rnd)
    t = time.perf_counter()
    evaluate(rnd, table, participants, jobs=a.jobs)
    return {"seconds": time.perf_counter() - t}


def part_evaluate_pairs(a: argparse.Namespace) -> dict:
    """evaluate/baseline from ``a.pairs`` alternating pairs in one process: the baseline's per-measurand loop on its
    own table, then roundscore's evaluation on its table (each read once, untimed). On a shared machine whose
    speed drifts by a third within minutes, a ratio of two parts timed minutes apart says little; each pair is
    timed seconds apart, and the median of the pairs' ratios is reported."""
    import statistics

    import baseline as bl
    from roundscore.evaluation.evaluate import evaluate
    from roundscore.intake.readers import read_participants, read_results
    from roundscore.intake.roundfile import load_round

    rnd = load_round(a.round)
    table = read_results(rnd, jobs=a.jobs)
    participants = read_participants(rnd)
    data, settings = bl._read(Path(a.round))
    pairs = []
    for _ in range(a.pairs):
        t = time.perf_counter()
        bl._evaluate(data, settings)
        base = time.perf_counter() - t
        t = time.perf_counter()
        evaluate(rnd, table, participants, jobs=a.jobs)
        pairs.append((base, time.perf_counter() - t))
    return {"pairs": pairs, "ratio": statistics.median(e / b for b, e in pairs)}


def part_floor_read(a: argparse.Namespace) -> dict:
    from roundscore.support.parallel import run_batches

    paths = sorted(str(p) for p in (Path(a.round) / "forms").glob("*.xlsx"))
    t = time.perf_counter()
    cells = run_batches(_floor_read_batch, paths, jobs=a.jobs)
    return {"seconds": time.perf_counter() - t, "cells": sum(cells)}


_PLOT = re.compile(rb"<c:(barChart|bar3DChart|lineChart|scatterChart|areaChart)>(.*?)</c:\1>", re.S)
_SER = re.compile(rb"<c:ser>(.*?)</c:ser>", re.S)
_FORMULA = re.compile(rb"<c:f>(.*?)</c:f>", re.S)
_NAME = re.compile(rb"<c:tx>(?:<c:strRef><c:f>(.*?)</c:f>|<c:v>(.*?)</c:v>)", re.S)
_FILL = re.compile(rb"<c:dPt>.*?<a:srgbClr val=\"([0-9A-Fa-f]{6})\"", re.S)
_SYMBOL = re.compile(rb"<c:marker>\s*<c:symbol val=\"(\w+)\"")


def _chart_spec(xml: bytes) -> list[tuple[str, list[dict]]]:
    """A chart's plot types and, for each, its series: name, category and value ranges, point fills, marker.

    What the floor writer needs to write the same chart: the same series over
    the same cell ranges, with as many per-point fills and the same markers
    (the pipeline's charts carry up to eight series and a fill per bar).
    """
    out = []
    for kind, body in _PLOT.findall(xml):
        kind = kind.decode()
        if kind == "barChart":
            kind = "bar" if b'<c:barDir val="bar"/>' in body else "column"
        else:
            kind = kind.replace("Chart", "").replace("3D", "")
        series = []
        for ser in _SER.findall(body):
            name = _NAME.search(ser)
            refs = [f.decode() for f in _FORMULA.findall(ser)]
            if name and name.group(1):
                refs = refs[1:]  # the first <c:f> was the name's
            spec = {"values": "=" + refs[-1]} if refs else {}
            if len(refs) > 1:
                spec["categories"] = "=" + refs[0]
            if name:
                spec["name"] = ("=" + name.group(1).decode()) if name.group(1) else name.group(2).decode()
            fills = _FILL.findall(ser)
            if fills:
                spec["points"] = [{"fill": {"color": "#" + f.decode()}} for f in fills]
            sym = _SYMBOL.search(ser)
            if sym:
                spec["marker"] = {"type": sym.group(1).decode()}
            series.append(spec)
        out.append((kind, series))
    return out


def _workbook_content(path: Path) -> tuple[list, list]:
    """(sheets as (name, rows), chart specs) of a written workbook, read back untimed."""
    import zipfile

    from python_calamine import CalamineWorkbook

    wb = CalamineWorkbook.from_path(str(path))
    sheets = [(n, wb.get_sheet_by_name(n).to_python(skip_empty_area=True)) for n in wb.sheet_names]
    charts = []
    with zipfile.ZipFile(path) as z:
        for name in sorted(z.namelist()):
            if re.fullmatch(r"xl/charts/chart\d+\.xml", name):
                charts.append(_chart_spec(z.read(name)))
    return sheets, charts


def _floor_write_batch(indices: list[int]) -> list[int]:
    import csv
    import io

    import xlsxwriter

    from roundscore.support.parallel import shared

    content, out_dir = shared()
    done = []
    for i in indices:
        rel, kind, data = content[i]
        target = Path(out_dir) / rel
        if kind == "xlsx":
            sheets, charts = data
            wb = xlsxwriter.Workbook(str(target), {"in_memory": True})
            for name, rows in sheets:
                ws = wb.add_worksheet(name)
                for r, row in enumerate(rows):
                    ws.write_row(r, 0, row)
            for plots in charts:
                chart = None
                for kind_, series in plots:
                    part = wb.add_chart({"type": kind_})
                    for spec in series:
                        part.add_series(spec)
                    if chart is None:
                        chart = part
                    else:
                        chart.combine(part)
                if chart is not None:
                    wb.worksheets()[0].insert_chart(0, 0, chart)
            wb.close()
        elif kind == "pdf":
            from pdf_floor import bare_pdf

            target.write_bytes(bare_pdf(*data))
        elif kind == "csv":
            buf = io.StringIO()
            csv.writer(buf, lineterminator="\n").writerows(data)
            target.write_text(buf.getvalue(), encoding="utf-8")
        else:
            target.write_bytes(data)
        done.append(1)
    return done


def part_floor_write(a: argparse.Namespace) -> dict:
    import csv

    from roundscore.support.parallel import run_batches

    src = Path(a.out)
    content = []
    pdfs = {}
    if any(src.rglob("*.pdf")):  # the same documents, rebuilt from the evaluation (untimed)
        from pdf_floor import documents

        from roundscore.pipeline import load_and_evaluate

        ev = load_and_evaluate(Path(a.round))
        pdfs, _ = documents(ev, list(ev.labs))
        paper = ev.round.paper
    for p in sorted(src.rglob("*")):
        if not p.is_file():
            continue
        rel = p.relative_to(src)
        if p.suffix.lower() == ".pdf" and rel.as_posix() in pdfs:
            content.append((rel, "pdf", (pdfs[rel.as_posix()], paper)))
        elif p.suffix.lower() == ".xlsx":
            content.append((rel, "xlsx", _workbook_content(p)))
        elif p.suffix.lower() == ".csv":
            with open(p, newline="", encoding="utf-8") as fh:
                content.append((rel, "csv", list(csv.reader(fh))))
        else:
            content.append((rel, "bytes", p.read_bytes()))
    out_dir = Path(a.floor_out)
    if out_dir.exists():
        shutil.rmtree(out_dir)
    for rel in {c[0].parent for c in content}:
        (out_dir / rel).mkdir(parents=True, exist_ok=True)
    cells = sum(len(r) for c in content if c[1] == "xlsx" for _, rows in c[2][0] for r in rows)
    charts = sum(len(c[2][1]) for c in content if c[1] == "xlsx")
    series = sum(len(ser) for c in content if c[1] == "xlsx" for plots in c[2][1] for _, ser in plots)
    order = sorted(range(len(content)), key=lambda i: -_weight(content[i]))  # largest first, as a scheduler would
    t = time.perf_counter()
    run_batches(_floor_write_batch, order, jobs=a.jobs, shared=(content, str(out_dir)),
                batch_size=max(1, len(order) // (16 * a.jobs)))
    return {"seconds": time.perf_counter() - t, "files": len(content), "cells": cells, "charts": charts,
            "series": series, "pdfs": sum(1 for c in content if c[1] == "pdf")}


def _weight(item) -> int:
    _rel, kind, data = item
    if kind == "pdf":
        return 20000  # about a summary sheet's cells: a PDF takes tens of milliseconds
    if kind == "xlsx":
        return sum(len(r) for _, rows in data[0] for r in rows)
    return len(data)


def part_baseline(a: argparse.Namespace) -> dict:
    from baseline import run_baseline

    return run_baseline(a.round, a.baseline_out)


def part_core(a: argparse.Namespace) -> dict:
    """Algorithm A vectorised over sets vs a statsmodels Huber loop; both are Huber's Proposal 2 here.

    ``algorithm_a(x, sd_factor=1/√β)`` with β = E[ψ²₁.₅(Z)] (Z standard
    normal, ψ clipped at 1.5) solves the same two equations as
    statsmodels' ``Huber(c=1.5)`` (Huber 1981, Proposal 2), so the two give
    the same location and scale; Huber's default tol (1e-8) is too loose
    to agree to 1e-9, so it gets tol=1e-12 and maxiter=2000.
    """
    import numpy as np
    from scipy import stats
    from statsmodels.robust.scale import Huber

    from roundscore.stats.robust import algorithm_a

    c = 1.5
    phi, Phi = stats.norm.pdf(c), stats.norm.cdf(c)
    beta = (2 * Phi - 1) - 2 * c * phi + 2 * c * c * (1 - Phi)  # E[ψ_c(Z)²]
    rng = np.random.default_rng(a.seed)
    x = rng.normal(50.0, 2.0, (a.core_sets, a.core_labs))
    bad = rng.random(x.shape) < 0.05
    x[bad] += rng.normal(0.0, 15.0, int(bad.sum()))  # 5 % contamination (invented)
    t = time.perf_counter()
    est = algorithm_a(x, sd_factor=1 / math.sqrt(beta))
    t_vec = time.perf_counter() - t
    huber = Huber(c=c, tol=1e-12, maxiter=2000)
    t = time.perf_counter()
    ref = [huber(row) for row in x]
    t_loop = time.perf_counter() - t
    loc = np.array([float(r[0]) for r in ref])
    scale = np.array([float(r[1]) for r in ref])
    mean = np.array([e.mean for e in est])
    sd = np.array([e.sd for e in est])
    return {"vectorised": t_vec, "loop": t_loop, "sets": a.core_sets, "labs": a.core_labs,
            "max_loc_diff": float(np.max(np.abs(mean - loc))),
            "max_scale_diff": float(np.max(np.abs(sd - scale))), "beta": beta}


def part_figures(a: argparse.Namespace) -> dict:
    """Cost of one matplotlib figure made from scratch (a lab's scores for one measurand), on a sample."""
    import matplotlib

    matplotlib.use("Agg")
    import io

    import matplotlib.pyplot as plt
    import numpy as np

    rng = np.random.default_rng(a.seed)
    n = a.figure_sample
    t = time.perf_counter()
    for _ in range(n):
        fig, ax = plt.subplots(figsize=(4, 2.5))
        z = rng.normal(0, 1, a.labs)
        ax.plot(np.sort(z), ".", color="#0072B2")
        ax.axhline(z[0], color="#D55E00")
        for lim in (-3, -2, 2, 3):
            ax.axhline(lim, ls="--", lw=0.8, color="#555555")
        fig.savefig(io.BytesIO(), format="svg")
        plt.close(fig)
    return {"per_figure": (time.perf_counter() - t) / n, "sample": n}


def _pdf_batch(names: list[str]) -> list[int]:
    from pdf_floor import bare_pdf

    from roundscore.outputs.pdf import render_pdf
    from roundscore.support.parallel import shared

    docs, paper, out_dir, bare = shared()
    for name in names:
        data = (bare_pdf if bare else render_pdf)(docs[name], paper)
        target = Path(out_dir) / name
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_bytes(data)
    return [1] * len(names)


def part_pdf(a: argparse.Namespace) -> dict:
    """The PDF files alone: roundscore's renderer against the bare library on the same documents, each in a pool
    of ``jobs`` processes (the documents are built first, untimed)."""
    from pdf_floor import documents

    from roundscore.pipeline import load_and_evaluate
    from roundscore.support.parallel import run_batches

    ev = load_and_evaluate(Path(a.round))
    labs = list(ev.labs)[:a.pdf_labs] if a.pdf_labs else list(ev.labs)
    docs, stand_in = documents(ev, labs)
    names = sorted(docs)
    out = {}
    for label, bare in (("roundscore", False), ("floor", True)):
        folder = Path(a.pdf_out) / label
        t = time.perf_counter()
        run_batches(_pdf_batch, names, jobs=a.jobs, shared=(docs, ev.round.paper, str(folder), bare), batch_size=16)
        out[label] = time.perf_counter() - t
        out[f"{label}_bytes"] = sum(p.stat().st_size for p in folder.rglob("*.pdf"))
    return {**out, "files": len(names), "stand_in": stand_in}


def part_recheck(a: argparse.Namespace) -> dict:
    """``roundscore check`` cold, then again after one exclusion is added to round.toml (forms unchanged).

    Both run in this process, after the imports, as the command's own work
    (reading, evaluating, the summary and the changes printed, the cache
    written); round.toml is put back afterwards.
    """
    import contextlib
    import io

    from roundscore.cli import main as cli

    out = Path(a.check_out)
    if out.exists():
        shutil.rmtree(out)
    toml = Path(a.round) / "round.toml"
    text = toml.read_text(encoding="utf-8")
    printed = io.StringIO()
    try:
        with contextlib.redirect_stdout(printed), contextlib.redirect_stderr(io.StringIO()):
            t = time.perf_counter()
            code_cold = cli(["check", a.round, "--out", str(out), "--jobs", str(a.jobs)])
            cold = time.perf_counter() - t
            toml.write_text(text + '\n[[exclude]]\nlab = "L0001"\nreason = "re-check benchmark"\n', encoding="utf-8")
            t = time.perf_counter()
            code_warm = cli(["check", a.round, "--out", str(out), "--jobs", str(a.jobs)])
            warm = time.perf_counter() - t
    finally:
        toml.write_text(text, encoding="utf-8")
    said = printed.getvalue()
    return {"cold": cold, "recheck": warm, "codes": [code_cold, code_warm],
            "changes": "Since the previous check of this round" in said}


PARTS = {"recheck": part_recheck, "evaluate": part_evaluate, "evaluate_pairs": part_evaluate_pairs,
         "pdf": part_pdf, "generate": part_generate, "pipeline": part_pipeline, "floor_read": part_floor_read,
         "floor_write": part_floor_write, "baseline": part_baseline, "core": part_core, "figures": part_figures}


# --------------------------------------------------------------------------- orchestration

def _tree(root: int) -> list[int]:
    """``root`` and all its descendants, from /proc."""
    children: dict[int, list[int]] = {}
    for d in os.listdir("/proc"):
        # Descendants were started after the root, so (until pid numbers wrap) have larger pids: reading
        # only those keeps the monitor from taking the CPU it measures.
        if not d.isdigit() or int(d) < root:
            continue
        try:
            with open(f"/proc/{d}/stat") as fh:
                ppid = int(fh.read().rsplit(")", 1)[1].split()[1])
        except (OSError, ValueError, IndexError):
            continue
        children.setdefault(ppid, []).append(int(d))
    out, todo = [], [root]
    while todo:
        pid = todo.pop()
        out.append(pid)
        todo += children.get(pid, [])
    return out


def _rss_kb(pids: list[int]) -> int:
    """Sum of resident set sizes (kB): pages shared by forked workers counted once per process."""
    page = os.sysconf("SC_PAGE_SIZE") // 1024
    total = 0
    for pid in pids:
        try:
            with open(f"/proc/{pid}/statm") as fh:
                total += int(fh.read().split()[1]) * page
        except (OSError, ValueError, IndexError):
            continue
    return total


def _pss_kb(pids: list[int]) -> int:
    """Sum of proportional set sizes (kB): shared pages split between the processes sharing them."""
    total = 0
    for pid in pids:
        try:
            with open(f"/proc/{pid}/smaps_rollup") as fh:
                for line in fh:
                    if line.startswith("Pss:"):
                        total += int(line.split()[1])
                        break
        except OSError:
            continue
    return total


def run_part(name: str, a: argparse.Namespace, **over) -> dict:
    """Run one part in a fresh interpreter; returns its JSON result plus the peak memory of its process tree."""
    args = dict(vars(a), **over)
    cmd = [sys.executable, str(Path(__file__).resolve()), "--part", name, "--args", json.dumps(args, default=str)]
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), str(HERE), os.environ.get("PYTHONPATH", "")]))
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    peak = {"rss": 0, "pss": 0}
    watching = os.path.isdir("/proc") and os.path.exists(f"/proc/{os.getpid()}/smaps_rollup")
    ended = threading.Event()  # set when the part has ended, so the monitor stops without finishing a sleep

    def watch():
        n = 0
        while proc.poll() is None:
            pids = _tree(proc.pid)
            peak["rss"] = max(peak["rss"], _rss_kb(pids))
            if n % PSS_EVERY == 0:  # PSS is exact but costly to read: a tenth of the samples
                peak["pss"] = max(peak["pss"], _pss_kb(pids))
            n += 1
            if ended.wait(MEMORY_SAMPLE_S):
                break

    th = threading.Thread(target=watch, daemon=True) if watching else None
    if th:
        th.start()
    out, err = proc.communicate()
    ended.set()
    if th:
        th.join()
    if proc.returncode != 0:
        raise SystemExit(f"benchmark part {name!r} failed:\n{err.strip()}")
    res = json.loads(out.strip().splitlines()[-1])
    res["peak_mb"] = {"rss": peak["rss"] / 1024, "pss": peak["pss"] / 1024} if watching else None
    return res


def _fit_exponent(sizes: list[int], times: list[float]) -> float:
    import numpy as np

    if len(sizes) < 2:
        return float("nan")
    slope, _ = np.polyfit(np.log(sizes), np.log(times), 1)
    return float(slope)


def _line(stage: str, sec: float, floor: float | None, base: float | None) -> str:
    f = f"{sec / floor:7.2f}× floor ({floor:.2f} s)" if floor else f"{'':>7}  floor n/a     "
    b = f"{sec / base:6.3f}× baseline ({base:.2f} s)" if base else "baseline n/a"
    return f"{stage:<10}{sec:9.2f} s   {f}   {b}"


def _count(text: str) -> int:
    """A whole number ≥ 0 (argparse type)."""
    try:
        n = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"a whole number ≥ 0, not {text!r}") from None
    if n < 0:
        raise argparse.ArgumentTypeError(f"a whole number ≥ 0, not {n}")
    return n


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--labs", type=int, default=2000, help="labs in the round (default 2000)")
    p.add_argument("--measurands", type=int, default=40, help="measurands (default 40)")
    p.add_argument("--replicates", type=int, default=2, help="replicates (default 2)")
    p.add_argument("--jobs", type=int, default=None, help="worker processes (default: all cores)")
    p.add_argument("--growth", default="250,500,1000",
                   help="other lab counts for the growth exponent, comma-separated ('' for none)")
    p.add_argument("--core-sets", type=int, default=10000, help="sets for the Algorithm A comparison")
    p.add_argument("--core-labs", type=int, default=200, help="lab means per set for the comparison")
    p.add_argument("--figure-sample", type=int, default=20, help="matplotlib figures timed for the estimate")
    p.add_argument("--pdf-labs", type=int, default=0,
                   help="labs whose PDFs the PDF comparison writes (default 0: all)")
    p.add_argument("--only-pdf", action="store_true",
                   help="generate the round and run only the PDF comparison (renderer against the bare library)")
    p.add_argument("--evaluate-pairs", type=_count, default=0, metavar="N",
                   help="also time N alternating pairs (baseline loop, evaluation) in one process and report their "
                        "median ratio as evaluate/baseline (steadier on a shared machine; reads the forms with "
                        "the baseline's reader once more)")
    p.add_argument("--work", default=None, help="working folder (default: a temporary one, removed)")
    p.add_argument("--seed", type=int, default=20270301)
    p.add_argument("--part", help=argparse.SUPPRESS)
    p.add_argument("--args", help=argparse.SUPPRESS)
    a = p.parse_args(argv)
    if a.part:
        ns = argparse.Namespace(**json.loads(a.args))
        print(json.dumps(PARTS[a.part](ns)))
        return 0
    from roundscore.support.parallel import resolve_jobs

    jobs = resolve_jobs(a.jobs)
    growth = sorted({int(s) for s in a.growth.split(",") if s.strip()} - {a.labs})
    work = Path(a.work) if a.work else Path(tempfile.mkdtemp(prefix="roundscore-bench-"))
    work.mkdir(parents=True, exist_ok=True)
    try:
        return _run(a, jobs, growth, work)
    finally:
        if not a.work:
            shutil.rmtree(work, ignore_errors=True)


def _run(a: argparse.Namespace, jobs: int, growth: list[int], work: Path) -> int:
    say = lambda s="": print(s, flush=True)  # noqa: E731
    base = dict(jobs=jobs)
    rnd, out = work / f"round-{a.labs}", work / f"out-{a.labs}"
    say(f"roundscore benchmark: {a.labs} labs × {a.measurands} measurands × {a.replicates} replicates, "
        f"{jobs} job(s), {os.cpu_count()} core(s), Python {platform.python_version()}")
    gen = run_part("generate", a, round=str(rnd), **base)
    say(f"{'generate':<10}{gen['seconds']:9.2f} s   {gen['forms']} filled-in forms, {gen['cells']} result cells "
        "(roundscore.demo.big_round; not compared)")
    if a.only_pdf:
        return _pdf_line(a, say, rnd, work, base)
    pipe = run_part("pipeline", a, round=str(rnd), out=str(out), **base)
    st = pipe["stages"]
    fr = run_part("floor_read", a, round=str(rnd), **base)
    fw = run_part("floor_write", a, round=str(rnd), out=str(out), floor_out=str(work / "floor-out"), **base)
    bl = run_part("baseline", a, round=str(rnd), baseline_out=str(work / "baseline-out"))
    floor_total = fr["seconds"] + fw["seconds"]
    say(_line("read", st["read"], fr["seconds"], bl["read"]))
    say(_line("evaluate", st["evaluate"], None, bl["evaluate"]))
    say(_line("write", st["write"], fw["seconds"], bl["write"]))
    say(_line("total", st["total"], floor_total, bl["total"]))
    say(f"  the floor itself is {floor_total / bl['total']:.3f}× the baseline: no run writing these outputs with "
        f"the floor's writer can beat that ratio (target total/floor ≤ {TARGETS['total/floor']:g})")
    say(f"  floor read: python-calamine, {jobs} process(es), both sheets of {gen['forms']} forms; floor write: "
        f"xlsxwriter in memory, {jobs} process(es), {fw['files']} files, {fw['cells']} cells, {fw['charts']} "
        f"native charts with their {fw['series']} series over the same ranges and their point fills (+ the same CSV "
        f"rows, {fw['pdfs']} PDFs drawn by bare fpdf2 from the same documents, other files' bytes)")
    if not fw["pdfs"]:
        _pdf_line(a, say, rnd, work, base)
    say(f"  baseline: pandas.read_excel+openpyxl per file, a per-measurand Algorithm A loop, openpyxl per lab "
        f"sheet ({bl['labs']} labs, all files, not sampled)")
    spans = pipe["progress_stages"]
    say(f"  outputs: {', '.join(f'{n} {k}' for k, n in sorted(pipe['files'].items()))}; progress stages "
        f"(first to last report): {', '.join(f'{k} {v:.1f} s' for k, v in sorted(spans.items())) or 'none'}")
    peak = pipe["peak_mb"]
    rss = pipe["maxrss_mb"]
    if peak is None:
        peak = {"rss": rss["main"] + jobs * rss["largest_child"], "pss": float("nan")}
    say(f"peak memory {peak['rss'] / 1024:.2f} GB (pipeline process tree: sum of RSS, sampled every "
        f"{MEMORY_SAMPLE_S} s, an upper bound as forked workers' shared pages count in each; PSS "
        f"{peak['pss'] / 1024:.2f} GB sampled every {MEMORY_SAMPLE_S * PSS_EVERY:g} s; max RSS main "
        f"{rss['main']:.0f} MB, largest worker {rss['largest_child']:.0f} MB; target ≤ {TARGETS['memory_gb']} GB)")
    core = run_part("core", a)
    speed = core["loop"] / core["vectorised"]
    say(f"core      algorithm_a on {core['sets']}×{core['labs']} in {core['vectorised']:.2f} s; statsmodels Huber "
        f"loop {core['loop']:.2f} s: {speed:.1f}× faster (target ≥ {TARGETS['core_speedup']:g}×); max |Δ| "
        f"location {core['max_loc_diff']:.1e}, scale {core['max_scale_diff']:.1e} "
        f"(sd_factor = 1/√β, β = E[ψ²₁.₅(Z)] = {core['beta']:.6f}; Huber tol 1e-12)")
    fig = run_part("figures", a)
    scratch = fig["per_figure"] * a.labs * a.measurands
    drawn = sum(v for k, v in spans.items() if k in ("figures", "lab pages"))
    against = (f"the pipeline's figures and lab pages took {drawn:.1f} s ({scratch / drawn:.0f}× less)" if drawn
               else f"the whole write stage took {st['write']:.1f} s")
    say(f"figures   one matplotlib figure from scratch {fig['per_figure'] * 1000:.0f} ms (mean of {fig['sample']}); "
        f"a figure per lab per measurand would take ≈ {scratch:.0f} s (estimated: {a.labs}×{a.measurands}× that); "
        + against)
    sizes, times = [a.labs], [st["total"]]
    for n in growth:
        r, o = work / f"round-{n}", work / f"out-{n}"
        run_part("generate", a, round=str(r), labs=n, **base)
        t = run_part("pipeline", a, round=str(r), out=str(o), labs=n, **base)["stages"]["total"]
        sizes.append(n)
        times.append(t)
        shutil.rmtree(r, ignore_errors=True)
        shutil.rmtree(o, ignore_errors=True)
    order = sorted(range(len(sizes)), key=lambda i: sizes[i])
    sizes, times = [sizes[i] for i in order], [times[i] for i in order]
    expo = _fit_exponent(sizes, times)
    if len(sizes) > 1:
        say("growth    " + ", ".join(f"{n} labs {t:.2f} s" for n, t in zip(sizes, times))
            + f": exponent {expo:.2f} (least-squares slope of log time on log labs; target ≤ {TARGETS['exponent']})")
    rc = run_part("recheck", a, round=str(rnd), check_out=str(work / "check-out"), **base)
    say(f"recheck   cold check {rc['cold']:.2f} s, re-check after one exclusion {rc['recheck']:.2f} s: "
        f"{rc['cold'] / rc['recheck']:.1f}× faster (target ≥ {TARGETS['recheck/cold']:g}×; exit codes "
        f"{rc['codes'][0]}, {rc['codes'][1]}; changes {'shown' if rc['changes'] else 'NOT shown'})")
    ev_ratio = st["evaluate"] / bl["evaluate"]
    if a.evaluate_pairs:
        pr = run_part("evaluate_pairs", a, round=str(rnd), pairs=a.evaluate_pairs, **base)
        ev_ratio = pr["ratio"]
        say(f"evaluate  {a.evaluate_pairs} pairs in one process (baseline, then roundscore): "
            + ", ".join(f"{b:.2f}/{e:.2f} s" for b, e in pr["pairs"])
            + f"; median ratio {ev_ratio:.2f} (the final line's evaluate/baseline)")
    say(f"  targets: read/floor ≤ {TARGETS['read/floor']:g}, write/floor ≤ {TARGETS['write/floor']:g}, total/floor ≤ "
        f"{TARGETS['total/floor']:g}, recheck/cold ≥ {TARGETS['recheck/cold']:g}, evaluate/baseline ≤ "
        f"{TARGETS['evaluate/baseline']:g}, exponent ≤ {TARGETS['exponent']:g}")
    say(f"read/floor={st['read'] / fr['seconds']:.2f} write/floor={st['write'] / fw['seconds']:.2f} "
        f"total/floor={st['total'] / floor_total:.2f} recheck/cold={rc['cold'] / rc['recheck']:.2f} "
        f"evaluate/baseline={ev_ratio:.2f} exponent={expo:.2f}")
    return 0


def _pdf_line(a: argparse.Namespace, say, rnd: Path, work: Path, base: dict) -> int:
    """The PDF comparison, printed (run when the pipeline writes no PDFs, or with --only-pdf)."""
    pdf = run_part("pdf", a, round=str(rnd), pdf_out=str(work / "pdf-out"), **base)
    n = pdf["files"]
    say(f"{'pdf':<10}{pdf['roundscore']:9.2f} s   {n} files ({pdf['roundscore_bytes'] / n / 1024:.0f} KB each), "
        f"{pdf['roundscore'] / pdf['floor']:.2f}× the floor ({pdf['floor']:.2f} s: bare fpdf2, fonts parsed once, "
        f"FPDF.table, FPDF.image of the same SVG; {pdf['floor_bytes'] / n / 1024:.0f} KB each)"
        + ("; stand-in lab documents (outputs/report.py has no lab_document yet)" if pdf["stand_in"] else ""))
    say(f"pdf/floor={pdf['roundscore'] / pdf['floor']:.2f} per file {pdf['roundscore'] / n * 1000:.0f} ms")
    return 0


if __name__ == "__main__":
    sys.exit(main())
