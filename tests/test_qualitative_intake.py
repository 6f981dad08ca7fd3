"""Qualitative results read from the results files (roundscore.intake.qualitative, model.qualitative mapping)."""

from __future__ import annotations

import pytest
from hypothesis import given, settings, strategies as st

from roundscore.errors import InputError
from roundscore.intake.readers import read_results
from roundscore.intake.roundfile import load_round
from roundscore.model.qualitative import QualitativeSettings, normalise

TOML = '''[round]
id = "Q1"
[measurand.lead]
unit = "mg/kg"
assigned = 1.0
u_assigned = 0.01
sigma_pt = 0.1
[measurand.salmonella]
kind = "nominal"
categories = ["detected", "not detected"]
assigned = { "QA-1" = "detected", "QA-2" = "not detected" }
aliases = { "+" = "detected", "ND" = "not detected" }
[measurand.grade]
kind = "ordinal"
categories = ["negative", "weak", "positive"]
'''
GOOD = """lab,measurand,replicate,value,item,method
L1,lead,1,1.02,,
L1,salmonella,1,Detected,QA-1,culture
L1,salmonella,1,nd,QA-2,culture
L1,grade,1,weak,,
L2,salmonella,,+,qa-1,pcr
L2,salmonella,1,+,QA-2,pcr
L2,salmonella,2,+,QA-2,pcr
L2,grade,1,  POSITIVE ,,
"""

SETTINGS = QualitativeSettings(name="s", kind="nominal", categories=("detected", "not detected"),
                               aliases={normalise("+"): "detected", normalise("ND"): "not detected"})


def _casings(word: str):
    """Any casing and white space around and between the words of ``word``."""
    gap = st.text(alphabet=" \t\u00a0", min_size=1, max_size=3)
    edge = st.text(alphabet=" \t", max_size=3)
    parts = word.split()
    cased = st.tuples(*(st.tuples(*(st.sampled_from([ch.lower(), ch.upper()]) for ch in p)) for p in parts))
    return st.tuples(edge, cased, st.lists(gap, min_size=len(parts), max_size=len(parts)), edge).map(
        lambda t: t[0] + "".join("".join(p) + (t[2][i] if i < len(parts) - 1 else "")
                                 for i, p in enumerate(t[1])) + t[3])


@settings(max_examples=200, deadline=None)
@given(st.sampled_from(["detected", "not detected", "nd", "+"]).flatmap(
    lambda w: st.tuples(st.just(w), _casings(w))))
def test_any_casing_and_spacing_maps(pair):
    word, typed = pair
    expected = {"nd": "not detected", "+": "detected"}.get(word, word)
    assert SETTINGS.category_of(typed) == expected


@settings(max_examples=200, deadline=None)
@given(st.text(min_size=1, max_size=20))
def test_unknown_words_are_refused(text):
    known = {"detected", "not detected", "nd", "+"}
    got = SETTINGS.category_of(text)
    if normalise(text) in known:
        assert got is not None
    else:
        assert got is None  # never guessed: only the categories and the round file's aliases map


def test_long_layout_reads_categories_items_and_replicates(make_round):
    rnd = load_round(make_round(TOML, GOOD))
    f = read_results(rnd).frame
    q = f[f["status"] == "category"]
    got = sorted(zip(q["lab"], q["measurand"], q["item"], q["category"]))
    assert got == [("L1", "grade", "", "weak"), ("L1", "salmonella", "QA-1", "detected"),
                   ("L1", "salmonella", "QA-2", "not detected"), ("L2", "grade", "", "positive"),
                   ("L2", "salmonella", "QA-1", "detected"), ("L2", "salmonella", "QA-2", "detected")]
    assert q.loc[q["category"] == "weak", "text"].iloc[0] == "weak"  # typed text kept
    n = f[f["status"] == "value"]
    assert list(n["measurand"]) == ["lead"] and n["item"].isna().all()  # numbers' rows unchanged


@pytest.mark.parametrize(("row", "says", "column"), [
    ("L3,salmonella,1,maybe,QA-1,", "not a category of salmonella", "value"),
    ("L3,salmonella,1,+,QA-7,", "unknown test item", "item"),
    ("L3,salmonella,1,+,,", "the test item is missing", "item"),
    ("L2,salmonella,3,ND,QA-2,", "give different categories", "value"),
    ("L2,salmonella,1,+,QA-2,", "duplicate result", "replicate"),
    ("L3,grade,x,weak,,", "whole number", "replicate"),
])
def test_bad_cells_are_named(make_round, row, says, column):
    rnd = load_round(make_round(TOML, GOOD + row + "\n"))
    with pytest.raises(InputError) as exc:
        read_results(rnd)
    p = exc.value.problems[0]
    assert says in p.message
    assert (p.file, p.row, p.column) == ("results.csv", 10, column)
