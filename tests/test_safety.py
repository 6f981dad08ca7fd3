"""Package checks before any reader: bombs, DTDs, encrypted/legacy/corrupt files, and what is noted.

Every hostile file is built here by the test itself (nothing downloaded).
The expectations come from the file formats: ECMA-376 (sheet, row, c, f, v,
mergeCell; sheet ``state``), PKWARE APPNOTE.TXT (zip headers), [MS-CFB]
(the OLE2 signature), XML 1.0 (DTDs only in the prolog).
"""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import struct
import zipfile
from pathlib import Path

import pytest
import xlsxwriter

from roundscore.errors import InputError
from roundscore.intake.safety import DEFLATE_MAX_RATIO, OLE2_SIGNATURE, WorkbookCheck, inspect_workbook
from roundscore.model.limits import ReadLimits
from roundscore.intake.xlsx import read_file_sheets, read_workbook_rows

MiB = 1 << 20


def make_base(path: Path) -> Path:
    """A plain two-sheet workbook with numbers, text and a formula that has a cached value."""
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Results")
    ws.write_row(0, 0, ["lab", "measurand", "replicate", "value"])
    ws.write_row(1, 0, ["L1", "lead", 1, 0.5])
    ws.write_formula(2, 3, "=D2*2", None, 1.0)
    wb.add_worksheet("Other").write(0, 0, "x")
    wb.close()
    return path


