"""A lab's audit pack (roundscore.history.pack, pack_workbook) and ``history report``, on the small invented rounds
of tests/history_rounds.py (planted drift on L01's lead, one action signal on its nitrate, a soil scheme under
code S-17 of the same laboratory).

Expected values come from outside the tool: the findings from the rules' published definitions (worked out in
tests/history_rounds.py); the per-round counts from a count made here from each round's scores.csv; RSZ, SSZ and
the bias t from scipy.stats (RSZ = Σz/√n and SSZ = Σz² as the IUPAC harmonized protocol, Thompson, Ellison, Wood
2006, defines them; scipy.stats.chi2 and ttest_1samp). The PDF's text is read with pypdf.
"""

from __future__ import annotations

import csv
import math
import re
import shutil

import openpyxl
import pytest
from pypdf import PdfReader
from scipy import stats

from roundscore.errors import RoundscoreError
from roundscore.history import pack as packs

from . import history_rounds
from .history_rounds import WATER_ROUNDS, SOIL_ROUNDS, WATER_Z, run_cli

OTHER_CODES = ("L02", "L03", "L04", "L05", "S-02", "S-03")


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    base = tmp_path_factory.mktemp("pack")
    built = history_rounds.build(base)
    code, _, err = run_cli("history", "note", "--archive", built.archive, "--lab", "L01", "--round", "AQ-25-04",
                           "--measurand", "nitrate", "--status", "closed", "--by", "J. Okafor",
                           "--cause", "Expired nitrate stock solution", "--action", "New stock; SOP-12 revised",
                           "--date", "2025-05-02")
    assert code == 0, err
    out = base / "pack"
    code, text, err = run_cli("history", "report", "--lab", "L01", "--archive", built.archive, "--out", out)
    assert code == 1, err  # three findings are still open
    return built, out, text


def test_the_pack_lists_the_findings_in_order_with_the_closed_record_beside_its_signal(small):
    built, _, text = small
    pack = packs.lab_pack(built.archive, "L01")
    assert pack.identity.name == "Riverside Water Laboratory"
    assert pack.identity.codes == (("AQ", "L01"), ("SOIL", "S-17"))
    table = packs.findings_table(pack)
    rows = [[c.text for c in row] for row in table.rows]
    # round-date order: the action signal (z = 3.6 ≥ 3, ISO 13528), the CUSUM alarm at round 8 (sum 4.9 > 4), the
    # run of nine at round 9 (Nelson test 2), the soil warning (|z| = 2.3 > 2)
    assert [r[0] for r in rows] == ["AQ-25-04", "AQ-25-08", "AQ-25-09", "SL-25-B"]
    assert rows[0][6] == "■ action signal" and rows[0][5] == "z +3.60"
    assert rows[0][8:] == ["closed", "Cause: Expired nitrate stock solution; Action: New stock; SOP-12 revised",
                           "J. Okafor, 2025-05-02"]
    assert "rule 4 (CUSUM)" in rows[1][7] and "rule 3" in rows[2][7]
    assert [r[8] for r in rows[1:]] == ["no record"] * 3
    assert "4 findings, 3 open" in text


def test_the_charts_mark_the_findings_where_they_fired(small):
    _, out, _ = small
    book = openpyxl.load_workbook(out / "pack.xlsx")
    assert book.sheetnames == ["findings", "rounds", "measurands", "charts", "chart_data"]
    data = [[c.value for c in row] for row in book["chart_data"].iter_rows()]
    blocks = {row[0]: i for i, row in enumerate(data) if row[0] in ("AQ / lead", "AQ / nitrate", "SOIL / copper")}
    head = data[blocks["AQ / lead"] + 1]
    rule = head.index("rule")
    lead = data[blocks["AQ / lead"] + 2: blocks["AQ / lead"] + 11]
    assert [r[0] for r in lead] == [r for r, _ in WATER_ROUNDS]  # the round ids, in order, on the axis
    assert [r[0] for r in lead if r[rule] is not None] == ["AQ-25-08", "AQ-25-09"]
    assert [r[1] for r in lead] == pytest.approx(WATER_Z[("L01", "lead")])
    nitrate = data[blocks["AQ / nitrate"] + 2: blocks["AQ / nitrate"] + 11]
    assert [r[0] for r in nitrate if r[rule] is not None] == ["AQ-25-04"]
    assert [r[0] for r in nitrate if r[head.index("action")] is not None] == ["AQ-25-04"]
    html = (out / "pack.html").read_text(encoding="utf-8")
    assert html.count("<svg") == 3 and "R4" in html and "R3" in html and "AQ-25-09" in html
    # each chart's name is given once, by the page (its figure's title), not again inside the drawing
    figures = [b for b in packs.pack_document(packs.lab_pack(small[0].archive, "L01")).blocks
               for b in getattr(b, "blocks", ()) if getattr(b, "svg", None)]
    assert [f.title for f in figures] == ["AQ / lead", "AQ / nitrate", "SOIL / copper"]
    drawn = [" ".join(re.findall(r"<text\b[^>]*>([^<]*)</text>", f.svg)) for f in figures]  # text on the canvas
    assert all(f.title not in text for f, text in zip(figures, drawn)) and all("AQ-25-09" in t for t in drawn[:2])


