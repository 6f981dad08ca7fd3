"""Tests of roundscore.history.store: the history store, over every archive implementation.

The tests taking ``archive_at`` run once per implementation of the store interface
(tests/archive_backends.py: the SQLite file, and an in-memory one) and look at the archive only
through the interface.  The last sections ("SQLite files", "crash safety") are about SQLite files
and take ``tmp_path``.

All data here is invented for the tests (our own scenario: a water-analysis
scheme "AQ" and a soil scheme "SOIL", labs with made-up codes).  Expected
values are either the invented inputs themselves or facts about SQLite's
documented behaviour (common practice).
"""

from __future__ import annotations

import json
import re
import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from roundscore.history import db as archive_db, store as archive
from roundscore.history.sqlite_schema import MIGRATIONS
from roundscore.errors import ArchiveError, InputError

from . import archive_backends
from .archive_backends import audit, exists, tables, totals

archive_at = archive_backends.archive_at  # the fixture: every test taking it runs over every backend

REPO = Path(__file__).resolve().parents[1]


def scores_frame(*, scheme="AQ", round_id="2024-1", date="2024-03-04",
                 labs=("L01", "L02", "L03"), measurands=("nitrate", "lead"), shift=0.0,
                 note="") -> pd.DataFrame:
    """An invented scores table with exactly the pipeline's scores.csv columns.

    Each row is internally consistent (z = d / σ_pt, z′ = d / √(σ_pt² + u²), ζ within
    |d| / u(x_pt)), as ``history add`` checks (ISO 13528:2022 §9).
    """
    rows = []
    for i, lab in enumerate(labs):
        for j, m in enumerate(measurands):
            z = round(-1.0 + 0.7 * i + 0.3 * j + shift, 6)
            rows.append(dict(
                lab=lab, measurand=m, unit="mg/L", n_replicates=2, result=10.0 + z,
                assigned=10.0, u_assigned=0.05, sigma_pt=1.0, z=z, z_prime=z / np.hypot(1.0, 0.05),
                zeta=z * 1.5, en=np.nan, d=z, d_percent=10.0 * z,
                signal="acceptable" if abs(z) <= 2 else ("warning" if abs(z) < 3 else "action"),
                note=note, score="z", scheme=scheme, round=round_id, round_date=date))
    return pd.DataFrame(rows, columns=list(archive.SCORE_COLUMNS))


def rescore(frame: pd.DataFrame) -> pd.DataFrame:
    """The score columns computed again from result, assigned, σ_pt and u (ISO 13528:2022 §9),
    blank for a censored result, as the pipeline writes them."""
    out = frame.copy()
    x = pd.to_numeric(out["result"], errors="coerce").astype(float)
    a, s, u = out["assigned"], out["sigma_pt"], out["u_assigned"]
    out["d"], out["d_percent"] = x - a, 100.0 * (x - a) / a
    out["z"], out["z_prime"] = (x - a) / s, (x - a) / np.hypot(s, u)
    out["zeta"], out["en"] = 1.5 * (x - a) / s, np.nan
    out["signal"] = ["not-scored" if not np.isfinite(z) else "acceptable" if abs(z) <= 2 else
                     "warning" if abs(z) < 3 else "action" for z in out["z"]]
    return out


def stats_frame(measurands=("nitrate", "lead"), mean=10.0) -> pd.DataFrame:
    return pd.DataFrame({"measurand": list(measurands), "assigned": [mean] * len(measurands),
                         "n": [3] * len(measurands)})


def store(path, frame, *, replace=False, statistics=None, settings=None, **kw):
    first = frame.iloc[0]
    return archive.store_round(
        path, scheme=first["scheme"], round_id=first["round"], round_date=first["round_date"],
        title="Invented round", settings=settings or {"sigma_pt": "fixed"},
        statistics=stats_frame() if statistics is None else statistics, scores=frame,
        replace=replace, **kw)


