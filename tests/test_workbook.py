"""The summary workbook and the lab sheets, read back with openpyxl and as zip parts (invented demo round)."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import math
import re
import zipfile

import openpyxl
import pytest

from roundscore.model.evaluation import SCORE_COLUMNS
from roundscore.model.qualitative import QUALITATIVE_COLUMNS
from roundscore.outputs.workbook import write_summary


@pytest.fixture
def books(scored_demo):
    """The demo's evaluation, summary workbook and K07's sheet, as the pipeline wrote them (shared: read only)."""
    return scored_demo.evaluation, scored_demo.out / "round-summary.xlsx", scored_demo.out / "labs" / "K07.xlsx"


def _charts(path) -> list[str]:
    with zipfile.ZipFile(path) as z:
        return [z.read(n).decode() for n in sorted(z.namelist()) if re.match(r"xl/charts/chart\d+\.xml$", n)]


def test_data_and_round_sheets_keep_their_contract(books):
    ev, _, lab_path = books
    wb = openpyxl.load_workbook(lab_path)
    rows = list(wb["data"].iter_rows(values_only=True))
    assert list(rows[0]) == [*SCORE_COLUMNS, "row_digest"]  # the digest after the contract's columns
    own = ev.lab_scores("K07")
    assert len(rows) == 1 + len(own)
    z = dict(zip(own["measurand"], own["z"]))
    for r in rows[1:]:
        rec = dict(zip(SCORE_COLUMNS, r))
        if isinstance(z[rec["measurand"]], float) and math.isfinite(z[rec["measurand"]]):
            assert rec["z"] == pytest.approx(z[rec["measurand"]], rel=5e-12)  # 12 digits kept
        assert re.fullmatch(r"[0-9a-f]{16}", r[len(SCORE_COLUMNS)])
    meta = dict(list(wb["round"].iter_rows(values_only=True))[1:])
    # format 2: the demo's K07 has qualitative results, on the hidden sheet qualitative_data (counted here)
    assert meta["generator"] == "roundscore" and meta["lab"] == "K07" and meta["format"] == 2
    qual = list(wb["qualitative_data"].iter_rows(values_only=True))
    assert list(qual[0]) == [*QUALITATIVE_COLUMNS, "row_digest"]
    assert meta["qualitative_rows"] == len(qual) - 1 == len(ev.lab_rows("qualitative", "K07"))
    assert re.fullmatch(r"[0-9a-f]{64}", meta["digest"])


@pytest.mark.parametrize("measurand, decimals", [("cadmium", 3), ("arsenic", 1), ("iodine", 0), ("moisture", 2)])
def test_values_use_the_measurands_decimals(books, measurand, decimals):
    _, summary, _ = books
    ws = openpyxl.load_workbook(summary)["Scores"]
    head = [c.value for c in ws[1]]
    col_result, col_sigma, col_z = head.index("Result") + 1, head.index("σ_pt") + 1, head.index("z") + 1
    row = next(r for r in range(2, ws.max_row + 1) if ws.cell(r, 2).value == measurand)
    want = "0." + "0" * decimals if decimals else "0"
    assert ws.cell(row, col_result).number_format == want
    assert ws.cell(row, col_sigma).number_format == "0." + "0" * (decimals + 1)  # one more for σ_pt
    assert ws.cell(row, col_z).number_format == "0.00"


def test_frozen_heads_widths_and_print_setup(books):
    ev, summary, lab_path = books
    wb = openpyxl.load_workbook(summary)
    ws = wb["Scores"]
    assert ws.freeze_panes == "C2"
    assert ws.print_title_rows.replace("$", "") == "1:1"
    # fit to one page wide (fitToWidth 1 is the OOXML default, so it is left out), any number of pages tall
    assert ws.page_setup.orientation == "landscape" and ws.page_setup.fitToWidth in (None, 1)
    assert int(ws.page_setup.fitToHeight) == 0 and ws.page_setup.paperSize == 9
    assert ws.sheet_properties.pageSetUpPr.fitToPage
    assert ev.round.id in ws.oddHeader.left.text
    widths = {ws.cell(1, j).value: ws.column_dimensions[openpyxl.utils.get_column_letter(j)].width
              for j in range(1, ws.max_column + 1)}
    assert widths["Note"] > widths["Unit"] >= 6 and widths["Note"] <= 62
    lab_ws = openpyxl.load_workbook(lab_path)["Scores"]
    head_row = next(r for r in range(1, 40) if lab_ws.cell(r, 1).value == "Measurand")
    assert lab_ws.freeze_panes == f"B{head_row + 1}"


def test_summary_has_a_chart_per_scored_measurand_with_signal_shapes(books):
    ev, summary, _ = books
    charts = _charts(summary)
    assert len(charts) == sum(m.scored for m in ev.measurands.values())
    joined = "".join(charts)
    # signal marker shapes (roundscore.outputs.look: circle, triangle, square) and the limit lines
    for shape in ("circle", "triangle", "square"):
        assert f'<c:symbol val="{shape}"/>' in joined
    assert "warning limit ±2" in joined and "action limit ±1" in joined
    assert "<c:barChart>" in joined and "<c:lineChart>" in joined


def test_lab_sheet_charts_and_names(books):
    ev, summary, lab_path = books
    charts = _charts(lab_path)
    families = {s for s in ev.lab_scores("K07")["score"]}
    assert len(charts) == (1 if families & {"z", "z-prime", "zeta"} else 0) + (1 if "en" in families else 0)
    assert "Laboratory K07" in "".join(charts)
    name = ev.participants["K07"].name
    with zipfile.ZipFile(lab_path) as z:
        assert name in z.read("xl/sharedStrings.xml").decode()
    with zipfile.ZipFile(summary) as z:
        text = "".join(z.read(n).decode(errors="ignore") for n in z.namelist() if n.endswith(".xml"))
    assert not [p.name for p in ev.participants.values() if p.name in text]


def test_summary_is_reproducible(books, tmp_path):
    ev, summary, _ = books
    again = tmp_path / "again.xlsx"
    write_summary(ev, again)
    assert again.read_bytes() == summary.read_bytes()


def _axis(chart: str) -> tuple[float, float]:
    """The (min, max) of a chart's value axis (the first c:valAx with both set)."""
    m = re.search(r'<c:valAx>.*?<c:max val="([^"]+)"/><c:min val="([^"]+)"/>', chart, re.S)
    assert m, "no fixed value axis"
    return float(m.group(2)), float(m.group(1))


