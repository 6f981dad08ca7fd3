"""The command line (roundscore.cli): the demo end to end, exit codes, errors without tracebacks,
and participants' names kept to their own sheet. Internal behaviour; the demo data are invented."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import hashlib
import subprocess
import sys
from pathlib import Path

import openpyxl
import pandas as pd
import pytest

from roundscore.cli import main
from roundscore.model.evaluation import SCORE_COLUMNS, STATISTICS_COLUMNS


@pytest.fixture(scope="module")
def demo_out(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("demo") / "roundscore-demo"
    assert main(["demo", "--out", str(out)]) == 0
    return out


def test_demo_writes_every_output(demo_out):
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


def test_score_command_and_python_m(demo_round, tmp_path):
    out = tmp_path / "out"
    proc = subprocess.run([sys.executable, "-m", "roundscore", "score", str(demo_round), "--out", str(out)],
                          capture_output=True, text=True)
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


def test_previous_outputs_survive_a_failed_run(demo_round, tmp_path):
    out = tmp_path / "out"
    assert main(["score", str(demo_round), "--out", str(out), "--quiet"]) == 0
    before = (out / "scores.csv").read_bytes()
    (demo_round / "results.csv").write_text("lab,measurand,replicate,value\nK01,iodine,1,bad\n")
    assert main(["score", str(demo_round), "--out", str(out), "--quiet"]) == 2
    assert (out / "scores.csv").read_bytes() == before


def test_csv_outputs_are_reproducible(demo_round, tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    assert main(["score", str(demo_round), "--out", str(a), "--quiet"]) == 0
    assert main(["score", str(demo_round), "--out", str(b), "--quiet"]) == 0
    for name in ("scores.csv", "statistics.csv", "audit.csv"):
        assert (a / name).read_bytes() == (b / name).read_bytes()


def test_check_command_writes_nothing(demo_round, capsys):
    listing = sorted(p.name for p in demo_round.iterdir())
    assert main(["check", str(demo_round)]) == 0
    assert "valid" in capsys.readouterr().out
    assert sorted(p.name for p in demo_round.iterdir()) == listing


def test_no_command_prints_help(capsys):
    assert main([]) == 2
    assert "score" in capsys.readouterr().out
