"""The command line (roundscore.cli): the demo end to end, exit codes, errors without tracebacks,
and participants' names kept to their own sheet. Internal behaviour; the demo data are invented."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import hashlib
import shutil
import subprocess
import sys
from pathlib import Path

import openpyxl
import pandas as pd
import pytest

from roundscore.cli import main
from roundscore.model.evaluation import SCORE_COLUMNS, STATISTICS_COLUMNS


#: A small invented round for the tests where the round's size does not matter (two measurands, six labs).
SMALL_TOML = """
[round]
id = "CLI-1"
scheme = "CLI"
[measurand.copper]
unit = "mg/kg"
sigma_pt = 0.5
[measurand.zinc]
unit = "mg/kg"
sigma_pt = 1.0
"""
SMALL_RESULTS = "lab,measurand,replicate,value\n" + "".join(
    f"L{i},{m},{rep},{centre + 0.1 * i + 0.01 * rep:.2f}\n"
    for i in range(1, 7) for m, centre in (("copper", 10.0), ("zinc", 30.0)) for rep in (1, 2))


@pytest.fixture
def demo_out(scored_demo) -> Path:
    """What ``roundscore demo --out OUT`` wrote (the session's shared scored demo, conftest.py): read only."""
    return scored_demo.out


@pytest.fixture(scope="module")
def python_m_run(tmp_path_factory):
    """``python -m roundscore score`` on a copy of the demo round, in a fresh interpreter: (process, out)."""
    from .conftest import DEMO

    root = tmp_path_factory.mktemp("python-m")
    folder = shutil.copytree(DEMO, root / "round")
    out = root / "out"
    proc = subprocess.run([sys.executable, "-m", "roundscore", "score", str(folder), "--out", str(out)],
                          capture_output=True, text=True)
    return proc, out


def test_demo_writes_every_output(demo_out, scored_demo):
    assert scored_demo.printed.startswith(f"Demo round (invented data) written to {demo_out / 'round'}/")
    assert "does not replace" in scored_demo.printed  # the caution, after the summary
    for name in ("scores.csv", "statistics.csv", "audit.csv", "round-summary.xlsx", "round/round.toml"):
        assert (demo_out / name).is_file(), name
    scores = pd.read_csv(demo_out / "scores.csv")
    assert tuple(scores.columns[: len(SCORE_COLUMNS)]) == SCORE_COLUMNS
    stats = pd.read_csv(demo_out / "statistics.csv")
    assert tuple(stats.columns) == STATISTICS_COLUMNS
    assert set(scores["signal"]) <= {"acceptable", "warning", "action", "not-scored"}
    assert len(scores) == 31 * 6
    labs = sorted(p.stem for p in (demo_out / "labs").glob("*.xlsx"))
    assert len(labs) == 31 and labs[0] == "K01"
    # The planted features are found: the unit slip, the censored result, the unreported result.
    notes = scores.set_index(["lab", "measurand"])["note"].fillna("")
    assert "possible unit or decimal slip" in notes[("K19", "cadmium")]
    assert "censored" in notes[("K23", "mercury")]
    assert "not reported" in notes[("K30", "moisture")]


def test_names_only_in_own_sheet(demo_out):
    parts = pd.read_csv(demo_out / "round" / "participants.csv")
    names = dict(zip(parts["lab"], parts["name"]))

    def texts(path: Path) -> str:
        wb = openpyxl.load_workbook(path, read_only=True)
        return "\n".join(str(c) for ws in wb.worksheets for row in ws.iter_rows(values_only=True)
                         for c in row if c is not None)

    own = texts(demo_out / "labs" / "K05.xlsx")
    assert names["K05"] in own
    assert not any(n in own for lab, n in names.items() if lab != "K05")
    summary = texts(demo_out / "round-summary.xlsx")
    assert not any(n in summary for n in names.values())
    for csv_name in ("scores.csv", "statistics.csv", "audit.csv"):
        text = (demo_out / csv_name).read_text(encoding="utf-8")
        assert not any(n in text for n in names.values())


def test_score_command_and_python_m(python_m_run):
    proc, out = python_m_run
    assert proc.returncode == 0, proc.stderr
    assert "iodine" in proc.stdout and "does not replace" in proc.stdout
    assert (out / "scores.csv").is_file()


def test_error_is_a_message_not_a_traceback(make_round, tmp_path):
    folder = make_round('[round]\nid="X"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=1\n',
                        "lab,measurand,replicate,value\nA,cu,1,oops\n")
    before = hashlib.sha256((folder / "results.csv").read_bytes()).hexdigest()
    out = tmp_path / "never"
    proc = subprocess.run([sys.executable, "-m", "roundscore", "score", str(folder), "--out", str(out)],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert "results.csv, line 2, column 'value' (lab A, measurand cu): value 'oops': not a number" in proc.stderr
    assert not out.exists()  # nothing written
    assert hashlib.sha256((folder / "results.csv").read_bytes()).hexdigest() == before  # input unchanged


def test_previous_outputs_survive_a_failed_run(make_round, tmp_path):
    folder = make_round(SMALL_TOML, SMALL_RESULTS)
    out = tmp_path / "out"
    assert main(["score", str(folder), "--out", str(out), "--quiet"]) == 0
    before = (out / "scores.csv").read_bytes()
    (folder / "results.csv").write_text("lab,measurand,replicate,value\nL1,copper,1,bad\n")
    assert main(["score", str(folder), "--out", str(out), "--quiet"]) == 2
    assert (out / "scores.csv").read_bytes() == before


def test_outputs_are_reproducible(demo_out, python_m_run):
    # Two runs on the same round: `roundscore demo` in this process and `python -m roundscore score` in
    # another (another hash seed, another process pool) write the same bytes: CSV, workbooks, pages.
    proc, out = python_m_run
    assert proc.returncode == 0, proc.stderr
    names = sorted(str(p.relative_to(out)) for p in out.rglob("*") if p.is_file())
    assert "scores.csv" in names and "labs/K07.xlsx" in names and "report.html" in names
    for name in names:
        if name != ".roundscore-output":  # the marker names its own folder
            assert (out / name).read_bytes() == (demo_out / name).read_bytes(), name


def test_check_command_writes_only_its_cache(demo_round, capsys):
    # check writes no outputs: only the cache folder (the previous check's summary) inside ROUND/out, the output
    # folder score writes, marked as roundscore's; --no-cache changes nothing of that for a long-layout round.
    listing = sorted(p.name for p in demo_round.iterdir())
    assert main(["check", str(demo_round)]) == 0
    assert "valid" in capsys.readouterr().out
    assert sorted(p.name for p in demo_round.iterdir()) == sorted([*listing, "out"])
    assert sorted(p.name for p in (demo_round / "out").iterdir()) == [".roundscore-cache", ".roundscore-output"]


def test_no_command_prints_help(capsys):
    assert main([]) == 2
    assert "score" in capsys.readouterr().out
