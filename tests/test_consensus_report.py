"""Where the sensitivity table and the reported-uncertainty check show (roundscore.outputs.consensus_report and
the writers that carry them): the round report (HTML and PDF), a lab's page and PDF, its workbook's Scores sheet,
the summary workbook and the terminal.

The round is invented (tests/uncertainty_round.py; a skewed round for the sensitivity flag). Expected values
are the evaluation's own tables (the tool's contract: each output must show what the evaluation decided; the
decisions are checked against their definitions in test_uncertainty.py and test_consensus.py) and the numbers
formatted to the measurand's decimals (cu: 2, so uncertainties to 3).
"""

from __future__ import annotations

import html
import io
import re

import openpyxl
import pypdf
import pytest

from roundscore.commands.round_commands import summary_text
from roundscore.evaluation.uncertainty import counts
from roundscore.outputs.consensus_report import lab_uncertainty_section, sensitivity_section
from roundscore.outputs.document import Table
from roundscore.outputs.pdf import render_pdf
from roundscore.outputs.report import lab_document, report_document, report_parts
from roundscore.pipeline import load_and_evaluate, write_outputs

from . import uncertainty_round as ur
from .conftest import write_round

#: The labs looked at: u below u(x_pt), u above 1.5 σ_pt, a plausible u, no u, and the two joint readings.
LABS = ("S1", "B1", "L01", "N1", "J1", "J2")


@pytest.fixture(scope="module")
def scored(tmp_path_factory):
    """The uncertainty round evaluated and written (CSV, workbooks, HTML), and its shared page parts."""
    base = tmp_path_factory.mktemp("uncertainty-outputs")
    ev = load_and_evaluate(ur.write(base / "round"))
    out = base / "out"
    out.mkdir()
    write_outputs(ev, out, jobs=1, formats=("csv", "xlsx", "html"))
    return ev, out, report_parts(ev)


def _words(text: str) -> str:
    """Text with its white space collapsed (a PDF or HTML line break is a space)."""
    return re.sub(r"\s+", " ", text)


def _html_text(path) -> str:
    return _words(html.unescape(re.sub(r"<[^>]+>", " ", path.read_text(encoding="utf-8"))))


def _pdf_text(data: bytes) -> str:
    return _words(" ".join(p.extract_text() for p in pypdf.PdfReader(io.BytesIO(data)).pages))


def _rows(ev):
    return ev.extras["uncertainties"].set_index("lab")


def _scores_sheet(path) -> list[dict]:
    ws = openpyxl.load_workbook(path)["Scores"]
    rows = list(ws.iter_rows(values_only=True))
    top = next(i for i, r in enumerate(rows) if r and r[0] == "Measurand")
    return [dict(zip(rows[top], r)) for r in rows[top + 1:] if r and r[0] is not None]


@pytest.mark.parametrize("lab", LABS)
def test_the_lab_workbook_shows_its_u_and_the_reading_beside_zeta_and_en(scored, lab):
    ev, out, _ = scored
    want = _rows(ev).loc[lab]
    wb = openpyxl.load_workbook(out / "labs" / f"{lab}.xlsx")
    row = next(r for r in _scores_sheet(out / "labs" / f"{lab}.xlsx") if r["Measurand"] == "cu")
    head = list(row)
    assert head.index("ζ") < head.index("En") < head.index("Your u (standard uncertainty)") < head.index("Note")
    assert row["Your u: reading"] == want["reading"]
    assert (row["z and ζ read together"] or "") == want["joint"]
    assert row["Lowest plausible u"] == pytest.approx(want["u_min"])
    assert row["Highest plausible u"] == pytest.approx(1.5 * ur.SIGMA_PT)
    if lab == "N1":
        assert row["Your u (standard uncertainty)"] is None and row["Your u: reading"] == "no uncertainty reported"
    else:
        assert row["Your u (standard uncertainty)"] == pytest.approx(ur.LABS[lab][1])
    # zn: nobody gave u, so its cells stay empty
    zn = next(r for r in _scores_sheet(out / "labs" / f"{lab}.xlsx") if r["Measurand"] == "zn")
    assert zn["Your u: reading"] is None
    # u to the measurand's decimals plus one (cu: 2 decimals, uncertainties 3)
    ws = wb["Scores"]
    top = next(r for r in range(1, 60) if ws.cell(r, 1).value == "Measurand")
    col = [ws.cell(top, j).value for j in range(1, ws.max_column + 1)].index("Lowest plausible u") + 1
    assert ws.cell(top + 1, col).number_format == "0.000"