def test_a_decimal_slip_does_not_flatten_the_charts(books):
    # The demo's K19 cadmium z ≈ 6504 (a decimal slip, invented): the axes stay at the z-like ±4 and the bar
    # at the edge carries the true value as its label (workbook_base.score_axis).
    ev, summary, _ = books
    z = ev.scores.set_index(["lab", "measurand"])["z"]
    assert z[("K19", "cadmium")] > 6000
    charts = _charts(summary)
    cadmium = next(c for c in charts if "cadmium: z-score" in c)
    assert _axis(cadmium) == (-4.0, 4.0)
    assert f"<a:t>{z[('K19', 'cadmium')]:.2f}</a:t>" in cadmium
    for c in charts:  # every chart: z-like ±4..8, En ±2..4; none scaled to the slip
        lo, hi = _axis(c)
        assert lo == -hi and (2 <= hi <= 8)
    lab = _charts(summary.parent / "labs" / "K19.xlsx")
    zlike = next(c for c in lab if "z, z′, ζ" in c)
    assert _axis(zlike) == (-4.0, 4.0) and f"<a:t>{z[('K19', 'cadmium')]:.2f}</a:t>" in zlike
    wb = openpyxl.load_workbook(summary.parent / "labs" / "K19.xlsx")
    rows = list(wb["Chart data"].iter_rows(values_only=True))
    cad = next(r for r in rows if r[1] == "cadmium")
    assert cad[2] == pytest.approx(z[("K19", "cadmium")]) and cad[3] == 4.0  # the true score, and where drawn


@pytest.mark.parametrize("values, family, want", [
    ([0.1, -0.5, 1.2], "z-like", 4.0),                     # the base: action limit + 1
    ([0.3] * 9 + [5.2] * 3, "z-like", 6.0),                # a quarter beyond 4: widened to the bulk
    ([50.0] * 20, "z-like", 8.0),                          # capped at twice the base
    ([0.2, 0.4, 0.9], "en", 2.0),
    ([2.6] * 10, "en", 3.0),
    ([], "en", 2.0),
])
def test_axis_limit_rule(values, family, want):
    from roundscore.model.scores import SCORE_FAMILIES
    from roundscore.outputs.workbook_base import axis_limit, clip_to

    got = axis_limit(values, SCORE_FAMILIES[family])
    assert got == want
    drawn = clip_to(values + [1e4, -1e4, float("nan")], got)
    assert drawn.drawn[-3:] == [got, -got, None] and drawn.off_scale[-3:] == [True, True, False]
    assert all(abs(v) <= got for v in drawn.drawn if v is not None)
