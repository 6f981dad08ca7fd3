"""A lab's workbook: what its Scores sheet carries, what it no longer repeats, and the low-level writers.

The demo round is invented (roundscore.demo.demo_round).  Expected values are the
evaluation itself (the tool's own contract: the workbook must show what the
evaluation computed), values read back from the written file, or a direct
measurement of every value (for the column widths).  No outside reference
values here.
"""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import dataclasses
import math
import re
import xml.etree.ElementTree as ET
import zipfile

import numpy as np
import openpyxl
import pandas as pd
import pytest
from openpyxl.utils.cell import range_boundaries
from python_calamine import CalamineWorkbook

from roundscore.history.sheets import normalise_rows, read_lab_file
from roundscore.model.evaluation import SCORE_COLUMNS
from roundscore.outputs import workbook as wbm
from roundscore.outputs.look import SIGNAL_COLOUR, signal_label
from roundscore.outputs.workbook import SUMMARY_POINTER, lab_payload, write_lab_workbook, write_summary

#: Labs looked at: the planted iodine outlier (K07, h beyond a line), the censored mercury result (K23),
#: the missing moisture result (K30) and an ordinary lab.
LABS = ("K01", "K07", "K23", "K30")


@pytest.fixture
def books(scored_demo):
    """The demo's evaluation and output folder as the pipeline wrote them (the shared scored demo: read only)."""
    return scored_demo.evaluation, scored_demo.out


def _scores_table(path) -> tuple[list[str], list[dict]]:
    """The header and rows of the score table on a lab's Scores sheet (the row that starts with Measurand)."""
    ws = openpyxl.load_workbook(path)["Scores"]
    rows = list(ws.iter_rows(values_only=True))
    top = next(i for i, r in enumerate(rows) if r and r[0] == "Measurand")
    head = list(rows[top])
    body = []
    for r in rows[top + 1:]:
        if not r or r[0] is None:
            break
        body.append(dict(zip(head, r)))
    return head, body


def test_no_round_statistics_or_mandel_sheet_but_a_pointer_to_the_summary(books):
    _ev, out = books
    names = openpyxl.load_workbook(out / "labs" / "K07.xlsx").sheetnames
    # no archive here, so no History; the demo's qualitative results as a sheet and their hidden machine sheet
    assert names == ["Scores", "How to read", "Chart data", "Qualitative", "data", "qualitative_data", "round"]
    texts = [c for row in openpyxl.load_workbook(out / "labs" / "K07.xlsx")["Scores"].iter_rows(values_only=True)
             for c in row if isinstance(c, str)]
    assert SUMMARY_POINTER in texts and "round-summary.xlsx" in SUMMARY_POINTER
    # What the pointer and the Mandel line point to is there in the summary workbook.
    summary = openpyxl.load_workbook(out / "round-summary.xlsx", read_only=True).sheetnames
    assert "Statistics" in summary and "Mandel" in summary
    assert any("sheet Mandel of round-summary.xlsx" in t for t in texts)


@pytest.mark.parametrize("lab", LABS)
def test_scores_sheet_carries_p_and_the_labs_mandel_h_and_k(books, lab):
    ev, out = books
    head, rows = _scores_table(out / "labs" / f"{lab}.xlsx")
    for name in ("Labs used (p)", "Mandel h", "Mandel k", "Mandel h, k against the indicator lines"):
        assert name in head
    assert head[-1] == "Note"
    own = ev.lab_scores(lab)
    assert [r["Measurand"] for r in rows] == own["measurand"].tolist()
    mandel = ev.extras["mandel"]
    mine = {r["measurand"]: r for r in mandel[mandel["lab"] == lab].to_dict("records")}
    assert mine  # every lab here has Mandel rows
    for r in rows:
        m = r["Measurand"]
        assert r["Labs used (p)"] == ev.measurands[m].p
        if m not in mine:  # not in the precision data (censored or missing): the cells stay empty
            assert r["Mandel h"] is None and r["Mandel k"] is None
            assert r["Mandel h, k against the indicator lines"] is None
            continue
        want = mine[m]
        assert r["Mandel h"] == pytest.approx(want["h"], rel=1e-14)  # a workbook keeps 15-16 digits
        assert r["Mandel k"] == pytest.approx(want["k"], rel=1e-14)
        assert r["Mandel h, k against the indicator lines"] == (want["flag"] or "within")


def test_censored_and_missing_results_have_no_mandel_values(books):
    ev, out = books
    for lab, m in (("K23", "mercury"), ("K30", "moisture")):
        rows = {r["Measurand"]: r for r in _scores_table(out / "labs" / f"{lab}.xlsx")[1]}
        mandel = ev.extras["mandel"]
        assert not ((mandel["lab"] == lab) & (mandel["measurand"] == m)).any()
        assert rows[m]["Mandel h"] is None


