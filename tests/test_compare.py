"""Tests of roundscore.stats.compare and the ``roundscore compare`` command."""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import numpy as np
import pytest
from scipy import stats as sps

from roundscore.commands import compare as cmd
from roundscore.errors import InputError, StatisticsError
from roundscore.stats.compare import compare_groups, compare_one, compare_two

# Invented lab means (µg/L lead in drinking water) for two method groups: ICP-MS and GF-AAS.
ICPMS = [12.41, 12.63, 12.18, 12.90, 12.55, 12.37, 12.71]
GFAAS = [12.95, 13.32, 12.88, 13.41, 13.07, 13.19]
# A group with a much larger spread, to make the F test reject.
WIDE = [10.2, 14.9, 11.3, 15.8, 9.7, 16.1, 12.0]


@pytest.mark.parametrize("equal_var", [True, False])
def test_two_sample_matches_scipy(equal_var: bool) -> None:
    # Reference: scipy.stats.ttest_ind (pooled when equal_var=True, Welch otherwise) and its CI.
    method = "pooled" if equal_var else "welch"
    res = compare_two(ICPMS, GFAAS, method=method)
    ref = sps.ttest_ind(ICPMS, GFAAS, equal_var=equal_var)
    assert res.t == pytest.approx(ref.statistic, rel=1e-12)
    assert res.p_value == pytest.approx(ref.pvalue, rel=1e-9)
    assert res.df == pytest.approx(ref.df, rel=1e-12)
    ci = ref.confidence_interval(0.95)
    assert (res.ci_low, res.ci_high) == (pytest.approx(ci.low, rel=1e-10), pytest.approx(ci.high, rel=1e-10))
    assert res.method == method and res.method_reason == "chosen by the user"


def test_welch_df_matches_statsmodels() -> None:
    # Reference: statsmodels.stats.weightstats.ttest_ind(usevar="unequal") returns the Welch df.
    from statsmodels.stats.weightstats import ttest_ind

    t, _p, df = ttest_ind(ICPMS, WIDE, usevar="unequal")
    res = compare_two(ICPMS, WIDE, method="welch")
    assert res.df == pytest.approx(df, rel=1e-12) and res.t == pytest.approx(t, rel=1e-12)


def test_auto_chooses_by_the_f_test() -> None:
    same = compare_two(ICPMS, GFAAS)
    assert not same.variance_test.reject and same.method == "pooled" and same.pooled_sd is not None
    diff = compare_two(ICPMS, WIDE)
    assert diff.variance_test.reject and diff.method == "welch" and diff.pooled_sd is None
    assert "rejects equal variances" in diff.method_reason
    # F test by hand: s_a²/s_b² with (n_a − 1, n_b − 1) df; two-sided p symmetric in the order of groups.
    f = np.var(ICPMS, ddof=1) / np.var(WIDE, ddof=1)
    assert diff.variance_test.f == pytest.approx(f, rel=1e-12)
    assert compare_two(WIDE, ICPMS).variance_test.p_value == pytest.approx(diff.variance_test.p_value, rel=1e-9)


def test_confidence_level_changes_critical_value_and_wording() -> None:
    r95 = compare_two(ICPMS, GFAAS)
    r99 = compare_two(ICPMS, GFAAS, confidence=0.99)
    assert r99.t_critical == pytest.approx(sps.t.isf(0.005, r99.df))  # scipy t quantile
    assert r99.ci_high - r99.ci_low > r95.ci_high - r95.ci_low
    assert r95.significant and "differ significantly at the 95 % confidence level" in r95.conclusion
    assert "99 %" in r99.conclusion


def test_no_difference_wording() -> None:
    res = compare_two(ICPMS, [v + 0.01 for v in ICPMS[::-1]])
    assert not res.significant and res.conclusion.startswith("No significant difference")


def test_one_sample_matches_scipy() -> None:
    # Reference: scipy.stats.ttest_1samp and its confidence interval.
    res = compare_one(GFAAS, 13.0)
    ref = sps.ttest_1samp(GFAAS, 13.0)
    assert res.t == pytest.approx(ref.statistic, rel=1e-12) and res.p_value == pytest.approx(ref.pvalue, rel=1e-9)
    ci = ref.confidence_interval(0.95)
    assert res.ci_low == pytest.approx(ci.low, rel=1e-12) and res.ci_high == pytest.approx(ci.high, rel=1e-12)
    assert not res.significant


def test_groups_anova_matches_scipy_and_holm() -> None:
    # Reference: scipy.stats.f_oneway; Holm's adjustment recomputed by hand (Holm 1979).
    values = ICPMS + GFAAS + WIDE + [13.0]
    groups = ["ICP-MS"] * 7 + ["GF-AAS"] * 6 + ["ICP-OES"] * 7 + ["XRF"]
    res = compare_groups(values, groups)
    ref = sps.f_oneway(ICPMS, GFAAS, WIDE)
    assert res.anova.f == pytest.approx(ref.statistic, rel=1e-10)
    assert res.anova.p_value == pytest.approx(ref.pvalue, rel=1e-8)
    assert res.untested == ("XRF",) and res.groups == ("ICP-MS", "GF-AAS", "ICP-OES")
    raw = np.array([pc.comparison.p_value for pc in res.pairwise])
    order = np.argsort(raw)
    holm = np.maximum.accumulate(np.minimum(1, raw[order] * (len(raw) - np.arange(len(raw)))))
    expected = np.empty_like(holm)
    expected[order] = holm
    np.testing.assert_allclose([pc.p_adjusted for pc in res.pairwise], expected, rtol=1e-12)
    assert "XRF" in "\n".join(res.to_text())
    json.dumps(res.to_dict())