def write_workbook(path: Path, frame: pd.DataFrame, *, lab: str, meta: dict | None = None,
                   sheets=("data", "round")) -> Path:
    """A per-lab workbook following the pipeline's spec (data + round + a people sheet)."""
    import xlsxwriter

    first = frame.iloc[0]
    keys = {"generator": "roundscore", "format": 1, "scheme": first["scheme"],
            "round": first["round"], "round_date": first["round_date"], "lab": lab,
            "title": "Invented round"}
    keys.update(meta or {})
    book = xlsxwriter.Workbook(str(path))
    book.add_worksheet("Scores")  # a sheet for people, to be ignored
    part = frame[frame["lab"] == lab]
    if "data" in sheets:
        data = book.add_worksheet("data")
        for j, col in enumerate(archive.SCORE_COLUMNS):
            data.write_string(0, j, col)
        for i, row in enumerate(part.itertuples(index=False), start=1):
            for j, value in enumerate(row):
                if isinstance(value, str):
                    data.write_string(i, j, value)
                elif value is None or (isinstance(value, float) and np.isnan(value)):
                    continue
                else:
                    data.write_number(i, j, float(value))
    if "round" in sheets:
        sheet = book.add_worksheet("round")
        sheet.write_row(0, 0, ["key", "value"])
        for i, (k, v) in enumerate(keys.items(), start=1):
            sheet.write_string(i, 0, k)
            sheet.write(i, 1, v)
    book.close()
    return path


def count(path, sql, args=()):
    """One value from an SQLite archive file (for the tests about SQLite files)."""
    with sqlite3.connect(path) as conn:
        got = conn.execute(sql, args).fetchone()[0]
    conn.close()
    return got


# --------------------------------------------------------------------------- coordinator side

def test_store_round_idempotent_then_refused_then_replaced_with_audit(archive_at):
    db = archive_at()
    first = scores_frame()
    out = store(db, first)
    assert (out.status, out.rows) == ("added", 6)
    again = store(db, first.sample(frac=1.0, random_state=3))  # row order must not matter
    assert again.status == "unchanged"
    assert "nothing changed" in again.message
    changed = scores_frame(shift=0.25)
    with pytest.raises(ArchiveError, match=r"different content.*replace=True replaces it"):
        store(db, changed)
    assert audit(db) == []  # a refusal writes nothing
    done = store(db, changed, replace=True, reason="assigned value corrected")
    assert done.status == "replaced" and "audit" in done.message
    entries = audit(db)
    assert [e.kind for e in entries] == ["round"] + ["score"] * 6 + ["statistics"] * 2
    scores = [e for e in entries if e.kind == "score"]
    assert all(e.reason == "assigned value corrected" and e.replaced_at[:4].isdigit()
               and (e.scheme, e.round_id) == ("AQ", "2024-1") for e in scores)
    assert json.loads(entries[0].row)["origin"] == "coordinator"
    old_z = sorted(json.loads(e.row)["z"] for e in scores)
    assert old_z == sorted(first["z"].tolist())  # the invented inputs, not recomputed
    now = archive.lab_history(db, lab="L01").set_index("measurand")["z"]
    assert now["nitrate"] == pytest.approx(-1.0 + 0.25)


@pytest.mark.parametrize("change", ["11th_digit", "statistics", "settings", "title"])
def test_any_content_change_is_detected(archive_at, change):
    db = archive_at()
    store(db, scores_frame())
    frame, kw = scores_frame(), {}
    if change == "11th_digit":  # floats are compared to 12 significant digits (HASH_DIGITS)
        frame.loc[0, "result"] = frame.loc[0, "result"] * (1 + 3e-11)
    elif change == "statistics":
        kw["statistics"] = stats_frame(mean=10.01)
    elif change == "settings":
        kw["settings"] = {"sigma_pt": "horwitz"}
    if change == "title":
        with pytest.raises(ArchiveError):
            archive.store_round(db, scheme="AQ", round_id="2024-1", round_date="2024-03-04",
                                title="Other title", settings={"sigma_pt": "fixed"},
                                statistics=stats_frame(), scores=frame)
    else:
        with pytest.raises(ArchiveError, match="different content"):
            store(db, frame, **kw)


def test_store_round_bad_scores_name_row_column_and_value(archive_at):
    frame = scores_frame().astype(object)
    frame.loc[1, "z"] = "one point two"
    frame.loc[2, "signal"] = "fine"
    with pytest.raises(InputError) as err:
        store(archive_at("a"), frame)
    text = str(err.value)
    assert "column 'z'" in text and "'one point two'" in text and "not a number" in text
    assert "unknown signal" in text and "'fine'" in text
    with pytest.raises(InputError, match="missing columns: z, signal"):
        store(archive_at("b"), scores_frame().drop(columns=["z", "signal"]))
    assert not exists(archive_at("a")) and not exists(archive_at("b"))  # refused before opening


# --------------------------------------------------------------------------- lab side

