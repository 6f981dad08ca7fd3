"""Hostile and broken input end to end: clear errors, no formulas in outputs, nothing lost, reproducible.

Each test builds its hostile files itself from a copy of the demo round
(invented data). Spreadsheet formula injection: cells starting with ``=``,
``+``, ``-``, ``@`` (and tab / carriage return) are neutralised in CSV, as the
OWASP "CSV Injection" guidance recommends (common guidance); workbooks hold
participant text as strings, never as formulas.
"""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import csv
import hashlib
import os
import signal
import subprocess
import sys
from pathlib import Path

import openpyxl
import pytest
import xlsxwriter

from roundscore import pipeline
from roundscore.cli import main
from roundscore.errors import InputError, RoundFileError
from roundscore.intake.forms import write_forms
from roundscore.intake.roundfile import load_round, result_files
from roundscore.outputs import lab_workbook

HOSTILE = [
    '=HYPERLINK("http://example.invalid/x","click me")',
    "+1+cmd|' /C calc'!A0",
    "-2+3",
    "@SUM(A1:A9)",
    "\t=1+1",
    "\r=1+1",
    "=1+1",
]


def run_cli(*args: str, capsys=None) -> tuple[int, str]:
    code = main(list(args))
    err = capsys.readouterr().err if capsys is not None else ""
    return code, err


def hash_tree(folder: Path) -> dict[str, str]:
    """Every file of a round folder by its digest, but for ROUND/out (score's outputs, check's cache)."""
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file() and p.relative_to(folder).parts[0] != "out"}


def make_hostile(round_dir: Path) -> None:
    """Participant names and method names that a spreadsheet would run as formulas."""
    part = round_dir / "participants.csv"
    rows = list(csv.reader(part.open(encoding="utf-8")))
    for i, r in enumerate(rows[1:], start=0):
        if i < len(HOSTILE):
            r[1] = HOSTILE[i]
            r[2] = HOSTILE[-1 - i]
    with part.open("w", encoding="utf-8", newline="") as fh:
        csv.writer(fh).writerows(rows)
    res = round_dir / "results.csv"
    rows = list(csv.reader(res.open(encoding="utf-8")))
    head = rows[0]
    im = head.index("method")
    for j, r in enumerate(rows[1:]):
        if j % 5 == 0:
            r[im] = HOSTILE[j % len(HOSTILE)]
    with res.open("w", encoding="utf-8", newline="") as fh:
        csv.writer(fh).writerows(rows)


def _formula_cells(path: Path) -> list[str]:
    wb = openpyxl.load_workbook(path)  # formulas kept as formulas (data_only=False)
    bad = []
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if c.data_type == "f" or (isinstance(c.value, str) and c.value.startswith("=")
                                           and c.data_type != "s"):
                    bad.append(f"{path.name}!{ws.title}!{c.coordinate}={c.value!r}")
    return bad


def test_participant_text_is_never_a_formula(small_round: Path, tmp_path: Path, capsys):
    make_hostile(small_round)
    out = tmp_path / "out"
    code, err = run_cli("score", str(small_round), "--out", str(out), "--quiet", "--jobs", "1", capsys=capsys)
    assert code == 0, err
    books = sorted(out.rglob("*.xlsx"))
    assert len(books) == 9  # the summary and eight lab sheets
    bad = [b for p in books for b in _formula_cells(p)]
    assert bad == []
    # The hostile texts are there, as text, in at least one lab sheet (names only in a lab's own sheet).
    seen = set()
    for p in books:
        for ws in openpyxl.load_workbook(p).worksheets:
            for row in ws.iter_rows(values_only=True):
                seen.update(v for v in row if isinstance(v, str))
    assert any(h in seen for h in HOSTILE)
    for p in sorted(out.rglob("*.csv")):
        for row in csv.reader(p.open(encoding="utf-8")):
            for cell in row:
                if cell[:1] in ("=", "+", "@", "\t", "\r"):
                    pytest.fail(f"{p.name}: cell {cell!r} would run as a formula")
                if cell.startswith("-"):
                    float(cell)  # a negative number, never text starting with '-'


SMALL = ('[round]\nid = "S-1"\nparticipants = "participants.csv"\n[measurand.lead]\nunit = "mg/kg"\n'
         'sigma_pt = 0.05\n[measurand.cadmium]\nunit = "mg/kg"\nsigma_pt = 0.01\n')


