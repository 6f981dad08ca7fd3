"""Tests of roundscore.stats.trends and roundscore.history.rules (trend rules, combined scores, bias check) and of
roundscore.commands.history (the ``history add/show/check`` subcommands).

Series are hand-made so that the expected result follows from the rule's
published definition; the arithmetic is done in the comments.  Quantiles are
checked against scipy.stats and against printed table values (from memory,
as noted).
"""

from __future__ import annotations

import json
import math
import zipfile

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from roundscore.history import store as archive
from roundscore.history import rules as history
from roundscore.stats import trends
from roundscore.commands import history as cmd
from roundscore.errors import InputError, StatisticsError


# --------------------------------------------------------------------------- rule 1

@pytest.mark.parametrize("z, limit, expected", [
    ([0.5, 2.99, -3.0, 3.5], 3.0, [2, 3]),  # ISO 13528: |z| >= 3.0 is an action signal
    ([2.9, -2.999, 0.0], 3.0, []),
    ([0.99, -1.0, 1.2], trends.EN_ACTION_LIMIT, [1, 2]),  # ISO 13528: |En| >= 1.0
])
def test_rule1_action_signals(z, limit, expected):
    assert trends.action_signals(z, limit=limit).tolist() == expected


# --------------------------------------------------------------------------- rule 2

@pytest.mark.parametrize("z, expected", [
    ([2.1, 0.0, 2.5], [(2, "high")]),  # 2 of 3 above +2 (Western Electric zone A rule)
    ([2.5, 2.1], [(1, "high")]),  # two of the first two
    ([2.5, 2.5, 0.0], [(1, "high")]),  # fires where the pattern completes (itself beyond 2), not after
    ([2.5, 1.0, 1.0, 2.5, 2.5], [(4, "high")]),  # the 4th alone is 3 from the 1st; the 5th completes it
    ([-2.2, 1.0, -2.4], [(2, "low")]),
    ([0.0, 2.6, 2.7, 2.8], [(2, "high"), (3, "high")]),
    ([2.5, 0.0, 0.0, 2.5], []),  # 3 apart: not within three consecutive points
    ([2.0, 2.0, 2.0], []),  # zone A is beyond 2, not at 2
    ([2.5, -2.5], []),  # opposite sides
    ([2.5, -2.5, 1.0], []),
    ([3.5], []),
])
def test_rule2_two_of_three(z, expected):
    assert trends.two_of_three(z) == expected


# --------------------------------------------------------------------------- rule 3

@pytest.mark.parametrize("z, expected", [
    ([0.1] * 9, [(0, 8, "high")]),  # nine in a row on one side (Nelson 1984 test 2)
    ([0.1] * 8, []),
    ([-0.4] * 4 + [0.0] + [-0.4] * 5, []),  # an exact zero ends the run
    ([1.0, -0.2] + [-0.3] * 10, [(1, 11, "low")]),
    ([0.5] * 9 + [-0.5] * 9, [(0, 8, "high"), (9, 17, "low")]),
])
def test_rule3_same_side_runs(z, expected):
    assert trends.same_side_runs(z) == expected


# --------------------------------------------------------------------------- rule 4

def test_cusum_recursion_by_hand():
    # Page (1954) tabular CUSUM, k = 0.5:
    # C+ = 0.5, 2.0, 0.5, 0.5 ; C- = 0, 0, 0.5, 0 (worked by hand from the definition)
    res = trends.cusum([1.0, 2.0, -1.0, 0.5])
    assert res.upper.tolist() == [0.5, 2.0, 0.5, 0.5]
    assert res.lower.tolist() == [0.0, 0.0, 0.5, 0.0]
    assert res.alarms == () and (res.k, res.h) == (0.5, 4.0)


