"""A tiny run of benchmarks/scale.py, so the benchmark keeps working (its numbers are not checked here)."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

SCRIPT = Path(__file__).resolve().parents[1] / "benchmarks" / "scale.py"
FINAL = re.compile(r"^read/floor=(\S+) write/floor=(\S+) total/floor=(\S+) recheck/cold=(\S+) "
                   r"evaluate/baseline=(\S+) exponent=(\S+)$")


@pytest.fixture(scope="module")
def tiny_work(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("bench")


@pytest.fixture(scope="module")
def tiny_run(tiny_work) -> str:
    work = tiny_work
    res = subprocess.run(
        [sys.executable, str(SCRIPT), "--labs", "8", "--measurands", "3", "--growth", "4", "--core-sets", "20",
         "--core-labs", "15", "--figure-sample", "1", "--jobs", "2", "--evaluate-pairs", "2", "--work", str(work)],
        capture_output=True, text=True, timeout=300,
        # the benchmark measures every format, the PDFs included: not the test formats of tests/conftest.py
        env={k: v for k, v in os.environ.items() if k != "ROUNDSCORE_FORMATS"})
    assert res.returncode == 0, res.stderr
    return res.stdout


def test_final_line_has_six_ratios(tiny_run):
    last = tiny_run.strip().splitlines()[-1]
    m = FINAL.match(last)
    assert m, last
    values = [float(v) for v in m.groups()]
    assert all(math.isfinite(v) and v > 0 for v in values[:5])
    assert math.isfinite(values[5])


def test_recheck_line_runs_check_twice_and_shows_the_changes(tiny_run):
    line = next(ln for ln in tiny_run.splitlines() if ln.startswith("recheck"))
    assert re.search(r"cold check \d+\.\d+ s, re-check after one exclusion \d+\.\d+ s", line), line
    assert "changes shown" in line and re.search(r"exit codes [01], [01]", line), line


@pytest.mark.parametrize("stage", ["generate", "read", "evaluate", "write", "total", "core", "figures", "growth",
                                   "recheck"])
def test_one_line_per_stage(tiny_run, stage):
    assert any(line.startswith(stage) for line in tiny_run.splitlines()), tiny_run


def test_stage_lines_give_seconds_and_ratios(tiny_run):
    lines = {ln.split()[0]: ln for ln in tiny_run.splitlines() if ln.split()}
    for stage in ("read", "write", "total"):
        assert re.search(r"\d+\.\d+ s .*× floor .*× baseline", lines[stage]), lines[stage]
    assert "peak memory" in tiny_run and "GB" in tiny_run


def test_evaluate_pairs_give_the_final_ratio(tiny_run):
    line = next(ln for ln in tiny_run.splitlines() if ln.startswith("evaluate  2 pairs"))
    pairs = re.findall(r"(\d+\.\d+)/(\d+\.\d+) s", line)
    assert len(pairs) == 2, line
    ratio = float(re.search(r"median ratio (\d+\.\d+)", line).group(1))
    final = float(FINAL.match(tiny_run.strip().splitlines()[-1]).group(5))
    assert ratio == final > 0


def test_refuses_negative_pairs():
    res = subprocess.run([sys.executable, str(SCRIPT), "--evaluate-pairs", "-1"], capture_output=True, text=True)
    assert res.returncode == 2 and "--evaluate-pairs" in res.stderr and "≥ 0" in res.stderr


def test_refuses_bad_option():
    res = subprocess.run([sys.executable, str(SCRIPT), "--labs", "many"], capture_output=True, text=True)
    assert res.returncode == 2 and "--labs" in res.stderr


def test_pdf_files_are_compared_with_the_bare_library(tiny_run):
    # The pipeline writes the PDFs, so the write stage counts them, against bare fpdf2 drawing the same documents
    # in the floor (8 lab files and report.pdf of the tiny round).
    assert re.search(r"floor write: .*\b9 PDFs drawn by bare fpdf2 from the same documents", tiny_run), tiny_run


def test_the_evaluate_part_times_the_evaluation_of_the_generated_round(tiny_run, tiny_work):
    # The part the README's repeated evaluate/baseline figures come from: the round the tiny run generated
    # (round-8), read untimed, then evaluated; a missing round is refused, not timed as zero.
    args = {"round": str(tiny_work / "round-8"), "jobs": 1}
    res = subprocess.run([sys.executable, str(SCRIPT), "--part", "evaluate", "--args", json.dumps(args)],
                         capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    seconds = json.loads(res.stdout.strip().splitlines()[-1])["seconds"]
    assert 0 < seconds < 60
    args["round"] = str(tiny_work / "no-such-round")
    res = subprocess.run([sys.executable, str(SCRIPT), "--part", "evaluate", "--args", json.dumps(args)],
                         capture_output=True, text=True, timeout=120)
    assert res.returncode != 0