def test_add_csv_needs_lab_when_several(archive_at, tmp_path):
    db, csv = archive_at("lab"), tmp_path / "scores.csv"
    scores_frame().to_csv(csv, index=False)
    with pytest.raises(InputError, match=r"holds 3 labs \(L01, L02, L03\); pass --lab"):
        archive.add_files(db, [csv])
    with pytest.raises(InputError, match="no rows for lab 'L99'"):
        archive.add_files(db, [csv], lab="L99")
    [out] = archive.add_files(db, [csv], lab="L02")
    assert (out.status, out.rows, out.lab) == ("added", 2, "L02")
    assert totals(db) == (1, 2, 0)
    assert archive.archived_labs(db) == ["L02"]
    [again] = archive.add_files(db, [csv], lab="L02")
    assert again.status == "unchanged" and "nothing changed" in again.message


def test_add_refuses_then_replaces_lab_rows_with_audit(archive_at, tmp_path):
    db, csv = archive_at("lab"), tmp_path / "scores.csv"
    scores_frame().to_csv(csv, index=False)
    archive.add_files(db, [csv], lab="L01")
    scores_frame(shift=0.5).to_csv(csv, index=False)
    with pytest.raises(ArchiveError, match="different scores; use --replace"):
        archive.add_files(db, [csv], lab="L01")
    [out] = archive.add_files(db, [csv], lab="L01", replace=True, reason="provider reissued")
    assert out.status == "replaced"
    entries = audit(db)
    assert [(e.kind, e.lab, e.reason) for e in entries] == [("round", "L01", "provider reissued")] + [
        ("score", "L01", "provider reissued")] * 2
    assert totals(db) == (1, 2, 3)


def test_one_ulp_is_not_a_change_but_is_kept_as_first_stored(archive_at):
    # scores.csv keeps 12 significant digits (roundscore.outputs.csvout), a workbook ~15-16
    # (common practice: Excel's 15-digit precision); a last-bit difference is no change
    db = archive_at()
    store(db, scores_frame())
    frame = scores_frame()
    frame.loc[0, "result"] = np.nextafter(frame.loc[0, "result"], np.inf)
    assert store(db, frame).status == "unchanged"
    assert archive.lab_history(db, lab="L01")["result"].iloc[-1] == scores_frame().loc[0, "result"]


@pytest.mark.parametrize("cell, stored", [
    ("'=HYPERLINK(\"x\")", "=HYPERLINK(\"x\")"),  # neutralised formula: one quote removed
    ("'+41 lab note", "+41 lab note"),
    ("'@sum", "@sum"),
    ("'-", "-"),
    ("'plain", "'plain"),  # a quote not before = + - @ is the participant's own text
    ("''=x", "''=x"),  # the quote precedes a quote, not = + - @: kept
])
def test_formula_neutralising_quote_is_stripped(archive_at, tmp_path, cell, stored):
    db, csv = archive_at("lab"), tmp_path / "scores.csv"
    scores_frame(note=cell).to_csv(csv, index=False)
    archive.add_files(db, [csv], lab="L01")
    notes = set(archive.lab_history(db, lab="L01")["note"])
    assert notes == {stored}


def test_workbook_and_csv_of_the_same_round_agree(archive_at, tmp_path):
    frame = scores_frame(note="'=neutralised")
    csv = tmp_path / "scores.csv"
    frame.to_csv(csv, index=False)
    book = write_workbook(tmp_path / "L03.xlsx", frame, lab="L03")
    db = archive_at("lab")
    [out] = archive.add_files(db, [book])
    assert (out.status, out.lab, out.rows) == ("added", "L03", 2)
    [same] = archive.add_files(db, [csv], lab="L03")
    assert same.status == "unchanged"
    hist = archive.lab_history(db, lab="L03")
    assert set(hist["title"]) == {"Invented round"}
    assert hist["n_replicates"].tolist() == [2, 2]