@pytest.mark.parametrize("shift, side, after", [
    # in-control part exactly 0 so C stays 0; after the shift C grows by |shift| - k per point
    (2.0, "high", 3),  # 1.5, 3.0, 4.5 > 4: third point (hand arithmetic)
    (1.0, "high", 9),  # 0.5 per point: 8 points reach exactly 4.0 (not > h), the 9th alarms
    (-1.5, "low", 5),  # 1.0 per point: 5.0 > 4 at the fifth point
])
def test_cusum_detects_a_known_shift_not_before(shift, side, after):
    z = [0.0] * 10 + [shift] * 12
    res = trends.cusum(z)
    first, first_side = res.alarms[0]
    assert first == 10 + after - 1 and first_side == side
    assert all(p >= 10 for p, _ in res.alarms)


def test_cusum_restarts_after_an_alarm_and_ignores_noise():
    res = trends.cusum([2.0] * 9)  # alarms every third point after a restart at 0
    assert [p for p, _ in res.alarms] == [2, 5, 8]
    assert trends.cusum([1.0, -1.0] * 20).alarms == ()  # C+ alternates 0.5, 0: never > 4
    held = trends.cusum([2.0] * 6, restart=False)
    assert [p for p, _ in held.alarms] == [2, 3, 4, 5]


# --------------------------------------------------------------------------- combined scores

def test_combined_scores_arithmetic_and_chi2_quantiles():
    c = trends.combined_scores([1.0, -1.0, 2.0, 0.0])
    # RSZ = 2 / sqrt(4) = 1; SSZ = 1 + 1 + 4 + 0 = 6; mean |z| = 4 / 4 (hand arithmetic)
    assert (c.n, c.rsz, c.ssz, c.mean_abs_z) == (4, 1.0, 6.0, 1.0)
    assert c.ssz_p_value == pytest.approx(stats.chi2.sf(6.0, 4), rel=1e-12)  # scipy reference
    assert c.rsz_p_value == pytest.approx(2 * stats.norm.sf(1.0), rel=1e-12)
    assert "IUPAC" in c.caution and "hide a single bad result" in c.caution


@pytest.mark.parametrize("n, crit5, crit1", [
    (10, 18.307, 23.209),  # chi-squared upper points, printed tables (from memory)
    (5, 11.070, 15.086),
    (1, 3.841, 6.635),
])
def test_ssz_critical_values_match_tables_and_scipy(n, crit5, crit1):
    c = trends.combined_scores(np.full(n, 0.3))
    assert c.ssz_critical_5 == pytest.approx(crit5, abs=6e-4)
    assert c.ssz_critical_1 == pytest.approx(crit1, abs=6e-4)
    assert c.ssz_critical_5 == pytest.approx(stats.chi2.ppf(0.95, n), rel=1e-12)


# --------------------------------------------------------------------------- bias check

def test_bias_check_by_hand_and_scipy():
    z = [0.5, 1.0, 1.5, 1.0, 1.0]
    b = trends.bias_check(z)
    # mean 1, s = sqrt(0.5 / 4) = 0.35355, t = 1 / (s / sqrt 5) = 6.3246 (hand arithmetic)
    assert b.t == pytest.approx(1.0 / (math.sqrt(0.125) / math.sqrt(5)), rel=1e-12)
    assert b.df == 4 and b.mean_z == 1.0
    assert b.p_value == pytest.approx(2 * stats.t.sf(b.t, 4), rel=1e-10)  # scipy reference
    half = 2.776 * math.sqrt(0.125) / math.sqrt(5)  # t(0.975, 4) = 2.776, printed tables (from memory)
    assert (b.ci_low, b.ci_high) == pytest.approx((1 - half, 1 + half), abs=2e-4)
    assert b.biased and "differs from 0" in b.conclusion and "t = 6.32" in b.conclusion


