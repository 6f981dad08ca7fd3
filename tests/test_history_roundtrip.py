"""A lab's history end to end: ``score --archive`` stores rounds and fills the lab sheets'
History sheet; the lab sheets, added to a fresh lab archive with ``history add``, give back
the scores the coordinator stored; ``history show`` and ``history check`` work on the result.

All data are invented: the demo round's generator (roundscore.demo.demo_round, our own scenario) with
other seeds, ids and dates, and small water rounds made up here.  Expected values are the
invented inputs themselves, values read back from the other side of the round trip, or
properties of the rules in roundscore.history.rules (each named beside its check).
"""

from __future__ import annotations

import contextlib
import io
import re
import sqlite3
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from python_calamine import CalamineWorkbook

from roundscore.history import store as archive
from roundscore.cli import main
from roundscore.demo.demo_round import make_demo_round
from roundscore.model.evaluation import SCORE_COLUMNS as PIPELINE_SCORE_COLUMNS

from .conftest import write_round

#: Three invented rounds of the demo scheme: (seed, round id, date).
ROUNDS = (
    (101, "SKW-2027-01", "2027-02-01"),
    (202, "SKW-2027-02", "2027-06-01"),
    (303, "SKW-2027-03", "2027-10-01"),
)
#: Labs compared across the round trip: the planted iodine outlier (K07), the unit slip (K19),
#: the censored mercury result (K23), the missing moisture result (K30) and two ordinary labs.
COMPARED_LABS = ("K01", "K07", "K19", "K23", "K30", "K12")
FLOATS = ("result", "assigned", "u_assigned", "sigma_pt", "z", "z_prime", "zeta", "en", "d",
          "d_percent", "score_value")


