"""Every state of a lab × measurand, decided once in the evaluation, walked through every output.

A hidden round (invented data) holds each state: scored with an acceptable, a warning and an action
signal, a censored false negative, a withheld score (``[[exclude]] scored = false``), a decimal slip, a
result entered in another unit and a lab that reported nothing; and a measurand whose u(x_pt) check fails.
The round is scored once by the command line; each test reads the files written (scores.csv, audit.csv,
the summary workbook and the lab workbooks with openpyxl, hidden sheets included, the lab pages, the
report, the strips and the figures' marks).
"""

from __future__ import annotations

import csv
import html
import re

import openpyxl
import pytest

from roundscore.cli import main
from roundscore.model.evaluation import STATES
from roundscore.model.signals import SIGNALS
from roundscore.pipeline import load_and_evaluate

from .conftest import ALL_FORMATS

TOML = """
[round]
id = "ST-1"
title = "States round"
scheme = "ST"
date = "2026-11-02"
results = "results.csv"
participants = "participants.csv"

[measurand.copper]
unit = "mg/kg"
sigma_pt = 0.5
decimals = 2

[measurand.zinc]
unit = "mg/kg"
sigma_pt = 0.05
decimals = 2

[[exclude]]
lab = "L05"
measurand = "copper"
reason = "sample thawed in transit"
scored = false
"""

#: Copper results (invented): L05 withheld, L09 warning, L10 action, L11 a censored false negative,
#: L12 a decimal slip (×1000), L13 entered in g/kg (0.01002 g/kg = 10.02 mg/kg), L06 in µg/kg (10050 µg/kg =
#: 10.05 mg/kg), L07 in ppm (a mass fraction of 1e-6: 9.97 ppm = 9.97 mg/kg), L14 reported nothing.
COPPER = {"L01": "10.03", "L02": "9.91", "L03": "10.12", "L04": "9.87", "L05": "11.3945", "L06": "10050",
          "L07": "9.97", "L08": "10.08", "L09": "11.2", "L10": "8.2", "L11": "<2", "L12": "10010",
          "L13": "0.01002"}
#: The units the labs entered other than the measurand's mg/kg, and the factor each is converted by (SI:
#: 1 g/kg = 1000 mg/kg, 1 µg/kg = 0.001 mg/kg; ppm as a mass fraction 1e-6 = 1 mg/kg).
UNITS = {"L13": ("g/kg", "1000"), "L06": ("µg/kg", "0.001"), "L07": ("ppm", "1")}
#: Zinc results spread widely against σ_pt = 0.05, so u(x_pt) > 0.3 σ_pt (the check fails).
ZINC = {f"L{i:02d}": f"{5 + 0.08 * ((i * 7) % 11 - 5):.2f}" for i in range(1, 14)}

#: What each lab's copper row is, and the signal it must carry everywhere.
EXPECTED = {"L01": ("scored", "acceptable"), "L09": ("scored", "warning"), "L10": ("scored", "action"),
            "L11": ("false-negative", "action"), "L05": ("withheld", "not-scored"),
            "L12": ("scored", "action"), "L13": ("scored", "acceptable"), "L14": ("not-reported", "not-scored")}
SCORE_VALUE_COLUMNS = ("z", "z_prime", "zeta", "en", "d", "d_percent")


@pytest.fixture(scope="module")
def scored(tmp_path_factory):
    root = tmp_path_factory.mktemp("states")
    folder = root / "round"
    folder.mkdir()
    (folder / "round.toml").write_text(TOML.lstrip(), encoding="utf-8")
    rows = ["lab,measurand,replicate,value,unit"]
    rows += [f"{lab},copper,1,{v},{UNITS[lab][0] if lab in UNITS else ''}" for lab, v in COPPER.items()]
    rows += [f"{lab},zinc,1,{v}," for lab, v in ZINC.items()]
    (folder / "results.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (folder / "participants.csv").write_text("lab,name,contact\n" + "".join(
        f"L{i:02d},Invented Lab {i},lab{i}@invented.example\n" for i in range(1, 15)), encoding="utf-8")
    out = root / "out"
    # every format: the PDFs are among the outputs whose states are walked (tests/conftest.py ALL_FORMATS)
    assert main(["score", str(folder), "--out", str(out), "--jobs", "1", "--quiet", "--formats", ALL_FORMATS]) == 0
    ev = load_and_evaluate(folder, jobs=1)
    return ev, out