def test_an_outlying_lab_sees_its_indicator_line(books):
    _, out = books
    rows = {r["Measurand"]: r for r in _scores_table(out / "labs" / "K07.xlsx")[1]}
    # The planted iodine outlier of the demo round (roundscore.demo.demo_round) is far beyond the 1 % line for h.
    assert "h beyond 1 % indicator" in rows["iodine"]["Mandel h, k against the indicator lines"]
    ws = openpyxl.load_workbook(out / "labs" / "K07.xlsx")["Scores"]
    head_row = next(r for r in range(1, 40) if ws.cell(r, 1).value == "Measurand")
    col = [ws.cell(head_row, j).value for j in range(1, ws.max_column + 1)].index("Mandel h") + 1
    assert ws.cell(head_row + 1, col).number_format == "0.00"


def test_a_lab_file_is_smaller_than_before(books):
    ev, out = books
    book = CalamineWorkbook.from_path(str(out / "labs" / "K07.xlsx"))
    cells = {n: sum(1 for r in book.get_sheet_by_name(n).to_python() for v in r if v not in ("", None))
             for n in book.sheet_names}
    # The round's statistics (one row per measurand, all columns) are not copied into a lab's file.
    assert cells["Scores"] < 40 * len(ev.measurands) + 60
    assert sum(cells.values()) < 3 * cells["data"] + 100


def test_history_reads_the_lab_workbook_back(books):
    ev, out = books
    for lab in LABS:
        (got,) = read_lab_file(out / "labs" / f"{lab}.xlsx", None)
        assert (got.lab, got.round_id, got.scheme) == (lab, ev.round.id, ev.round.scheme)
        want, problems = normalise_rows(ev.lab_scores(lab)[list(SCORE_COLUMNS)].to_dict("records"),
                                        file=None, sheet=None, first_row=2)
        assert not problems
        assert len(got.rows) == len(want)
        for a, b in zip(got.rows, want):
            for x, y in zip(a, b):
                if isinstance(y, float):  # the data sheet keeps 12 significant digits
                    assert x == pytest.approx(y, rel=5e-12)  # (model.digest.DIGITS)
                else:
                    assert x == y


def test_tables_the_lab_cannot_fold_keep_a_sheet(books, tmp_path):
    ev, _ = books
    payload = lab_payload(ev, "K07")
    # Two rows per measurand (not foldable), and a folded table with a repeated measurand.
    mandel = payload.extras["mandel"]
    extras = {**payload.extras,
              "replicates": pd.DataFrame({"lab": ["K07"] * 2, "measurand": ["iodine"] * 2,
                                          "replicate": [1, 2], "value": [3280.0, 3288.0]}),
              "mandel": pd.concat([mandel, mandel.iloc[:1]], ignore_index=True)}
    write_lab_workbook(dataclasses.replace(payload, extras=extras), tmp_path / "K07.xlsx")
    wb = openpyxl.load_workbook(tmp_path / "K07.xlsx")
    assert "Replicates" in wb.sheetnames and "Mandel" in wb.sheetnames
    rows = list(wb["Replicates"].iter_rows(values_only=True))
    assert rows == [("Lab", "Measurand", "replicate", "value"), ("K07", "iodine", 1, 3280), ("K07", "iodine", 2, 3288)]
    assert len(list(wb["Mandel"].iter_rows(values_only=True))) == 1 + len(mandel) + 1
    assert "Mandel h" not in _scores_table(tmp_path / "K07.xlsx")[0]


# ----------------------------------------------------------------------------- the summary workbook

def test_summary_holds_every_score_and_statistic(books):
    ev, out = books
    book = CalamineWorkbook.from_path(str(out / "round-summary.xlsx"))
    rows = book.get_sheet_by_name("Scores").to_python()
    assert len(rows) == 1 + len(ev.scores)
    head = rows[0]
    got = pd.DataFrame(rows[1:], columns=head)
    assert got["Lab"].tolist() == ev.scores["lab"].tolist()
    assert got["Measurand"].tolist() == ev.scores["measurand"].tolist()
    z = ev.scores["z"].to_numpy(float)
    shown = pd.to_numeric(got["z"].replace("", np.nan)).to_numpy(float)
    assert np.array_equal(np.isnan(z), np.isnan(shown))
    assert np.allclose(shown[~np.isnan(z)], z[~np.isnan(z)], rtol=1e-14, atol=0)
    stats = book.get_sheet_by_name("Statistics").to_python()
    assert [r[0] for r in stats[1:]] == ev.statistics["measurand"].tolist()
    assert [r[2] for r in stats[1:]] == ev.statistics["p"].tolist()
    mandel = book.get_sheet_by_name("Mandel").to_python()
    assert len(mandel) == 1 + len(ev.extras["mandel"])


