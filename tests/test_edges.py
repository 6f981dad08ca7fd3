"""Numbers and settings at the edges (roundscore.ranges): every case is refused with a message naming the file,
key or cell and what is allowed, or computed without an infinite score; never a traceback, never a library
warning, never a half-written output folder, never a changed input.

Each round is invented and built here. Warnings are turned into errors (and the command line's belt, which
hides library warnings from users, steps aside because ``sys.warnoptions`` is set), so a warning anywhere
makes the test fail.
"""
# Source of expected values: the tool's own contract (internal behaviour), except where a line names its source.

from __future__ import annotations

import hashlib
import math
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from roundscore.stats import trends
from roundscore.cli import main
from roundscore.errors import StatisticsError
from roundscore.ranges import CONFIDENCE_MAX, MAX_MAGNITUDE, MIN_MAGNITUDE, magnitude_problem

LABS = [[10.1, 10.2], [9.9, 10.0], [10.3, 10.2], [10.0, 10.1], [9.8, 9.9], [10.4, 10.3], [10.0, 10.0],
        [10.2, 10.1]]  # invented


@pytest.fixture
def strict(monkeypatch):
    """Warnings are errors, and the CLI's belt (active only without -W options) is off."""
    monkeypatch.setattr(sys, "warnoptions", ["error"])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        yield


def results_csv(values=LABS, measurand="cu", extra_rows="") -> str:
    rows = ["lab,measurand,replicate,value"]
    rows += [f"L{i + 1:02d},{measurand},{j + 1},{v}" for i, vs in enumerate(values) for j, v in enumerate(vs)]
    return "\n".join(rows) + "\n" + extra_rows


def toml(measurand: str, *, round_extra: str = "", tail: str = "", unit: str = "mg/kg") -> str:
    return (f'[round]\nid = "E-1"\nscheme = "E"\ndate = "2026-01-01"\n{round_extra}\n'
            f'[measurand.cu]\nunit = "{unit}"\n{measurand}\n{tail}')


def hashes(folder: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir()) if p.is_file()}


def refused(folder: Path, capsys, *words: str) -> str:
    """Score the round; assert exit 2, every word in the message, no traceback, inputs and folder untouched."""
    before, listing = hashes(folder), sorted(p.name for p in folder.iterdir())
    out = folder / "out"
    code = main(["score", str(folder), "--out", str(out), "--jobs", "1", "--quiet"])
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err and "Warning" not in err
    for w in words:
        assert w in err, (w, err)
    assert not out.exists()  # nothing half-written: no output folder, no temporary folder beside it
    assert sorted(p.name for p in folder.iterdir()) == listing
    assert hashes(folder) == before
    return err


# --------------------------------------------------------------------------- the round file

@pytest.mark.parametrize("measurand, words", [
    # σ_pt = 1e308 made x_pt ± 3σ_pt infinite (figure axis limits)
    ("sigma_pt = 1e308", ["'measurand.cu.sigma_pt'", "1e+308", "from 1e-50 to 1e+50", "too large"]),
    # σ_pt = 1e-320 made every z ±inf in scores.csv
    ("sigma_pt = 1e-320", ["'measurand.cu.sigma_pt'", "1e-320", "too small"]),
    # assigned 1e308 with σ_pt 1e-300: both keys named
    ("assigned = 1e308\nu_assigned = 0\nsigma_pt = 1e-300",
     ["'measurand.cu.assigned'", "'measurand.cu.sigma_pt'", "1e-300"]),
    ("assigned = 10\nu_assigned = 1e60\nsigma_pt = 0.1", ["'measurand.cu.u_assigned'", "1e+60"]),
    ("sigma_pt = { s_R = 1e300, s_r = 1, replicates = 2 }", ["'measurand.cu.sigma_pt.s_R'"]),
    # in range, but σ_pt below the rounding of the assigned value
    ("assigned = 1e40\nu_assigned = 0\nsigma_pt = 1e-40", ["'measurand.cu.sigma_pt'", "1e-12 × |assigned|"]),
])
def test_numbers_out_of_range_in_the_round_file(make_round, capsys, strict, measurand, words):
    refused(make_round(toml(measurand), results_csv()), capsys, "round.toml", *words)


