"""The qualitative outputs of the demo round: CSV contracts, report section, lab pages, sheets and figure.

Source of expected values: the tool's own contract (the column names fixed by the issue, the demo's planted and
invented results); no outside reference values here.
"""

from __future__ import annotations

import csv

import openpyxl

from roundscore.model.qualitative import QUALITATIVE_COLUMNS, QUALITATIVE_SUMMARY_COLUMNS
from roundscore.outputs.qualitative_report import lab_section, qualitative_parts, report_section


def _rows(path):
    with open(path, encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def test_csv_contracts(scored_demo):
    out = scored_demo.out
    with open(out / "qualitative.csv", encoding="utf-8") as fh:
        assert tuple(next(csv.reader(fh))) == QUALITATIVE_COLUMNS
    with open(out / "qualitative_summary.csv", encoding="utf-8") as fh:
        assert tuple(next(csv.reader(fh))) == QUALITATIVE_SUMMARY_COLUMNS
    rows = _rows(out / "qualitative.csv")
    # the demo's planted results (roundscore/demo/demo_round.py): K09 false negative, K22 false positive,
    # K26 two grades above the median
    wrong = {(r["lab"], r["item"]): r["agreement"] for r in rows if r["measurand"] == "salmonella"
             and r["agreement"] != "agrees"}
    assert wrong == {("K09", "KM-14S"): "false negative", ("K22", "KM-14B"): "false positive"}
    k26 = next(r for r in rows if r["lab"] == "K26" and r["measurand"] == "grit")
    assert (k26["deviation"], k26["signal"]) == ("2", "action")
    assert len(rows) == 31 * 3  # 31 labs × (2 salmonella items + 1 grit item)


def test_report_section_and_lab_pages(scored_demo):
    report = (scored_demo.out / "report.html").read_text(encoding="utf-8")
    assert 'id="qualitative"' in report and "Wilson" in report and "fisher-exact" in report
    k09 = (scored_demo.out / "labs" / "K09.html").read_text(encoding="utf-8")
    assert "Your qualitative results" in k09 and "false negative" in k09
    assert "your lab (K09)" in k09 and "your lab (K22)" not in k09  # its own marks only
    k01 = (scored_demo.out / "labs" / "K01.html").read_text(encoding="utf-8")
    assert ">false positive<" not in k01 and ">agrees<" in k01  # a table cell of K22's, not of K01's


def test_lab_workbook_holds_only_its_rows(scored_demo):
    wb = openpyxl.load_workbook(scored_demo.out / "labs" / "K22.xlsx", read_only=True)
    # no round tables; the hidden machine sheet read back by history add (also its rows only)
    assert [n for n in wb.sheetnames if n.lower().startswith("qualitative")] == ["Qualitative", "qualitative_data"]
    assert {r[0] for r in wb["qualitative_data"].iter_rows(min_row=2, values_only=True)} == {"K22"}
    cells = [c for row in wb["Qualitative"].iter_rows(values_only=True) for c in row if isinstance(c, str)]
    labs = {c for c in cells if c.startswith("K") and c[1:].isdigit()}
    assert labs == {"K22"}
    summary = openpyxl.load_workbook(scored_demo.out / "round-summary.xlsx", read_only=True)
    assert {"Qualitative", "Qualitative_summary", "Qualitative_distribution"} <= set(summary.sheetnames)


def test_blocks_follow_the_evaluation(scored_demo):
    ev = scored_demo.evaluation
    parts = qualitative_parts(ev)
    assert set(parts.figures) == {"salmonella", "grit"}
    fig = parts.figures["salmonella"]
    assert len(fig.marks["K09"]) == 2  # one mark per item
    assert fig.for_lab("K09") != fig.figure.svg and fig.for_lab("nobody") == fig.figure.svg
    assert report_section(ev, parts) is not None
    sec = lab_section(ev, parts, "K26")
    assert sec is not None
    table = sec.blocks[1]
    assert {row[0].text for row in table.rows} == {"salmonella", "grit"}
    assert any(cell.signal == "action" and "action" in cell.text for row in table.rows for cell in row)
