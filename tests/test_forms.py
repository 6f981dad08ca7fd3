"""Blank submission forms (roundscore.intake.forms): written, filled in as a lab would, read back.

The form layout is our own design; the checks are internal (round trip, protection, validation).
"""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import hashlib
import shutil

import openpyxl
import pandas as pd
import pytest

from roundscore.cli import main
from roundscore.errors import InputError
from roundscore.intake.forms import FIRST_ROW, RESULTS_SHEET, write_form
from roundscore.intake.readers import read_results
from roundscore.intake.roundfile import load_round

TOML = """
[round]
id = "F1"
provider = "Invented PT Ltd"
results = "returned"
participants = "participants.csv"
replicates = 2
[measurand.iron]
unit = "mg/kg"
sigma_pt = 1.0
[measurand.zinc]
unit = "mg/kg"
sigma_pt = 2.0
"""


def _fill(path, rows):
    wb = openpyxl.load_workbook(path)
    ws = wb[RESULTS_SHEET]
    for r, values in enumerate(rows):
        for c, v in enumerate(values):
            if v is not None:
                ws.cell(row=FIRST_ROW + r, column=3 + c, value=v)
    wb.save(path)


def test_forms_command_and_round_trip(make_round):
    folder = make_round(TOML, participants__csv="lab,name,contact\nA1,Alpha Lab,a@x.example\nB2,Beta Lab,b@x.example\n")
    assert main(["forms", str(folder)]) == 0
    blank = sorted((folder / "blank-forms").glob("*.xlsx"))
    assert [f.name for f in blank] == ["F1-A1.xlsx", "F1-B2.xlsx"]
    (folder / "returned").mkdir()
    for f in blank:  # sent out, filled in, returned
        shutil.copy(f, folder / "returned" / f.name)
    forms = sorted((folder / "returned").glob("*.xlsx"))
    wb = openpyxl.load_workbook(forms[0])
    ws = wb[RESULTS_SHEET]
    assert ws.protection.sheet  # the sheet is protected...
    assert ws.cell(row=FIRST_ROW, column=3).protection.locked is False  # ...but the result cells are open
    assert ws.cell(row=FIRST_ROW, column=1).value == "iron"
    assert len(ws.data_validations.dataValidation) >= 4
    # u, U, k, method, comment after two replicates
    _fill(forms[0], [[12.1, 12.3, 0.4, None, None, "ICP-OES", "ok"], ["<5", None, None, 1.0, 2, None, None]])
    _fill(forms[1], [["11,9", 12.0], [40.5, 41.5]])
    t = read_results(load_round(folder)).frame.set_index(["lab", "measurand", "replicate"])
    assert t.loc[("A1", "iron", 1), "value"] == 12.1 and t.loc[("A1", "iron", 1), "u"] == 0.4
    assert t.loc[("A1", "iron", 1), "method"] == "ICP-OES"
    assert t.loc[("A1", "zinc", 1), "status"] == "censored" and t.loc[("A1", "zinc", 1), "U"] == 1.0
    assert t.loc[("A1", "zinc", 2), "status"] == "blank"
    assert t.loc[("B2", "iron", 1), "value"] == 11.9
    assert t.loc[("A1", "iron", 1), "file"] == "returned/F1-A1.xlsx"


def test_form_of_another_round_is_refused(make_round, tmp_path):
    folder = make_round(TOML)
    (folder / "returned").mkdir()
    other = load_round(make_round(TOML.replace('id = "F1"', 'id = "F9"')))
    write_form(other, "A1", folder / "returned" / "x.xlsx")
    _fill(folder / "returned" / "x.xlsx", [[1.0, 2.0]])
    with pytest.raises(InputError, match="this form is for round 'F9', not 'F1'"):
        read_results(load_round(folder))


def test_bad_cell_in_form_names_file_sheet_row(make_round):
    folder = make_round(TOML)
    (folder / "returned").mkdir()
    write_form(load_round(folder), "C3", folder / "returned" / "c.xlsx")
    _fill(folder / "returned" / "c.xlsx", [[1.0, "twelve"]])
    with pytest.raises(InputError) as info:
        read_results(load_round(folder))
    assert "returned/c.xlsx, Results!D10 (column 'Result 2', lab C3, measurand iron)" in str(info.value)
    assert "'twelve': not a number" in str(info.value)


def _hashes(folder):
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())}