def test_per_round_counts_match_a_count_of_scores_csv(small):
    built, _, _ = small
    pack = packs.lab_pack(built.archive, "L01")
    by_round = {r.round_id: r for r in pack.rounds}
    assert sorted(by_round) == sorted([r for r, _ in WATER_ROUNDS] + [r for r, _ in SOIL_ROUNDS])
    for round_id, path in built.scores.items():
        with open(path, encoding="utf-8", newline="") as f:
            mine = [row["signal"] for row in csv.DictReader(f) if row["lab"] in ("L01", "S-17")]
        got = by_round[round_id]
        assert got.counts == {s: mine.count(s) for s in ("acceptable", "warning", "action", "not-scored")}
        scored = len([s for s in mine if s != "not-scored"])
        assert got.scored == scored
        assert got.percent_acceptable == pytest.approx(100.0 * mine.count("acceptable") / scored)
    assert by_round["AQ-25-04"].percent_acceptable == 50.0  # one of L01's two scores an action signal


def test_rsz_ssz_and_the_bias_t_agree_with_scipy(small):
    built, _, _ = small
    pack = packs.lab_pack(built.archive, "L01")
    [lead] = [m for m in pack.measurands if (m.scheme, m.measurand) == ("AQ", "lead")]
    z = WATER_Z[("L01", "lead")]
    n = len(z)
    assert lead.n == n and lead.mean == pytest.approx(sum(z) / n)
    assert lead.sd == pytest.approx(stats.tstd(z))  # scipy: the sample SD (n - 1)
    assert lead.combined.rsz == pytest.approx(sum(z) / math.sqrt(n))  # harmonized protocol: RSZ = Σz/√n
    assert lead.combined.ssz == pytest.approx(sum(v * v for v in z))
    assert lead.combined.ssz_p_value == pytest.approx(stats.chi2.sf(sum(v * v for v in z), n))
    t = stats.ttest_1samp(z, 0.0)
    assert lead.bias.t == pytest.approx(t.statistic) and lead.bias.p_value == pytest.approx(t.pvalue)
    assert lead.bias.biased  # a drift above 0: the mean z differs from 0 at α = 0.05 (p from scipy)


def test_the_pdf_names_the_lab_every_round_and_every_open_finding_and_no_other_lab(small):
    _, out, _ = small
    text = "\n".join(page.extract_text() for page in PdfReader(out / "pack.pdf").pages)
    flat = " ".join(text.split())
    assert "Riverside Water Laboratory" in flat and "L01" in flat and "S-17" in flat
    for round_id, _ in WATER_ROUNDS + SOIL_ROUNDS:
        assert round_id in flat, round_id
    assert flat.count("no record") == 3  # the open findings: AQ-25-08, AQ-25-09 lead, SL-25-B copper
    assert "does not replace" in flat and "IUPAC" in flat
    for code in OTHER_CODES:
        assert code not in flat, code


def test_the_pack_never_writes_into_a_users_folder_and_refuses_an_unknown_lab(small, tmp_path):
    built, _, _ = small
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("keep", encoding="utf-8")
    code, _, err = run_cli("history", "report", "--lab", "L01", "--archive", built.archive, "--out", mine,
                           "--formats", "html")
    assert code == 2 and (mine / "notes.txt").read_text(encoding="utf-8") == "keep"
    assert sorted(p.name for p in mine.iterdir()) == ["notes.txt"]
    db = shutil.copy(built.archive, tmp_path / "a.sqlite")
    code, _, err = run_cli("history", "report", "--lab", "L01", "--archive", db, "--out", tmp_path,
                           "--formats", "html")
    assert code == 2 and "Traceback" not in err
    code, _, err = run_cli("history", "report", "--lab", "Nobody", "--archive", db, "--out", tmp_path / "p",
                           "--formats", "html")
    assert code == 2 and "no archived scores match lab 'Nobody'" in err
    with pytest.raises(RoundscoreError):
        packs.lab_pack(db, "L01", since="2026-01-01")
    code, _, _ = run_cli("history", "report", "--lab", "L02", "--archive", db, "--out", tmp_path / "l02",
                         "--formats", "html,xlsx", "--scheme", "AQ")
    assert code == 1 and sorted(p.name for p in (tmp_path / "l02").iterdir() if not p.name.startswith(".")) == \
        ["pack.html", "pack.xlsx"]