@pytest.fixture
def small_round(make_round) -> Path:
    """Eight labs, two measurands, duplicates: enough for every output, quick to score."""
    lines = ["lab,measurand,replicate,value,method"]
    for i in range(1, 9):
        for rep in (1, 2):
            lines.append(f"L{i},lead,{rep},{0.50 + 0.01 * i + 0.002 * rep:.3f},ICP-MS")
            lines.append(f"L{i},cadmium,{rep},{0.10 + 0.003 * i - 0.001 * rep:.3f},AAS")
    parts = "lab,name,contact\n" + "".join(f"L{i},Lab {i},x@example.invalid\n" for i in range(1, 9))
    return make_round(SMALL, "\n".join(lines) + "\n", participants__csv=parts)


def test_two_runs_identical_bytes_and_inputs_unchanged(small_round: Path, tmp_path: Path, capsys):
    make_hostile(small_round)
    before = hash_tree(small_round)
    for name, jobs in (("a", "1"), ("b", "2")):
        assert run_cli("score", str(small_round), "--out", str(tmp_path / name), "--quiet", "--jobs", jobs,
                       capsys=capsys)[0] == 0
    # cadmium's u(x_pt) exceeds 0.3 σ_pt here: check says so with exit 1 (score only with --strict).
    assert run_cli("check", str(small_round), capsys=capsys)[0] == 1
    assert hash_tree(small_round) == before  # inputs are opened read-only and never changed
    a, b = hash_tree(tmp_path / "a"), hash_tree(tmp_path / "b")
    assert a.pop(".roundscore-output") != b.pop(".roundscore-output")  # each marker names its own folder
    assert any(k.endswith(".xlsx") for k in a) and any(k.endswith(".csv") for k in a)
    assert a == b  # every CSV and workbook byte-identical


def test_failed_run_leaves_previous_outputs(small_round: Path, tmp_path: Path, monkeypatch):
    out = tmp_path / "out"
    pipeline.run_round(small_round, out, jobs=1)
    before = hash_tree(out)
    calls = {"n": 0}
    real = lab_workbook.write_lab_workbook  # what the lab-sheet writer calls (roundscore.outputs.writers)

    def flaky(payload, path):
        calls["n"] += 1
        if calls["n"] == 5:
            raise OSError(28, "No space left on device (simulated)")
        real(payload, path)

    monkeypatch.setattr(lab_workbook, "write_lab_workbook", flaky)
    with pytest.raises(OSError):
        pipeline.run_round(small_round, out, jobs=1)
    assert calls["n"] == 5  # it failed midway, after some sheets were written
    assert hash_tree(out) == before
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".out.")]  # no partial folder left


def test_killed_run_leaves_previous_outputs(small_round: Path, tmp_path: Path):
    out = tmp_path / "out"
    pipeline.run_round(small_round, out, jobs=1)
    before = hash_tree(out)
    code = (
        "import sys, time\n"
        "from roundscore import pipeline\n"
        "from roundscore.outputs import lab_workbook\n"
        "real = lab_workbook.write_lab_workbook\n"
        "def slow(payload, path):\n"
        "    real(payload, path); print('wrote', flush=True); time.sleep(0.2)\n"
        "lab_workbook.write_lab_workbook = slow\n"
        "pipeline.run_round(sys.argv[1], sys.argv[2], jobs=1)\n"
    )
    proc = subprocess.Popen([sys.executable, "-c", code, str(small_round), str(out)],
                            stdout=subprocess.PIPE, text=True)
    try:
        for _ in range(3):  # kill it while it is writing lab sheets
            assert proc.stdout.readline().startswith("wrote")
        proc.send_signal(signal.SIGKILL)
    finally:
        proc.wait(timeout=60)
    assert proc.returncode == -signal.SIGKILL
    assert hash_tree(out) == before
    # The next run completes, with the same outputs.
    pipeline.run_round(small_round, out, jobs=1)
    assert hash_tree(out) == before


# ------------------------------------------------------------------ round files


