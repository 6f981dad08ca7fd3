"""How the workbooks print: page set-up read from the sheet XML (pageSetup, rowBreaks, headerFooter, definedNames).

Source of expected values: the OOXML spreadsheet schema (ECMA-376 Part 1, §18.3.1.63 pageSetup: paperSize 9 = A4,
1 = Letter; §18.2.5 definedName _xlnm.Print_Area / _xlnm.Print_Titles; §18.3.1.46 headerFooter codes &P, &N);
otherwise the tool's own contract (invented demo round).
"""

from __future__ import annotations

import dataclasses
import re
import zipfile

import pytest

from roundscore.outputs.lab_workbook import write_lab_workbook
from roundscore.outputs.payloads import lab_payload
from roundscore.outputs.workbook import write_summary
from roundscore.support.sheetprint import Chart, chart_breaks, header_text, scale_for


def _sheets(path) -> dict[str, str]:
    """Sheet name → its XML, and "workbook" → workbook.xml."""
    with zipfile.ZipFile(path) as z:
        book = z.read("xl/workbook.xml").decode()
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
        target = dict(re.findall(r'Id="(rId\d+)"[^>]*Target="([^"]+)"', rels))
        target.update({k: v for v, k in re.findall(r'Target="([^"]+)"[^>]*Id="(rId\d+)"', rels)})
        out = {"workbook": book}
        for name, rid in re.findall(r'<sheet name="([^"]+)" sheetId="\d+"(?: state="hidden")? r:id="(rId\d+)"', book):
            out[name] = z.read("xl/" + target[rid]).decode()
    return out


def _defined(book: str, kind: str) -> dict[int, str]:
    return {int(i): ref for i, ref in re.findall(rf'<definedName name="_xlnm.{kind}" localSheetId="(\d+)">([^<]+)<',
                                                  book)}


def _names(book: str) -> list[str]:
    return re.findall(r'<sheet name="([^"]+)"', book)


@pytest.fixture
def demo(scored_demo):
    return scored_demo.evaluation, scored_demo.out


def test_summary_sheets_print_one_page_wide_with_titles_area_and_header(demo):
    ev, out = demo
    sheets = _sheets(out / "round-summary.xlsx")
    book = sheets["workbook"]
    names = _names(book)
    areas, titles = _defined(book, "Print_Area"), _defined(book, "Print_Titles")
    for i, name in enumerate(names):
        xml = sheets[name]
        if 'state="hidden"' in re.search(rf'<sheet name="{re.escape(name)}"[^>]*>', book).group(0):
            continue
        setup = re.search(r"<pageSetup [^>]*/>", xml).group(0)
        assert 'paperSize="9"' in setup, name
        assert i in areas, f"{name} has no print area"
        assert ev.round.id in re.search(r"<oddHeader>(.*?)</oddHeader>", xml).group(1)
        assert "&amp;P of &amp;N" in re.search(r"<oddFooter>(.*?)</oddFooter>", xml).group(1)
        if name == "Charts":  # an explicit scale and a page break between charts, so none is split
            assert "<rowBreaks" in xml and "fitToPage" not in xml  # (scale 100 is the default: left out)
        else:  # fitted one page wide, any number of pages tall
            assert '<pageSetUpPr fitToPage="1"/>' in xml and 'fitToHeight="0"' in setup
    assert titles[names.index("Scores")].endswith("$1:$1")


def test_lab_sheet_header_names_the_lab_and_letter_paper_is_taken(demo, tmp_path):
    ev, out = demo
    sheets = _sheets(out / "labs" / "K19.xlsx")
    scores = sheets["Scores"]
    header = re.search(r"<oddHeader>(.*?)</oddHeader>", scores).group(1)
    assert ev.round.id in header and "Laboratory K19" in header
    assert 'paperSize="9"' in scores
    payload = lab_payload(ev, "K19")
    letter = dataclasses.replace(payload, round=dataclasses.replace(payload.round, paper="letter"))
    write_lab_workbook(letter, tmp_path / "K19.xlsx")
    again = _sheets(tmp_path / "K19.xlsx")
    assert 'paperSize="1"' in again["Scores"] and 'paperSize="9"' not in again["Scores"]
    lettered = dataclasses.replace(ev, round=dataclasses.replace(ev.round, paper="letter"))
    write_summary(lettered, tmp_path / "summary.xlsx")
    assert all('paperSize="1"' in x for k, x in _sheets(tmp_path / "summary.xlsx").items() if k != "workbook")


def test_chart_breaks_keep_charts_whole():
    # landscape A4 (595.3 pt tall, 0.6 in margins: 478 pt usable) holds two 280-px charts (210 pt) every 15 rows
    # (225 pt) but not three: a break before the third and the fifth
    charts = [Chart(15 * k, 280) for k in range(5)]
    assert chart_breaks(charts, first_row=0, scale=100, paper="a4", landscape=True) == [30, 60]
    # at half scale a page holds twice the rows: four charts
    assert chart_breaks(charts, first_row=0, scale=50, paper="a4", landscape=True) == [60]
    # a chart below a table: one crossing the foot of the first page moves on; one below the page's foot starts
    # the next page by itself
    assert chart_breaks([Chart(26, 280)], first_row=0, scale=100, paper="a4", landscape=True) == [26]
    assert chart_breaks([Chart(34, 280)], first_row=0, scale=100, paper="a4", landscape=True) == []
    assert chart_breaks([Chart(26, 280)], first_row=0, scale=100, paper="a4", landscape=True,
                        row_points={0: 200.0}) == [26]
    # a chart taller than a page is not moved (it would not fit anywhere): no break before it
    assert chart_breaks([Chart(0, 2000)], first_row=0, scale=100, paper="letter", landscape=False) == []


def test_scale_and_header_text():
    assert scale_for(100, "letter", True) == 100
    assert scale_for(2000, "a4", True) == 36  # 770 pt printable × 0.94 / 2000 pt = 0.362
    assert header_text("R&D-1", "Laboratory L&1", "x") == "&LR&&D-1&CLaboratory L&&1&Rx"
    assert header_text(right="y") == "&Ry"