def test_pipeline_csv_precision_and_workbook_agree(archive_at, tmp_path):
    # The pipeline writes scores.csv with csvout.FLOAT_FORMAT; the hash must not be finer.
    from roundscore.outputs.csvout import FLOAT_FORMAT, write_csv

    assert FLOAT_FORMAT == f"{{:.{archive.HASH_DIGITS}g}}"
    frame = scores_frame()
    frame["result"] = frame["result"] * (2.0 / 3.0)  # repeating binary fractions: 12 digits
    frame["sigma_pt"] = 1.0 / 3.0  # lose the tail
    frame = rescore(frame)
    csv = tmp_path / "scores.csv"
    write_csv(frame, csv, archive.SCORE_COLUMNS)
    assert "0.333333333333," in csv.read_text(encoding="utf-8")  # really 12 digits
    book = write_workbook(tmp_path / "L02.xlsx", frame, lab="L02")
    db = archive_at("lab")
    assert archive.add_files(db, [book])[0].status == "added"
    assert archive.add_files(db, [csv], lab="L02")[0].status == "unchanged"


@pytest.mark.parametrize("kind, expected", [
    ("no_data_sheet", "not a roundscore lab workbook: no sheet named 'data'"),
    ("no_round_sheet", "not a roundscore lab workbook: no sheet named 'round'"),
    ("wrong_generator", "generator"),
    ("wrong_format", "format 3"),
    ("no_qualitative_sheet", "no sheet named 'qualitative_data'"),  # format 2 promises the qualitative results
    ("lab_mismatch", "sheet 'round' gives lab 'L09'"),
    ("csv_missing", "missing columns: z, signal"),
    ("not_csv", "missing columns"),
    ("extension", "neither a roundscore scores.csv nor a lab workbook"),
    ("missing_file", "file not found"),
    ("bad_number", "line 3, column 'result': value 'ten': not a number"),
    ("bad_date", "ISO round_date"),
])
def test_files_that_are_not_ours_get_clear_messages(archive_at, tmp_path, kind, expected):
    frame = scores_frame()
    target = tmp_path / "in.xlsx"
    if kind == "no_data_sheet":
        write_workbook(target, frame, lab="L01", sheets=("round",))
    elif kind == "no_round_sheet":
        write_workbook(target, frame, lab="L01", sheets=("data",))
    elif kind == "wrong_generator":
        write_workbook(target, frame, lab="L01", meta={"generator": "spreadsheet"})
    elif kind == "wrong_format":
        write_workbook(target, frame, lab="L01", meta={"format": 3})
    elif kind == "no_qualitative_sheet":
        write_workbook(target, frame, lab="L01", meta={"format": 2})
    elif kind == "lab_mismatch":
        write_workbook(target, frame, lab="L01", meta={"lab": "L09"})
    else:
        target = tmp_path / ("in.csv" if kind != "extension" else "in.ods")
        if kind == "csv_missing":
            frame = frame.drop(columns=["z", "signal"])
        elif kind == "bad_number":
            frame = frame.astype(object)
            frame.loc[1, "result"] = "ten"
        elif kind == "bad_date":
            frame["round_date"] = "04/03/2024"
        if kind == "not_csv":
            target.write_text("just some words\nnothing tabular here\n")
        elif kind != "missing_file":
            frame.to_csv(target, index=False)
    with pytest.raises(InputError) as err:
        archive.add_files(archive_at("lab"), [target], lab="L01")
    assert expected in str(err.value)
    assert target.name in str(err.value)
    assert not exists(archive_at("lab"))  # the file is read and refused before the archive is opened


def test_one_lab_in_two_schemes_under_different_codes(archive_at, tmp_path):
    db = archive_at("lab")
    water = scores_frame(scheme="AQ", round_id="2024-1", date="2024-03-04", labs=("A7",))
    soil = scores_frame(scheme="SOIL", round_id="2024-1", date="2024-02-01", labs=("L12",),
                        measurands=("cadmium",))
    for i, frame in enumerate((water, soil)):
        frame.to_csv(tmp_path / f"s{i}.csv", index=False)
    outs = archive.add_files(db, [tmp_path / "s0.csv", tmp_path / "s1.csv"])
    assert [o.status for o in outs] == ["added", "added"]
    both = archive.lab_history(db, lab=["A7", "L12"])
    assert both["scheme"].tolist() == ["SOIL", "AQ", "AQ"]  # ordered by date
    assert set(archive.lab_history(db, lab="A7", scheme="SOIL")["lab"]) == set()
    assert archive.archived_labs(db) == ["A7", "L12"]


