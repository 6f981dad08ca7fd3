"""Importing results (roundscore.model.table, io.readers): the long layout, cells, units and every problem listed.

The rules checked here are the issue's import contract (common practice for PT result sheets).
"""

from __future__ import annotations

import math

import pytest
import xlsxwriter

from roundscore.errors import InputError
from roundscore.intake.readers import read_results
from roundscore.intake.roundfile import load_round

TOML = """
[round]
id = "T1"
[measurand.copper]
unit = "mg/kg"
sigma_pt = 0.2
[measurand.zinc]
unit = "mg/kg"
sigma_pt = 2
"""


def test_long_layout_with_units_and_censoring(make_round):
    folder = make_round(TOML, """
        lab,measurand,replicate,value,unit,u,U,k,method
        L1,copper,1,"4,75",mg/kg,0.1,,,ICP
        L1,copper,2,4.80,,,,,ICP
        L2,copper,1,4800,µg/kg,,0.4,2,AAS
        L2,copper,2,<0.5,,,,,AAS
        L3,zinc,1,1 234.5,,,,,
        L3,zinc,2,,,,,,
        L4,zinc,1,−2.5e1,,,,,
    """.replace("−2.5e1", "25e0"))
    t = read_results(load_round(folder)).frame
    row = t[(t.lab == "L1") & (t.replicate == 1)].iloc[0]
    assert row.value == 4.75 and row.text == "4.75" and row.u == 0.1 and row.method == "ICP"
    l2 = t[t.lab == "L2"].set_index("replicate")
    assert l2.loc[1, "value"] == pytest.approx(4.8)  # 4800 µg/kg → 4.8 mg/kg
    assert l2.loc[1, "U"] == pytest.approx(0.4e-3)  # U converted with the value
    assert l2.loc[2, "status"] == "censored" and l2.loc[2, "limit"] == 0.5 and math.isnan(l2.loc[2, "value"])
    l3 = t[t.lab == "L3"].set_index("replicate")
    assert l3.loc[1, "value"] == 1234.5 and l3.loc[2, "status"] == "blank"


def test_every_problem_is_listed_with_its_place(make_round):
    folder = make_round(TOML, """
        lab,measurand,replicate,value,unit
        L1,copper,1,abc,
        L1,copper,1,4.1,
        L2,nickel,1,3.0,
        L3,zinc,1,3.0,mg/L
        L4,zinc,x,3.0,
        L5,zinc,1,-3.0,
    """)
    with pytest.raises(InputError) as info:
        read_results(load_round(folder))
    problems = info.value.problems
    text = str(info.value)
    assert len(problems) == 6
    assert "results.csv, line 2, column 'value' (lab L1, measurand copper): value 'abc': not a number" in text
    assert "duplicate result for lab L1, copper, replicate 1 (also at results.csv, line 2)" in text
    assert "line 4" in text and "unknown measurand; the round has: copper, zinc" in text
    assert "'mg/L' cannot be converted to 'mg/kg'" in text
    assert "line 6" in text and "replicate must be a whole number" in text
    assert "negative result" in text


def test_missing_columns(make_round):
    folder = make_round(TOML, "laboratory,measurand,value\nL1,copper,3\n")
    with pytest.raises(InputError, match="missing column\\(s\\) lab, replicate"):
        read_results(load_round(folder))


def test_xlsx_long_layout_named_sheet(make_round):
    folder = make_round(TOML.replace('id = "T1"', 'id = "T1"\nresults = "res.xlsx"\nresults_sheet = "data"'))
    wb = xlsxwriter.Workbook(str(folder / "res.xlsx"))
    wb.add_worksheet("cover").write(0, 0, "not the data")
    ws = wb.add_worksheet("data")
    ws.write_row(0, 0, ["lab", "measurand", "replicate", "value"])
    ws.write_row(1, 0, ["L1", "copper", 1, 4.5])
    ws.write_row(2, 0, [17, "copper", 1, "<0.2"])  # a numeric lab code becomes "17"
    ws.write_row(3, 0, ["L1", "copper", 2, "n.d."])
    wb.close()
    t = read_results(load_round(folder)).frame
    assert set(t.lab) == {"L1", "17"}
    nd = t[(t.lab == "L1") & (t.replicate == 2)].iloc[0]
    assert nd.status == "censored" and math.isnan(nd.limit)  # censored without a limit


def test_missing_sheet_named(make_round):
    folder = make_round(TOML.replace('id = "T1"', 'id = "T1"\nresults = "res.xlsx"\nresults_sheet = "nope"'))
    wb = xlsxwriter.Workbook(str(folder / "res.xlsx"))
    wb.add_worksheet("data")
    wb.close()
    with pytest.raises(InputError, match="no sheet named 'nope'; the workbook has: data"):
        read_results(load_round(folder))