def test_blank_forms_never_go_where_returned_forms_are_read(make_round, capsys):
    folder = make_round(TOML, participants__csv="lab,name\nA1,Alpha Lab\nB2,Beta Lab\n")
    assert main(["forms", str(folder)]) == 0
    (folder / "returned").mkdir()
    returned = folder / "returned" / "F1-A1.xlsx"
    shutil.copy(folder / "blank-forms" / "F1-A1.xlsx", returned)
    _fill(returned, [[12.1, 12.3], [40.0, 41.0]])
    before = _hashes(folder / "returned")
    capsys.readouterr()
    for out in (folder / "returned", folder / "returned" / "sub"):
        assert main(["forms", str(folder), "--labs", "A1", "--out", str(out)]) == 2
        err = capsys.readouterr().err
        assert "would be read as results" in err and "Traceback" not in err
    assert _hashes(folder / "returned") == before
    assert not (folder / "returned" / "sub").exists()


def test_existing_forms_are_kept_unless_replace_and_then_set_aside(make_round, capsys):
    folder = make_round(TOML, participants__csv="lab,name\nA1,Alpha Lab\nB2,Beta Lab\n")
    assert main(["forms", str(folder)]) == 0
    blank = folder / "blank-forms"
    _fill(blank / "F1-A1.xlsx", [[12.1, 12.3]])  # a coordinator typed a faxed result into a form
    filled = _hashes(blank)
    capsys.readouterr()
    assert main(["forms", str(folder)]) == 0
    out = capsys.readouterr().out
    assert "Kept 2 existing files unchanged" in out and "F1-A1.xlsx" in out
    assert _hashes(blank) == filled
    assert main(["forms", str(folder), "--labs", "A1", "--replace"]) == 0
    out = capsys.readouterr().out
    assert "kept as F1-A1.old-1.xlsx" in out
    after = _hashes(blank)
    assert after["F1-A1.old-1.xlsx"] == filled["F1-A1.xlsx"]  # the filled-in file, byte for byte
    assert after["F1-B2.xlsx"] == filled["F1-B2.xlsx"]
    assert after["F1-A1.xlsx"] != filled["F1-A1.xlsx"]  # a new blank form
    assert main(["forms", str(folder), "--labs", "A1", "--replace"]) == 0
    assert "F1-A1.old-2.xlsx" in _hashes(blank) and _hashes(blank)["F1-A1.old-1.xlsx"] == filled["F1-A1.xlsx"]
    assert not [p for p in blank.iterdir() if p.name.startswith(".")]  # no temporary file left


def test_blank_form_prints_one_page_wide_on_the_rounds_paper(tmp_path):
    # pageSetup / definedName as in ECMA-376 Part 1 (§18.3.1.63: paperSize 1 = Letter); form-info is hidden
    import re
    import zipfile

    from roundscore.intake.forms import write_form
    from roundscore.intake.roundfile import load_round

    folder = tmp_path / "r"
    folder.mkdir()
    (folder / "round.toml").write_text('[round]\nid = "R-1"\npaper = "letter"\nreturn_by = "2026-11-02"\n'
                                       '[measurand.lead]\nunit = "mg/kg"\nsigma_pt = 0.1\n', encoding="utf-8")
    rnd = load_round(folder)
    path = tmp_path / "form.xlsx"
    write_form(rnd, "L01", path)
    with zipfile.ZipFile(path) as z:
        book = z.read("xl/workbook.xml").decode()
        sheet = z.read("xl/worksheets/sheet1.xml").decode()
    assert re.search(r'<sheet name="form-info" sheetId="2" state="hidden"', book)
    assert '<definedName name="_xlnm.Print_Titles" localSheetId="0">Results!$9:$9</definedName>' in book
    assert re.search(r'<definedName name="_xlnm.Print_Area" localSheetId="0">Results!\$A\$1:\$[A-Z]+\$\d+<', book)
    assert 'paperSize="1"' in sheet and 'fitToHeight="0"' in sheet and '<pageSetUpPr fitToPage="1"/>' in sheet
    assert "Laboratory L01" in re.search(r"<oddHeader>(.*?)</oddHeader>", sheet).group(1)


def _receipt_cells(path) -> dict[str, str]:
    wb = openpyxl.load_workbook(path)
    kv = {r[0]: r[1] for r in wb["form-info"].iter_rows(min_row=2, values_only=True)}
    return {k[:-5]: v for k, v in kv.items() if k in ("arrived_cell", "condition_cell", "analysed_cell")}