def test_the_planted_readings_are_the_ones_the_sheets_show(scored):
    ev, _, _ = scored
    got = _rows(ev)["reading"]
    assert [got[k] for k in ("S1", "B1", "L01", "N1")] == [
        "too small: below u(x_pt)", "too large: above 1.5 σ_pt", "plausible", "no uncertainty reported"]
    joint = _rows(ev)["joint"]
    assert joint["J1"] == "uncertainty probably understated" and joint["J2"] == "result may not be fit for purpose"


@pytest.mark.parametrize("lab", LABS)
def test_the_lab_page_and_pdf_say_the_same(scored, lab):
    ev, out, parts = scored
    want = _rows(ev).loc[lab]
    page = _html_text(out / "labs" / f"{lab}.html")
    pdf = _pdf_text(render_pdf(lab_document(ev, parts, lab), ev.round.paper))
    for text in (page, pdf):
        assert "Your reported uncertainties" in text and "ISO 13528:2015 §9.8, from memory" in text
        assert want["reading"][1:] in text  # its first letter is capitalised on the page
        assert f"{want['u_min']:.3f}" in text and "0.600" in text
        if want["advice"]:
            assert _words(want["advice"])[:60] in text
        if want["joint"]:
            assert f"z and ζ read together: {want['joint']}" in text
    if lab != "N1":
        zeta = ev.lab_scores(lab).set_index("measurand").loc["cu", "zeta"]
        assert f"{ur.LABS[lab][1]:.3f}" in page and f"{zeta:.2f}" in page  # the u beside its ζ


def test_the_lab_section_is_left_out_without_rows(scored):
    ev, _, parts = scored
    assert lab_uncertainty_section(ev, "C1", [], []) is None  # C1's only u is on a censored result
    titles = [getattr(b, "heading", None) and b.heading.text for b in lab_document(ev, parts, "C1").blocks]
    assert "Your reported uncertainties" not in titles


def test_the_report_counts_and_lists_the_flagged(scored):
    ev, out, _ = scored
    text = _html_text(out / "report.html")
    got = counts(ev.extras["uncertainties"])
    assert got is not None and (got.too_small, got.too_large) == (3, 2)
    assert got.line(capital=True) in text
    listed = _rows(ev)
    for lab in ("S1", "R1", "Z1", "B1", "J2", "J1"):  # too small, too large, or a joint reading
        assert listed.loc[lab, "reading"] in text
    # the table lists exactly those: the plausible ones without a joint reading are left out
    blocks = next(s for s in report_document(ev).blocks if s.heading.anchor == "scores").blocks
    at = next(i for i, b in enumerate(blocks) if getattr(b, "text", "") == "Laboratories' reported uncertainties")
    table = next(b for b in blocks[at:] if isinstance(b, Table))
    assert sorted(row[0].text for row in table.rows) == ["B1", "J1", "J2", "R1", "S1", "Z1"]


