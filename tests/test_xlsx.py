"""Low-level readers: text files as spreadsheet programs save them, and workbook sheet access.

The encodings and delimiters are what common spreadsheet programs write
(UTF-8 with a byte-order mark, "Unicode text" = UTF-16 LE with BOM and tabs,
Windows-1252 / Latin-1 with semicolons and decimal commas in European
locales): common practice.
"""

from __future__ import annotations

from pathlib import Path

import pytest
import xlsxwriter

from roundscore.intake.cells import parse_cell
from roundscore.errors import InputError
from roundscore.model.limits import ReadLimits
from roundscore.intake.xlsx import read_csv_rows, read_file_sheets, read_rows

TABLE = "lab;measurand;replicate;value;comment\nK01;lead;1;0,512;Müller & Söhne\nK02;lead;1;1.234,5;\n"


@pytest.mark.parametrize("encoding, prefix", [
    ("utf-8", b""),
    ("utf-8", b"\xef\xbb\xbf"),
    ("cp1252", b""),
    ("latin-1", b""),
    ("utf-16-le", b"\xff\xfe"),
])
def test_encodings_semicolon_and_decimal_comma(tmp_path: Path, encoding: str, prefix: bytes):
    path = tmp_path / "r.csv"
    path.write_bytes(prefix + TABLE.encode(encoding))
    rows = read_csv_rows(path).rows
    assert rows[0] == ["lab", "measurand", "replicate", "value", "comment"]  # no BOM left on 'lab'
    assert rows[1][4] == "Müller & Söhne"
    assert parse_cell(rows[1][3]).value == 0.512
    # 1.234,5 reads one way only with a decimal comma: refused unless the round declares it (roundscore.intake.cells).
    assert parse_cell(rows[2][3], decimal="comma").value == 1234.5
    assert rows[2][4] is None


@pytest.mark.parametrize("text, delimiter", [
    ("a,b,c\n1;2,3\n", ","),
    ("a;b;c\n1,5;2,5;3\n", ";"),
    ("a\tb\tc\n1,5\t2\t3\n", "\t"),
    ('"a;x",b,c\n1,2,3\n', ","),  # a semicolon inside quotes does not count
])
def test_delimiter_from_the_header(tmp_path: Path, text: str, delimiter: str):
    path = tmp_path / "d.csv"
    path.write_text(text, encoding="utf-8")
    assert len(read_csv_rows(path).rows[0]) == 3


def test_text_file_size_limit(tmp_path: Path):
    path = tmp_path / "big.csv"
    path.write_text("a,b\n" + "1,2\n" * 5000)
    assert read_csv_rows(path).rows[-1] == ["1", "2"]
    with pytest.raises(InputError, match="more than the limit"):
        read_csv_rows(path, limits=ReadLimits(max_text_bytes=1000))


def test_nul_bytes_and_unclosed_quote(tmp_path: Path):
    path = tmp_path / "bin.csv"
    path.write_bytes(b"PK\x03\x04\x00\x00binary")
    with pytest.raises(InputError, match="NUL bytes"):
        read_csv_rows(path)
    path = tmp_path / "q.csv"
    path.write_text('a,b\n"' + "x" * (2 << 20) + "\n1,2\n")
    with pytest.raises(InputError, match="cannot be read") as info:
        read_csv_rows(path)
    assert info.value.problems[0].file == str(path)


def test_field_limit_restored(tmp_path: Path):
    import csv

    before = csv.field_size_limit()
    path = tmp_path / "ok.csv"
    path.write_text("a\n1\n")
    read_csv_rows(path)
    assert csv.field_size_limit() == before


@pytest.mark.parametrize("name, message", [
    ("r.json", "unsupported file type '.json'"),
    ("missing.csv", "file not found"),
])
def test_read_rows_refusals(tmp_path: Path, name: str, message: str):
    if name.endswith(".json"):
        (tmp_path / name).write_text("{}")
    with pytest.raises(InputError, match=message):
        read_rows(tmp_path / name)


def test_workbook_sheets_and_missing_sheet(tmp_path: Path):
    path = tmp_path / "w.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    wb.add_worksheet("A").write(0, 0, 1.5)
    wb.add_worksheet("B").write(1, 1, "x")
    wb.close()
    a, b = read_file_sheets(path, ["A", "B"])
    assert a.rows == [[1.5]] and b.rows[1] == [None, "x"] and b.sheet == "B"
    assert read_rows(path).sheet == "A"
    with pytest.raises(InputError, match="no sheet named 'C'; the workbook has: A, B"):
        read_rows(path, "C")


def test_legacy_xls_refused_with_advice(tmp_path: Path):
    path = tmp_path / "old.xls"
    path.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(1000))
    with pytest.raises(InputError, match=r"save as .xlsx without a password"):
        read_rows(path)


def test_text_file_as_many_sheets(tmp_path: Path):
    path = tmp_path / "t.csv"
    path.write_text("a,b\n1,2\n")
    one, two = read_file_sheets(path, ["x", "y"])
    assert one.rows == two.rows and one.sheet is None
