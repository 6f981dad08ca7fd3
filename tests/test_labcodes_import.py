"""Lab codes where they are read: long-layout CSV and workbooks, returned forms (the hidden form-info cell
included), the participants file and [[exclude]]; unknown labs; and that nothing is written or changed.

Source of expected values: the tool's own documented rule (README "Inputs roundscore refuses, and why");
no outside reference values here.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import openpyxl
import pytest
import xlsxwriter

from roundscore.cli import main
from roundscore.errors import InputError, RoundFileError
from roundscore.intake.forms import FIRST_ROW, INFO_SHEET, RESULTS_SHEET, write_form
from roundscore.intake.readers import read_results
from roundscore.pipeline import load_and_evaluate
from roundscore.intake.roundfile import load_round

TOML = """
[round]
id = "LC-1"
results = "results.csv"
{extra}
[measurand.iron]
unit = "mg/kg"
sigma_pt = 1.0
"""


def _results(labs) -> str:
    rows = ["lab,measurand,replicate,value"]
    for i, lab in enumerate(labs):
        rows += [f"{lab},iron,1,{10 + 0.1 * (i % 7)}", f"{lab},iron,2,{10.05 + 0.1 * (i % 5)}"]
    return "\n".join(rows) + "\n"


def _hashes(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _refused(folder: Path, capsys) -> str:
    """Run ``score``: exit 2, nothing written, every input unchanged; returns stderr."""
    before = _hashes(folder)
    assert main(["score", str(folder), "--jobs", "1", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert not (folder / "out").exists()
    assert _hashes(folder) == before
    assert "Traceback" not in err
    return err


LABS = ["K01", "K02", "K03", "K04", "K05"]


def test_bad_code_in_the_long_layout_names_the_cell(make_round, capsys):
    text = _results(LABS).replace("K03,iron,2", "K\x1b[2J03,iron,2")
    folder = make_round(TOML.format(extra=""), text)
    err = _refused(folder, capsys)
    assert "results.csv, line 7, column 'lab'" in err and "control character \\x1b" in err
    assert "\x1b" not in err  # shown escaped, never raw


def test_case_clash_in_the_long_layout_names_both_rows(make_round, capsys):
    text = _results(LABS + ["k02"])
    folder = make_round(TOML.format(extra=""), text)
    err = _refused(folder, capsys)
    assert "line 12" in err and "line 4" in err and "'k02'" in err and "'K02'" in err
    assert "letter case" in err


def test_full_width_code_is_the_same_lab(make_round):
    text = _results(LABS).replace("K05,iron,2", "Ｋ０５,iron,2")
    ev = load_and_evaluate(make_round(TOML.format(extra=""), text))
    assert ev.labs == LABS
    assert ev.lab_scores("K05")["n_replicates"].iloc[0] == 2


def test_workbook_cells_that_are_not_codes(make_round, capsys):
    folder = make_round(TOML.format(extra="").replace("results.csv", "results.xlsx"))
    wb = xlsxwriter.Workbook(str(folder / "results.xlsx"))
    ws = wb.add_worksheet("data")
    ws.write_row(0, 0, ["lab", "measurand", "replicate", "value"])
    for i, lab in enumerate(LABS):
        ws.write_row(1 + i, 0, [lab, "iron", 1, 10 + 0.1 * i])
    ws.write_row(6, 0, [101.0, "iron", 1, 10.2])   # a whole number: the code "101"
    ws.write_row(7, 0, [3.5, "iron", 1, 10.3])     # not a code
    ws.write_boolean(8, 0, True)
    ws.write_row(8, 1, ["iron", 1, 10.4])
    wb.close()
    err = _refused(folder, capsys)
    assert "data!A8 (column 'lab'" in err and "not a whole number" in err
    assert "data!A9 (column 'lab'" in err and "truth value" in err
    assert "101" not in err.split("data!A8")[0]  # 101 was fine


# ------------------------------------------------------------------------------------------ returned forms

FORMS_TOML = """
[round]
id = "LC-F"
results = "returned"
participants = "participants.csv"
{extra}
[measurand.iron]
unit = "mg/kg"
sigma_pt = 1.0
"""
FORM_LABS = ["A1", "B2", "C3", "D4"]


@pytest.fixture
def forms_round(make_round):
    parts = "lab,name,contact\n" + "".join(f"{lab},Invented lab {lab},x@example.org\n" for lab in FORM_LABS)
    folder = make_round(FORMS_TOML.format(extra=""), participants__csv=parts)
    (folder / "returned").mkdir()
    rnd = load_round(folder)
    for i, lab in enumerate(FORM_LABS):
        path = folder / "returned" / f"{lab}.xlsx"
        write_form(rnd, lab, path)
        wb = openpyxl.load_workbook(path)
        wb[RESULTS_SHEET].cell(row=FIRST_ROW, column=3, value=10 + 0.1 * i)
        wb[RESULTS_SHEET].cell(row=FIRST_ROW, column=4, value=10.1 + 0.1 * i)
        wb.save(path)
    return folder


def _edit_hidden_code(path: Path, value, *, visible=None) -> str:
    wb = openpyxl.load_workbook(path)
    info = wb[INFO_SHEET]
    row = next(r for r in range(1, info.max_row + 1) if info.cell(r, 1).value == "lab")
    info.cell(row, 2).value = value
    if visible is not None:
        wb[RESULTS_SHEET]["B5"].value = visible
    wb.save(path)
    return f"B{row}"


def test_forms_read_as_before(forms_round):
    assert read_results(load_round(forms_round)).labs == FORM_LABS


@pytest.mark.parametrize("value, words", [
    ("x" * 300, "300 characters long"),
    (True, "truth value"),
    ("C\u202e3", "formatting character"),
])
def test_hidden_code_that_breaks_the_rule_is_refused(forms_round, capsys, value, words):
    cell = _edit_hidden_code(forms_round / "returned" / "C3.xlsx", value)
    err = _refused(forms_round, capsys)
    assert f"returned/C3.xlsx, sheet 'form-info', row {cell[1:]}, column 'B'" in err
    assert words in err
    assert "x" * 61 not in err  # the quoted value is clipped


def test_hidden_code_edited_to_another_lab_is_refused_naming_both_cells(forms_round, capsys):
    _edit_hidden_code(forms_round / "returned" / "C3.xlsx", "B2")
    err = _refused(forms_round, capsys)
    assert "returned/C3.xlsx, sheet 'form-info'" in err
    assert "'B2'" in err and "cell B5: 'C3'" in err and "edited" in err


def test_hidden_and_visible_codes_edited_alike_make_a_duplicate(forms_round, capsys):
    _edit_hidden_code(forms_round / "returned" / "C3.xlsx", "B2", visible="B2")
    err = _refused(forms_round, capsys)
    assert "lab B2 returned two forms" in err and "returned/B2.xlsx" in err


def test_forms_whose_codes_differ_only_in_case_are_refused(forms_round, capsys):
    _edit_hidden_code(forms_round / "returned" / "D4.xlsx", "a1", visible="a1")
    err = _refused(forms_round, capsys)
    assert "returned/D4.xlsx, sheet 'form-info'" in err and "returned/A1.xlsx" in err
    assert "letter case" in err


def test_form_lab_not_in_participants_is_a_warning(forms_round, capsys):
    _edit_hidden_code(forms_round / "returned" / "D4.xlsx", "Z9", visible="Z9")
    ev = load_and_evaluate(forms_round, jobs=1)
    assert "Z9" in ev.labs
    (w,) = [w for w in ev.warnings if "Z9" in w]
    assert "returned/D4.xlsx, sheet 'form-info'" in w and "not in the participants file" in w
    assert main(["check", str(forms_round)]) == 0
    assert "Z9" in capsys.readouterr().out


def test_form_lab_not_in_participants_is_an_error_when_asked(forms_round, capsys):
    toml = forms_round / "round.toml"
    toml.write_text(toml.read_text().replace('participants = "participants.csv"',
                                             'participants = "participants.csv"\nunknown_labs = "error"'))
    _edit_hidden_code(forms_round / "returned" / "D4.xlsx", "Z9", visible="Z9")
    err = _refused(forms_round, capsys)
    assert "lab code 'Z9' is not in the participants file participants.csv" in err
    assert "returned/D4.xlsx, sheet 'form-info'" in err


def test_unknown_labs_key_is_checked(make_round):
    folder = make_round(TOML.format(extra='unknown_labs = "refuse"'), _results(LABS))
    with pytest.raises(RoundFileError, match=r"unknown_labs.*'warn', 'error'"):
        load_round(folder)


# ------------------------------------------------------------------------------- participants and exclusions

def test_participants_codes_follow_the_rule(make_round, capsys):
    parts = ("lab,name,contact\nK01,One,a\nK02,Two,b\nk01,Three,c\nK\tX,Four,d\nK02,Five,e\n"
             f"K04,{'N' * 201},f\n")
    folder = make_round(TOML.format(extra='participants = "participants.csv"'), _results(LABS),
                        participants__csv=parts)
    err = _refused(folder, capsys)
    assert "participants.csv, line 4, column 'lab'" in err and "letter case" in err     # k01 vs K01
    assert "participants.csv, line 5, column 'lab'" in err and "control character" in err
    assert "participants.csv, line 6, column 'lab'" in err and "appears twice (first in line 3)" in err
    assert "participants.csv, line 7, column 'name'" in err and "201 characters" in err


def test_results_and_participants_spelling_a_code_differently_are_refused(make_round, capsys):
    parts = "lab,name,contact\n" + "".join(f"{lab.lower() if lab == 'K03' else lab},n,c\n" for lab in LABS)
    folder = make_round(TOML.format(extra='participants = "participants.csv"'), _results(LABS),
                        participants__csv=parts)
    err = _refused(folder, capsys)
    assert "results.csv, line 6, column 'lab'" in err or "participants.csv, line 4" in err
    assert "'k03'" in err and "'K03'" in err


def test_exclusion_code_follows_the_rule(make_round):
    extra = '[[exclude]]\nlab = "K\\u001b01"\nreason = "late"\n'
    folder = make_round(TOML.format(extra="") + extra, _results(LABS))
    with pytest.raises(RoundFileError) as exc:
        load_round(folder)
    assert "exclude[1].lab" in str(exc.value) and "control character" in str(exc.value)
    assert "\x1b" not in str(exc.value)


def test_exclusion_spelled_in_another_case_is_refused(make_round):
    extra = '[[exclude]]\nlab = "k02"\nreason = "sample thawed"\n'
    folder = make_round(TOML.format(extra="") + extra, _results(LABS))
    with pytest.raises(InputError) as exc:
        load_and_evaluate(folder)
    text = str(exc.value)
    assert "exclude[1].lab" in text and "'K02'" in text and "results.csv, line 4" in text


def test_exclusion_of_an_absent_lab_is_a_warning(make_round):
    extra = '[[exclude]]\nlab = "K99"\nreason = "sample thawed"\n'
    ev = load_and_evaluate(make_round(TOML.format(extra="") + extra, _results(LABS)))
    assert any("K99" in w and "changes nothing" in w for w in ev.warnings)


def test_forms_command_refuses_codes_before_writing(make_round, capsys, tmp_path):
    folder = make_round(TOML.format(extra=""), _results(LABS))
    out = tmp_path / "blank"
    assert main(["forms", str(folder), "--out", str(out), "--labs", "K01", "k01", "K\x1b"]) == 2
    err = capsys.readouterr().err
    assert "letter case" in err and "control character" in err and "\x1b" not in err
    assert not out.exists()


def test_blank_forms_for_odd_codes_are_distinct_and_read_back(make_round, tmp_path):
    from roundscore.intake.forms import write_forms

    codes = ["K01", "a/b", "a_b", "a\\b", "a:b", "CON", ".x", "מעבדה-7", "🧪" * 32, "한" * 32, "X" * 32]
    rnd = load_round(make_round(FORMS_TOML.format(extra="").replace('id = "LC-F"', 'id = "LC/F 1"')))
    paths = write_forms(rnd, [(c, None) for c in codes], tmp_path / "blank").written
    assert len(set(paths)) == len(codes) == len(list((tmp_path / "blank").iterdir()))
    for code, path in zip(codes, paths):
        assert path.parent == tmp_path / "blank"  # the round id's "/" did not make a folder
        wb = openpyxl.load_workbook(path, read_only=True)
        pairs = {r[0]: r[1] for r in wb[INFO_SHEET].iter_rows(values_only=True)}
        assert pairs["lab"] == code