def run_cli(*argv: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


def demo_variant(folder: Path, seed: int, round_id: str, date: str) -> Path:
    """The demo round with another seed, id and date (patched in the round.toml text)."""
    make_demo_round(folder, seed=seed)
    toml = folder / "round.toml"
    text = toml.read_text(encoding="utf-8")
    text = text.replace('id = "SKW-2026-14"', f'id = "{round_id}"')
    text = text.replace('date = "2026-10-14"', f'date = "{date}"')
    assert f'id = "{round_id}"' in text and f'date = "{date}"' in text
    toml.write_text(text, encoding="utf-8")
    return folder


@pytest.fixture(scope="module")
def trip(tmp_path_factory) -> dict:
    """Score the three rounds into a coordinator archive; add every lab sheet to a lab archive."""
    base = tmp_path_factory.mktemp("trip")
    coord = base / "coordinator.sqlite"
    outs, printed = [], []
    for seed, round_id, date in ROUNDS:
        folder = demo_variant(base / round_id, seed, round_id, date)
        code, text, err = run_cli("score", folder, "--archive", coord, "--out", folder / "out")
        assert code == 0, err
        outs.append(folder / "out")
        printed.append(text)
    lab_db = base / "lab.sqlite"
    sheets = sorted(str(p) for out in outs for p in (out / "labs").glob("*.xlsx"))
    code, added, err = run_cli("history", "add", *sheets, "--archive", lab_db)
    assert code == 0, added + err
    return {"base": base, "coord": coord, "lab": lab_db, "outs": outs, "printed": printed,
            "added": added, "sheets": sheets}


def test_score_columns_are_one_contract():
    # The archive reads what the pipeline writes (roundscore.model.evaluation.SCORE_COLUMNS).
    assert archive.SCORE_COLUMNS == PIPELINE_SCORE_COLUMNS


def test_score_prints_what_the_archive_did(trip):
    for text in trip["printed"]:
        assert re.search(r"Archive: added: round 'SKW-2027-0\d' of scheme 'SKW': added 186 score "
                         r"rows", text)  # 31 labs x 6 measurands (the demo's design)
    assert trip["added"].count(": added: ") == 3 * 31  # one line per sheet


def test_the_coordinator_stored_settings_statistics_and_every_score(trip):
    con = sqlite3.connect(trip["coord"])
    try:
        rounds = con.execute("SELECT round_id, round_date, origin, settings FROM rounds "
                             "ORDER BY round_date").fetchall()
        kinds = dict(con.execute("SELECT kind, COUNT(*) FROM round_tables WHERE round_id = ? "
                                 "GROUP BY kind", (ROUNDS[0][1],)).fetchall())
        n_scores = con.execute("SELECT COUNT(*) FROM scores").fetchone()[0]
    finally:
        con.close()
    assert [(r[0], r[1], r[2]) for r in rounds] == [(i, d, "coordinator") for _, i, d in ROUNDS]
    import json

    settings = json.loads(rounds[0][3])
    assert settings["id"] == ROUNDS[0][1] and settings["measurand.lead"]["score"] == "zeta"
    assert kinds["statistics"] == 6  # one statistics row per measurand (the demo has six)
    assert n_scores == 3 * 186


def test_lab_sheets_give_back_the_stored_scores(trip):
    coord = archive.lab_history(trip["coord"], lab=list(COMPARED_LABS))
    lab = archive.lab_history(trip["lab"], lab=list(COMPARED_LABS))
    assert len(coord) == len(COMPARED_LABS) * 3 * 6
    assert list(coord.columns) == list(lab.columns) == list(archive.HISTORY_COLUMNS)
    text_cols = [c for c in coord.columns if c not in FLOATS]
    pd.testing.assert_frame_equal(coord[text_cols], lab[text_cols])
    # The lab sheet's data sheet keeps 12 significant digits (model.digest.DIGITS: what a
    # spreadsheet program saving it again keeps, and what scores.csv keeps), so numbers agree
    # to 12 digits; the censored mercury result of K23 stays the text "<0.1".
    for col in FLOATS:
        a, b = coord[col].to_numpy(), lab[col].to_numpy()
        num = np.array([isinstance(v, float) for v in a])
        assert list(a[~num]) == list(b[~num]), col
        np.testing.assert_allclose(a[num].astype(float), b[num].astype(float), rtol=5e-12,
                                   atol=0, equal_nan=True, err_msg=col)
    censored = coord[(coord["lab"] == "K23") & (coord["measurand"] == "mercury")]
    assert set(censored["result"]) == {"<0.1"}  # the demo writes "<0.1" for K23 mercury
    assert set(censored["signal"]) == {"not-scored"}


def test_the_same_scores_from_csv_are_unchanged_in_the_lab_archive(trip):
    # The coordinator's scores.csv and the lab's own sheet hash alike (archive.HASH_DIGITS).
    code, text, err = run_cli("history", "add", trip["outs"][1] / "scores.csv", "--lab", "K07",
                              "--archive", trip["lab"])
    assert code == 0, err
    assert ": unchanged: " in text and "nothing changed" in text


def test_lab_sheets_give_back_the_qualitative_results(trip):
    # The demo's salmonella (nominal, two items) and grit (ordinal) results: the coordinator's archive (score
    # --archive) and the lab's (history add of its sheets) hold the rows of qualitative.csv, cell for cell.
    coord = archive.lab_qualitative_history(trip["coord"], lab=list(COMPARED_LABS))
    lab = archive.lab_qualitative_history(trip["lab"], lab=list(COMPARED_LABS))
    assert len(coord) == len(COMPARED_LABS) * 3 * 3  # 3 rounds x (2 salmonella items + grit)
    pd.testing.assert_frame_equal(coord.drop(columns="title"), lab.drop(columns="title"))
    first = pd.read_csv(trip["outs"][0] / "qualitative.csv", dtype=str, keep_default_na=False)
    first = first[first["lab"].isin(COMPARED_LABS)].sort_values(["lab", "measurand", "item"])
    mine = coord[coord["round"] == ROUNDS[0][1]].sort_values(["lab", "measurand", "item"])
    for col in ("lab", "measurand", "item", "reported", "assigned", "agreement", "signal"):
        assert mine[col].tolist() == first[col].tolist(), col
    assert [("" if pd.isna(v) else str(v)) for v in mine["deviation"]] == first["deviation"].tolist()


def test_an_edited_qualitative_result_is_refused_by_its_digest(trip, tmp_path):
    import openpyxl

    sheet = next(p for p in trip["sheets"] if Path(p).stem == "K07")
    wb = openpyxl.load_workbook(sheet)
    ws = wb["qualitative_data"]
    head = [c.value for c in ws[1]]
    cell = ws.cell(row=2, column=head.index("reported") + 1)
    cell.value = "not detected" if cell.value != "not detected" else "detected"  # the row's digest no longer fits
    edited = tmp_path / "K07.xlsx"
    wb.save(edited)
    code, text, _ = run_cli("history", "add", edited, "--archive", tmp_path / "x.sqlite")
    assert code == 2
    assert "sheet 'qualitative_data', row 2" in text and "does not match its digest" in text
    assert not (tmp_path / "x.sqlite").exists()


def test_history_show_and_check_list_the_qualitative_results(trip):
    code, text, err = run_cli("history", "show", "--lab", "K07", "--archive", trip["lab"])
    assert code == 0, err
    assert "Qualitative results of lab K07: 3 rounds, 2 measurands" in text
    assert len(re.findall(r"\n\S+\s+SKW\s+\S+\s+salmonella\s", text)) == 6
    code, text, err = run_cli("history", "check", "--lab", "K07", "--archive", trip["lab"], "--json")
    body = __import__("json").loads(text)
    assert isinstance(body["qualitative"], list)
    wrong = archive.lab_qualitative_history(trip["lab"], lab="K07")
    assert body["fired"] == (code == 1)
    for f in body["qualitative"]:  # every finding names two wrong rounds among three
        assert len(f["wrong"]) >= 2 and set(f["wrong"]) <= set(
            wrong[wrong["agreement"] != "agrees"]["round"])


def test_lab_sheets_show_the_earlier_rounds_with_a_chart(trip):
    first, third = (trip["outs"][i] / "labs" / "K07.xlsx" for i in (0, 2))
    assert "History" not in CalamineWorkbook.from_path(str(first)).sheet_names  # no archive yet
    rows = CalamineWorkbook.from_path(str(third)).get_sheet_by_name("History").to_python()
    table = [r for r in rows if len(r) > 2 and str(r[1]).startswith("SKW-")]
    assert sorted({r[1] for r in table}) == [ROUNDS[0][1], ROUNDS[1][1]]  # not the round itself
    assert len(table) == 2 * 6
    stored = archive.lab_history(trip["coord"], lab="K07", measurand="iodine")
    iodine = {r[1]: r[8] for r in table if r[2] == "iodine"}
    for _, row in stored.iloc[:2].iterrows():
        assert iodine[row["round"]] == pytest.approx(row["score_value"], rel=1e-15)
    with zipfile.ZipFile(third) as z:
        charts = [z.read(n).decode("utf-8") for n in z.namelist()
                  if n.startswith("xl/charts/chart")]
    history_charts = [c for c in charts if "History!" in c and "<c:lineChart>" in c]
    assert len(history_charts) == 2  # z-like scores and En numbers (mercury is scored by En)
    assert "(this round)" in history_charts[0]


def test_history_show_writes_the_workbook_and_chart(trip, tmp_path):
    code, text, err = run_cli("history", "show", "--lab", "K07", "--out", tmp_path,
                              "--archive", trip["lab"])
    assert code == 0, err
    assert "History of lab K07: 3 rounds, 6 measurands" in text
    for name in ("history.xlsx", "history.png", "history.svg"):
        assert (tmp_path / name).stat().st_size > 0, name
    with zipfile.ZipFile(tmp_path / "history.xlsx") as z:
        assert any(n.startswith("xl/charts/chart") for n in z.namelist())


def test_history_check_fires_for_the_planted_outlier(trip):
    # K07's iodine is planted 6.5 between-lab SDs high in every seed (roundscore.demo.demo_round), so
    # rule 1 (|z| >= 3, ISO 13528) fires and the exit code is 1.
    code, text, err = run_cli("history", "check", "--lab", "K07", "--archive", trip["lab"])
    assert code == 1, err
    assert re.search(r"K07 / SKW / iodine .*\n\s+rule 1 \(action signal\)", text)


def test_history_check_is_quiet_on_a_clean_lab(trip, tmp_path):
    # A lab whose every score is below 1 in size cannot fire any rule over three rounds:
    # rule 1 needs 3 (En: 1), rule 2 needs 2, rule 3 needs nine rounds, and the CUSUM
    # (k = 0.5, h = 4) grows by less than 0.5 a round (roundscore.history.rules).
    coord = archive.lab_history(trip["coord"], lab=archive.archived_labs(trip["coord"]))
    size = coord.assign(a=coord["score_value"].abs()).groupby("lab")["a"].max()
    clean = sorted(size[size < 1].index)
    assert clean, "the seeds give no lab with every |score| < 1"
    lab = clean[0]
    db = tmp_path / "clean.sqlite"
    sheets = [p for p in trip["sheets"] if Path(p).stem == lab]
    assert len(sheets) == 3
    assert run_cli("history", "add", *sheets, "--archive", db)[0] == 0
    code, text, err = run_cli("history", "check", "--archive", db)
    assert code == 0, text + err
    own = coord[(coord["lab"] == lab) & (coord["signal"] != "not-scored")]
    n_series = own.assign(f=own["score"] == "en").groupby(["measurand", "f"]).ngroups
    assert f"0 of {n_series} series with a rule firing" in text


# --------------------------------------------------------------------------- small rounds

SMALL_TOML = """\
[round]
id = "{id}"
title = "Invented water round"
scheme = "{scheme}"
date = "{date}"
results = "results.csv"
replicates = 2
{extra}

[measurand.nitrate]
unit = "mg/L"
assigned = "algorithm-a"
sigma_pt = 0.5
decimals = 2
"""
#: Invented lab means for nitrate (mg/L); each lab reports mean - 0.05 and mean + 0.05.
SMALL_MEANS = {"W1": 10.0, "W2": 10.2, "W3": 9.8, "W4": 10.1, "W5": 9.9, "W6": 11.4}


def small_round(folder: Path, *, round_id: str, date: str, scheme: str = "AQ", extra: str = "",
                shift: float = 0.0) -> Path:
    lines = ["lab,measurand,replicate,value,unit"]
    for lab, mean in SMALL_MEANS.items():
        for rep, d in ((1, -0.05), (2, 0.05)):
            lines.append(f"{lab},nitrate,{rep},{mean + d + (shift if lab == 'W1' else 0):.2f},mg/L")
    toml = SMALL_TOML.format(id=round_id, date=date, scheme=scheme, extra=extra)
    return write_round(folder, toml, "\n".join(lines) + "\n")


def test_rescoring_is_idempotent_and_a_change_needs_replace(tmp_path):
    db = tmp_path / "a.sqlite"
    folder = small_round(tmp_path / "r", round_id="AQ-1", date="2025-01-10")
    code, text, _ = run_cli("score", folder, "--archive", db)
    assert code == 0 and "Archive: added: " in text
    code, text, _ = run_cli("score", folder, "--archive", db)
    assert code == 0 and "Archive: unchanged: " in text and "nothing changed" in text
    small_round(folder, round_id="AQ-1", date="2025-01-10", shift=0.3)  # W1 reports 0.3 higher
    code, text, err = run_cli("score", folder, "--archive", db)
    assert code == 2
    assert "the outputs were written to" in err and "different content" in err
    assert "--replace-archive" in err and "Traceback" not in err
    scores = pd.read_csv(folder / "out" / "scores.csv")
    assert scores.loc[scores["lab"] == "W1", "result"].item() == pytest.approx(10.3)  # invented
    code, text, _ = run_cli("score", folder, "--archive", db, "--replace-archive")
    assert code == 0 and "Archive: replaced: " in text
    stored = archive.lab_history(db, lab="W1")
    assert stored["result"].tolist() == pytest.approx([10.3])
    con = sqlite3.connect(db)
    try:
        assert con.execute("SELECT COUNT(*) FROM audit WHERE kind = 'score'").fetchone()[0] == 6
    finally:
        con.close()


def test_history_rounds_date_order_scheme_and_round_toml_key(tmp_path, monkeypatch):
    extra = 'archive = "../store.sqlite"\nhistory_rounds = 2'
    for i, date in enumerate(("2025-01-10", "2025-04-10", "2025-07-10")):
        folder = small_round(tmp_path / f"r{i}", round_id=f"AQ-{i + 1}", date=date, extra=extra)
        assert run_cli("score", folder)[0] == 0  # the archive comes from round.toml
    other = small_round(tmp_path / "o", round_id="AQ-1", date="2025-05-01", scheme="SOIL",
                        extra=extra)
    assert run_cli("score", other)[0] == 0  # same lab codes, another scheme
    calls = []
    real = archive.lab_history
    monkeypatch.setattr(archive, "lab_history", lambda *a, **k: calls.append(k) or real(*a, **k))
    late = small_round(tmp_path / "r9", round_id="AQ-9", date="2025-12-01", extra=extra)
    assert run_cli("score", late)[0] == 0
    assert len(calls) == 1 and sorted(calls[0]["lab"]) == sorted(SMALL_MEANS)  # one query
    rows = CalamineWorkbook.from_path(str(late / "out" / "labs" / "W1.xlsx")) \
        .get_sheet_by_name("History").to_python()
    shown = [r[1] for r in rows if str(r[1]).startswith("AQ-")]
    assert shown == ["AQ-2", "AQ-3"]  # history_rounds = 2: the last two, not SOIL's AQ-1
    early = small_round(tmp_path / "r0b", round_id="AQ-0", date="2024-10-01", extra=extra)
    assert run_cli("score", early)[0] == 0
    assert "History" not in CalamineWorkbook.from_path(
        str(early / "out" / "labs" / "W1.xlsx")).sheet_names  # nothing before 2024-10-01


def test_archive_needs_a_scheme_and_writes_nothing_without(tmp_path):
    folder = small_round(tmp_path / "r", round_id="AQ-1", date="2025-01-10", scheme="")
    code, _text, err = run_cli("score", folder, "--archive", tmp_path / "a.sqlite")
    assert code == 2 and "'round.scheme'" in err and "round.toml" in err
    assert not (folder / "out").exists() and not (tmp_path / "a.sqlite").exists()