def test_bias_check_no_evidence_and_refusals():
    b = trends.bias_check([1.0, -1.0, 0.5, -0.5])
    assert not b.biased and b.t == 0.0 and b.p_value == pytest.approx(1.0)
    assert "no evidence" in b.conclusion
    with pytest.raises(StatisticsError, match="at least 3"):
        trends.bias_check([1.0, 2.0])
    with pytest.raises(StatisticsError, match=r"nearly\) all equal"):
        trends.bias_check([1.2, 1.2, 1.2])
    with pytest.raises(StatisticsError, match="missing or infinite"):
        trends.cusum([1.0, float("nan")])


# --------------------------------------------------------------------------- series

def labels(n):
    return [f"R{i + 1}" for i in range(n)], [f"2020-{i // 28 + 1:02d}-{i % 28 + 1:02d}"
                                             for i in range(n)]


@pytest.mark.parametrize("window, reported", [(8, False), (12, True), (None, True)])
def test_window_limits_reported_findings(window, reported):
    z = [3.4] + [0.2, -0.3] * 5 + [0.1]  # one action signal at the oldest of 12 rounds
    r, d = labels(len(z))
    s = history.check_series(z, rounds=r, dates=d, window=window)
    assert s.fired == reported
    if reported:
        assert s.findings[0].rule == 1 and s.findings[0].rounds == ("R1",)
    if reported:  # combined scores only for a series with a finding (README, combined scores)
        assert s.combined.n == (len(z) if window is None else min(window, len(z)))
    else:
        assert s.combined is None


def test_every_rule_named_with_its_source():
    z = [0.3] * 6 + [2.4, 1.0, 2.6, 3.1]  # 10 positive scores, 2 of 3 above 2, one >= 3
    r, d = labels(len(z))
    s = history.check_series(z, rounds=r, dates=d, window=None)
    rules = {f.rule for f in s.findings}
    assert rules == {1, 2, 3, 4}
    by_rule = {f.rule: f for f in s.findings}
    assert by_rule[1].rounds == ("R10",)
    assert by_rule[2].rounds == ("R9", "R10") and by_rule[2].side == "high"
    assert by_rule[3].positions == (8, 9)  # the 9th and 10th positive scores
    assert "Western Electric" in by_rule[2].source and "Nelson" in by_rule[3].source
    assert "Page" in by_rule[4].source and "Montgomery" in by_rule[4].source
    json.dumps(s.to_dict())  # JSON-ready


def test_check_history_families_and_unscored_rounds():
    rows = []
    for k, (z, en, sig) in enumerate([(0.5, 0.4, "acceptable"), (np.nan, np.nan, "not-scored"),
                                      (1.0, 1.2, "action"), (0.2, 0.3, "acceptable")]):
        rows.append(dict(scheme="AQ", lab="L01", measurand="lead", round=f"R{k}",
                         round_date=f"2024-0{k + 1}-01", score="z", score_value=z, signal=sig))
        rows.append(dict(scheme="CAL", lab="L01", measurand="mass", round=f"R{k}",
                         round_date=f"2024-0{k + 1}-01", score="en", score_value=en, signal=sig))
    report = history.check_history(pd.DataFrame(rows), window=None)
    by = {(s.scheme, s.family): s for s in report.series}
    assert by[("AQ", "z-like")].rounds == ("R0", "R2", "R3")  # the unscored round is left out
    en = by[("CAL", "en")]
    assert [f.rule for f in en.findings] == [1] and en.findings[0].rounds == ("R2",)
    assert en.cusum is None and en.combined is None and en.notes
    assert report.fired
    bad = pd.DataFrame(rows).assign(score="d-percent")
    with pytest.raises(InputError, match="unknown score names"):
        history.check_history(bad)


# --------------------------------------------------------------------------- commands

COLS = list(archive.SCORE_COLUMNS)