def test_lab_history_filters_and_last_n(archive_at):
    db = archive_at()
    dates = ["2023-01-10", "2023-04-10", "2023-07-10", "2023-10-10", "2024-01-10"]
    for k, date in enumerate(dates):
        store(db, scores_frame(round_id=f"R{k + 1}", date=date, shift=0.1 * k))
    hist = archive.lab_history(db, lab="L02", measurand="lead")
    assert hist["round"].tolist() == ["R1", "R2", "R3", "R4", "R5"]
    assert hist["score_value"].tolist() == pytest.approx(
        [-1.0 + 0.7 + 0.3 + 0.1 * k for k in range(5)])  # invented z = -1 + 0.7 i + 0.3 j + shift
    last = archive.lab_history(db, lab="L02", before_date="2024-01-10", last=2)
    assert last.groupby("measurand")["round"].apply(list).to_dict() == {
        "lead": ["R3", "R4"], "nitrate": ["R3", "R4"]}
    since = archive.lab_history(db, lab="L02", since="2023-07-10")
    assert sorted(set(since["round"])) == ["R3", "R4", "R5"]
    assert archive.lab_history(db, lab="nobody").empty
    with pytest.raises(InputError, match="since: not an ISO date"):
        archive.lab_history(db, lab="L02", since="July")
    with pytest.raises(InputError, match="one or more lab codes"):
        archive.lab_history(db, lab=[])


def test_round_history_one_query_many_labs_grouped(archive_at):
    db = archive_at()
    assert archive.round_history(db, scheme="AQ", labs=["L01"], round_id="R9",
                                 round_date="2024-01-01", last=8) == {}  # no archive yet: no history
    assert not exists(db)
    labs = [f"L{i:04d}" for i in range(2000)]  # more codes than SQLite's old 999 parameters
    for k, date in enumerate(["2023-01-10", "2023-04-10", "2023-07-10"]):
        store(db, scores_frame(round_id=f"R{k + 1}", date=date, labs=labs[:1200:7] + ["L01"],
                               measurands=("nitrate",)))
    store(db, scores_frame(scheme="SOIL", round_id="R2", date="2023-02-01", labs=("L01",)))
    hist = archive.round_history(db, scheme="AQ", labs=labs + ["L01"], round_id="R3",
                                 round_date="2023-12-01", last=8)
    assert len(hist) == len(labs[:1200:7]) + 1  # labs without history are absent
    assert hist["L01"]["round"].tolist() == ["R1", "R2"]  # R3 itself left out; no SOIL rows
    assert set(hist["L01"]["scheme"]) == {"AQ"}
    assert hist["L01"]["round_date"].tolist() == ["2023-01-10", "2023-04-10"]
    early = archive.round_history(db, scheme="AQ", labs=["L01"], round_id="R0",
                                  round_date="2023-04-10", last=8)
    assert early["L01"]["round"].tolist() == ["R1"]  # strictly before the round's date
    assert archive.lab_history(db, lab="L01", exclude_round="R1", scheme="AQ")["round"] \
        .tolist() == ["R2", "R3"]


@pytest.mark.parametrize("cell, stored, problem", [
    ("<0.1", "<0.1", None),  # censored results as the pipeline writes them (evaluation/evaluate.py)
    (">200", ">200", None),
    ("<limit not given", "<limit not given", None),
    ("12.5", 12.5, None),
    ("n.d.", None, "not a number or a censored result such as <0.1"),
])
def test_censored_results_are_kept_as_text(archive_at, tmp_path, cell, stored, problem):
    frame = scores_frame(labs=("L01",))
    frame["result"] = frame["result"].astype(object)
    frame.loc[0, "result"] = cell
    frame = rescore(frame)
    csv = tmp_path / "scores.csv"
    frame.to_csv(csv, index=False)
    db = archive_at("lab")
    if problem:
        with pytest.raises(InputError, match=re.escape(f"line 2, column 'result': value {cell!r}: "
                                                       f"{problem}")):
            archive.add_files(db, [csv])
        return
    archive.add_files(db, [csv])
    hist = archive.lab_history(db, lab="L01").set_index("measurand")["result"]
    assert hist["nitrate"] == stored
    assert hist["lead"] == pytest.approx(frame.loc[1, "result"])


def test_round_keys_needed_for_the_archive_name_the_round_file(tmp_path):
    from roundscore.errors import RoundFileError
    from roundscore.intake.roundfile import load_round

    from .conftest import write_round

    folder = write_round(tmp_path / "r", """
        [round]
        id = "AQ-7"
        results = "results.csv"
        [measurand.nitrate]
        unit = "mg/L"
        assigned = "algorithm-a"
        sigma_pt = 0.5
        """, "lab,measurand,replicate,value,unit\nW1,nitrate,1,10.0,mg/L\n")
    with pytest.raises(RoundFileError) as err:
        archive.check_round_keys(load_round(folder))
    text = str(err.value)
    assert "round.toml: key 'round.scheme' is needed to store the round" in text
    assert "key 'round.date'" in text and "'round.id'" not in text


