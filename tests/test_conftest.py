"""The guard of the shared scored demo (tests/conftest.py): a changed, added or removed output file, or a
changed table of the evaluation, is reported, so a test that writes into the shared demo fails the run.

Source of expected values: the guard's own contract (internal behaviour); no outside reference values here.
"""

from __future__ import annotations

import copy
import dataclasses
import shutil

from .conftest import changes, snapshot


def _private(scored_demo, tmp_path):
    """A copy of the shared demo (its files and evaluation) that this test may change."""
    out = shutil.copytree(scored_demo.out, tmp_path / "out")
    return dataclasses.replace(scored_demo, out=out, round=out / "round",
                               evaluation=copy.deepcopy(scored_demo.evaluation))


def test_an_unchanged_demo_has_no_changes(scored_demo, tmp_path):
    mine = _private(scored_demo, tmp_path)
    assert changes(snapshot(scored_demo), snapshot(mine)) == []


def test_changed_added_and_removed_files_are_named(scored_demo, tmp_path):
    mine = _private(scored_demo, tmp_path)
    before = snapshot(mine)
    with open(mine.out / "scores.csv", "a", encoding="utf-8") as fh:
        fh.write("\n")
    (mine.out / "labs" / "K01.html").unlink()
    (mine.out / "stray.txt").write_text("x", encoding="utf-8")
    assert changes(before, snapshot(mine)) == ["file labs/K01.html", "file scores.csv", "file stray.txt"]


def test_a_changed_table_of_the_evaluation_is_named(scored_demo, tmp_path):
    mine = _private(scored_demo, tmp_path)
    before = snapshot(mine)
    mine.evaluation.scores.loc[0, "z"] = 99.0
    mine.evaluation.measurands["iodine"].labs.loc[0, "mean"] = -1.0
    assert changes(before, snapshot(mine)) == ["evaluation measurand.iodine.labs", "evaluation scores"]