def test_integers_beyond_any_float_are_refused(make_round, capsys, strict):
    # TOML integers have no size limit; float(10**400) overflowed (OverflowError traceback)
    huge = "9" * 400
    folder = make_round(toml(f"assigned = {huge}\nu_assigned = 0\nsigma_pt = {huge}",
                             round_extra=f"confidence = {huge}", tail=f"[limits]\ntimeout_s = {huge}\n"),
                        results_csv())
    err = refused(folder, capsys, "'measurand.cu.assigned'", "'measurand.cu.sigma_pt'", "'round.confidence'",
                  "'limits.timeout_s'", "9" * 50 + "...")
    assert huge not in err


@pytest.mark.parametrize("key, value, allowed", [
    ("timeout_s", "1e300", "from 1 to 3600"),  # overflowed the poll timeout (OverflowError traceback)
    ("timeout_s", "0.5", "from 1 to 3600"),
    ("memory_mib", "1e300", "from 64 to 65536"),
    ("max_part_mib", "-1", "from 0.001 to 4096"),
    ("max_total_mib", "inf", "from 0.001 to 16384"),
    ("max_parts", "2.5", "a whole number from 1 to 100000"),
    ("max_text_mib", "true", "from 0.001 to 4096"),
])
def test_limits_have_documented_ranges(make_round, capsys, strict, key, value, allowed):
    folder = make_round(toml("sigma_pt = 0.1", tail=f"[limits]\n{key} = {value}\n"), results_csv())
    refused(folder, capsys, "round.toml", f"'limits.{key}'", allowed)


def test_deeply_nested_toml_is_refused_naming_the_file(make_round, capsys, strict):
    folder = make_round(toml("sigma_pt = 0.1", tail="x = " + "[" * 50_000 + "]" * 50_000 + "\n"), results_csv())
    refused(folder, capsys, str(folder / "round.toml"), "nested too deeply")


@pytest.mark.parametrize("value", ["0", "1", "1.5", "-0.2", '"high"', "0.99999999999999989"])
def test_confidence_outside_the_open_unit_interval_is_refused(make_round, capsys, strict, value):
    # confidence = 0 used to become 0.95 without a word; 0.99999999999999989 = 1 − 2⁻⁵³ leaves (1 + c)/2 = 1.
    folder = make_round(toml("sigma_pt = 0.1", round_extra=f"confidence = {value}"), results_csv())
    err = refused(folder, capsys, "'round.confidence'", "strictly between 0 and 1")
    assert ("critical value is infinite" in err) == (value == "0.99999999999999989")


def test_confidence_inside_the_interval_is_kept(make_round):
    from roundscore.intake.roundfile import load_round

    for value, expected in (("0.3", 0.3), (repr(CONFIDENCE_MAX), CONFIDENCE_MAX), (None, 0.95)):
        extra = f"confidence = {value}" if value else ""
        assert load_round(make_round(toml("sigma_pt = 0.1", round_extra=extra))).confidence == expected


@pytest.mark.parametrize("unit, words", [
    ("<b>mg</b>", ["'measurand.cu.unit'", "markup"]),  # σ_pt was nan, nothing scored, no reason given
    ("<b>mg/kg</b>", ["'measurand.cu.unit'", "markup"]),  # pint would have read this as mg/kg
    ("mg/L", ["'measurand.cu.unit'", "mass-fraction unit", "not a mass fraction"]),
    ("bananas", ["'measurand.cu.unit'", "not understood"]),
])
def test_horwitz_needs_a_mass_fraction_unit(make_round, capsys, strict, unit, words):
    refused(make_round(toml('sigma_pt = "horwitz"', unit=unit), results_csv()), capsys, *words)


# --------------------------------------------------------------------------- the results

@pytest.mark.parametrize("replicate", ["100000000000000000000", "1e20", "1000001", "0"])
def test_replicate_numbers_out_of_range(make_round, capsys, strict, replicate):
    # 1e20 as digits overflowed the table's 64-bit replicate column (OverflowError traceback).
    text = results_csv().replace("L01,cu,2,", f"L01,cu,{replicate},")
    refused(make_round(toml("sigma_pt = 0.1"), text), capsys,
            "results.csv, line 3, column 'replicate' (lab L01, measurand cu)", replicate, "from 1 to 1000000")