@pytest.mark.parametrize("toml, message", [
    ('[round]\nid = "R"\nresult = "results.csv"\n[measurand.lead]\nunit = "mg/kg"\nsigma_pt = 0.1\n',
     "did you mean 'results'"),
    ('[round]\nid = "R"\n[measurand.lead]\nunit = "mg/kg"\nsigma_pt = 0.1\nsigmapt = 2\n',
     "did you mean 'sigma_pt'"),
])
def test_unknown_keys_warn_with_nearest(make_round, toml, message):
    folder = make_round(toml, "lab,measurand,replicate,value\nL1,lead,1,0.5\n")
    rnd = load_round(folder)
    assert any(message in w for w in rnd.warnings), rnd.warnings


@pytest.mark.parametrize("toml, message", [
    ('[round]\nid = "R"\nreplicates = "two"\n[measurand.lead]\nunit = "mg/kg"\nsigma_pt = 0.1\n', "replicates"),
    ('[round]\nid = "R"\n[measurand.lead]\nunit = "mg/kg"\nsigma_pt = "lots"\n', "sigma_pt"),
    ('[round]\nid = "R"\nresults = "../elsewhere.csv"\n[measurand.lead]\nunit = "mg/kg"\nsigma_pt = 0.1\n',
     "inside the round folder"),
    ('[round]\nid = "R"\nresults = "/etc/passwd"\n[measurand.lead]\nunit = "mg/kg"\nsigma_pt = 0.1\n',
     "inside the round folder"),
    ('[round]\nid = "R"\nparticipants = "../p.csv"\n[measurand.lead]\nunit = "mg/kg"\nsigma_pt = 0.1\n',
     "inside the round folder"),
    ('[round\nid = "R"\n', "round.toml"),
])
def test_round_file_mistakes_are_clear(make_round, capsys, toml, message):
    folder = make_round(toml, "lab,measurand,replicate,value\nL1,lead,1,0.5\n")
    code, err = run_cli("check", str(folder), capsys=capsys)
    assert code == 2 and message in err and "Traceback" not in err


def test_missing_results_file(make_round, capsys):
    folder = make_round('[round]\nid = "R"\nresults = "nope.csv"\n[measurand.lead]\nunit = "mg/kg"\n'
                        'sigma_pt = 0.1\n')
    code, err = run_cli("score", str(folder), "--out", str(folder / "o"), capsys=capsys)
    assert code == 2 and "nope.csv" in err and "not found" in err


def test_symlink_out_of_the_round_folder_is_refused(make_round, tmp_path):
    secret = tmp_path / "secret.csv"
    secret.write_text("lab,measurand,replicate,value\nX,lead,1,1\n")
    folder = make_round('[round]\nid = "R"\nresults = "forms/*.csv"\n[measurand.lead]\nunit = "mg/kg"\n'
                        'sigma_pt = 0.1\n')
    (folder / "forms").mkdir()
    (folder / "forms" / "a.csv").symlink_to(secret)
    with pytest.raises(RoundFileError, match="outside the round folder"):
        result_files(load_round(folder))


# ------------------------------------------------------------------ hostile forms in a forms round


def _forms_round(make_round) -> tuple[Path, list[Path]]:
    toml = ('[round]\nid = "F-1"\nresults = "forms"\nreplicates = 2\nparticipants = "participants.csv"\n'
            '[measurand.lead]\nunit = "mg/kg"\nsigma_pt = 0.05\n[measurand.cadmium]\nunit = "mg/kg"\n'
            'sigma_pt = 0.01\nallow_negative = false\n')
    labs = [f"L{i:02d}" for i in range(1, 9)]
    folder = make_round(toml, participants__csv="lab,name,contact\n" + "".join(f"{lab},Lab {lab},x\n" for lab in labs))
    paths = write_forms(load_round(folder), [(lab, None) for lab in labs], folder / "forms").written
    for i, p in enumerate(paths):
        fill(p, {"lead": [0.50 + 0.01 * i, 0.51 + 0.01 * i], "cadmium": [0.10 + 0.002 * i, 0.101]})
    return folder, paths


def fill(path: Path, values: dict[str, list[object]], *, lab: str | None = None) -> None:
    """Fill a blank form in place (openpyxl keeps the form-info sheet as written)."""
    wb = openpyxl.load_workbook(path)
    ws = wb["Results"]
    for row in ws.iter_rows(min_row=10):
        name = row[0].value
        if name in values:
            for j, v in enumerate(values[name]):
                row[2 + j].value = v
    wb.save(path)