def test_store_evaluation_keeps_precision_when_the_round_has_it(archive_at, tmp_path):
    from types import SimpleNamespace

    frame = scores_frame()
    rnd = SimpleNamespace(scheme="AQ", id="2024-1", date="2024-03-04", title="Invented round",
                          path=tmp_path / "round.toml", settings_dict=lambda: {"sigma_pt": 0.5})
    precision = pd.DataFrame({"measurand": ["nitrate", "lead"], "s_r": [0.11, 0.02],
                              "s_R": [0.31, 0.05]})  # invented
    ev = SimpleNamespace(round=rnd, statistics=stats_frame(),
                         scores=frame.assign(rank=1.0, n_scored=3), extras={"precision": precision})
    db = archive_at()
    assert archive.store_evaluation(db, ev).status == "added"
    assert tables(db, "AQ", "2024-1", "precision") == precision.to_dict(orient="records")
    assert tables(db, "AQ", "2024-1", "statistics") == stats_frame().to_dict(orient="records")
    assert archive.store_evaluation(db, ev).status == "unchanged"
    changed = SimpleNamespace(**{**vars(ev), "extras": {"precision": precision.assign(s_r=0.12)}})
    with pytest.raises(ArchiveError, match="different content"):
        archive.store_evaluation(db, changed)
    without = SimpleNamespace(**{**vars(ev), "extras": {}})  # no precision stage: none stored
    assert archive.store_evaluation(db, without, replace=True).status == "replaced"
    assert tables(db, "AQ", "2024-1", "precision") == []


def test_score_value_follows_the_chosen_score(archive_at):
    frame = scores_frame(labs=("L01",), measurands=("lead",))
    frame["score"] = "zeta"
    db = archive_at()
    store(db, frame, statistics=stats_frame(("lead",)))
    row = archive.lab_history(db, lab="L01").iloc[0]
    assert row["score"] == "zeta" and row["score_value"] == row["zeta"] == pytest.approx(-1.5)


# --------------------------------------------------------------------------- SQLite files
# These tests are about SQLite files (schema versions, foreign files, the file's path): SQLite only.

def test_migration_from_version_1(tmp_path):
    db = tmp_path / "old.sqlite"
    with archive_db.open_archive(db, write=True, migrations=MIGRATIONS[:1]) as conn:
        conn.execute("INSERT INTO rounds (scheme, round_id, round_date, title, settings, "
                     "stored_at) VALUES ('AQ', 'R0', '2022-05-01', 'old', '{}', 'then')")
        conn.execute("INSERT INTO scores (scheme, round_id, lab, measurand, z, signal, score) "
                     "VALUES ('AQ', 'R0', 'L01', 'lead', 2.5, 'warning', 'z')")
    assert count(db, "PRAGMA user_version") == 1
    before = db.read_bytes()
    hist = archive.lab_history(db, lab="L01")  # reading an old schema works and changes nothing
    assert hist["score_value"].tolist() == [2.5]
    assert db.read_bytes() == before and count(db, "PRAGMA user_version") == 1
    store(db, scores_frame(round_id="R0", date="2022-05-01"), replace=True)  # a write migrates
    assert count(db, "PRAGMA user_version") == archive.SCHEMA_VERSION == 5  # the released migrations
    assert count(db, "PRAGMA application_id") == archive.APPLICATION_ID
    assert count(db, "SELECT COUNT(*) FROM schema_version") == 5
    old_round = json.loads(count(db, "SELECT row FROM audit WHERE kind = 'round'"))
    assert old_round["origin"] == "lab"  # migration 2's default for rounds stored before it
    assert count(db, "SELECT COUNT(*) FROM audit WHERE kind = 'score'") == 1


