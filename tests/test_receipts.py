"""The sample's receipt (date it arrived, its condition, date of analysis) in the long layout, and in the demo.

The forms' own fields are tested in tests/test_forms.py; here the long layout's optional columns ``arrived``,
``condition`` and ``analysed`` (read by ``roundscore.intake.readers.receipts_from_long``), the demo round's
``return_by`` and receipts reaching the blank forms, the audit trail, the lab's sheet and its page, and the
workbooks' wrapped texts that carry them.
Source of expected values: the tool's own contract (invented data); no outside reference values here.
"""

from __future__ import annotations

import csv

import openpyxl
import pytest

from roundscore.errors import InputError
from roundscore.intake.readers import read_results
from roundscore.intake.roundfile import load_round

TOML = """
[round]
id = "RC-1"
date = "2026-11-02"
results = "results.csv"

[measurand.copper]
unit = "mg/kg"
sigma_pt = 0.5
decimals = 2
"""


def _results(extra: dict[int, tuple[str, str, str]]) -> str:
    rows = ["lab,measurand,replicate,value,arrived,condition,analysed"]
    for i in range(1, 7):
        for rep in (1, 2):
            got = extra.get(i, ("", "", "")) if rep == 1 else extra.get(-i, ("", "", ""))
            rows.append(f"L{i},copper,{rep},{10 + 0.1 * i + 0.01 * rep:.2f}," + ",".join(
                f'"{v}"' if "," in v else v for v in got))
    return "\n".join(rows) + "\n"


def test_long_layout_receipts_reach_the_audit_sheet_and_page(make_round, tmp_path):
    from roundscore.cli import main

    folder = make_round(TOML, _results({2: ("2026-10-20", "intact, cool", "2026-10-22"), 4: ("2026-10-21", "", ""),
                                        -4: ("", "thawed", "")}))
    table = read_results(load_round(folder), jobs=1)
    assert set(table.receipts) == {"L2", "L4"}
    r2, r4 = table.receipts["L2"], table.receipts["L4"]
    assert (r2.arrived, r2.condition, r2.analysed) == ("2026-10-20", "intact, cool", "2026-10-22")
    assert (r4.arrived, r4.condition, r4.analysed) == ("2026-10-21", "thawed", "")  # two rows, one receipt
    assert r2.source == "results.csv, line 4" and r4.source == "results.csv, lines 8, 9"
    out = tmp_path / "out"
    assert main(["score", str(folder), "--out", str(out), "--jobs", "1", "--quiet"]) == 0
    with open(out / "audit.csv", encoding="utf-8", newline="") as fh:
        audit = [r for r in csv.DictReader(fh) if r["action"] == "sample receipt"]
    assert [(r["lab"], r["reason"]) for r in audit] == [
        ("L2", "date the sample arrived: 2026-10-20; condition on arrival: intact, cool; date of analysis: "
               "2026-10-22 (results.csv, line 4)"),
        ("L4", "date the sample arrived: 2026-10-21; condition on arrival: thawed (results.csv, lines 8, 9)")]
    ws = openpyxl.load_workbook(out / "labs" / "L2.xlsx")["Scores"]
    heading = {ws.cell(r, 1).value: ws.cell(r, 2).value for r in range(2, 16)}
    assert heading["Date the sample arrived"] == "2026-10-20" and heading["Condition on arrival"] == "intact, cool"
    assert heading["Date of analysis"] == "2026-10-22"
    assert ws.column_dimensions["A"].width >= len("Date the sample arrived")  # the label is not cut off
    page = (out / "labs" / "L2.html").read_text(encoding="utf-8")
    assert "Date the sample arrived" in page and "intact, cool" in page
    assert "Date the sample arrived" not in (out / "labs" / "L3.html").read_text(encoding="utf-8")


