"""The seeded generator of large rounds: reproducible, filled-in forms that read back (invented data)."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import filecmp

import numpy as np
import pytest
import xlsxwriter

from roundscore.demo.big_round import BIG_ID, fill_form, make_big_round
from roundscore.intake.readers import read_results
from roundscore.intake.xlsx import read_rows
from roundscore.intake.roundfile import load_round


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    return make_big_round(tmp_path_factory.mktemp("g") / "r", labs=30, measurands=7, replicates=3, jobs=1)


def test_size_and_files(small):
    assert small.labs == 30 and small.measurands == 7 and small.replicates == 3
    assert len(small.forms) == 30 and all(p.is_file() for p in small.forms)
    assert small.forms[0].name == f"{BIG_ID}-L0001.xlsx"
    rnd = load_round(small.folder)
    assert len(rnd.measurands) == 7 and rnd.replicates == 3


def test_same_seed_same_bytes_for_any_jobs(small, tmp_path):
    again = make_big_round(tmp_path / "r", labs=30, measurands=7, replicates=3, jobs=2)
    for a, b in zip(small.forms, again.forms):
        assert filecmp.cmp(a, b, shallow=False)
    assert (small.folder / "round.toml").read_text() == (again.folder / "round.toml").read_text()


def test_other_seed_other_values(small, tmp_path):
    other = make_big_round(tmp_path / "r", labs=30, measurands=7, replicates=3, seed=1, jobs=1)
    assert not filecmp.cmp(small.forms[0], other.forms[0], shallow=False)


def test_forms_read_back_as_every_filled_cell(small):
    table = read_results(load_round(small.folder), jobs=1)
    f = table.frame
    filled = int((f["status"] != "blank").sum())
    assert filled == small.cells
    assert set(f["lab"]) == {f"L{i:04d}" for i in range(1, 31)}
    assert (f["status"] == "value").sum() > 0.95 * small.cells
    assert np.isfinite(f.loc[f["status"] == "value", "value"]).all()


def test_fill_form_writes_numbers_and_text(tmp_path):
    p = tmp_path / "f.xlsx"
    wb = xlsxwriter.Workbook(str(p))
    ws = wb.add_worksheet("Results")
    fmt = wb.add_format({"locked": False})
    for ref in ("C10", "D10", "E10"):
        ws.write_blank(ref, None, fmt)
    wb.close()
    fill_form(p, {"C10": 1.25, "D10": "<0.5 & more"})
    rows = read_rows(p, "Results").rows
    assert rows[9][2] == 1.25 and rows[9][3] == "<0.5 & more"
    assert len(rows[9]) == 4 or rows[9][4] is None  # E10 stays blank


def test_fill_form_refuses_a_cell_that_is_not_empty(tmp_path):
    p = tmp_path / "f.xlsx"
    wb = xlsxwriter.Workbook(str(p))
    wb.add_worksheet("Results").write_string("A1", "taken")
    wb.close()
    with pytest.raises(KeyError, match="A1"):
        fill_form(p, {"A1": 2.0})


@pytest.mark.parametrize("labs, measurands, replicates", [(2, 5, 2), (10, 0, 2), (10, 5, 0)])
def test_refuses_sizes_it_cannot_make(tmp_path, labs, measurands, replicates):
    with pytest.raises(ValueError, match="need labs"):
        make_big_round(tmp_path, labs=labs, measurands=measurands, replicates=replicates)