def test_replicate_1e20_in_a_workbook(make_round, capsys, strict):
    import xlsxwriter

    folder = make_round(toml("sigma_pt = 0.1", round_extra='results = "results.xlsx"'))
    book = xlsxwriter.Workbook(str(folder / "results.xlsx"))
    sheet = book.add_worksheet("Results")
    sheet.write_row(0, 0, ["lab", "measurand", "replicate", "value"])
    for i, (a, b) in enumerate(LABS):
        sheet.write_row(1 + 2 * i, 0, [f"L{i + 1}", "cu", 1e20 if i == 3 else 1, a])
        sheet.write_row(2 + 2 * i, 0, [f"L{i + 1}", "cu", 2, b])
    book.close()
    refused(folder, capsys, "results.xlsx", "Results!C8", "'replicate'", "lab L4", "from 1 to 1000000")


@pytest.mark.parametrize("key, value", [("replicates", 1e20), ("replicates", 21), ("header_row", 1e20)])
def test_a_form_whose_hidden_sheet_asks_for_1e20_replicates(make_round, capsys, strict, key, value):
    # int(1e20) replicate columns would have exhausted the worker's memory; now the form is refused by name.
    import openpyxl

    from roundscore.intake.forms import INFO_SHEET, write_form
    from roundscore.intake.roundfile import load_round

    folder = make_round(toml("sigma_pt = 0.1", round_extra='results = "returned"'))
    (folder / "returned").mkdir()
    form = folder / "returned" / "E-1-L01.xlsx"
    write_form(load_round(folder), "L01", form)
    book = openpyxl.load_workbook(form)
    info = book[INFO_SHEET]
    row = next(r for r in info.iter_rows() if r[0].value == key)
    row[1].value = value
    book.save(form)
    refused(folder, capsys, "E-1-L01.xlsx", f"sheet '{INFO_SHEET}'", "the form-info sheet is damaged",
            "replicates must be 1 to 20")


def test_a_single_result_of_1e308_is_refused_naming_file_row_and_lab(make_round, capsys, strict):
    text = results_csv().replace("L03,cu,2,10.2", "L03,cu,2,1e308")
    refused(make_round(toml("sigma_pt = 0.1"), text), capsys,
            "results.csv, line 7, column 'value' (lab L03, measurand cu)", "1e308", "too large to compute with")


def test_all_results_denormal_are_refused_by_cell_not_by_grubbs(make_round, capsys, strict):
    tiny = [[f"{k}e-320", f"{k + 1}e-320"] for k in range(1, 9)]
    err = refused(make_round(toml('sigma_pt = "robust-sd"'), results_csv(tiny)), capsys,
                  "16 problems", "line 2, column 'value' (lab L01, measurand cu): value '1e-320'", "too small")
    assert "Grubbs" not in err


def test_results_out_of_range_after_unit_conversion(make_round, capsys, strict):
    # 1e45 g/kg is 1e48 mg/kg: in range; 1e48 g/kg is 1e51 mg/kg, out of it.
    text = results_csv().replace("lab,measurand,replicate,value", "lab,measurand,replicate,value,unit")
    text = "\n".join(line + ("," if i else "") for i, line in enumerate(text.strip().split("\n"))) + "\n"
    text = text.replace("L05,cu,1,9.8,", "L05,cu,1,1e48,g/kg")
    refused(make_round(toml("sigma_pt = 0.1"), text), capsys, "lab L05", "after converting g/kg to mg/kg")


def test_uncertainties_out_of_range(make_round, capsys, strict):
    text = results_csv().replace("lab,measurand,replicate,value", "lab,measurand,replicate,value,u")
    text = "\n".join(line + (",0.1" if i else "") for i, line in enumerate(text.strip().split("\n"))) + "\n"
    text = text.replace("L02,cu,1,9.9,0.1", "L02,cu,1,9.9,1e-60")
    refused(make_round(toml("sigma_pt = 0.1"), text), capsys, "column 'u' (lab L02", "u: too small")


# --------------------------------------------------------------------------- in range: scored, never infinite

EXTREME_TOML = """\
[round]
id = "E-2"
scheme = "E"
date = "2026-01-01"

[measurand.outlier]       # one result 1e50 among results near 10: z = 1e51, finite
unit = "mg/kg"
sigma_pt = 0.1

[measurand.wide]          # σ_pt at the top of the range
unit = "mg/kg"
sigma_pt = 1e50

[measurand.tiny]          # results near 1e-45 with the robust SD as σ_pt
unit = "mg/kg"
sigma_pt = "robust-sd"

[measurand.sharp]         # σ_pt below 1e-12 of x_pt: not scored, with the reason
unit = "mg/kg"
sigma_pt = 1e-11

[measurand.zeta0]         # ζ with u(x) = u(x_pt) = 0: not defined, not ±inf
unit = "mg/kg"
assigned = 10
u_assigned = 0
sigma_pt = 1
score = "zeta"

[measurand.horwitz]       # a mass fraction above 1: no Horwitz σ_pt, with the reason
unit = "mg/kg"
sigma_pt = "horwitz"
"""