def invented_rounds(db, z_by_round, *, lab="L07", other=0.1, note="'=2+2"):
    """Store invented rounds: lab ``lab`` has the given z for 'lead'; a second lab is quiet."""
    for k, z in enumerate(z_by_round):
        rows = []
        for who, value in ((lab, z), ("L99", other * (-1) ** k)):
            sig = "acceptable" if abs(value) <= 2 else ("warning" if abs(value) < 3 else "action")
            rows.append(dict(lab=who, measurand="lead", unit="ug/L", n_replicates=2,
                             result=5.0 + 0.5 * value, assigned=5.0, u_assigned=0.05,
                             sigma_pt=0.5, z=value, z_prime=value, zeta=value, en=np.nan,
                             d=0.5 * value, d_percent=10.0 * value, signal=sig, note=note,
                             score="z"))
        archive.store_round(db, scheme="AQ", round_id=f"2023-{k + 1}",
                            round_date=f"2023-{k + 1:02d}-10", title="Invented", settings={},
                            statistics=pd.DataFrame({"measurand": ["lead"]}),
                            scores=pd.DataFrame(rows))


def run_cli(argv, capsys):
    code = cmd.main(argv)
    return code, capsys.readouterr()


@pytest.mark.parametrize("z, code", [
    ([0.4, -0.2, 0.9, 3.3, 0.1], 1),  # an action signal in the window
    ([0.4, -0.2, 0.9, -0.5, 0.1], 0),  # nothing
])
def test_check_exit_codes_and_json(tmp_path, capsys, z, code):
    db = tmp_path / "a.sqlite"
    invented_rounds(db, z)
    got, out = run_cli(["history", "check", "--archive", str(db), "--lab", "L07"], capsys)
    assert got == code
    assert "does not replace" in out.out
    if code:
        assert "rule 1 (action signal)" in out.out and "2023-4" in out.out
    got, out = run_cli(["history", "check", "--archive", str(db), "--json"], capsys)
    body = json.loads(out.out)
    assert got == code and body["fired"] == bool(code)
    assert {s["lab"] for s in body["series"]} == {"L07", "L99"}


def test_check_and_show_errors_exit_2(tmp_path, capsys):
    db = tmp_path / "a.sqlite"
    got, out = run_cli(["history", "check", "--archive", str(db)], capsys)
    assert got == 2 and "no archive at" in out.err
    invented_rounds(db, [0.1, 0.2])
    got, out = run_cli(["history", "show", "--archive", str(db), "--lab", "L00"], capsys)
    assert got == 2 and "no archived scores match lab 'L00'" in out.err and "L07" in out.err


def test_add_reports_each_file(tmp_path, capsys):
    db = tmp_path / "lab.sqlite"
    frame = pd.DataFrame([dict(lab=lab, measurand="lead", unit="ug/L", n_replicates=1,
                               result=5.1, assigned=5.0, u_assigned=0.05, sigma_pt=0.5, z=0.2,
                               z_prime=0.2 / np.hypot(1.0, 0.1), zeta=0.3, en="", d=0.1,
                               d_percent=2.0,
                               signal="acceptable", note="", score="z", scheme="AQ",
                               round="2024-1", round_date="2024-02-02") for lab in ("L07", "L99")],
                         columns=COLS)
    good = tmp_path / "scores.csv"
    frame.to_csv(good, index=False)
    changed = tmp_path / "reissued.csv"
    frame.assign(result=5.2, z=0.4, z_prime=0.4 / np.hypot(1.0, 0.1), d=0.2,
                 d_percent=4.0).to_csv(changed, index=False)  # a reissue, consistent in itself
    got, out = run_cli(["history", "add", str(good), "--lab", "L07", "--archive", str(db)],
                       capsys)
    assert got == 0 and "added: lab 'L07'" in out.out
    got, out = run_cli(["history", "add", str(good), str(changed), str(tmp_path / "none.csv"),
                        "--lab", "L07", "--archive", str(db)], capsys)
    lines = out.out.splitlines()
    assert got == 2
    assert "unchanged" in lines[0] and "nothing changed" in lines[0]
    assert "reissued.csv: refused:" in lines[1] and "--replace" in lines[1]
    assert "none.csv: refused: file not found" in lines[2]
    got, out = run_cli(["history", "add", str(changed), "--lab", "L07", "--replace",
                        "--archive", str(db)], capsys)
    assert got == 0 and "replaced" in out.out


