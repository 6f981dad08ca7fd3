"""One participant must not break a round or another lab's sheet: a round of hostile lab codes and texts,
scored once, end to end, as a user runs it.

Every lab gets its own score sheet and page (distinct files, each naming its own lab), the figures are
drawn for the longest allowed code, the inputs are unchanged, and no control character from a
participant's text reaches the terminal raw.

Source of expected values: the tool's own documented rule (roundscore.model.labcodes, roundscore.support.filenames);
no outside reference values here.
"""

from __future__ import annotations

import csv
import hashlib
import os
import subprocess
import sys
from pathlib import Path

import openpyxl
import pandas as pd
import pytest

from roundscore.support.filenames import file_stem
from roundscore.model.labcodes import MAX_LAB_CODE

ROOT = Path(__file__).resolve().parents[1]

CODES = ["K01", "K02", "K03", "K04", "X" * MAX_LAB_CODE, "a/b", "a_b", "a\\b", "a:b", "a b", "a%2Fb", "CON",
         ".hidden", "trail.", "~", "%", "מעבדה-7", "مختبر٣", "🧪🔬", "🧪" * MAX_LAB_CODE, "Äx",
         "研究所" * 10 + "研究", "한" * MAX_LAB_CODE]
#: Escape sequences a participant could type into a cell: clear screen, set window title, a colour.
NASTY = "\x1b[2J\x1b]0;owned\x07\x1b[31m"
TOML = """
[round]
id = "LC-R"
title = "Hostile codes"
results = "results.csv"
participants = "participants.csv"
decimal = "point"
[measurand.cu]
unit = "mg/kg"
sigma_pt = 0.5
[measurand.zn]
label = "zinc, total"
unit = "mg/kg"
sigma_pt = 0.8
"""


def _hashes(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.fixture(scope="module")
def scored(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile") / "round"
    folder.mkdir()
    (folder / "round.toml").write_text(TOML, encoding="utf-8")
    with open(folder / "results.csv", "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(["lab", "measurand", "replicate", "value", "method", "comment"])
        for i, code in enumerate(CODES):
            method = f"ICP\u202eSM{NASTY}" if i % 2 else "AAS\nforged line"
            for m, centre in (("cu", 10.0), ("zn", 20.0)):
                for rep in (1, 2):
                    shift = 0.8 if (i % 2 and m == "cu") else 0.0  # the method groups differ: a note names them
                    w.writerow([code, m, rep, f"{centre + shift + 0.13 * ((i * 7 + rep) % 9 - 4):.3f}", method,
                                f"fine{NASTY}\nforged line"])
    with open(folder / "participants.csv", "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f)
        w.writerow(["lab", "name", "contact"])
        for code in CODES:
            w.writerow([code, f"Invented lab {NASTY} {code}", "pt@example.org"])
    before = _hashes(folder)
    out = folder.parent / "out"
    # every format: the odd codes name the PDFs too (the variable of tests/conftest.py is left out)
    env = {**{k: v for k, v in os.environ.items() if k != "ROUNDSCORE_FORMATS"},
           "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    res = subprocess.run([sys.executable, "-m", "roundscore", "score", str(folder), "--out", str(out),
                          "--jobs", "2"], capture_output=True, timeout=300, env=env)
    return {"folder": folder, "out": out, "before": before, "after": _hashes(folder), "res": res}


def test_scored_and_inputs_unchanged(scored):
    assert scored["res"].returncode == 0, scored["res"].stderr.decode(errors="replace")[-2000:]
    assert scored["after"] == scored["before"]


def test_every_lab_has_its_own_sheet_and_page(scored):
    out = scored["out"]
    labs = sorted(pd.read_csv(out / "scores.csv", dtype=str, keep_default_na=False)["lab"].unique())
    assert labs == sorted(CODES)
    sheets = sorted(p.name for p in (out / "labs").iterdir())
    expected = sorted(file_stem(c) + suffix for c in CODES for suffix in (".xlsx", ".html", ".pdf"))
    assert sheets == expected and len(set(sheets)) == 3 * len(CODES)
    for code in CODES:
        wb = openpyxl.load_workbook(out / "labs" / (file_stem(code) + ".xlsx"), read_only=True)
        pairs = {r[0]: r[1] for r in wb["round"].iter_rows(values_only=True) if r and r[0]}
        assert pairs["lab"] == code  # the sheet is this lab's, not another's written over it
        data = list(wb["data"].iter_rows(values_only=True))
        col = data[0].index("lab")
        assert {r[col] for r in data[1:]} == {code}
        page = (out / "labs" / (file_stem(code) + ".html")).read_text(encoding="utf-8")
        assert "Invented lab" in page


def test_figures_drawn_for_the_longest_code(scored):
    report = (scored["out"] / "report.html").read_text(encoding="utf-8")
    assert 'id="fig-z-cu"' in report and 'id="fig-z-zn"' in report
    assert "X" * MAX_LAB_CODE in report


def test_no_control_character_reaches_the_terminal(scored):
    res = scored["res"]
    out = res.stdout
    # The summary quotes the methods (the groups differ): shown, with their controls escaped.
    assert b"method groups differ" in out
    assert b"ICP\\u202eSM\\x1b[2J\\x1b]0;owned\\x07\\x1b[31m" in out
    assert out.count(b"forged line") == out.count(b"AAS\\x0aforged line") >= 1
    for stream in (res.stdout, res.stderr):
        assert b"\x1b" not in stream and b"\x07" not in stream
        assert "\u202e".encode() not in stream
    assert res.stderr == b""  # not even the font's warnings about glyphs of CJK or emoji codes
