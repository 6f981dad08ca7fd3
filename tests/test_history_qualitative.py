"""Qualitative results in the archive (roundscore.history.qualitative and the store's qualitative rows).

The tests taking ``archive_at`` run over every implementation (tests/archive_backends.py). The data are
invented (a microbiology scheme "MB", made-up lab codes). Expected values: the rule as the module defines it
(two wrong results in three rounds: common practice, the counterpart of the two-of-three zone rule, Western
Electric Statistical Quality Control Handbook, 1956), counted by hand on the planted series below; the rest is
the tool's own contract (what is stored comes back as it went in).
"""

from __future__ import annotations

import pandas as pd
import pytest

from roundscore.errors import ArchiveConflict, InputError
from roundscore.history import store as archive
from roundscore.history.qualitative import (QUALITATIVE_HISTORY_COLUMNS, QUALITATIVE_ROW_FIELDS, check_qualitative,
                                            normalise_rows)

from . import archive_backends
from .archive_backends import audit
from .test_archive import scores_frame, store

archive_at = archive_backends.archive_at


def qual_frame(rows) -> pd.DataFrame:
    """Invented qualitative.csv rows: (lab, measurand, item, reported, assigned, agreement, deviation, signal)."""
    return pd.DataFrame([(*r, "") for r in rows], columns=list(QUALITATIVE_ROW_FIELDS))


ROUND_1 = qual_frame([
    ("L01", "salmonella", "S1", "detected", "detected", "agrees", None, "acceptable"),
    ("L01", "salmonella", "B1", "detected", "not detected", "false positive", None, "action"),
    ("L02", "salmonella", "S1", "not detected", "detected", "false negative", None, "action"),
    ("L02", "salmonella", "B1", "not detected", "not detected", "agrees", None, "acceptable"),
    ("L01", "grade", "", "weak", "positive", "disagrees", -1, "warning"),
    ("L02", "grade", "", "positive", "positive", "agrees", 0, "acceptable"),
])


def test_a_round_keeps_its_qualitative_results_and_gives_them_back(archive_at):
    db = archive_at()
    got = store(db, scores_frame(), qualitative=ROUND_1)
    assert got.status == "added" and "6 qualitative results" in got.message
    hist = archive.lab_qualitative_history(db, lab=["L01", "L02"])
    assert list(hist.columns) == list(QUALITATIVE_HISTORY_COLUMNS)
    assert len(hist) == 6
    back = hist.loc[:, list(QUALITATIVE_ROW_FIELDS)].sort_values(["lab", "measurand", "item"]).reset_index(drop=True)
    want = ROUND_1.sort_values(["lab", "measurand", "item"]).reset_index(drop=True)
    for col in ("lab", "measurand", "item", "reported", "assigned", "agreement", "signal"):
        assert back[col].tolist() == want[col].tolist(), col
    grade = back[back["measurand"] == "grade"]
    assert grade["deviation"].astype(int).tolist() == [-1, 0] and back["deviation"].isna().sum() == 4
    assert set(hist["round"]) == {"2024-1"} and set(hist["scheme"]) == {"AQ"}
    # the same again is unchanged; a changed result is refused, then replaced with the old rows audited
    assert store(db, scores_frame(), qualitative=ROUND_1).status == "unchanged"
    changed = ROUND_1.copy()
    changed.loc[2, ["reported", "agreement", "signal"]] = ["detected", "agrees", "acceptable"]
    with pytest.raises(ArchiveConflict, match="different content"):
        store(db, scores_frame(), qualitative=changed)
    assert store(db, scores_frame(), qualitative=changed, replace=True).status == "replaced"
    kinds = [e.kind for e in audit(db)]
    assert kinds.count("qualitative") == 6 and kinds.count("score") == 6
    after = archive.lab_qualitative_history(db, lab="L02", measurand="salmonella")
    assert after["agreement"].tolist() == ["agrees", "agrees"]


def test_a_round_without_qualitative_results_hashes_as_before(archive_at):
    db = archive_at()
    assert store(db, scores_frame()).status == "added"
    assert store(db, scores_frame(), qualitative=qual_frame([])).status == "unchanged"
    assert archive.lab_qualitative_history(db, lab="L01").empty