def test_summary_rows_written_in_order_keep_their_height_and_no_temporary_files(books, tmp_path):
    ev, _ = books
    write_summary(ev, tmp_path / "round-summary.xlsx")  # alone in its folder: nothing else may appear
    ws = openpyxl.load_workbook(tmp_path / "round-summary.xlsx")["Summary"]
    head_row = next(r for r in range(1, 40) if ws.cell(r, 1).value == "Measurand")
    assert ws.row_dimensions[head_row].height == 30  # set before the row was written
    assert sorted(p.name for p in tmp_path.iterdir()) == ["round-summary.xlsx"]


_C = "{http://schemas.openxmlformats.org/drawingml/2006/chart}"


def _sheet_values(book: openpyxl.Workbook, ref: str) -> list:
    sheet, cells = ref.rsplit("!", 1)
    sheet = sheet.strip("'").replace("''", "'")
    lo_c, lo_r, hi_c, hi_r = range_boundaries(cells.replace("$", ""))
    ws = book[sheet]
    return [ws.cell(r, c).value for r in range(lo_r, hi_r + 1) for c in range(lo_c, hi_c + 1)]


def _check_chart_caches(path) -> int:
    """Every chart range's cached values equal the cells the range refers to; returns the ranges checked."""
    book = openpyxl.load_workbook(path)
    checked = 0
    with zipfile.ZipFile(path) as z:
        charts = [n for n in z.namelist() if re.match(r"xl/charts/chart\d+\.xml$", n)]
        assert charts
        for name in charts:
            root = ET.fromstring(z.read(name))
            for ref in list(root.iter(_C + "numRef")) + list(root.iter(_C + "strRef")):
                formula = ref.find(_C + "f").text
                cache = ref.find(_C + "numCache")
                if cache is None:
                    cache = ref.find(_C + "strCache")
                assert cache is not None, f"{name}: {formula} has no cached values"
                count = int(cache.find(_C + "ptCount").get("val"))
                pts = {int(p.get("idx")): p.find(_C + "v").text for p in cache.findall(_C + "pt")}
                cells = _sheet_values(book, formula)
                assert count == len(cells), formula
                for i, v in enumerate(cells):
                    if v is None:
                        assert i not in pts, formula
                    elif isinstance(v, (int, float)):
                        assert float(pts[i]) == pytest.approx(v, rel=1e-15), formula
                    else:
                        assert pts[i] == v, formula
                checked += 1
    return checked


def test_chart_ranges_and_their_cached_values_match_the_cells(books):
    _, out = books
    assert _check_chart_caches(out / "round-summary.xlsx") > 20
    assert _check_chart_caches(out / "labs" / "K07.xlsx") > 5


# ----------------------------------------------------------------------------- the low-level writers

def test_table_writes_each_kind_of_value(tmp_path):
    import xlsxwriter

    path = tmp_path / "t.xlsx"
    wb = xlsxwriter.Workbook(str(path), wbm._OPTIONS)
    fm = wbm._Formats(wb)
    values = [1.5, math.nan, None, "", "=1+1", 3, np.float64(2.25), True, np.int64(7), math.inf]
    data = {"v": values, "fixed": [0.123456] * len(values), "measurand": ["m"] * len(values),
            "result": [10.0] * len(values), "signal": ["warning"] + [None] * (len(values) - 1)}
    end = wbm._table(wb.add_worksheet("T"), fm, 0, data, ["v", "fixed", "result", "signal"],
                     decimals={"fixed": 3}, signal_col="signal", row_decimals={"m": 1})
    wb.close()
    assert end == 1 + len(values)
    ws = openpyxl.load_workbook(path)["T"]
    got = [ws.cell(r, 1).value for r in range(2, 2 + len(values))]
    assert got[:9] == [1.5, None, None, None, "=1+1", 3, 2.25, True, 7]
    assert ws.cell(6, 1).data_type == "s"  # text that looks like a formula stays text
    assert ws.cell(11, 1).value == "=1/0"  # inf: xlsxwriter's #DIV/0! error cell (nan_inf_to_errors)
    assert ws.cell(2, 2).number_format == "0.000"
    assert ws.cell(2, 3).number_format == "0.0"  # the measurand's decimals by row
    assert ws.cell(2, 4).value == signal_label("warning") and ws.cell(3, 4).value is None
    assert ws.cell(2, 4).fill.fgColor.rgb.endswith(wbm._tint(SIGNAL_COLOUR["warning"])[1:])


