"""Lab score sheets coming back for ``history add``: row consistency, sheet digests, re-saved files,
older sheets without a digest, and hostile workbooks (read like returned forms: package check and a
bounded worker).

The round is the invented demo round (roundscore.demo.demo_round).  The score formulas the consistency check
applies are those of ISO 13528:2022 §9 (z, z′, ζ, En, D, D%; limits 2 and 3 for z-like scores, 1
for En, §9.4.1 and §9.7.3); the hand-built rows below are invented, their expected scores worked
out from those formulas beside each.  Every refusal is checked to name the file and row and to
leave the archive as it was (row counts before and after).
"""

from __future__ import annotations

import shutil
import subprocess
import zipfile
from pathlib import Path

import openpyxl
import pytest

from roundscore.history import store as archive
from roundscore.model.digest import canonical
from roundscore.history.checks import row_problems
from roundscore.history.sheets import ROW_FIELDS, read_lab_file
from roundscore.demo.demo_round import make_demo_round
from roundscore.outputs.workbook import lab_payload, write_lab_workbook
from roundscore.pipeline import load_and_evaluate

from .test_archive import count, scores_frame, write_workbook
from .test_history_roundtrip import run_cli

#: The planted iodine outlier (z = 6.25, action), a zeta-scored lead and En-scored mercury row,
#: and the censored mercury result of K23 (the demo's own scenario).
LABS = ("K07", "K23")