def test_a_lab_with_qualitative_results_only_is_an_archived_lab(archive_at):
    db = archive_at()
    only = qual_frame([("Q9", "salmonella", "S1", "detected", "detected", "agrees", None, "acceptable")])
    store(db, scores_frame(), qualitative=only)
    assert "Q9" in archive.archived_labs(db)


def test_bad_qualitative_rows_are_refused_naming_the_cell(archive_at):
    bad = qual_frame([("L01", "salmonella", "S1", "detected", "detected", "maybe", 0.5, "acceptable"),
                      ("L01", "salmonella", "S1", "detected", "detected", "agrees", None, "fine")])
    with pytest.raises(InputError) as err:
        store(archive_at(), scores_frame(), qualitative=bad)
    text = str(err.value)
    assert "column 'agreement'" in text and "'maybe'" in text
    assert "not a whole number of categories" in text
    assert "unknown signal" in text and "'fine'" in text
    assert "duplicate lab x measurand x item (also on row 1)" in text
    assert not archive_backends.exists(archive_at()) or archive.archived_labs(archive_at()) == []


def test_normalise_reads_sheet_cells_as_a_spreadsheet_gives_them():
    rows, problems = normalise_rows([{"lab": 7.0, "measurand": "grade", "item": None, "reported": "weak",
                                      "assigned": "weak", "agreement": "agrees", "deviation": 0.0,
                                      "signal": "acceptable", "note": None}], file="f.xlsx", sheet="q",
                                    row_numbers=[2])
    assert problems == []
    assert rows == [("7", "grade", "", "weak", "weak", "agrees", 0, "acceptable", None)]


# --------------------------------------------------------------------------- the rule

def history(series: dict[str, list[str]], *, items: int = 1) -> pd.DataFrame:
    """A qualitative history frame: per lab, one agreement per round (A agrees, W a false negative, N not scored)."""
    out = []
    for lab, marks in series.items():
        for i, mark in enumerate(marks):
            for k in range(items):
                wrong = mark == "W" and k == 0  # one wrong item of several is a wrong round
                out.append(("MB", f"R{i + 1:02d}", f"2025-{i + 1:02d}-01", "", lab, "salmonella", f"S{k}",
                            "not detected" if wrong else "detected", "detected",
                            "false negative" if wrong else "agrees", None,
                            "not-scored" if mark == "N" else ("action" if wrong else "acceptable"), ""))
    return pd.DataFrame(out, columns=list(QUALITATIVE_HISTORY_COLUMNS))


@pytest.mark.parametrize(("marks", "fired_at"), [
    (["A", "W", "W"], ["R03"]),             # a false negative repeated in the next round
    (["W", "A", "W", "A"], ["R03"]),        # two in three, with a good round between
    (["W", "A", "A", "W"], []),             # three rounds apart: no run
    (["W", "W", "W"], ["R02", "R03"]),      # fires at each wrong round that completes two in three
    (["W", "N", "A", "W"], ["R04"]),        # a round without an assigned category is left out
    (["A", "A", "A"], []),
])
def test_two_wrong_results_in_three_rounds(marks, fired_at):
    got = check_qualitative(history({"L01": marks}))
    assert [f.round for f in got] == fired_at
    for f in got:
        assert len(f.wrong) >= 2 and f.rounds[-1] == f.round and "false negative" in f.message


def test_several_wrong_items_in_one_round_count_once_and_labs_apart():
    got = check_qualitative(history({"L01": ["W", "A", "A"], "L02": ["A", "W", "W"]}, items=2))
    assert [(f.lab, f.round) for f in got] == [("L02", "R03")]
    assert got[0].wrong == ("R02", "R03")


def test_the_window_keeps_findings_at_the_last_rounds_only():
    marks = ["W", "W", "A", "A", "A", "A"]
    assert [f.round for f in check_qualitative(history({"L01": marks}))] == ["R02"]
    assert check_qualitative(history({"L01": marks}), window=4) == []