def _fit_by_measuring_every_value(values, decimals, head="h"):
    longest = max(len(w) for w in head.split())
    for v in values:
        if isinstance(v, float):
            if math.isnan(v):
                continue
            n = len(f"{v:.{decimals}f}") if decimals is not None else len(f"{v:.6g}")
        else:
            n = len(str(v))
        longest = max(longest, n)
    return min(max(longest + 2, wbm.MIN_WIDTH), wbm.MAX_WIDTH)


@pytest.mark.parametrize("decimals", [None, 0, 2, 4])
def test_fit_with_fixed_decimals_equals_measuring_every_value(decimals):
    rng = np.random.default_rng(7)
    cases = [rng.normal(0, 10.0 ** rng.integers(-4, 6), 300).tolist(),
             [9.9996, -0.0004, 0.0004, math.nan, 99.995, -99.995],
             [math.nan, -math.inf, 0.5], [math.inf], [math.nan] * 3,
             [1.0, "a long text value", 2]]
    for values in cases:
        frame = pd.DataFrame({"c": pd.Series(values, dtype=object)})
        assert wbm._fit(frame, ["c"], ["h"], {"c": decimals}) == [_fit_by_measuring_every_value(values, decimals)]
        assert wbm._fit({"c": values}, ["c"], ["h"], {"c": decimals}) == [
            _fit_by_measuring_every_value(values, decimals)]


def test_machine_sheets_are_hidden_and_last(books):
    # openpyxl reads sheet_state from the workbook part (ECMA-376 §18.2.19 sheet@state)
    _, out = books
    wb = openpyxl.load_workbook(out / "labs" / "K19.xlsx")
    states = [(ws.title, ws.sheet_state) for ws in wb.worksheets]
    hidden = ("data", "qualitative_data", "round")  # the demo's labs have qualitative results
    machine = [i for i, (name, _) in enumerate(states) if name in hidden]
    assert [states[i][1] for i in machine] == ["hidden", "hidden", "hidden"]
    assert machine == [len(states) - 3, len(states) - 2, len(states) - 1]  # nothing a person reads after them
    assert all(state == "visible" for name, state in states if name not in hidden)


def test_headings_decimals_and_how_to_read(books, tmp_path):
    # display headings (outputs/headings.py), number formats to the measurand's decimals with full precision
    # kept in the cells, the guidance sheet (outputs/guidance.py); the demo's cadmium has decimals = 3
    from roundscore.outputs.guidance import GUIDANCE_TITLE, how_to_read
    from roundscore.outputs.lab_workbook import write_lab_workbook
    from roundscore.outputs.payloads import lab_payload

    ev, out = books
    summary = openpyxl.load_workbook(out / "round-summary.xlsx")
    stats_head = [c.value for c in summary["Statistics"][1]]
    assert "Robust SD s*" in stats_head and "MADe" in stats_head and "robust_sd" not in stats_head
    mandel = [c.value for c in summary["Mandel"][1]]
    assert "h: critical value at 5 %" in mandel and "h_crit_5" not in mandel
    col = mandel.index("h") + 1
    assert {summary["Mandel"].cell(r, col).number_format for r in range(2, 8)} == {"0.00"}
    history = pd.DataFrame([{"scheme": "SKW", "round": "SKW-2026-13", "round_date": "2026-06-01", "title": "",
                             "lab": "K19", "measurand": "cadmium", "unit": "mg/kg", "result": 0.8412345678,
                             "assigned": 0.83010242632412457, "sigma_pt": 0.03010242632412457, "score": "z",
                             "score_value": 0.3698, "signal": "acceptable", "note": ""}])
    path = tmp_path / "K19.xlsx"
    write_lab_workbook(lab_payload(ev, "K19", history), path)
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames[:2] == ["Scores", "How to read"]
    hs = wb["History"]
    head = [c.value for c in hs[4]]
    row = 5
    sigma = hs.cell(row, head.index("σ_pt") + 1)
    assert sigma.value == pytest.approx(0.03010242632412457, rel=1e-15)  # full precision in the cell
    assert sigma.number_format == "0.0000"  # shown to cadmium's 3 decimals + 1
    assert hs.cell(row, head.index("Your result") + 1).number_format == "0.000"
    text = [c.value for c in wb["How to read"]["A"] if c.value]
    assert text[0] == GUIDANCE_TITLE
    parts = how_to_read(ev.round.words)
    assert all(p.title in text for p in parts) and all(f"• {b}" in text for p in parts for b in p.bullets)