def test_groups_with_too_few_labs() -> None:
    res = compare_groups([1.0, 2.0, 3.0], ["a", "b", "c"])
    assert res.anova is None and res.pairwise == () and res.untested == ("a", "b", "c")
    assert "no comparison was made" in res.conclusion


@pytest.mark.parametrize(
    ("a", "b", "message"),
    [
        ([1.0], [2.0, 3.0], "need at least 2 values"),
        ([1.0, 1.0], [2.0, 2.0], "no spread in either group"),
        ([1.0, float("nan")], [2.0, 3.0], "not a finite number"),
    ],
)
def test_two_sample_errors(a: list[float], b: list[float], message: str) -> None:
    with pytest.raises(StatisticsError, match=message):
        compare_two(a, b)


def test_results_serialise() -> None:
    res = compare_two(ICPMS, WIDE, labels=("ICP-MS", "ICP-OES"))
    d = json.loads(json.dumps(res.to_dict()))
    assert d["method"] == "welch" and d["variance_test"]["reject"] is True
    assert "does not replace" in d["disclaimer"]
    text = "\n".join(res.to_text())
    assert "Welch t test" in text and "ICP-MS - ICP-OES" in text


# ----------------------------------------------------------------------------- the command


def _run(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(prog="roundscore")
    cmd.register(parser.add_subparsers(dest="command"))
    args = parser.parse_args(["compare", *argv])
    return args.func(args)


def test_command_two_sets(capsys: pytest.CaptureFixture[str]) -> None:
    assert _run([*map(str, ICPMS), "--vs", *map(str, GFAAS), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    ref = sps.ttest_ind(ICPMS, GFAAS)  # scipy reference, pooled (the F test does not reject)
    assert out["t"] == pytest.approx(ref.statistic, rel=1e-12) and out["method"] == "pooled"


def test_command_reference_and_confidence(capsys: pytest.CaptureFixture[str]) -> None:
    assert _run(["12,4", "12,6", "12,5", "--reference", "12.0", "--confidence", "0.99"]) == 0
    out = capsys.readouterr().out
    assert "reference value = 12" in out and "99 %" in out


def test_command_csv(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    f = tmp_path / "means.csv"
    f.write_text("icpms;gfaas\n" + "\n".join(
        f"{a};{b}" for a, b in zip(ICPMS, GFAAS + [""])), encoding="utf-8")
    assert _run(["--csv", str(f), "--a", "icpms", "--b", "gfaas", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["n_a"] == 7 and out["n_b"] == 6 and out["label_a"] == "icpms"


@pytest.mark.parametrize(
    ("argv", "message", "where"),
    [
        (["1.2", "abc", "--vs", "1", "2"], "not a number", {"column": "values", "row": 2, "value": "abc"}),
        (["1.2", "--vs", "1", "2"], "need at least 2 values", {"column": "values"}),
        (["1.2", "1.3"], "give the second set with --vs", {}),
        (["1.2", "1.3", "--vs", "1", "2", "--confidence", "95"], "strictly between 0 and 1", {"value": "95"}),
        (["1.2", "<0.5", "--vs", "1", "2"], "censored", {"row": 2}),
    ],
)
def test_command_bad_input(argv: list[str], message: str, where: dict[str, object]) -> None:
    with pytest.raises(InputError, match=message) as err:
        _run(argv)
    problem = err.value.problems[0]
    for key, value in where.items():
        assert getattr(problem, key) == value


def test_command_csv_errors(tmp_path: Path) -> None:
    f = tmp_path / "m.csv"
    f.write_text("x,y\n1.0,2.0\n1.1,oops\n1.2,2.2\n", encoding="utf-8")
    with pytest.raises(InputError, match="no such column") as err:
        _run(["--csv", str(f), "--a", "x", "--b", "z"])
    assert err.value.problems[0].column == "z" and err.value.problems[0].file == str(f)
    with pytest.raises(InputError, match="not a number") as err:
        _run(["--csv", str(f), "--a", "x", "--b", "y"])
    p = err.value.problems[0]
    assert (p.file, p.column, p.row, p.value) == (str(f), "y", 3, "oops")
    with pytest.raises(InputError, match="file not found"):
        _run(["--csv", str(tmp_path / "none.csv"), "--a", "x", "--b", "y"])


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_holm_equals_statsmodels(seed):
    # Reference library: statsmodels.stats.multitest.multipletests(method="holm").
    from statsmodels.stats.multitest import multipletests

    from roundscore.stats.compare import holm

    p = np.random.default_rng(seed).uniform(0, 0.2, 7)
    p[2] = p[4]  # a tie
    reject, expected, _, _ = multipletests(p, alpha=0.05, method="holm")
    got = holm(p)
    assert np.allclose(got, expected, rtol=0, atol=1e-15)
    assert ((got <= 0.05) == reject).all()