def test_newer_schema_and_foreign_files_are_refused(tmp_path):
    db = tmp_path / "new.sqlite"
    store(db, scores_frame())
    with sqlite3.connect(db) as conn:
        conn.execute("PRAGMA user_version = 99")
    with pytest.raises(ArchiveError, match="version 99 was written by a newer roundscore"):
        archive.lab_history(db, lab="L01")
    junk = tmp_path / "junk.sqlite"
    junk.write_bytes(b"this is not a database at all" * 100)
    with pytest.raises(ArchiveError, match=r"junk.sqlite: not a roundscore archive: not an SQLite"):
        archive.lab_history(junk, lab="L01")
    with pytest.raises(ArchiveError, match="no archive at"):
        archive.lab_history(tmp_path / "absent.sqlite", lab="L01")
    assert not (tmp_path / "absent.sqlite").exists()


def test_archive_path_precedence(tmp_path, monkeypatch):
    monkeypatch.setenv(archive.ARCHIVE_ENV, str(tmp_path / "env.sqlite"))
    assert archive.archive_path(tmp_path / "x.sqlite") == tmp_path / "x.sqlite"
    assert archive.archive_path() == tmp_path / "env.sqlite"
    monkeypatch.delenv(archive.ARCHIVE_ENV)
    default = archive.archive_path()
    assert default.name == "archive.sqlite" and "roundscore" in default.parent.name.lower()


# --------------------------------------------------------------------------- crash safety
# SQLite only: a process killed inside an SQLite transaction (the in-memory test implementation
# keeps nothing once its process ends).

CHILD = textwrap.dedent("""
    import sys, time
    import numpy as np, pandas as pd
    from roundscore.history import store as archive
    from roundscore.history.sqlite import SqliteWriter
    db, mode, n_labs = sys.argv[1], sys.argv[2], int(sys.argv[3])
    labs = [f"L{i:05d}" for i in range(n_labs)]
    rows = [dict(lab=lab, measurand=m, unit="mg/L", n_replicates=2, result=10.0 + 0.001 * i,
                 assigned=10.0, u_assigned=0.05, sigma_pt=1.0, z=0.001 * i, z_prime=0.0,
                 zeta=0.0, en=np.nan, d=0.0, d_percent=0.0, signal="acceptable", note="",
                 score="z") for i, lab in enumerate(labs) for m in ("nitrate", "lead")]
    frame = pd.DataFrame(rows)
    if mode == "hooked":
        original = SqliteWriter.add_scores
        def slow(*a, **k):
            original(*a, **k)
            print("INSIDE", flush=True)  # all rows written, transaction not committed
            time.sleep(60)
        SqliteWriter.add_scores = slow
    print("START", flush=True)
    archive.store_round(db, scheme="AQ", round_id="BIG", round_date="2024-06-01", title="big",
                        settings={}, statistics=pd.DataFrame({"measurand": ["lead"]}),
                        scores=frame)
    print("DONE", flush=True)
""")


@pytest.mark.parametrize("mode, n_labs, wait_for, delay", [
    ("hooked", 5000, "INSIDE", 0.0),  # killed for certain between BEGIN and COMMIT
    ("timed", 20000, "START", 0.15),  # killed wherever the import happens to be
])
def test_sigkill_mid_import_leaves_all_or_nothing(tmp_path, mode, n_labs, wait_for, delay):
    db = tmp_path / "a.sqlite"
    store(db, scores_frame(round_id="SMALL"))
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    child = subprocess.Popen([sys.executable, "-c", CHILD, str(db), mode, str(n_labs)],
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    try:
        deadline = time.monotonic() + 60
        line = ""
        while wait_for not in line and time.monotonic() < deadline:
            line = child.stdout.readline()
            if not line and child.poll() is not None:
                pytest.fail(f"child ended early: {child.stderr.read()}")
        assert wait_for in line
        time.sleep(delay)
        child.send_signal(signal.SIGKILL)
        child.wait(timeout=10)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
        child.stdout.close()
        child.stderr.close()
    assert count(db, "PRAGMA integrity_check") == "ok"
    big = count(db, "SELECT COUNT(*) FROM scores WHERE round_id = 'BIG'")
    header = count(db, "SELECT COUNT(*) FROM rounds WHERE round_id = 'BIG'")
    stored_tables = count(db, "SELECT COUNT(*) FROM round_tables WHERE round_id = 'BIG'")
    assert (big, header, stored_tables) in {(0, 0, 0), (2 * n_labs, 1, 1)}
    if mode == "hooked":
        assert big == 0  # killed before COMMIT: nothing of the round
    assert count(db, "SELECT COUNT(*) FROM scores WHERE round_id = 'SMALL'") == 6
    assert store(db, scores_frame(round_id="SMALL")).status == "unchanged"