@pytest.fixture(scope="module")
def sheets(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("lab-sheets")
    make_demo_round(root / "round")
    ev = load_and_evaluate(root / "round")
    for lab in LABS:
        write_lab_workbook(lab_payload(ev, lab), root / f"{lab}.xlsx")
    return root


@pytest.fixture
def db(tmp_path) -> Path:
    """A lab archive that already holds a round, so a refusal can be seen to change nothing."""
    path = tmp_path / "lab.sqlite"
    csv = tmp_path / "earlier.csv"
    scores_frame(labs=("K07",), scheme="SKW", round_id="SKW-2026-13", date="2026-06-01") \
        .to_csv(csv, index=False)
    assert archive.add_files(path, [csv])[0].status == "added"
    return path


def counts(path: Path) -> tuple[int, int, int]:
    return tuple(count(path, f"SELECT COUNT(*) FROM {t}") for t in ("rounds", "scores", "audit"))


def copy(sheets: Path, tmp_path: Path, lab: str = "K07") -> Path:
    target = tmp_path / f"{lab}.xlsx"
    shutil.copyfile(sheets / f"{lab}.xlsx", target)
    return target


def refused(db: Path, book: Path, *words: str) -> str:
    """Run ``history add``; it must refuse, name the file and the words, and change nothing."""
    before = counts(db)
    code, text, err = run_cli("history", "add", book, "--archive", db)
    assert code == 2 and "refused" in text and "Traceback" not in text + err, text + err
    assert str(book) in text
    for word in words:
        assert word in text, (word, text)
    assert counts(db) == before
    return text


def edit(book: Path, change) -> None:
    """Open the sheet with openpyxl, let ``change(workbook)`` edit it, save it again."""
    wb = openpyxl.load_workbook(book)
    change(wb)
    wb.save(book)


def data_row(wb, lab: str, measurand: str) -> tuple[int, dict[str, int]]:
    ws = wb["data"]
    head = {c.value: c.column for c in ws[1]}
    for row in ws.iter_rows(min_row=2):
        if row[head["lab"] - 1].value == lab and row[head["measurand"] - 1].value == measurand:
            return row[0].row, head
    raise AssertionError((lab, measurand))


# --------------------------------------------------------------------------- genuine sheets

def test_genuine_sheets_are_added_and_match_their_digests(sheets, tmp_path, db):
    for lab in LABS:
        book = copy(sheets, tmp_path, lab)
        [item] = read_lab_file(book, None)
        assert item.warnings == ()  # a current sheet: digests present and matching
    code, text, err = run_cli("history", "add", *(tmp_path / f"{lab}.xlsx" for lab in LABS),
                              "--archive", db)
    assert code == 0 and text.count(": added: ") == 2 and "warning" not in text, text + err


def test_opened_and_saved_again_with_openpyxl_is_accepted(sheets, tmp_path, db):
    book = copy(sheets, tmp_path)
    before = book.read_bytes()
    edit(book, lambda wb: None)
    assert book.read_bytes() != before  # other bytes, the same values
    code, text, err = run_cli("history", "add", book, "--archive", db)
    assert code == 0 and ": added: " in text, text + err


@pytest.mark.skipif(shutil.which("libreoffice") is None, reason="LibreOffice is not installed")
def test_opened_and_saved_again_with_libreoffice_is_accepted(sheets, tmp_path, db):
    # LibreOffice keeps 15 significant digits on saving (as Excel does); the data sheet holds 12.
    book = copy(sheets, tmp_path)
    out = tmp_path / "saved"
    run = subprocess.run(["libreoffice", f"-env:UserInstallation={(tmp_path / 'profile').as_uri()}",
                          "--headless", "--convert-to", "xlsx", "--outdir", str(out), str(book)],
                         capture_output=True, text=True, timeout=180)
    saved = out / "K07.xlsx"
    if run.returncode != 0 or not saved.is_file():
        pytest.skip(f"LibreOffice did not convert the file: {run.stderr[-300:]}")
    assert saved.read_bytes() != book.read_bytes()
    code, text, err = run_cli("history", "add", saved, "--archive", db)
    assert code == 0 and ": added: " in text, text + err


def test_sorting_the_data_rows_is_not_an_edit(sheets, tmp_path, db):
    book = copy(sheets, tmp_path)

    def reverse(wb):
        ws = wb["data"]
        body = [[c.value for c in r] for r in ws.iter_rows(min_row=2)]
        for i, values in enumerate(reversed(body), start=2):
            for j, v in enumerate(values, start=1):
                ws.cell(row=i, column=j).value = v  # (ws.cell(value=None) would keep the old one)
    edit(book, reverse)
    code, text, err = run_cli("history", "add", book, "--archive", db)
    assert code == 0 and ": added: " in text, text + err


# --------------------------------------------------------------------------- edited sheets

def test_the_reported_edit_is_refused_with_the_row_named(sheets, tmp_path, db):
    # The trial's case: K07's iodine z of 6.25 changed to 0.5 and its signal to acceptable.
    book = copy(sheets, tmp_path)
    holder = {}

    def change(wb):
        row, head = data_row(wb, "K07", "iodine")
        holder["row"] = row
        wb["data"].cell(row=row, column=head["z"], value=0.5)
        wb["data"].cell(row=row, column=head["signal"], value="acceptable")
    edit(book, change)
    refused(db, book, f"sheet 'data', row {holder['row']}", "lab K07, measurand iodine",
                   "does not match its digest", "column 'z'", "(result − assigned) / σ_pt = 6.2459")


def test_an_edit_the_numbers_cannot_show_is_found_by_the_digest(sheets, tmp_path, db):
    book = copy(sheets, tmp_path)
    holder = {}

    def change(wb):
        row, head = data_row(wb, "K07", "cadmium")
        holder["row"] = row
        wb["data"].cell(row=row, column=head["note"], value="re-measured, fine now")
    edit(book, change)
    text = refused(db, book, f"sheet 'data', row {holder['row']}", "lab K07, measurand cadmium",
                   "does not match its digest")
    assert "iodine" not in text  # only the edited row is named


@pytest.mark.parametrize("how, words", [
    ("delete_row", ["rows were added, copied or removed"]),
    ("edit_title", ["sheet 'round'", "rows were added, copied or removed"]),
    ("drop_digest_key", ["the sheet's digest is incomplete", "key 'digest' is missing"]),
    ("drop_digest_column", ["the sheet's digest is incomplete", "column 'row_digest' is missing"]),
])
def test_rows_removed_or_the_round_sheet_edited_are_refused(sheets, tmp_path, db, how, words):
    book = copy(sheets, tmp_path)

    def change(wb):
        if how == "delete_row":
            wb["data"].delete_rows(3)
        elif how == "edit_title":
            ws = wb["round"]
            for r in ws.iter_rows(min_row=2):
                if r[0].value == "title":
                    r[1].value = "my own title"
        elif how == "drop_digest_key":
            ws = wb["round"]
            for r in ws.iter_rows(min_row=2):
                if r[0].value == "digest":
                    ws.delete_rows(r[0].row)
                    break
        else:
            ws = wb["data"]
            ws.delete_cols([c.value for c in ws[1]].index("row_digest") + 1)
    edit(book, change)
    refused(db, book, *words)


# --------------------------------------------------------------------------- older sheets

def test_an_older_sheet_without_digest_is_accepted_with_a_warning_but_still_checked(tmp_path, db):
    frame = scores_frame(labs=("L05",))
    old = write_workbook(tmp_path / "L05.xlsx", frame, lab="L05")  # the format before digests
    code, text, _err = run_cli("history", "add", old, "--archive", db)
    assert code == 0 and ": added: " in text
    assert "warning: written by a roundscore without sheet digests" in text
    assert "checked for consistency" in text
    bad = frame.copy()
    bad.loc[0, "z"] = 0.5  # its result and assigned value give z = -1.0 (scores_frame)
    bad.loc[0, "signal"] = "acceptable"
    later = write_workbook(tmp_path / "L05-later.xlsx", bad.assign(round="2024-2"), lab="L05")
    refused(db, later, "sheet 'data', row 2", "column 'z'", "value 0.5",
            "(result − assigned) / σ_pt = -1")


# --------------------------------------------------------------------------- the consistency rules

#: An invented row: x = 10.8, x_pt = 10.0, u(x_pt) = 0.1, σ_pt = 0.2 give d = 0.8, D% = 8,
#: z = 4.0 (action), z′ = 0.8/√0.05 = 3.577708764 (ISO 13528:2022 §9.3-9.5).
ROW = dict(lab="L1", measurand="lead", unit="mg/L", n_replicates=2, result=10.8, assigned=10.0,
           u_assigned=0.1, sigma_pt=0.2, z=4.0, z_prime=3.577708763999664, zeta=2.0, en=1.2,
           d=0.8, d_percent=8.0, signal="action", note="", score="z")


@pytest.mark.parametrize("change, column", [
    ({}, None),
    ({"z": 3.999}, "z"),
    ({"z_prime": 3.5}, "z_prime"),
    ({"d": 0.5}, "d"),
    ({"d_percent": 5.0}, "d_percent"),
    ({"zeta": -2.0}, "zeta"),  # the opposite sign of d
    ({"zeta": 8.5}, "zeta"),  # |ζ| ≤ |d| / u(x_pt) = 8
    ({"zeta": 7.999}, None),
    ({"en": 4.1}, "en"),  # |En| ≤ |d| / (2 u(x_pt)) = 4
    ({"signal": "warning"}, "signal"),  # |z| = 4 ≥ 3 is an action signal (§9.4.1)
    ({"z": 3.0, "result": 10.6, "d": 0.6, "d_percent": 6.0, "z_prime": 2.6832815729997477,
      "signal": "warning"}, None),  # |z| = 3 on the limit, within the tolerance: either side
    ({"z": 2.0000000000001, "result": 10.40000000000002, "d": 0.40000000000002,
      "d_percent": 4.000000000000201, "z_prime": 1.7888543819999, "signal": "acceptable"},
     None),  # on the limit 2 within the rounding tolerance: acceptable and warning both allowed
    ({"score": "en", "signal": "action"}, None),  # |En| = 1.2 > 1 (§9.7.3)
    ({"score": "en", "en": 0.9, "signal": "action"}, "signal"),
    ({"z": None, "z_prime": None, "zeta": None, "en": None, "d": None, "d_percent": None,
      "result": None, "signal": "acceptable"}, "signal"),  # not reported, yet a signal
    ({"signal": "not-scored", "note": "score withheld by the coordinator"}, None),
    ({"signal": "not-scored"}, "signal"),
    ({"result": "<0.1", "z": None, "z_prime": None, "zeta": None, "en": None, "d": None,
      "d_percent": None, "signal": "action"}, None),  # false negative: 0.1 < 10 − 3 × 0.2
    ({"result": "<9.5", "z": None, "z_prime": None, "zeta": None, "en": None, "d": None,
      "d_percent": None, "signal": "action"}, "signal"),  # 9.5 is not below 9.4
    ({"result": "<9.5", "signal": "not-scored"}, "d"),  # scores for a censored result
])
def test_row_consistency_rules(change, column):
    row = {**ROW, **change}
    found = row_problems(row, file="x.csv", sheet=None, row_number=7)
    if column is None:
        assert found == []
    else:
        assert found and found[0].column == column and found[0].row == 7
        assert "edited by hand?" in found[0].message
    assert set(ROW) == set(ROW_FIELDS)


def test_canonical_values_for_the_digests():
    assert canonical(0.30000000000000004) == canonical(0.3) == "0.3"
    assert canonical(2) == canonical(2.0) == "2"
    assert canonical(-0.0) == "0" and canonical(float("inf")) is None
    assert canonical("  K07 ") == "K07" and canonical("") is None and canonical(None) is None
    assert canonical(1.23456789012345) == "1.23456789012"  # 12 significant digits


# --------------------------------------------------------------------------- hostile workbooks

def _rewrite(source: Path, target: Path, change) -> Path:
    """Copy a workbook part by part; ``change(name, data)`` returns the new bytes (or None: drop)."""
    with zipfile.ZipFile(source) as zin, zipfile.ZipFile(target, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = change(info.filename, zin.read(info.filename))
            if data is not None:
                zout.writestr(info.filename, data)
        extra = change("", b"")
        if extra:
            zout.writestr("xl/media/padding.bin", extra)
    return target


def _data_part(book: Path) -> str:
    """The part name of sheet 'data' (xl/workbook.xml and its relationships)."""
    wb = openpyxl.load_workbook(book, read_only=True)
    index = wb.sheetnames.index("data") + 1
    wb.close()
    return f"xl/worksheets/sheet{index}.xml"


@pytest.mark.parametrize("how, words", [
    ("bomb", ["inflates to more than 64 MiB", "decompression bomb"]),
    ("doctype", ["declares a document type or an entity", "<!DOCTYPE"]),
    ("entity_reference", ["sheet 'data'"]),
])
def test_hostile_workbooks_are_refused_by_name(sheets, tmp_path, db, how, words):
    book = copy(sheets, tmp_path)
    part = _data_part(book)
    target = tmp_path / "hostile.xlsx"

    def change(name: str, data: bytes) -> bytes | None:
        if how == "bomb" and name == "":
            return b"\0" * (65 << 20)  # a part of 65 MiB of zeros; about 65 kB compressed
        if name == part and how == "doctype":
            return data.replace(b"?>", b'?><!DOCTYPE w [<!ENTITY e "x">]>', 1)
        if name == part and how == "entity_reference":  # no DTD, so the entity is undefined
            return data.replace(b"<v>", b"<v>&undefined;", 1)
        return data
    _rewrite(book, target, change)
    if how == "bomb":
        assert target.stat().st_size < (1 << 20)
    text = refused(db, target, *words)
    assert "hostile.xlsx" in text


def test_score_rows_follow_the_lab_code_rule():
    """history add reads lab codes by the same rule as every other reader (roundscore.model.labcodes)."""
    from roundscore.history.sheets import ROW_FIELDS, normalise_rows

    good = {c: None for c in ROW_FIELDS}
    good.update(lab="K01", measurand="iron", signal="not-scored")
    bad = dict(good, lab="K\x1b[2J01")
    wide = dict(good, lab="Ｋ０２")  # full width: the code K02 (NFKC)
    rows, problems = normalise_rows([good, bad, wide], file="scores.csv", sheet=None, first_row=2)
    assert [r[0] for r in rows] == ["K01", "K\x1b[2J01", "K02"]
    (p,) = problems
    assert p.row == 3 and p.column == "lab" and "control character" in str(p) and "\x1b" not in str(p)