def test_show_table_and_outputs(tmp_path, capsys):
    db = tmp_path / "a.sqlite"
    invented_rounds(db, [0.4, 2.4, 3.3, -0.5])
    out_dir = tmp_path / "out"
    got, out = run_cli(["history", "show", "--archive", str(db), "--lab", "L07",
                        "--out", str(out_dir)], capsys)
    assert got == 0
    # the symbols and words of every other output (roundscore.outputs.look)
    assert "▲ warning signal" in out.out and "■ action signal" in out.out and "● acceptable" in out.out
    assert "signals: ● acceptable, ▲ warning signal, ■ action signal, × not scored" in out.out
    assert "+3.30" in out.out and "does not replace" in out.out
    assert sorted(p.name for p in out_dir.iterdir()) == [".roundscore-output", "history.png", "history.svg",
                                                         "history.xlsx"]
    with zipfile.ZipFile(out_dir / "history.xlsx") as book:
        names = book.namelist()
        chart = book.read("xl/charts/chart1.xml").decode()
    assert "xl/charts/chart1.xml" in names and "<c:lineChart>" in chart
    assert "009E73" in chart and "D55E00" in chart and "triangle" in chart
    # the round ids are the categories, labelled under the plot; the rules firing at 2023-3 (|z| = 3.3 ≥ 3,
    # ISO 13528; 2.4 and 3.3 two of three beyond 2, Western Electric zone A) are ringed and named there
    assert "<c:v>2023-3</c:v>" in chart and '<c:tickLblPos val="low"/>' in chart
    assert "trend rule fired" in chart and "R1 R2 R4" in chart
    import openpyxl

    sheet = openpyxl.load_workbook(out_dir / "history.xlsx")["history"]
    assert sheet.cell(row=1, column=1).value == "Laboratory L07"  # the head names the lab, scheme, dates
    assert sheet.cell(row=2, column=1).value.startswith("Scheme ")
    assert "produced " in sheet.cell(row=4, column=1).value
    top = next(r for r in range(1, 10) if sheet.cell(row=r, column=1).value == "Round date")
    header = [c.value for c in sheet[top]]
    note = sheet.cell(row=top + 1, column=header.index("Note") + 1)  # display headings (outputs/headings.py)
    rules = [sheet.cell(row=top + 1 + k, column=header.index("Trend rules fired") + 1).value for k in range(4)]
    assert rules == [None, None, "1, 2, 4", None]  # in the table too; CUSUM z - 0.5: 0, 1.9, 4.7 > h = 4 (Page 1954)
    assert note.value == "=2+2" and note.data_type == "s"  # text, never a formula
    svg = (out_dir / "history.svg").read_text().lower()
    for colour in ("#009e73", "#e69f00", "#d55e00"):  # Okabe-Ito, one per signal shown
        assert colour in svg
    png = (out_dir / "history.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    got, _again = run_cli(["history", "show", "--archive", str(db), "--lab", "L07",
                          "--out", str(out_dir)], capsys)
    assert (out_dir / "history.svg").read_text().lower() == svg  # deterministic


def test_register_sets_func_for_every_subcommand():
    import argparse

    parser = argparse.ArgumentParser()
    cmd.register(parser.add_subparsers(dest="command"))
    for argv in (["history", "add", "x.csv"], ["history", "show", "--lab", "L1"],
                 ["history", "check", "--window", "3"]):
        args = parser.parse_args(argv)
        assert args.func in (cmd.run_add, cmd.run_show, cmd.run_check)
    with pytest.raises(SystemExit):
        parser.parse_args(["history", "check", "--window", "0"])