def test_broken_forms_are_each_reported_and_nothing_crashes(make_round, capsys):
    folder, paths = _forms_round(make_round)
    paths[0].write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(600))            # encrypted / legacy
    paths[1].write_bytes(paths[1].read_bytes()[:300])                                  # truncated
    fill(paths[2], {"lead": ["1 234,5", "n.d."], "cadmium": ["<LOQ", "−0.2"]})        # negative cadmium
    fill(paths[3], {"lead": ["inf", "x" * 500], "cadmium": [None, None]})
    code, err = run_cli("score", str(folder), "--out", str(folder / "out"), capsys=capsys)
    assert code == 2 and "Traceback" not in err
    assert not (folder / "out").exists()
    for expected in ("encrypted or legacy workbook", "corrupt or not an .xlsx file",
                     "cannot be below zero", "not a finite number", "characters is not a result"):
        assert expected in err, err
    for p in paths[:4]:
        assert p.name in err


def test_censored_without_limit_is_noted_not_scored(make_round, capsys):
    folder, paths = _forms_round(make_round)
    fill(paths[4], {"lead": ["n.d.", "ND"]})
    out = folder / "out"
    code, err = run_cli("score", str(folder), "--out", str(out), "--quiet", capsys=capsys)
    assert code == 0, err
    rows = list(csv.DictReader((out / "scores.csv").open(encoding="utf-8")))
    row = next(r for r in rows if r["lab"] == "L05" and r["measurand"] == "lead")
    assert row["z"] == "" and "not scored" in row["note"]
    audit = (out / "audit.csv").read_text(encoding="utf-8")
    assert "L05" in audit and "limit not given" in audit


def test_macro_workbook_values_read_and_warned(make_round, capsys):
    folder, paths = _forms_round(make_round)
    import zipfile

    src = paths[5]
    data = {n: zipfile.ZipFile(src).read(n) for n in zipfile.ZipFile(src).namelist()}
    data["xl/vbaProject.bin"] = b"\xd0\xcf\x11\xe0 never run"
    with zipfile.ZipFile(src, "w", zipfile.ZIP_DEFLATED) as zf:
        for n, b in data.items():
            zf.writestr(n, b)
    code, out_text = main(["score", str(folder), "--out", str(folder / "out")]), capsys.readouterr()
    assert code == 0, out_text.err
    assert "macros present; they are never run" in out_text.out + out_text.err


def test_a_bomb_in_a_forms_round_is_refused_by_name(make_round, capsys):
    folder, paths = _forms_round(make_round)
    import zipfile

    with zipfile.ZipFile(paths[6], "a", zipfile.ZIP_DEFLATED) as zf:
        zf.writestr("xl/media/huge.bin", b"\0" * (80 << 20))
    code, err = run_cli("score", str(folder), "--out", str(folder / "out"), capsys=capsys)
    assert code == 2 and "decompression bomb" in err and paths[6].name in err and "64 MiB" in err


def test_hidden_long_table_workbook_warns(make_round, capsys):
    folder = make_round('[round]\nid = "W"\nresults = "results.xlsx"\n[measurand.lead]\nunit = "mg/kg"\n'
                        'sigma_pt = 0.05\n')
    wb = xlsxwriter.Workbook(str(folder / "results.xlsx"))
    ws = wb.add_worksheet("data")
    ws.write_row(0, 0, ["lab", "measurand", "replicate", "value"])
    for i in range(1, 9):
        ws.write_row(i, 0, [f"L{i}", "lead", 1, 0.5 + 0.01 * i])
    ws.set_row(3, None, None, {"hidden": True})
    ws.merge_range("F1:G1", "note")
    wb.close()
    out = folder / "out"
    main(["score", str(folder), "--out", str(out)])
    text = capsys.readouterr()
    assert "hidden rows 4" in text.out + text.err and "merged cells F1:G1" in text.out + text.err
    assert os.path.exists(out / "scores.csv")


def test_errors_are_input_errors_not_tracebacks(tmp_path):
    from roundscore.intake.xlsx import read_rows

    p = tmp_path / "x.xlsx"
    p.write_text("hello")
    with pytest.raises(InputError):
        read_rows(p)