def _csv(path):
    with open(path, encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def _copper(rows, lab):
    (row,) = [r for r in rows if r["lab"] == lab and r["measurand"] == "copper"]
    return row


def _withheld_numbers(ev):
    """The numbers the withheld row would show had it been scored (z, D, D %), computed here by hand."""
    x, x_pt, s = float(COPPER["L05"]), ev.measurands["copper"].assigned, ev.measurands["copper"].sigma_pt
    z = (x - x_pt) / s  # ISO 13528 §9.4
    return {"z": z, "d": x - x_pt, "d_percent": 100 * (x - x_pt) / x_pt}


def _texts(values):
    """The ways a person could see a number: 2, 3 and 4 decimals."""
    return {f"{v:.{n}f}" for v in values for n in (2, 3, 4)}


def _workbook_cells(path):
    wb = openpyxl.load_workbook(path)
    for ws in wb.worksheets:  # hidden and machine sheets included
        for row in ws.iter_rows(values_only=True):
            yield from (c for c in row if c is not None)


def test_the_evaluation_decides_one_state_per_row(scored):
    ev, _ = scored
    sc = ev.scores[ev.scores["measurand"] == "copper"].set_index("lab")
    for lab, (state, signal) in EXPECTED.items():
        assert sc.loc[lab, "state"] == state and sc.loc[lab, "signal"] == signal, lab
    assert set(ev.scores["state"]) <= set(STATES)
    # withheld means absent: no score value of any kind in the evaluation itself
    assert sc.loc["L05", list(SCORE_VALUE_COLUMNS)].isna().all() and sc.loc["L05", "rank"] != sc.loc["L05", "rank"]
    assert "withheld by the coordinator: sample thawed in transit" in sc.loc["L05", "note"]
    audit = ev.audit
    assert ((audit["lab"] == "L05") & audit["action"].str.contains("withheld")).any()


def test_scores_csv_carries_each_state_and_no_withheld_value(scored):
    ev, out = scored
    rows = _csv(out / "scores.csv")
    for lab, (_, signal) in EXPECTED.items():
        assert _copper(rows, lab)["signal"] == signal, lab
    l05 = _copper(rows, "L05")
    assert all(l05[c] == "" for c in SCORE_VALUE_COLUMNS)
    assert "not scored: withheld by the coordinator: sample thawed in transit" == l05["note"]
    assert "false negative" in _copper(rows, "L11")["note"] and _copper(rows, "L11")["result"] == "<2"
    assert "possible unit or decimal slip" in _copper(rows, "L12")["note"]
    assert _copper(rows, "L13")["note"] == "entered in g/kg, converted ×1000 to mg/kg"
    assert float(_copper(rows, "L13")["result"]) == pytest.approx(10.02)
    assert _copper(rows, "L14")["note"] == "not reported"
    text = (out / "scores.csv").read_text(encoding="utf-8")
    assert not _texts(_withheld_numbers(ev).values()) & set(re.findall(r"-?\d+\.\d+", text))


def test_audit_records_the_withholding_and_the_conversion(scored):
    _, out = scored
    audit = _csv(out / "audit.csv")
    assert any(r["lab"] == "L05" and "withheld" in r["action"] and r["reason"] == "sample thawed in transit"
               for r in audit)
    conv = {r["lab"]: r for r in audit if r["action"] == "unit converted"}
    assert set(conv) == set(UNITS) and {r["measurand"] for r in conv.values()} == {"copper"}
    for lab, (unit, factor) in UNITS.items():
        # the factors 1000, 0.001 and 1 are exact: said once (the full factor is added only when it has more digits)
        assert conv[lab]["reason"] == f"entered in {unit}, converted ×{factor} to mg/kg", conv[lab]
    rows = _csv(out / "scores.csv")
    assert float(_copper(rows, "L06")["result"]) == pytest.approx(10.05)
    assert float(_copper(rows, "L07")["result"]) == pytest.approx(9.97)
    assert _copper(rows, "L06")["note"] == "entered in µg/kg, converted ×0.001 to mg/kg"


@pytest.mark.parametrize("name", ["round-summary.xlsx", "labs/L05.xlsx"])
def test_workbooks_hold_no_withheld_value(scored, name):
    ev, out = scored
    hidden = _withheld_numbers(ev)
    for cell in _workbook_cells(out / name):
        if isinstance(cell, float):
            assert all(abs(cell - v) > 1e-9 for v in hidden.values()), (name, cell)
        elif isinstance(cell, str):
            assert not any(t in cell for t in _texts(hidden.values())), (name, cell)


def test_lab_workbook_rows_say_each_state(scored):
    _, out = scored
    for lab, (state, signal) in EXPECTED.items():
        wb = openpyxl.load_workbook(out / "labs" / f"{lab}.xlsx")
        ws = wb["Scores"]
        rows = [r for r in ws.iter_rows(values_only=True) if r and r[0] == "copper"]
        assert rows, lab
        text = " ".join(str(c) for c in rows[0] if c is not None)
        assert SIGNALS[signal].label() in text, (lab, text)
        if state == "withheld":
            assert "withheld by the coordinator: sample thawed in transit" in text
        if lab == "L13":
            assert "entered in g/kg, converted ×1000" in text
        # plain words for the lab: no coordinator finding heads its sheet
        heads = " ".join(str(c) for r in ws.iter_rows(max_row=14, values_only=True) for c in r if c is not None)
        assert "Check failed" not in heads and "zinc: the uncertainty of the assigned value is large" in heads


def _chart_rows(path, label_start):
    ws = openpyxl.load_workbook(path)["Chart data"]
    return [r for r in ws.iter_rows(values_only=True) if r and isinstance(r[0], str) and r[0].startswith(label_start)]


@pytest.mark.parametrize("name, label, key, absent", [("labs/L11.xlsx", "z", "copper", "—"),
                                                      ("round-summary.xlsx", "copper", "L11", "L05")])
def test_workbook_charts_draw_the_censored_false_negative(scored, name, label, key, absent):
    """The censored false negative is a bar at the axis' low end with its action signal, not left out; the
    withheld lab has no bar (one state, drawn the same way in every output)."""
    _, out = scored
    rows = _chart_rows(out / name, label)
    by_lab = {r[1]: r for r in rows}
    fn = by_lab.get(key)
    assert fn is not None, rows
    assert fn[2] == "false negative (censored result)"
    head = openpyxl.load_workbook(out / name)["Chart data"]
    heads = next(r for r in head.iter_rows(values_only=True) if r and r[0] == "Chart")
    limit = float(heads[3].split("±")[1].rstrip(")"))
    assert fn[3] == -limit  # drawn at the low end of the fixed axis
    # its action marker sits there too (the marker series named by the signal's word)
    words = {SIGNALS["action"].word(w) for w in ("signals", "iso-17043")}
    (action,) = [j for j, h in enumerate(heads) if h in words]
    assert fn[action] == -limit
    assert absent not in by_lab


def _lab_page(out, lab):
    return (out / "labs" / f"{lab}.html").read_text(encoding="utf-8")


def _row(page, measurand):
    start = page.index(f'<a href="#strip-{measurand}">')
    return page[start:page.index("</tr>", start)]


def _strip_mark(page, measurand):
    strip = page[page.index(f'id="strip-{measurand}"'):]
    strip = strip[:strip.index("</figure>")]
    return html.unescape(strip[strip.index('<g class="lab-mark"'):])


def test_lab_pages_agree_with_themselves(scored):
    _, out = scored
    for lab, (state, signal) in EXPECTED.items():
        page = _lab_page(out, lab)
        row = html.unescape(_row(page, "copper"))
        mark = _strip_mark(page, "copper")
        word = SIGNALS[signal].label()
        assert word in row, (lab, row)
        if state in ("scored", "false-negative"):
            assert word in mark, (lab, mark)  # the table and the standing strip say the same signal
        else:
            assert f"× {STATES[state]}" in mark, (lab, mark)
        if state == "false-negative":
            assert "false negative" in mark and "<rect" in mark  # the action square, at the axis' end
    page = _lab_page(out, "L13")
    assert "entered in g/kg, converted ×1000 to mg/kg" in html.unescape(_row(page, "copper"))


def test_withheld_value_appears_on_no_page(scored):
    ev, out = scored
    texts = _texts(_withheld_numbers(ev).values())
    for page in (_lab_page(out, "L05"), (out / "report.html").read_text(encoding="utf-8")):
        prose = re.sub(r"<svg.*?</svg>", "", page, flags=re.S)  # figures are checked by their marks below
        assert not [t for t in texts if t in prose]
        marks = " ".join(re.findall(r'<g class="lab-mark" aria-label="([^"]*)"', page))
        assert not [t for t in texts if t in marks]
    mark = _strip_mark(_lab_page(out, "L05"), "copper")
    assert "not scored: withheld" in mark and "<line" not in mark  # no score drawn on the axis
    # the ranked chart has no bar for the withheld lab, and the censored false negative is drawn
    from roundscore.outputs.figures import round_figures

    figs = round_figures(ev)
    marks = figs.scores["copper"].marks
    assert "L05" not in marks and "L14" not in marks and "L11" in marks


def test_report_keeps_the_technical_finding_and_the_same_signals(scored):
    _, out = scored
    report = html.unescape((out / "report.html").read_text(encoding="utf-8"))
    assert "Check failed: zinc: u(x_pt) exceeds 0.3 σ_pt" in report
    matrix = report[report.index('<section id="scores">'):report.index('<section id="audit">')]
    for lab, (_, signal) in EXPECTED.items():
        row = matrix[matrix.index(f"<tr><td>{lab}</td>"):]
        first = row[:row.index("</td>", row.index("</td>") + 1)]  # the lab's copper cell
        assert f'class="s-{signal}"' in first and SIGNALS[signal].symbol in first, (lab, first)
    for lab in EXPECTED:
        page = _lab_page(out, lab)
        assert "Check failed" not in page and "u(x_pt) exceeds" not in page
        assert "treat your z-score as indicative" in page


def _pdf_text(path):
    import io

    import pypdf

    text = "\n".join(p.extract_text() for p in pypdf.PdfReader(io.BytesIO(path.read_bytes())).pages)
    return " ".join(text.split())  # table cells wrap inside their column


def test_the_pdfs_say_each_state_and_hold_no_withheld_value(scored):
    # The PDF is drawn from the same Document as the page: each lab's state in words, the withheld value nowhere.
    ev, out = scored
    texts = _texts(_withheld_numbers(ev).values())
    for lab, (state, signal) in EXPECTED.items():
        text = _pdf_text(out / "labs" / f"{lab}.pdf")
        assert SIGNALS[signal].label() in text, (lab, state)
        assert f"Invented Lab {int(lab[1:])}" in text
    withheld = _pdf_text(out / "labs" / "L05.pdf")
    assert "withheld" in withheld and not [t for t in texts if t in withheld]
    assert "converted ×1000" in _pdf_text(out / "labs" / "L13.pdf")
    report = _pdf_text(out / "report.pdf")
    assert not [t for t in texts if t in report]


def test_history_and_the_circulation_list_follow_the_states(scored, tmp_path):
    """The archived round read back by ``history show``: the withheld row says so and carries no value, the
    censored false negative keeps its signal; circulation.csv lists every lab's own files."""
    ev, out = scored
    folder = ev.round.folder
    db = tmp_path / "archive.sqlite"
    assert main(["score", str(folder), "--out", str(tmp_path / "out"), "--jobs", "1", "--quiet", "--formats", "csv",
                 "--archive", str(db)]) == 0
    hidden = _withheld_numbers(ev)
    for lab in ("L05", "L11"):
        assert main(["history", "show", "--archive", str(db), "--lab", lab, "--out", str(tmp_path / lab)]) == 0
        ws = openpyxl.load_workbook(tmp_path / lab / "history.xlsx")["history"]
        rows = [r for r in ws.iter_rows(values_only=True) if r and "copper" in r]
        (row,) = rows
        text = " ".join(str(c) for c in row if c is not None)
        _, signal = EXPECTED[lab]
        assert SIGNALS[signal].label() in text, text
        if lab == "L05":
            assert "withheld by the coordinator" in text
            assert not any(isinstance(c, float) and any(abs(c - v) < 1e-9 for v in hidden.values()) for c in row)
        else:
            assert "false negative" in text
    listed = {r["lab"]: r["files"].split(";") for r in _csv(out / "circulation.csv")}
    assert set(listed) == {f"L{i:02d}" for i in range(1, 15)}
    assert listed["L05"] == ["labs/L05.xlsx", "labs/L05.html", "labs/L05.pdf"]
