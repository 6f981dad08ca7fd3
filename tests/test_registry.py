"""The registries (roundscore.model.scores, roundscore.model.signals, roundscore.choices) and the writer interface
(roundscore.outputs.writers): every output's score columns, names and limits come from the one table.

Check values: the signal limits are ISO 13528:2022 §9.4.1 (|z| ≤ 2 acceptable, 2 < |z| < 3 warning, |z| ≥ 3
action) and §9.7.3 (|En| ≤ 1 acceptable, |En| > 1 action) (clause numbers from memory); the score formulas are
the standard's definitions worked by hand on invented numbers. The round is invented.
"""

from __future__ import annotations

import csv
import dataclasses
from typing import Literal

import numpy as np
import pytest
from python_calamine import CalamineWorkbook

from roundscore.choices import check_choice, is_choice, options, options_text
from roundscore.errors import InputError, RoundFileError, StatisticsError
from roundscore.history import rules
from roundscore.history.sheets import FLOAT_FIELDS, ROW_FIELDS
from roundscore.history.store import HISTORY_COLUMNS
from roundscore.intake.roundfile import load_round
from roundscore.model.digest import ROW_DIGEST_COLUMN
from roundscore.model.evaluation import SCORE_COLUMNS
from roundscore.model.items import ItemConsequence
from roundscore.model.round import MEASURAND_KEYS, SCORES as ROUND_SCORES
from roundscore.model.scores import (SCORE_FAMILIES, SCORE_FIELD, SCORE_NAMES, SCORE_VALUE_COLUMNS, SCORES,
                                     ScoreInputs, ScoreName, family_of)
from roundscore.model.signals import SCORED_SIGNALS, SIGNAL_NAMES, SIGNALS, signal_label
from roundscore.outputs import look
from roundscore.outputs.payloads import LabPayload
from roundscore.outputs.writers import (FORMATS, WRITERS, WriteOptions, WriteTask, writers_for, write_with)
from roundscore.pipeline import load_and_evaluate
from roundscore.stats import scores as sc
from roundscore.stats import trends
from tests.conftest import write_round

# ----------------------------------------------------------------------------- the score table


def test_the_score_table_is_complete_and_consistent():
    assert SCORE_NAMES == options(ScoreName) == ROUND_SCORES == ("z", "z-prime", "zeta", "en")
    assert SCORE_VALUE_COLUMNS == ("z", "z_prime", "zeta", "en")
    assert dict(SCORE_FIELD) == {"z": "z", "z-prime": "z_prime", "zeta": "zeta", "en": "en"}
    assert [s.symbol for s in SCORES.values()] == ["z", "z′", "ζ", "En"]
    for kind in SCORES.values():
        assert kind.family in SCORE_FAMILIES and kind.source.startswith("ISO 13528")
    assert SCORE_FAMILIES["z-like"].symbols == "z, z′, ζ" and SCORE_FAMILIES["en"].symbols == "En"
    assert SCORE_FAMILIES["z-like"].heading == "z-like scores (z, z′, ζ)"
    # the registry's limits are those of the signals (one definition) and of the trend rules
    assert (SCORE_FAMILIES["z-like"].warning, SCORE_FAMILIES["z-like"].action) == (sc.Z_WARNING, sc.Z_ACTION)
    assert SCORE_FAMILIES["en"].action == sc.EN_ACTION == trends.EN_ACTION_LIMIT
    assert (trends.WARNING_LIMIT, trends.ACTION_LIMIT) == (sc.Z_WARNING, sc.Z_ACTION)


def test_formulas_by_hand():
    # invented: x = 10.6, x_pt = 10, σ_pt = 0.2, u(x_pt) = 0.15, u(x) = 0.2, U(x) = 0.4, U(x_pt) = 0.3
    a = ScoreInputs(x=np.array([10.6]), x_pt=10.0, u_x_pt=0.15, sigma_pt=0.2, u_x=np.array([0.2]),
                    U_x=np.array([0.4]), U_x_pt=0.3)
    want = {"z": 0.6 / 0.2, "z-prime": 0.6 / 0.25, "zeta": 0.6 / 0.25, "en": 0.6 / 0.5}  # 3-4-5 triangles
    for name, value in want.items():
        got, undefined = SCORES[name].compute(a)
        assert got[0] == pytest.approx(value, rel=1e-15) and not undefined[0]


def test_a_score_over_two_zero_uncertainties_is_not_defined():
    zero = ScoreInputs(x=np.array([10.6, 10.0]), x_pt=10.0, u_x_pt=0.0, sigma_pt=0.2, u_x=np.array([0.0, 0.0]),
                       U_x=np.array([0.0, 0.0]), U_x_pt=0.0)
    for name in ("zeta", "en"):
        got, undefined = SCORES[name].compute(zero)
        assert np.isnan(got).all() and undefined.all()  # ±inf and 0/0 alike
    got, undefined = SCORES["z"].compute(zero)
    assert got.tolist() == [pytest.approx(3.0), 0.0] and not undefined.any()