def members(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as zf:
        return {n: zf.read(n) for n in zf.namelist()}


def rewrite(src: Path, dst: Path, change: dict[str, bytes | None], *,
            method: int = zipfile.ZIP_DEFLATED) -> Path:
    """Copy a package with some members replaced (bytes), added, or removed (None)."""
    parts = members(src)
    for name, data in change.items():
        if data is None:
            parts.pop(name, None)
        else:
            parts[name] = data
    with zipfile.ZipFile(dst, "w", compression=method) as zf:
        for name, data in parts.items():
            zf.writestr(name, data)
    return dst


@pytest.fixture()
def base(tmp_path: Path) -> Path:
    return make_base(tmp_path / "base.xlsx")


def refused(path: Path, limits: ReadLimits | None = None) -> str:
    with pytest.raises(InputError) as info:
        inspect_workbook(path, limits or ReadLimits())
    text = str(info.value)
    assert str(path) in text  # the message names the file
    return text


def test_plain_workbook_passes(base: Path):
    check = inspect_workbook(base)
    assert isinstance(check, WorkbookCheck)
    assert check.sheets == ("Results", "Other")
    assert not check.hidden_sheets and not check.macros and not check.formulas_without_value
    # The cached formula value is read; the file is not changed by the check.
    before = base.read_bytes()
    rows = read_workbook_rows(base, "Results").rows
    assert rows[2][3] == 1.0
    assert base.read_bytes() == before


DTD = b'<?xml version="1.0"?>\n<!DOCTYPE lolz [<!ENTITY lol "lol"><!ENTITY lol2 "&lol;&lol;&lol;">]>\n'
XXE = b'<?xml version="1.0"?>\n<!DOCTYPE foo [<!ENTITY xxe SYSTEM "file:///etc/passwd">]>\n'


@pytest.mark.parametrize("part", [
    "xl/sharedStrings.xml", "xl/workbook.xml", "xl/worksheets/sheet1.xml", "xl/styles.xml",
    "[Content_Types].xml", "xl/_rels/workbook.xml.rels", "docProps/core.xml", "xl/theme/theme1.xml",
])
@pytest.mark.parametrize("declaration", [DTD, XXE], ids=["entity-expansion", "external-entity"])
def test_dtd_in_any_part_is_refused(base: Path, tmp_path: Path, part: str, declaration: bytes):
    original = members(base)[part]
    body = original.split(b"?>", 1)[1] if original.startswith(b"<?xml") else original
    bad = rewrite(base, tmp_path / "dtd.xlsx", {part: declaration + body.lstrip()})
    text = refused(bad)
    assert "<!DOCTYPE" in text and part in text


def test_dtd_after_long_comment_is_found(base: Path, tmp_path: Path):
    # The prolog check must read on past the first bytes of a part (XML 1.0 §2.8 allows comments first).
    body = members(base)["xl/styles.xml"].split(b"?>", 1)[1]
    data = b'<?xml version="1.0"?>' + b"<!--" + b"x" * 50_000 + b"-->" + XXE.split(b"?>", 1)[1] + body
    text = refused(rewrite(base, tmp_path / "c.xlsx", {"xl/styles.xml": data}))
    assert "declares a document type" in text


def test_entity_declaration_alone_is_refused(base: Path, tmp_path: Path):
    sheet = members(base)["xl/worksheets/sheet1.xml"]
    bad = rewrite(base, tmp_path / "e.xlsx", {"xl/worksheets/sheet1.xml": sheet + b'<!ENTITY a "b">'})
    assert "<!ENTITY" in refused(bad)


def _bomb_sheet(size: int) -> bytes:
    head = b'<?xml version="1.0"?><worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
    return head + b" " * size + b"<sheetData/></worksheet>"


@pytest.mark.parametrize("part", ["xl/worksheets/sheet1.xml", "xl/theme/theme1.xml", "xl/media/image1.bin"])
def test_zip_bomb_refused(base: Path, tmp_path: Path, part: str):
    bomb = rewrite(base, tmp_path / "bomb.xlsx", {part: _bomb_sheet(70 * MiB)})
    assert bomb.stat().st_size < 1 * MiB  # a small file...
    text = refused(bomb)  # ...that would inflate to 70 MiB
    assert "64 MiB" in text and "decompression bomb" in text and part in text


def test_lying_header_sizes_are_not_trusted(base: Path, tmp_path: Path):
    # Declare 100 bytes for a member that inflates to 70 MiB (sizes patched in both headers).
    path = rewrite(base, tmp_path / "liar.xlsx", {"xl/worksheets/sheet1.xml": _bomb_sheet(70 * MiB)})
    data = bytearray(path.read_bytes())
    name = b"xl/worksheets/sheet1.xml"
    for sig, size_at in ((b"PK\x03\x04", 22), (b"PK\x01\x02", 24)):
        pos = 0
        while (pos := data.find(sig, pos)) >= 0:
            nlen_at = 26 if sig == b"PK\x03\x04" else 28
            nlen = struct.unpack_from("<H", data, pos + nlen_at)[0]
            start = pos + (30 if sig == b"PK\x03\x04" else 46)
            if bytes(data[start:start + nlen]) == name:
                struct.pack_into("<I", data, pos + size_at, 100)
            pos += 4
    path.write_bytes(bytes(data))
    assert "decompression bomb" in refused(path)


def test_limits_are_configurable(base: Path, tmp_path: Path):
    path = rewrite(base, tmp_path / "two.xlsx", {"xl/worksheets/sheet1.xml": _bomb_sheet(2 * MiB)})
    inspect_workbook(path)  # 2 MiB is fine by default
    text = refused(path, ReadLimits(max_member_bytes=1 * MiB))
    assert "1 MiB" in text


def test_total_limit(base: Path, tmp_path: Path):
    extra = {f"xl/media/pad{i}.bin": b"\0" * (MiB + MiB // 2) for i in range(3)}
    path = rewrite(base, tmp_path / "total.xlsx", extra)
    text = refused(path, ReadLimits(max_member_bytes=2 * MiB, max_total_bytes=3 * MiB))
    assert "in total" in text and "3 MiB" in text


def test_member_count_limit(base: Path, tmp_path: Path):
    path = rewrite(base, tmp_path / "many.xlsx", {f"customXml/item{i}.bin": b"x" for i in range(30)})
    assert "more than the limit of 20" in refused(path, ReadLimits(max_members=20))


def test_stored_members_are_checked_too(base: Path, tmp_path: Path):
    path = rewrite(base, tmp_path / "stored.xlsx", {}, method=zipfile.ZIP_STORED)
    assert inspect_workbook(path).sheets == ("Results", "Other")
    sheet = members(base)["xl/worksheets/sheet1.xml"]
    bad = rewrite(base, tmp_path / "stored-dtd.xlsx", {"xl/worksheets/sheet1.xml": XXE + sheet.split(b"?>", 1)[1]},
                  method=zipfile.ZIP_STORED)
    assert "<!DOCTYPE" in refused(bad)


@pytest.mark.parametrize("content, expected", [
    (OLE2_SIGNATURE + bytes(504), "encrypted or legacy workbook: save as .xlsx without a password"),
    (b"lab,measurand,replicate,value\nL1,lead,1,0.5\n", "corrupt or not an .xlsx file"),
    (b"", "corrupt or not an .xlsx file"),
    (b"PK\x03\x04" + bytes(100), "corrupt or not an .xlsx file"),
])
def test_not_a_workbook(tmp_path: Path, content: bytes, expected: str):
    path = tmp_path / "x.xlsx"
    path.write_bytes(content)
    assert expected in refused(path)


def test_truncated_and_damaged_packages(base: Path, tmp_path: Path):
    data = base.read_bytes()
    cut = tmp_path / "cut.xlsx"
    cut.write_bytes(data[: len(data) // 2])
    assert "corrupt" in refused(cut)
    # Flip bytes inside the compressed data of the first member: checksum or inflate error.
    damaged = bytearray(data)
    for i in range(60, 90):
        damaged[i] ^= 0xFF
    bad = tmp_path / "bad.xlsx"
    bad.write_bytes(bytes(damaged))
    assert "corrupt" in refused(bad)


def test_missing_file_and_folder(tmp_path: Path):
    assert "file not found" in refused(tmp_path / "none.xlsx")
    assert "folder" in refused(tmp_path)


def test_macros_noted_and_values_read(base: Path, tmp_path: Path):
    path = rewrite(base, tmp_path / "m.xlsm", {"xl/vbaProject.bin": b"\xd0\xcf\x11\xe0 not run"})
    check = inspect_workbook(path)
    assert check.macros
    sheet = read_workbook_rows(path, "Results")
    assert sheet.rows[1][3] == 0.5
    assert any("macros present; they are never run, only cell values are read" in w for w in sheet.warnings)


def test_hidden_sheet_rows_merged_noted(base: Path, tmp_path: Path):
    parts = members(base)
    wbxml = parts["xl/workbook.xml"].replace(b'<sheet name="Other"', b'<sheet name="Other" state="veryHidden"')
    sheet = parts["xl/worksheets/sheet1.xml"].replace(b'<row r="2"', b'<row r="2" hidden="1"')
    sheet = sheet.replace(b"</sheetData>", b'</sheetData><mergeCells count="1"><mergeCell ref="A1:B1"/></mergeCells>')
    path = rewrite(base, tmp_path / "h.xlsx", {"xl/workbook.xml": wbxml, "xl/worksheets/sheet1.xml": sheet})
    check = inspect_workbook(path)
    assert check.hidden_sheets == ("Other",)
    assert check.hidden_rows == {"Results": (2,)}
    assert check.merged == {"Results": ("A1:B1",)}
    results, other = read_file_sheets(path, ["Results", "Other"])
    assert results.rows[1][3] == 0.5  # hidden rows are read all the same
    text = " ".join(results.warnings)
    assert "hidden rows 2" in text and "merged cells A1:B1" in text
    assert any("'Other' is hidden" in w for w in other.warnings)


def test_formula_without_cached_value_names_the_cell(base: Path, tmp_path: Path):
    parts = members(base)
    sheet = parts["xl/worksheets/sheet1.xml"]
    # xlsxwriter wrote <c r="D3"><f>D2*2</f><v>1</v></c>; drop the cached value.
    start = sheet.index(b'<c r="D3"')
    end = sheet.index(b"</c>", start)
    cell = sheet[start:end]
    assert b"<v>" in cell
    sheet = sheet[:start] + cell[: cell.index(b"<v>")] + sheet[end:]
    path = rewrite(base, tmp_path / "f.xlsx", {"xl/worksheets/sheet1.xml": sheet})
    assert inspect_workbook(path).formulas_without_value == {"Results": ("D3",)}
    with pytest.raises(InputError) as info:
        read_workbook_rows(path, "Results")
    p = info.value.problems[0]
    assert (p.sheet, p.row, p.column) == ("Results", 3, "D3")
    assert "formula without a saved value" in str(info.value)
    # Another sheet of the same file reads fine.
    assert read_workbook_rows(path, "Other").rows == [["x"]]


def test_openpyxl_formulas_without_values(tmp_path: Path):
    # openpyxl writes formulas with no cached value (a common way to produce such files).
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Results"
    ws.append(["lab", "measurand", "replicate", "value"])
    ws.append(["L1", "lead", 1, "=0.25*2"])
    path = tmp_path / "o.xlsx"
    wb.save(path)
    with pytest.raises(InputError) as info:
        read_workbook_rows(path, "Results")
    assert info.value.problems[0].column == "D2"


def test_deflate_bound_constant():
    # zlib technical details (zlib.net/zlib_tech.html): maximum compression factor 1032:1.
    assert DEFLATE_MAX_RATIO == 1032
    data = zlib_compress_raw(b"\0" * (4 * MiB))
    assert len(data) * DEFLATE_MAX_RATIO >= 4 * MiB


def zlib_compress_raw(data: bytes) -> bytes:
    import zlib

    c = zlib.compressobj(9, zlib.DEFLATED, -15)
    return c.compress(data) + c.flush()


def test_readlimits_validated():
    with pytest.raises(ValueError, match="max_member_bytes"):
        ReadLimits(max_member_bytes=0)
    with pytest.raises(ValueError, match="timeout_s"):
        ReadLimits(timeout_s=-1)


REGRESSIONS = sorted((Path(__file__).parent / "data" / "fuzz_regressions").glob("crash-*"))


@pytest.mark.parametrize("path", [p for p in REGRESSIONS if not p.name.endswith(".txt")], ids=lambda p: p.name)
def test_fuzz_regressions(path: Path):
    # Crashers kept from fuzz/fuzz_readers.py (see tests/data/fuzz_regressions/README.md).
    from roundscore.intake.isolation import FileRows, ReadFailure, read_many

    try:
        read_file_sheets(path, ["Results", "form-info"])
    except InputError as exc:
        assert str(path) in str(exc)
    got = read_many([path], ["Results", "form-info"], jobs=1)[0]
    assert isinstance(got, (FileRows, ReadFailure))
    if isinstance(got, ReadFailure):
        assert "reader failed" not in got.reason and "stopped by" not in got.reason


def test_prefixed_and_shared_formulas_without_values_are_found(base: Path, tmp_path: Path):
    # SpreadsheetML (ECMA-376 Part 1, §18.3.1.40 f): a shared formula's text is on the group's first
    # cell; the other cells hold an empty <f t="shared" si="…"/>. Namespace prefixes are legal XML.
    parts = members(base)
    sheet = parts["xl/worksheets/sheet1.xml"]
    start = sheet.index(b'<c r="D3"')
    end = sheet.index(b"</c>", start) + len(b"</c>")
    shared = (b'<c r="D3"><f t="shared" ref="D3:E3" si="0">D2*2</f></c>'
              b'<c r="E3"><f t="shared" si="0"/></c>')
    path = rewrite(base, tmp_path / "shared.xlsx", {"xl/worksheets/sheet1.xml": sheet[:start] + shared + sheet[end:]})
    assert inspect_workbook(path).formulas_without_value == {"Results": ("D3", "E3")}
    # The same cell with a prefixed element name, value missing.
    prefixed = sheet.replace(b"<worksheet ", b'<worksheet xmlns:x="http://schemas.openxmlformats.org/'
                                            b'spreadsheetml/2006/main" ', 1)
    prefixed = prefixed[:start] + b'<c r="D3"><x:f>D2*2</x:f></c>' + prefixed[end:]
    path = rewrite(base, tmp_path / "prefixed.xlsx", {"xl/worksheets/sheet1.xml": prefixed})
    assert inspect_workbook(path).formulas_without_value == {"Results": ("D3",)}