def test_a_receipt_that_disagrees_or_a_bad_date_is_refused_naming_the_line(make_round):
    folder = make_round(TOML, _results({3: ("2026-10-20", "", ""), -3: ("2026-10-21", "", ""),
                                        5: ("", "", "21/10/2026")}))
    with pytest.raises(InputError) as err:
        read_results(load_round(folder), jobs=1)
    text = str(err.value)
    assert "date the sample arrived differs from the lab's row 6 ('2026-10-20')" in text
    assert "results.csv, line 7" in text and "'2026-10-21'" in text and "column 'arrived'" in text
    assert "date of analysis is not a date" in text and "results.csv, line 10" in text and "'21/10/2026'" in text
    assert "YYYY-MM-DD" in text


def test_a_table_without_the_columns_gives_no_receipts(make_round):
    folder = make_round(TOML, "lab,measurand,replicate,value\nL1,copper,1,10.1\nL2,copper,1,10.2\nL3,copper,1,10\n")
    assert read_results(load_round(folder), jobs=1).receipts == {}


def test_the_demo_shows_return_by_and_its_labs_receipts(scored_demo, tmp_path):
    from roundscore.intake.forms import write_form

    rnd = load_round(scored_demo.round)
    assert rnd.return_by == "2026-10-07"
    form = tmp_path / "K08.xlsx"
    write_form(rnd, "K08", form)
    ws = openpyxl.load_workbook(form)["Results"]
    shown = {r[0]: r[1] for r in ws.iter_rows(min_row=1, max_row=12, max_col=2, values_only=True)}
    assert shown["Return by"] == "2026-10-07"
    # every qualitative result cell keeps its drop-down list, a long label ("Sand and grit (graded by sieving)",
    # 33 characters) included: Excel allows 32 in an input title, and a longer one used to drop the list
    lists = [v for v in ws.data_validations.dataValidation if v.type == "list"]
    titles = {v.promptTitle for v in lists}
    assert "Sand and grit (graded by sievin…" in titles and "Salmonella spp. in 25 g" in titles
    with open(scored_demo.out / "audit.csv", encoding="utf-8", newline="") as fh:
        receipts = {r["lab"]: r["reason"] for r in csv.DictReader(fh) if r["action"] == "sample receipt"}
    assert set(receipts) == {"K03", "K08", "K21"}
    assert "condition on arrival: cool box, ice packs melted" in receipts["K08"]
    sheet = openpyxl.load_workbook(scored_demo.out / "labs" / "K08.xlsx")["Scores"]
    heading = {sheet.cell(r, 1).value: sheet.cell(r, 2).value for r in range(2, 16)}
    assert heading["Condition on arrival"] == "cool box, ice packs melted"
    assert "cool box, ice packs melted" in (scored_demo.out / "labs" / "K08.html").read_text(encoding="utf-8")


def test_long_texts_wrap_in_the_workbooks_and_scores_show_their_symbols(scored_demo):
    """A note or audit reason longer than its column wraps in a row tall enough for it (a spreadsheet program
    does not grow rows on opening, and a text past its column is cut off at the printed page's edge)."""
    book = openpyxl.load_workbook(scored_demo.out / "round-summary.xlsx")
    audit = book["Audit"]
    heads = [c.value for c in audit[1]]
    reason = heads.index("Reason") + 1
    width = audit.column_dimensions[openpyxl.utils.get_column_letter(reason)].width
    long_rows = [r for r in range(2, audit.max_row + 1)
                 if len(str(audit.cell(r, reason).value or "")) > 1.1 * width]
    assert long_rows  # the demo's audit has reasons longer than the column
    for r in long_rows:
        assert audit.cell(r, reason).alignment.wrap_text, r
        assert (audit.row_dimensions[r].height or 15) > 15, r
    summary = book["Summary"]
    shown = [summary.cell(r, c).value for r in range(1, summary.max_row + 1) for c in range(1, 12)]
    assert "ζ" in shown and "En" in shown and "zeta" not in shown and "z-prime" not in shown
    lab = openpyxl.load_workbook(scored_demo.out / "labs" / "K01.xlsx")["Scores"]
    cells = [c for row in lab.iter_rows(values_only=True) for c in row]
    assert "ζ" in cells and "z′" in cells and "zeta" not in cells
    steps = {audit.cell(r, heads.index("Step") + 1).value for r in range(2, audit.max_row + 1)}
    assert "σ_pt" in steps and "sigma_pt" not in steps