@pytest.mark.parametrize("family, values, want", [
    # ISO 13528 §9.4.1: the limits themselves are acceptable (2) and action (3)
    ("z-like", [0.0, 2.0, -2.0000001, 2.999, 3.0, -3.5, np.nan],
     ["acceptable", "acceptable", "warning", "warning", "action", "action", "not-scored"]),
    # ISO 13528 §9.7.3: |En| = 1 is acceptable, there is no warning signal
    ("en", [0.5, 1.0, -1.0, 1.0000001, -2.5, np.nan],
     ["acceptable", "acceptable", "acceptable", "action", "action", "not-scored"]),
])
def test_family_signals_at_the_limits(family, values, want):
    assert SCORE_FAMILIES[family].signals(values).tolist() == want
    kind = SCORE_FAMILIES[family].members[0].name
    assert sc.signal(values, "en" if family == "en" else "z").tolist() == want  # the public function agrees
    assert family_of(kind).name == family


@pytest.mark.parametrize("family", ["z-like", "en"])
def test_trend_rule_1_fires_exactly_at_the_action_signals(family):
    values = [0.5, 1.0, -1.0, 1.2, 2.5, 3.0, -3.0, 2.999]
    fam = SCORE_FAMILIES[family]
    check = rules.check_series(values, rounds=[f"R{i}" for i in range(8)], dates=[f"2026-01-{i + 1:02d}"
                                                                                   for i in range(8)],
                               family=family, window=None)
    fired = [f for f in check.findings if f.rule == 1]
    positions = list(fired[0].positions) if fired else []
    assert positions == [i for i, s in enumerate(fam.signals(values)) if s == "action"]
    assert fired[0].message.startswith(f"rule 1 (action signal): {fam.action_text} at")
    assert fam.action_text == {"z-like": "|z| >= 3", "en": "|En| > 1"}[family]


def test_the_trend_rules_refuse_an_unknown_family():
    with pytest.raises(InputError, match="family: found 'x'; allowed: 'z-like', 'en'"):
        rules.check_series([1.0], rounds=["R"], dates=["2026-01-01"], family="x")  # type: ignore[arg-type]


# ----------------------------------------------------------------------------- the signal table

def test_the_look_is_the_signal_table():
    assert SIGNAL_NAMES == ("acceptable", "warning", "action", "not-scored") == tuple(look.SIGNAL_COLOUR)
    assert set(SIGNAL_NAMES) == set(options(sc.Signal))
    assert SCORED_SIGNALS == SIGNAL_NAMES[:3]
    assert look.SIGNAL_SYMBOL == {"acceptable": "●", "warning": "▲", "action": "■", "not-scored": "×"}
    assert look.SIGNAL_MARKER == {"acceptable": "o", "warning": "^", "action": "s", "not-scored": "x"}
    assert look.SIGNAL_CHART_MARKER["warning"] == "triangle"
    assert look.SIGNAL_WORD["performance"]["action"] == "unsatisfactory"  # ISO/IEC 17043's word
    assert signal_label("warning", "performance") == "▲ questionable"
    assert signal_label("unknown") == "unknown"
    assert [SIGNALS[s].rank for s in ("not-scored", "acceptable", "warning", "action")] == [0, 1, 2, 3]
    assert look.signal_legend_text() == "● acceptable  ▲ warning signal  ■ action signal  × not scored"


# ----------------------------------------------------------------------------- method choices

def test_choices_are_checked_in_one_helper():
    Side = Literal["high", "low"]
    assert options(Side) == ("high", "low") and options_text(Side, last=" or ") == "'high' or 'low'"
    assert check_choice("side", "low", Side) == "low"
    assert not is_choice(1, Literal[True]) and is_choice(True, Literal[True])  # True is not 1
    with pytest.raises(InputError, match=r"^side: found 'up'; allowed: 'high', 'low'$"):
        check_choice("side", "up", Side)
    with pytest.raises(StatisticsError, match="side: found None; allowed"):
        check_choice("side", None, Side, error=StatisticsError)
    with pytest.raises(TypeError):
        options(str)


def test_the_round_file_lists_the_allowed_values_from_the_literal(tmp_path):
    assert MEASURAND_KEYS["item_checks"].startswith(options_text(ItemConsequence, last=" or "))
    assert MEASURAND_KEYS["score"] == "'z', 'z-prime', 'zeta' or 'en'"
    folder = write_round(tmp_path / "r", '[round]\nid="C1"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.5\n'
                         'score="zz"\nitem_checks="always"\n', "lab,measurand,replicate,value\n")
    with pytest.raises(RoundFileError) as info:
        load_round(folder)
    text = str(info.value)
    assert "found 'zz'; allowed: 'z', 'z-prime', 'zeta', 'en'" in text
    assert "found 'always'; allowed: 'uncertainty', 'widen-sigma', 'both', 'report'" in text


# ----------------------------------------------------------------------------- every writer reads the registry

