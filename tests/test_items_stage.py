"""The item-check stage (roundscore.evaluation.items) end to end on small invented round folders.

The homogeneity tables are invented and *constructed* so that their s_x and
s_w are known exactly (item means on a fixed pattern scaled to a chosen SD,
pairs split by a fixed difference w, so s_w = w/sqrt(2)); expected values
come from that construction and the ISO 13528:2015 B.3 formulas
s_s^2 = s_x^2 - s_w^2/2 and the expanded criterion of B.2 with F1, F2 from
scipy's chi-square and F quantiles (ISO 13528 Table B.1 lists F1 = 1.88,
F2 = 1.01 for g = 10; from memory). They are never copied from our output.
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from scipy import stats

from roundscore.cli import main
from roundscore.errors import InputError
from roundscore.pipeline import load_and_evaluate
from roundscore.model.items import ITEMS_COLUMNS

from .conftest import DEMO

SIGMA = 1.0          # fixed sigma_pt of the invented round
X_PT, U_CHAR = 10.0, 0.05  # reference value and its standard uncertainty (invented)
G = 10
LAB_VALUES = [9.2, 9.6, 9.9, 10.0, 10.1, 10.3, 10.6, 11.4]  # invented lab results (one per lab, duplicated)


def _f1_f2(g: int = G, m: int = 2) -> tuple[float, float]:
    # ISO 13528:2015 B.2 (from memory): F1 = chi2_{0.95,g-1}/(g-1), F2 = (F_{0.95,g-1,g(m-1)} - 1)/m.
    return stats.chi2.ppf(0.95, g - 1) / (g - 1), (stats.f.ppf(0.95, g - 1, g * (m - 1)) - 1) / m


def hom_csv(s_s: float, s_w: float, *, unit: str | None = None, scale: float = 1.0) -> str:
    """A homogeneity table of G items in duplicate with exactly these s_s and s_w (construction above)."""
    s_x = math.sqrt(s_s**2 + s_w**2 / 2) if s_s > 0 else 0.0
    d = np.arange(G) - (G - 1) / 2
    means = X_PT + (d / d.std(ddof=1) * s_x if s_x > 0 else 0 * d)
    w = s_w * math.sqrt(2)
    lines = ["item,replicate,value" + (",unit" if unit else "")]
    for i, a in enumerate(means, start=1):
        for rep, v in ((1, a - w / 2), (2, a + w / 2)):
            lines.append(f"KM-{i:02d},{rep},{float(v * scale)!r}" + (f",{unit}" if unit else ""))
    return "\n".join(lines) + "\n"


def stab_csv(diff: float, u: float | None = None) -> str:
    """Two sets of 3 items in duplicate; the 'after' item means are the 'before' ones minus ``diff``."""
    base = [10.0, 10.1, 9.9]
    lines = ["item,replicate,value,set" + (",u" if u is not None else "")]
    for set_name, shift in (("before", 0.0), ("after", -diff)):
        for i, a in enumerate(base, start=1):
            for rep, e in ((1, -0.02), (2, 0.02)):
                lines.append(f"S{i},{rep},{a + shift + e!r},{set_name}" + (f",{u!r}" if u is not None else ""))
    return "\n".join(lines) + "\n"


def results_csv() -> str:
    rows = ["lab,measurand,replicate,value"]
    for i, v in enumerate(LAB_VALUES, start=1):
        rows += [f"L{i},cu,1,{v}", f"L{i},cu,2,{v}"]
    return "\n".join(rows) + "\n"


def round_toml(*, hom: bool = True, stab: bool = False, checks: str = "uncertainty", sigma: str = "1.0",
               extra: str = "") -> str:
    keys = ['homogeneity = "hom.csv"' if hom else "", 'stability = "stab.csv"' if stab else ""]
    return (
        '[round]\nid = "IT-1"\nscheme = "IT"\n\n[measurand.cu]\nunit = "mg/kg"\n'
        f"assigned = {X_PT}\nu_assigned = {U_CHAR}\nsigma_pt = {sigma}\nitem_checks = \"{checks}\"\n"
        + "\n".join(k for k in keys if k) + "\n" + extra
    )


@pytest.fixture
def item_round(make_round):
    def make(*, hom_text: str | None = None, stab_text: str | None = None, **kw) -> Path:
        files = {}
        if hom_text is not None:
            files["hom__csv"] = hom_text
        if stab_text is not None:
            files["stab__csv"] = stab_text
        kw.setdefault("hom", hom_text is not None)
        kw.setdefault("stab", stab_text is not None)
        return make_round(round_toml(**kw), results_csv(), **files)
    return make


# --------------------------------------------------------------------------------- homogeneity verdicts

@pytest.mark.parametrize("s_s, s_w, simple, expanded", [
    (0.10, 0.20, True, True),    # well inside 0.3 sigma_pt
    (0.38, 0.20, False, True),   # above 0.3 but below sqrt(F1 0.09 + F2 0.04) = 0.458 (design)
    (0.60, 0.20, False, False),  # above both
])
def test_homogeneity_verdicts(item_round, s_s, s_w, simple, expanded):
    ev = load_and_evaluate(item_round(hom_text=hom_csv(s_s, s_w), checks="report"))
    h = ev.measurands["cu"].item_checks.homogeneity
    f1, f2 = _f1_f2()
    assert h.s_s == pytest.approx(s_s, rel=1e-9)            # construction
    assert h.s_w == pytest.approx(s_w, rel=1e-9)            # construction
    assert h.criterion == pytest.approx(0.3 * SIGMA)        # ISO 13528 B.2: 0.3 sigma_pt
    assert h.allowed == pytest.approx(math.sqrt(f1 * 0.09 + f2 * s_w**2), rel=1e-12)  # ISO 13528 B.2
    assert (h.passed_simple, h.passed_expanded, h.passed) == (simple, expanded, expanded)
    failed = [c for c in ev.failed_checks if "homogeneity" in c]
    assert bool(failed) == (not expanded)
    items = ev.extras["items"]
    assert items.loc[0, "passed"] == expanded
    if simple != expanded:
        assert "expanded criterion only" in " ".join(ev.measurands["cu"].notes)


def test_failed_check_strict_exit_codes_and_headings(item_round, tmp_path, capsys):
    folder = item_round(hom_text=hom_csv(0.60, 0.20))
    assert main(["score", str(folder), "--out", str(tmp_path / "a"), "--quiet"]) == 0
    assert main(["score", str(folder), "--out", str(tmp_path / "b"), "--quiet", "--strict"]) == 1
    assert "cu: homogeneity check failed" in capsys.readouterr().err
    out = tmp_path / "b"

    def texts(path: Path) -> list[str]:
        wb = openpyxl.load_workbook(path, read_only=True)
        return [str(c) for ws in wb.worksheets for row in ws.iter_rows(values_only=True) for c in row if c]

    summary = texts(out / "round-summary.xlsx")
    assert "Check failed: cu: homogeneity check failed" in summary
    for lab in ("L1", "L8"):  # a lab's sheet says what the finding means for its score, in plain words
        lab_texts = texts(out / "labs" / f"{lab}.xlsx")
        assert not [t for t in lab_texts if t.startswith("Check failed")]
        assert any(t.startswith("cu: the test items may not have been homogeneous enough") for t in lab_texts)
    sheets = openpyxl.load_workbook(out / "round-summary.xlsx", read_only=True).sheetnames
    assert "Items" in sheets


def test_strict_passes_when_checks_pass(item_round, tmp_path):
    folder = item_round(hom_text=hom_csv(0.10, 0.20))
    assert main(["score", str(folder), "--out", str(tmp_path / "o"), "--quiet", "--strict"]) == 0


def test_items_csv_columns_exactly(item_round, tmp_path):
    folder = item_round(hom_text=hom_csv(0.10, 0.20), stab_text=stab_csv(0.1))
    assert main(["score", str(folder), "--out", str(tmp_path / "o"), "--quiet"]) == 0
    text = (tmp_path / "o" / "items.csv").read_text(encoding="utf-8")
    # The column list, verbatim.
    assert text.splitlines()[0] == "measurand,check,g,m,mean,s_x,s_w,s_s,criterion,allowed,passed,note"
    assert tuple(ITEMS_COLUMNS) == tuple(text.splitlines()[0].split(","))
    frame = pd.read_csv(tmp_path / "o" / "items.csv")
    assert list(frame["check"]) == ["homogeneity", "stability"]
    assert frame.loc[0, "g"] == G and frame.loc[0, "m"] == 2


def test_cochran_flags_a_single_discordant_pair(item_round):
    # Nine pairs with w = 0.2828 (variance 0.04) and one with w = 1.2 (variance 0.72):
    # C = 0.72 / (0.72 + 9 * 0.04) = 0.667 (design), between the ISO 5725-2 Table 4 critical values for
    # p = 10, n = 2 of 0.602 (5 %) and 0.718 (1 %) (from memory): a straggler.
    rows = hom_csv(0.10, 0.20).splitlines()
    item, _, v1 = rows[9].split(",")
    _, _, v2 = rows[10].split(",")
    mid = (float(v1) + float(v2)) / 2
    rows[9], rows[10] = f"{item},1,{mid - 0.6!r}", f"{item},2,{mid + 0.6!r}"
    ev = load_and_evaluate(item_round(hom_text="\n".join(rows) + "\n"))
    h = ev.measurands["cu"].item_checks.homogeneity
    assert h.cochran_c == pytest.approx(0.72 / 1.08, rel=1e-9)
    assert h.cochran_signal == "straggler" and h.cochran_item == item
    assert f"Cochran's test flags item {item!r} as a straggler" in " ".join(ev.measurands["cu"].notes)


def test_imprecise_check_method_is_warned(item_round):
    # s_w = 0.6 > 0.5 sigma_pt: the test cannot see heterogeneity of the size that matters
    # (IUPAC harmonized protocol 2006, Appendix 1; from memory).
    ev = load_and_evaluate(item_round(hom_text=hom_csv(0.10, 0.60)))
    assert "too imprecise for the homogeneity test to be meaningful" in " ".join(ev.measurands["cu"].notes)
    assert "too imprecise" in ev.extras["items"].loc[0, "note"]


def test_same_cell_rules_as_the_results_import(item_round):
    # Semicolon-separated file with decimal commas, as a spreadsheet in many locales writes it (common practice).
    plain = hom_csv(0.38, 0.20)
    local = "\n".join(r.replace(",", ";").replace(".", ",") for r in plain.splitlines()) + "\n"
    a = load_and_evaluate(item_round(hom_text=plain)).measurands["cu"].item_checks.homogeneity
    b = load_and_evaluate(item_round(hom_text=local)).measurands["cu"].item_checks.homogeneity
    assert b.item_labels == a.item_labels and b.s_s == pytest.approx(a.s_s, rel=1e-12)


# ------------------------------------------------------------------------------------------ consequences

@pytest.mark.parametrize("checks, add_u, widen", [
    ("uncertainty", True, False),
    ("widen-sigma", False, True),
    ("both", True, True),
    ("report", False, False),
])
def test_consequences_follow_the_formulas(item_round, checks, add_u, widen):
    s_s, diff = 0.38, 0.12
    ev = load_and_evaluate(item_round(hom_text=hom_csv(s_s, 0.20), stab_text=stab_csv(diff), checks=checks))
    m = ev.measurands["cu"]
    u_stab = diff / math.sqrt(3)  # ISO 13528 B.6 (from memory): rectangular, half-width |y1 - y2|
    u_exp = math.sqrt(U_CHAR**2 + s_s**2 + u_stab**2) if add_u else U_CHAR  # ISO 13528 clause 7
    s_exp = math.sqrt(SIGMA**2 + s_s**2) if widen else SIGMA               # ISO 13528 B.2
    assert m.u_assigned == pytest.approx(u_exp, rel=1e-9)
    assert m.sigma_pt == pytest.approx(s_exp, rel=1e-9)
    assert m.item_checks.u_stab == pytest.approx(u_stab, rel=1e-9)
    assert m.item_checks.widened is widen
    # The scores use them: z = (x - x_pt)/sigma_pt (ISO 13528 9.4).
    row = ev.scores[ev.scores["lab"] == "L8"].iloc[0]
    assert row["z"] == pytest.approx((LAB_VALUES[-1] - X_PT) / s_exp, rel=1e-9)
    assert row["u_assigned"] == pytest.approx(u_exp, rel=1e-9)
    assert checks in " ".join(ev.extras["items"]["note"])  # the choice is shown in items.csv


def test_truncated_s_s_gives_zero_u_hom(item_round):
    ev = load_and_evaluate(item_round(hom_text=hom_csv(0.0, 0.20)))  # all item means equal: s_x = 0
    m = ev.measurands["cu"]
    h = m.item_checks.homogeneity
    assert h.s_s == 0.0 and h.s_s_truncated  # s_x^2 - s_w^2/2 < 0 (ISO 13528 B.3)
    assert m.item_checks.u_hom == 0.0
    assert m.u_assigned == pytest.approx(U_CHAR, rel=1e-12)
    assert "s_s was truncated to 0, so u_hom = 0" in " ".join(m.notes)


def test_robust_sd_criterion_uses_sigma_before_widening(item_round):
    ev = load_and_evaluate(item_round(hom_text=hom_csv(0.38, 0.20), sigma='"robust-sd"', checks="widen-sigma"))
    m = ev.measurands["cu"]
    s_rob = m.robust.sd
    assert m.item_checks.homogeneity.criterion == pytest.approx(0.3 * s_rob, rel=1e-12)  # before widening
    assert m.sigma_pt == pytest.approx(math.hypot(s_rob, 0.38), rel=1e-9)
    assert "counts it again" in " ".join(m.notes)


def test_unit_column_is_converted(item_round):
    plain = load_and_evaluate(item_round(hom_text=hom_csv(0.38, 0.20)))
    in_g = load_and_evaluate(item_round(hom_text=hom_csv(0.38, 0.20, unit="g/kg", scale=1e-3)))
    a, b = plain.measurands["cu"].item_checks.homogeneity, in_g.measurands["cu"].item_checks.homogeneity
    assert b.s_s == pytest.approx(a.s_s, rel=1e-9) and b.mean == pytest.approx(a.mean, rel=1e-12)  # 1 g/kg = 1000 mg/kg


# --------------------------------------------------------------------------------------------- stability

@pytest.mark.parametrize("diff, u, used, passed", [
    (0.25, None, "simple", True),     # 0.25 <= 0.3 sigma_pt
    (0.40, None, "simple", False),    # 0.40 > 0.3
    (0.40, 0.10, "expanded", True),   # 0.40 <= 0.3 + 2 sqrt(0.1^2 + 0.1^2) = 0.583 (ISO 13528 B.5)
    (0.70, 0.10, "expanded", False),  # 0.70 > 0.583
])
def test_stability_with_and_without_uncertainties(item_round, diff, u, used, passed):
    ev = load_and_evaluate(item_round(stab_text=stab_csv(diff, u)))
    s = ev.measurands["cu"].item_checks.stability
    assert s.difference == pytest.approx(diff, rel=1e-9)  # construction: item means shifted by diff
    assert s.criterion_used == used and s.passed is passed
    row = ev.extras["items"].iloc[0]
    assert row["check"] == "stability" and bool(row["passed"]) is passed
    allowed = 0.3 * SIGMA if u is None else 0.3 * SIGMA + 2 * math.hypot(u, u)  # ISO 13528 B.5
    assert row["allowed"] == pytest.approx(allowed, rel=1e-12)
    assert f"the verdict uses the {used} criterion" in row["note"]
    assert ev.measurands["cu"].item_checks.stability_sets == ("before", "after")


def test_stability_single_item_sets_use_replicates(item_round):
    text = "item,replicate,value,set\n" + "".join(
        f"S1,{r},{v},{name}\n" for name, vals in (("reference", (10.0, 10.2, 9.8, 10.0)), ("transport", (9.9, 9.7)))
        for r, v in enumerate(vals, start=1))
    s = load_and_evaluate(item_round(stab_text=text)).measurands["cu"].item_checks.stability
    assert (s.n_first, s.n_second) == (4, 2)
    assert s.difference == pytest.approx(10.0 - 9.8, rel=1e-12)  # hand arithmetic
    assert s.u_first == pytest.approx(np.std([10.0, 10.2, 9.8, 10.0], ddof=1) / 2, rel=1e-12)  # SD/sqrt(n)


def test_stability_criterion_key_forces_expanded(item_round):
    # Without u the set u is SD(item means)/sqrt(3); the item means (10, 10.1, 9.9) have SD 0.1 (design).
    ev = load_and_evaluate(item_round(stab_text=stab_csv(0.40), extra='stability_criterion = "expanded"\n'))
    s = ev.measurands["cu"].item_checks.stability
    u = 0.1 / math.sqrt(3)
    assert s.criterion_used == "expanded"
    assert s.allowed_expanded == pytest.approx(0.3 + 2 * math.hypot(u, u), rel=1e-9)  # ISO 13528 B.5


# ------------------------------------------------------------------------------------------ bad tables

HOM_OK = hom_csv(0.1, 0.2)


def _swap(text: str, line: int, new: str) -> str:
    rows = text.splitlines()
    rows[line] = new
    return "\n".join(rows) + "\n"


@pytest.mark.parametrize("which, text, expected", [
    ("hom", _swap(HOM_OK, 3, "KM-02,1,<0.5"), "hom.csv, line 4, column 'value' (measurand cu): value '<0.5': "
                                             "a censored value cannot be used"),
    ("hom", _swap(HOM_OK, 3, "KM-02,1,"), "line 4, column 'value' (measurand cu): a blank value"),
    ("hom", _swap(HOM_OK, 3, "KM-02,1,ten"), "line 4, column 'value' (measurand cu): value 'ten': not a number"),
    ("hom", _swap(HOM_OK, 3, "KM-02,1,-4"), "cu cannot be below zero"),
    ("hom", _swap(HOM_OK, 3, "KM-02,x,10"), "column 'replicate' (measurand cu): value 'x': the replicate must"),
    ("hom", _swap(HOM_OK, 3, "KM-01,1,10"), "duplicate measurement for item 'KM-01', replicate 1 (also line 2)"),
    ("hom", _swap(HOM_OK, 3, ",1,10"), "line 4, column 'item' (measurand cu): the item label is empty"),
    ("hom", "item,rep,value\nA,1,1\n", "missing column(s) replicate"),
    ("hom", "\n".join(HOM_OK.splitlines()[:-1]) + "\n", "item 'KM-10' has a single measurement"),
    ("hom", "item,replicate,value,unit\nA,1,1,mg/L\nA,2,1,mg/L\nB,1,1,mg/L\nB,2,1,mg/L\n", "cannot be converted"),
    ("stab", stab_csv(0.1) + "S1,1,10,transport\n", "exactly 2 sets"),
    ("stab", _swap(stab_csv(0.1, 0.1), 2, "S1,2,10.02,before,0.2"), "u differs within set 'before'"),
    ("stab", _swap(stab_csv(0.1), 2, "S1,2,10.02,"), "line 3, column 'set' (measurand cu): the set is empty"),
])
def test_bad_item_tables_are_clear_errors(item_round, tmp_path, capsys, which, text, expected):
    kw = {"hom_text": text} if which == "hom" else {"stab_text": text}
    folder = item_round(**kw)
    out = tmp_path / "never"
    assert main(["score", str(folder), "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert expected in err, err
    assert "Traceback" not in err
    assert not out.exists()  # nothing written


def test_missing_file_and_all_problems_together(item_round):
    folder = item_round(hom_text=_swap(HOM_OK, 3, "KM-02,1,<0.5"), stab_text=stab_csv(0.1) + "S9,1,x,after\n")
    (folder / "round.toml").write_text(round_toml(hom=True, stab=True), encoding="utf-8")
    with pytest.raises(InputError) as exc:
        load_and_evaluate(folder)
    text = str(exc.value)
    assert "hom.csv, line 4" in text and "stab.csv, line 14" in text  # both files, one message
    (folder / "hom.csv").unlink()
    with pytest.raises(InputError, match="homogeneity file named in the round file was not found"):
        load_and_evaluate(folder)


def test_no_traceback_from_the_command(item_round, tmp_path):
    folder = item_round(hom_text=_swap(HOM_OK, 5, "KM-03,1,n.d."))
    proc = subprocess.run([sys.executable, "-m", "roundscore", "score", str(folder), "--out", str(tmp_path / "x")],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr and "hom.csv, line 6, column 'value'" in proc.stderr
    assert not (tmp_path / "x").exists()


def test_sigma_not_set_reports_not_evaluated(make_round):
    # robust-sd with two labs: sigma_pt cannot be set, the checks are not evaluated (and so not passed).
    toml = round_toml(sigma='"robust-sd"').replace("assigned = 10.0", 'assigned = "median"').replace(
        "u_assigned = 0.05\n", "")
    folder = make_round(toml, "lab,measurand,replicate,value\nA,cu,1,10\nB,cu,1,10.2\n", hom__csv=HOM_OK)
    ev = load_and_evaluate(folder)
    row = ev.extras["items"].iloc[0]
    assert not row["passed"] and row["note"].startswith("not evaluated")


# ------------------------------------------------------------------------------------------------ demo

def test_demo_round_has_a_borderline_measurand(scored_demo):
    # The committed demo round (invented data) must equal the generator's, and give items.csv.
    for name in ("homogeneity.csv", "stability.csv"):
        assert (scored_demo.round / name).read_bytes() == (DEMO / name).read_bytes()
    assert scored_demo.evaluation.failed_checks == []  # what --strict refuses (its exit code: tests above)
    items = pd.read_csv(scored_demo.out / "items.csv")
    hom = items[items["check"] == "homogeneity"]
    border = hom[(hom["s_s"] > hom["criterion"]) & (hom["s_s"] <= hom["allowed"])]
    assert len(border) == 1 and bool(border["passed"].iloc[0])
    assert set(items["check"]) == {"homogeneity", "stability"}
    assert items["passed"].all()