def _returned_round(make_round, fields: dict[str, object] | None, *, strip: bool = False):
    """Round F1 with lab A1's form returned: results filled in, the sample fields set (or the form-info keys
    removed, as in a form written before the fields existed)."""
    import datetime as dt

    folder = make_round(TOML.replace("replicates = 2\n", 'replicates = 2\nreturn_by = "2026-11-02"\n'),
                        participants__csv="lab,name,contact\nA1,Alpha Lab,a@x.example\n")
    (folder / "returned").mkdir()
    path = folder / "returned" / "F1-A1.xlsx"
    write_form(load_round(folder), "A1", path)
    _fill(path, [[10.1, 10.3], [20.0, 21.0]])
    wb = openpyxl.load_workbook(path)
    ws, info = wb[RESULTS_SHEET], wb["form-info"]
    cells = {r[0].value: r[1] for r in info.iter_rows(min_row=2) if r[0].value}
    for key, value in (fields or {}).items():
        ws[cells[f"{key}_cell"].value].value = value
    if strip:
        for key in ("arrived_cell", "condition_cell", "analysed_cell"):
            cells[key].value = None
            info.cell(row=cells[key].row, column=1).value = None
    wb.save(path)
    return folder, dt


def test_form_prints_return_by_and_reads_the_sample_fields(make_round):
    import datetime as dt

    from roundscore.pipeline import load_and_evaluate

    folder, _ = _returned_round(make_round, {"arrived": dt.datetime(2026, 10, 1), "condition": "intact, cool",
                                             "analysed": "2026-10-05"})
    rnd = load_round(folder)
    wb = openpyxl.load_workbook(folder / "returned" / "F1-A1.xlsx")
    shown = {r[0]: r[1] for r in wb[RESULTS_SHEET].iter_rows(min_row=2, max_row=7, max_col=2, values_only=True)}
    assert shown["Return by"] == rnd.return_by == "2026-11-02"
    assert wb[RESULTS_SHEET]["C10"].value == 10.1 and wb[RESULTS_SHEET]["D11"].value == 21.0  # addresses kept
    table = read_results(rnd, jobs=1)
    receipt = table.receipts["A1"]
    assert (receipt.arrived, receipt.condition, receipt.analysed) == ("2026-10-01", "intact, cool", "2026-10-05")
    assert "F1-A1.xlsx" in receipt.source and "Results!" in receipt.source
    ev = load_and_evaluate(folder)
    row = ev.audit[(ev.audit["lab"] == "A1") & (ev.audit["action"] == "sample receipt")]
    assert len(row) == 1 and "date the sample arrived: 2026-10-01" in row["reason"].iloc[0]
    assert "condition on arrival: intact, cool" in row["reason"].iloc[0]


@pytest.mark.parametrize("value", ["1 Oct 2026", "14/10/2026", "2026-02-30"])  # a typed number there is a date
def test_a_bad_sample_date_is_refused_naming_the_cell(make_round, value):
    folder, _ = _returned_round(make_round, {"analysed": value})
    with pytest.raises(InputError) as err:
        read_results(load_round(folder), jobs=1)
    text = str(err.value)
    cell = _receipt_cells(folder / "returned" / "F1-A1.xlsx")["analysed"]
    assert "date of analysis is not a date" in text and cell in text
    assert "F1-A1.xlsx" in text and "YYYY-MM-DD" in text


def test_blank_and_old_forms_still_read(make_round):
    folder, _ = _returned_round(make_round, None)
    table = read_results(load_round(folder), jobs=1)
    assert table.receipts == {} and set(table.frame["lab"]) == {"A1"}
    old, _ = _returned_round(make_round, {"arrived": "2026-10-01"}, strip=True)  # no form-info keys: ignored
    table = read_results(load_round(old), jobs=1)
    assert table.receipts == {} and len(table.frame) == 4


# --------------------------------------------------------------------------- qualitative measurands

QUAL_TOML = """
[round]
id = "Q1"
provider = "Invented PT Ltd"
results = "{results}"
participants = "participants.csv"
replicates = 1
[measurand.iron]
unit = "mg/kg"
sigma_pt = 1.0
[measurand.salmonella]
kind = "nominal"
categories = ["detected", "not detected"]
assigned = {{ "S1" = "detected", "B1" = "not detected" }}
aliases = {{ "+" = "detected", "ND" = "not detected" }}
[measurand.grade]
kind = "ordinal"
categories = ["negative", "weak", "positive"]
assigned = "median"
"""
QUAL_LABS = "lab,name\nA1,Alpha Lab\nB2,Beta Lab\n"
#: What the labs report, as typed (any casing, an alias): (lab, measurand, item, value, method).
QUAL_RESULTS = [("A1", "salmonella", "S1", "Detected", "culture"), ("A1", "salmonella", "B1", "ND", "culture"),
                ("A1", "grade", "", " weak ", None), ("B2", "salmonella", "S1", "+", None),
                ("B2", "grade", "", "POSITIVE", "PCR")]