def test_the_summary_workbook_and_the_terminal_count_them(scored):
    ev, out, _ = scored
    got = counts(ev.extras["uncertainties"])
    wb = openpyxl.load_workbook(out / "round-summary.xlsx", read_only=True)
    assert "Uncertainties" in wb.sheetnames and "Consensus" in wb.sheetnames
    summary = [c for row in wb["Summary"].iter_rows(values_only=True) for c in row if isinstance(c, str)]
    assert got.line(capital=True, where="sheet Uncertainties") in summary
    heads = next(wb["Uncertainties"].iter_rows(values_only=True))
    assert heads[:6] == ("Lab", "Measurand", "Reported u", "Lowest plausible u", "Highest plausible u", "Verdict")
    assert "Sensitivity flag" in next(wb["Consensus"].iter_rows(values_only=True))
    assert got.line() in summary_text(ev)
    assert (out / "uncertainties.csv").read_text(encoding="utf-8").splitlines()[0] == (
        "lab,measurand,u,u_min,u_max,check,reading,joint,advice")


# ------------------------------------------------------------------------------------------ sensitivity table

SKEWED = {f"L{i}": [10.0 + 0.01 * i] * 2 for i in range(1, 11)} | {f"H{i}": [10.6 + 0.05 * i] * 2 for i in range(1, 6)}


@pytest.fixture(scope="module")
def skewed(tmp_path_factory):
    """A round whose tail of high results pulls Algorithm A away from the other estimates (flagged)."""
    lines = ["lab,measurand,replicate,value"] + [f"{lab},cu,{i},{v}" for lab, vals in SKEWED.items()
                                                 for i, v in enumerate(vals, start=1)]
    folder = write_round(tmp_path_factory.mktemp("skewed") / "round",
                         '[round]\nid="S1"\n[measurand.cu]\nunit="mg/kg"\nsigma_pt=0.2\ndecimals=2\n',
                         "\n".join(lines) + "\n")
    return load_and_evaluate(folder)


def _table(section) -> Table:
    return next(b for b in section.blocks if isinstance(b, Table))


def test_the_sensitivity_table_shows_each_estimate_the_chosen_and_why(skewed):
    ev = skewed
    c = ev.extras["consensus"]
    assert c["flag"].all()
    section = sensitivity_section(ev)
    table = _table(section)
    heads = [col.title for col in table.columns]
    assert heads == ["Measurand", "Estimate", "Value", "u", "Robust SD", "σ_pt", "Chosen", "n",
                     "Sensitivity flag"]
    assert len(table.rows) == len(c)
    for row, (_, want) in zip(table.rows, c.iterrows()):
        cells = [cell.text for cell in row]
        assert cells[1] == want["method"]
        assert cells[2] == f"{want['value']:.2f}"  # the measurand's decimals
        assert cells[3] == ("" if want["u"] != want["u"] else f"{want['u']:.3f}")  # one more for u
        assert cells[6] == ("chosen" if want["chosen"] else "") and cells[8] == "flagged"
    bullets = [b for b in section.blocks if type(b).__name__ == "Bullets"]
    assert bullets and bullets[0].items == (f"cu: {c['why'].iloc[0]}",)


def test_the_sensitivity_table_is_in_the_report_html_and_pdf(skewed, tmp_path):
    ev = skewed
    doc = report_document(ev)
    why = ev.extras["consensus"]["why"].iloc[0]
    assert any(getattr(s, "heading", None) and s.heading.anchor == "sensitivity" for s in doc.blocks)
    pdf = _pdf_text(render_pdf(doc, ev.round.paper))
    write_outputs(ev, tmp_path, jobs=1, formats=("html",))
    page = _html_text(tmp_path / "report.html")
    for text in (page, pdf):
        assert "Sensitivity of the assigned value to the estimator" in text and "Why flagged" in text
        assert _words(why)[:50] in text and "chosen: Algorithm A" in text
    assert why.startswith("Algorithm A and Q/Hampel")


def test_no_flag_says_so(scored):
    ev, _, _ = scored
    section = sensitivity_section(ev)
    assert not ev.extras["consensus"]["flag"].any()
    assert any("No measurand is flagged" in getattr(b, "text", "") for b in section.blocks)
    assert all(row[8].text == "no" for row in _table(section).rows)