_TOML = """
[round]
id = "REG-1"
scheme = "REG"
date = "2026-05-04"
[measurand.a]
unit = "mg/kg"
assigned = 10.0
u_assigned = 0.05
sigma_pt = 0.5
score = "z"
[measurand.b]
unit = "mg/kg"
assigned = 10.0
u_assigned = 0.2
sigma_pt = 0.5
score = "z-prime"
[measurand.c]
unit = "mg/kg"
assigned = 10.0
u_assigned = 0.1
sigma_pt = 0.5
score = "zeta"
[measurand.d]
unit = "mg/kg"
assigned = 10.0
u_assigned = 0.1
sigma_pt = 0.5
score = "en"
"""


def _results() -> str:
    rows = ["lab,measurand,replicate,value,u,U"]
    for i, lab in enumerate(["L1", "L2", "L3", "L4"]):
        for m in "abcd":
            for rep in (1, 2):
                rows.append(f"{lab},{m},{rep},{10.0 + 0.3 * i - 0.1 * rep},0.2,0.4")
    return "\n".join(rows) + "\n"


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    """An invented round with one measurand per score, its CSV tables and workbooks (the report is left out)."""
    folder = write_round(tmp_path_factory.mktemp("reg") / "round", _TOML, _results())
    ev = load_and_evaluate(folder, jobs=1)
    out = tmp_path_factory.mktemp("out")
    files = write_with(writers_for(("csv", "xlsx")), ev, out, WriteOptions(jobs=1))
    return ev, out, files


def test_every_output_carries_the_registry_score_columns(written):
    ev, out, _ = written
    with open(out / "scores.csv", encoding="utf-8", newline="") as f:
        header = next(csv.reader(f))
    assert tuple(header) == SCORE_COLUMNS
    assert [c for c in header if c in SCORE_VALUE_COLUMNS] == list(SCORE_VALUE_COLUMNS)
    symbols = [s.symbol for s in SCORES.values()]
    summary = CalamineWorkbook.from_path(str(out / "round-summary.xlsx")).get_sheet_by_name("Scores").to_python()
    head = summary[0]
    assert head[head.index("σ_pt") + 1:head.index("D")] == symbols
    book = CalamineWorkbook.from_path(str(out / "labs" / "L1.xlsx"))
    rows = book.get_sheet_by_name("Scores").to_python()
    lab_head = next(r for r in rows if r and r[0] == "Measurand")
    assert lab_head[lab_head.index("Rank by |score| (1 = closest)") + 1:lab_head.index("D")] == symbols
    data = book.get_sheet_by_name("data").to_python()
    assert tuple(data[0]) == (*SCORE_COLUMNS, ROW_DIGEST_COLUMN)
    # the archive stores the row columns of scores.csv (the round's own columns live on the round)
    assert ROW_FIELDS == tuple(c for c in SCORE_COLUMNS if c not in ("scheme", "round", "round_date"))
    assert set(SCORE_VALUE_COLUMNS) <= set(FLOAT_FIELDS) and set(ROW_FIELDS) <= set(HISTORY_COLUMNS)
    # each measurand's official score is the column the registry names, and its signal the family's
    sc_frame = ev.scores
    for name, kind in SCORES.items():
        rows_ = sc_frame[sc_frame["score"] == name]
        assert len(rows_) == 4
        assert rows_["signal"].tolist() == kind.signals(rows_[kind.column].to_numpy(float)).tolist()


def test_writers_write_what_they_list(written):
    _, out, files = written
    on_disk = sorted(p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file())
    assert sorted(p.relative_to(out).as_posix() for p in files) == on_disk
    assert "round-summary.xlsx" in on_disk and "labs/L4.xlsx" in on_disk
    assert not any(n.endswith(".html") for n in on_disk)  # only the formats asked for


def test_the_writer_list(monkeypatch):
    monkeypatch.delenv("ROUNDSCORE_FORMATS")  # the default itself (tests/conftest.py sets the test formats)
    assert FORMATS == ("csv", "xlsx", "html", "pdf")
    assert [w.name for w in WRITERS] == ["tables", "summary", "lab sheets", "report", "pdf"]
    assert [w.name for w in writers_for(["html", "csv"])] == ["tables", "report"]  # the list's order
    assert writers_for(None) == WRITERS
    assert [w.name for w in writers_for(["pdf"])] == ["pdf"]
    with pytest.raises(ValueError, match="unknown output formats \\['docx'\\]"):
        writers_for(["docx"])
    with pytest.raises(dataclasses.FrozenInstanceError):
        WriteTask(writer="tables", files=()).labs = 3  # type: ignore[misc]


def test_the_lab_payload_is_typed_and_frozen(written):
    ev, _, _ = written
    from roundscore.outputs.payloads import lab_payload

    payload = lab_payload(ev, "L2")
    assert isinstance(payload, LabPayload) and payload.round.id == "REG-1" and payload.lab == "L2"
    assert payload.scores["lab"].unique().tolist() == ["L2"] and payload.p == {"a": 4, "b": 4, "c": 4, "d": 4}
    with pytest.raises(dataclasses.FrozenInstanceError):
        payload.lab = "L3"  # type: ignore[misc]