def _qualitative_rows(ws) -> dict[tuple[str, str], int]:
    """Row numbers of the qualitative table by (measurand, item), found under its heading."""
    heading = next(r for r in range(1, ws.max_row + 1) if ws.cell(row=r, column=1).value == "Qualitative results")
    assert [ws.cell(row=heading + 1, column=c).value for c in range(1, 6)] == [
        "Measurand", "Item", "Result", "Method", "Comment"]
    rows, r = {}, heading + 2
    while ws.cell(row=r, column=1).value:
        rows[(ws.cell(row=r, column=1).value, ws.cell(row=r, column=2).value or "")] = r
        r += 1
    return rows


def _qualitative_frame(folder):
    t = read_results(load_round(folder)).frame
    q = t[t["status"] == "category"]
    return q.loc[:, ["lab", "measurand", "item", "category", "method"]].sort_values(
        ["lab", "measurand", "item"]).reset_index(drop=True)


def test_qualitative_measurands_get_rows_with_lists_and_read_back_as_the_long_layout(make_round):
    folder = make_round(QUAL_TOML.format(results="returned"), participants__csv=QUAL_LABS)
    assert main(["forms", str(folder)]) == 0
    (folder / "returned").mkdir()
    for f in sorted((folder / "blank-forms").glob("*.xlsx")):
        shutil.copy(f, folder / "returned" / f.name)
    for form in sorted((folder / "returned").glob("*.xlsx")):
        wb = openpyxl.load_workbook(form)
        ws = wb[RESULTS_SHEET]
        rows = _qualitative_rows(ws)
        assert list(rows) == [("salmonella", "S1"), ("salmonella", "B1"), ("grade", "")]  # one row per item
        lists = {str(dv.sqref): dv for dv in ws.data_validations.dataValidation if dv.type == "list"}

        def listed(ref: str, lists=lists, info=wb["form-info"]) -> list[str]:
            first, last = lists[ref].formula1.split("!")[1].replace("$", "").split(":")
            return [c[0].value for c in info[first:last]]

        assert listed(f"C{rows[('salmonella', 'S1')]}") == ["detected", "not detected"]
        assert listed(f"B{rows[('salmonella', 'S1')]}") == ["S1", "B1"]
        assert listed(f"C{rows[('grade', '')]}") == ["negative", "weak", "positive"]
        assert f"B{rows[('grade', '')]}" not in lists  # no items declared: a free item cell
        assert ws.cell(row=rows[("grade", "")], column=3).protection.locked is False
        lab = form.stem.split("-")[-1]
        for who, measurand, item, value, method in QUAL_RESULTS:
            if who == lab:
                ws.cell(row=rows[(measurand, item)], column=3, value=value)
                ws.cell(row=rows[(measurand, item)], column=4, value=method)
        wb.save(form)
    from_forms = _qualitative_frame(folder)
    lines = ["lab,measurand,replicate,value,item,method"] + [
        f"{who},{m},1,{v},{item},{method or ''}" for who, m, item, v, method in QUAL_RESULTS]
    long = make_round(QUAL_TOML.format(results="results.csv"), "\n".join(lines) + "\n",
                      participants__csv=QUAL_LABS)
    pd.testing.assert_frame_equal(from_forms, _qualitative_frame(long))
    assert from_forms["category"].tolist() == ["weak", "not detected", "detected", "positive", "detected"]


def test_a_word_that_is_no_category_on_a_form_is_refused_naming_the_cell(make_round):
    folder = make_round(QUAL_TOML.format(results="returned"), participants__csv=QUAL_LABS)
    (folder / "returned").mkdir()
    write_form(load_round(folder), "A1", folder / "returned" / "Q1-A1.xlsx")
    wb = openpyxl.load_workbook(folder / "returned" / "Q1-A1.xlsx")
    ws = wb[RESULTS_SHEET]
    row = _qualitative_rows(ws)[("salmonella", "B1")]
    ws.cell(row=row, column=3, value="maybe")
    wb.save(folder / "returned" / "Q1-A1.xlsx")
    with pytest.raises(InputError) as err:
        read_results(load_round(folder))
    text = str(err.value)
    assert f"Results!C{row}" in text and "'maybe'" in text and "not a category of salmonella" in text