@pytest.fixture(scope="module")
def extreme_round(tmp_path_factory):
    folder = tmp_path_factory.mktemp("extreme")
    (folder / "round.toml").write_text(EXTREME_TOML, encoding="utf-8")
    rows = ["lab,measurand,replicate,value,u"]
    for i, (a, b) in enumerate(LABS):
        lab = f"L{i + 1:02d}"
        for name, scale in (("outlier", 1), ("wide", 1), ("tiny", 1e-45), ("sharp", 1e2), ("zeta0", 1),
                            ("horwitz", 1e6)):
            va, vb = a * scale, b * scale
            if name == "outlier" and i == 7:
                va = vb = 1e50
            rows += [f"{lab},{name},1,{va!r},0", f"{lab},{name},2,{vb!r},0"]
    (folder / "results.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    out = folder / "out"
    with pytest.MonkeyPatch.context() as mp, warnings.catch_warnings():
        mp.setattr(sys, "warnoptions", ["error"])
        warnings.simplefilter("error")  # figures, workbooks and report included
        code = main(["score", str(folder), "--out", str(out), "--jobs", "1", "--quiet"])
    assert code == 0
    return out


def test_scores_in_range_are_finite_or_empty_with_a_note(extreme_round):
    scores = pd.read_csv(extreme_round / "scores.csv", keep_default_na=False, na_values=[""])
    for col in ("z", "z_prime", "zeta", "en", "d", "d_percent"):
        assert not np.isinf(scores[col].to_numpy(float)).any(), col
    by = scores.set_index(["measurand", "lab"])
    assert by.loc[("outlier", "L08"), "z"] == pytest.approx((1e50 - by.loc[("outlier", "L01"), "assigned"]) / 0.1,
                                                           rel=1e-9)
    assert by.loc[("outlier", "L08"), "signal"] == "action"
    assert abs(by.loc[("wide", "L01"), "z"]) < 1e-48
    tiny = scores[scores["measurand"] == "tiny"]
    assert tiny["z"].notna().all() and tiny["sigma_pt"].gt(0).all()
    for name, words in (("sharp", "σ_pt could not be set"), ("zeta0", "ζ is not defined: u(x) and u(x_pt) are both 0"),
                        ("horwitz", "σ_pt could not be set")):
        part = scores[scores["measurand"] == name]
        assert len(part) == len(LABS) and (part["signal"] == "not-scored").all(), name
        assert part["note"].str.contains(words, regex=False).all(), name
        assert part["zeta" if name == "zeta0" else "z"].isna().all(), name
    audit = pd.read_csv(extreme_round / "audit.csv")
    sharp = audit[(audit["measurand"] == "sharp") & (audit["step"] == "sigma_pt")]
    assert "not usable" in set(sharp["action"]) and sharp["reason"].str.contains("1e-12 × |x_pt|", regex=False).any()


def test_unscored_measurands_say_why_in_the_terminal(extreme_round, capsys, strict):
    code = main(["check", str(extreme_round.parent)])
    out = capsys.readouterr().out
    assert code == (1 if "CHECK FAILED" in out else 0)  # check exits 1 when a check fails (README)
    assert "sharp: not scored: σ_pt = 1e-11 is below 1e-12 × |x_pt|" in out
    assert "horwitz: not scored: the assigned value" in out and "above 1 (100 %)" in out


# --------------------------------------------------------------------------- history check and compare

def test_history_check_with_nearly_equal_scores(tmp_path, capsys, strict):
    from tests.test_history import invented_rounds

    db = tmp_path / "h.sqlite"
    invented_rounds(db, [1.0, 1.0 + 2.2e-16, 1.0, 1.0 + 4.4e-16, 1.0] * 2)  # t was 1.1e16, with a scipy warning
    code = main(["history", "check", "--archive", str(db), "--lab", "L07"])
    out = capsys.readouterr()
    assert code == 1  # rules 3 and 4 fire: ten scores of +1
    assert "the scores are (nearly) all equal" in out.out and "the test is not meaningful" in out.out
    assert "1e-09 × max(1, largest |z|)" in out.out
    assert "t = " not in out.out and "Warning" not in out.err


def test_bias_check_tolerance_is_scale_aware(strict):
    with pytest.raises(StatisticsError, match=r"nearly\) all equal"):
        trends.bias_check([1e6, 1e6 + 1e-4, 1e6 - 1e-4])  # SD 1e-4 ≤ 1e-9 × 1e6 = 1e-3
    b = trends.bias_check([1e-3, 2e-3, 1.5e-3])  # near 0 the floor is 1e-9: a spread of 5e-4 is tested
    assert b.n == 3 and math.isfinite(b.t)
    # scores far beyond any roundscore computes (history add of a foreign file): finite t, no warning
    big = trends.bias_check([1e300, 2e300, 1.5e300])
    assert big.t == pytest.approx(trends.bias_check([1.0, 2.0, 1.5]).t, rel=1e-12)
    assert "+1.5e+300" in big.conclusion
    assert math.isinf(trends.combined_scores([1e300, 1e300]).ssz)


@pytest.mark.parametrize("argv, words", [
    (["1", "1.0000000000000002", "1", "--vs", "2", "2.0000000000000004", "2"], ["(nearly) all equal",
                                                                                "not meaningful"]),
    (["1", "1.0000000000000002", "1", "--reference", "1"], ["(nearly) all equal"]),
    (["1e-320", "2e-320", "--vs", "1", "2"], ["row 1", "1e-320", "too small"]),
    (["1", "2", "3", "--reference", "1e308"], ["--reference", "too large"]),
    (["1", "2", "--vs", "3", "4", "--confidence", "0"], ["--confidence", "strictly between 0 and 1"]),
])
def test_compare_at_the_edges(capsys, strict, argv, words):
    code = main(["compare", *argv])
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" not in err
    for w in words:
        assert w in err


# --------------------------------------------------------------------------- the rule itself, figures, the belt

def test_magnitude_rule():
    assert magnitude_problem(0.0) is None and magnitude_problem(-MAX_MAGNITUDE) is None
    assert magnitude_problem(MIN_MAGNITUDE) is None
    assert "too small" in magnitude_problem(MIN_MAGNITUDE / 2)
    assert "too large" in magnitude_problem(np.nextafter(MAX_MAGNITUDE, np.inf))
    assert "not a finite" in magnitude_problem(float("nan"))
    # the arithmetic that follows stays finite and normal (IEEE 754 double: max 1.8e308, min normal 2.2e-308)
    z = (2 * MAX_MAGNITUDE) / MIN_MAGNITUDE
    assert math.isfinite(z * z * 1e6) and (MIN_MAGNITUDE * 1e-16) ** 4 > sys.float_info.min


@pytest.mark.parametrize("values, assigned, sigma", [
    ([1.0, 2.0, 3.0], 1e308, 1e308), ([1e-320, 2e-320, 3e-320], 2e-320, 1e-320),
    ([1e308, -1e308, 1.0], math.nan, math.nan), ([1e40, 1e40 + 1e25, 1e40], 1e40, 1e-40),
])
def test_figures_draw_any_finite_numbers_without_warnings(strict, values, assigned, sigma):
    # Library callers may pass numbers outside the round's range; the figure is drawn, never an error.
    from roundscore.outputs.figures import density_figure, youden_figure

    labs = ["a", "b", "c"]
    d = density_figure(labs, values, assigned=assigned, sigma_pt=sigma, key="d", title="t", unit="u")
    y = youden_figure(labs, values, values[::-1], names=("p", "q"), assigned=(assigned, assigned),
                      sigma_pt=(sigma, sigma), key="y", title="t")
    for fig in (d, y):
        assert all(math.isfinite(v) and v for v in (fig.x_limits[1] - fig.x_limits[0],
                                                     fig.y_limits[1] - fig.y_limits[0]))


def test_the_cli_belt_hides_library_warnings(monkeypatch, capsys):
    from roundscore.commands import round_commands

    def noisy(args):
        np.log(np.zeros(1))  # a numpy RuntimeWarning
        warnings.warn("a library's UserWarning", stacklevel=1)
        return 0

    monkeypatch.setattr(sys, "warnoptions", [])  # no -W option: the belt is on
    monkeypatch.setattr(round_commands, "run_check", noisy)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # without the belt, the warnings would raise here
        assert main(["check", "anything"]) == 0
    assert capsys.readouterr().err == ""
