"""Figures: deterministic SVG, the data → SVG map, per-lab marks, limit lines, ISO 5725-2 indicator values.

Data are invented for these tests (small hand-made sets) unless a source is named.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from roundscore.io import figures as F
from roundscore.stats.precision import mandel_h_critical, mandel_k_critical

LABS = [f"L{i}" for i in range(1, 13)]
SCORES = np.array([0.1, -0.4, 2.5, -3.4, 0.9, np.nan, 1.2, -1.1, 0.0, 0.6, -0.2, 4.1])
SIGNALS = ["acceptable", "acceptable", "warning", "action", "acceptable", "not-scored", "acceptable",
           "acceptable", "acceptable", "acceptable", "acceptable", "action"]


def _bars(**kw):
    return F.z_bar_figure(LABS, SCORES, SIGNALS, key="z-test", title="test: z", **kw)


def test_svg_is_reproducible_and_self_contained():
    a, b = _bars(), _bars()
    assert a.svg == b.svg  # fixed hash salt, no date
    assert a.svg.startswith("<svg") and a.svg.rstrip().endswith("</svg>")
    assert "<metadata>" not in a.svg and "http" not in re.sub(r'xmlns(:\w+)?="http://www.w3.org/[^"]*"', "", a.svg)
    ids = re.findall(r'\bid="([^"]+)"', a.svg)
    assert ids and all(i.startswith("z-test-") for i in ids)  # prefixed: many figures fit in one page
    assert 'role="img"' in a.svg and 'aria-label="test: z"' in a.svg


def test_data_to_svg_map_matches_the_axes():
    f = _bars()
    left, top, right, bottom = f.axes_box
    x0, y0 = f.to_svg(f.x_limits[0], f.y_limits[0])
    x1, y1 = f.to_svg(f.x_limits[1], f.y_limits[1])
    assert (x0, y0, x1, y1) == pytest.approx((left, bottom, right, top), abs=0.05)


def test_ranked_marks_and_unscored_left_out():
    f = _bars()
    assert "L6" not in f.marks  # NaN score: not drawn
    order = sorted(f.marks, key=lambda lab: f.marks[lab][0])
    assert order[0] == "L4" and order[-1] == "L12"  # ranked by score
    assert f.marks["L3"][1] == 2.5


def test_lab_overlay_is_inside_the_axes_and_named():
    f = _bars()
    out = f.for_lab("L12")
    assert out.startswith(f.svg[: f.svg.rfind("</svg>")])  # the shared drawing is kept as it is
    mark = out[out.rfind('<g class="lab-mark"'):]
    assert "your lab (L12)" in mark
    left, top, right, bottom = f.axes_box
    rx = float(re.search(r'<rect x="([\d.]+)"', mark).group(1))
    assert left <= rx <= right
    assert f.for_lab("L6") == f.svg  # not scored: nothing marked
    assert f.for_lab("nobody") == f.svg


@pytest.mark.parametrize("score, lines", [("z", {"warning limit ±2", "action limit ±3"}),
                                          ("en", {"action limit ±1"})])
def test_limit_lines_follow_the_score(score, lines):
    svg = _bars(score=score).svg
    found = set(re.findall(r"(warning limit ±\d|action limit ±\d)", svg))
    assert found == lines  # ISO 13528 §9.4 (z: 2 and 3) and §9.7 (En: 1)


def test_signals_carry_words_not_colour_alone():
    svg = _bars().svg
    for word in ("acceptable", "warning signal", "action signal"):
        assert word in svg


def test_many_labs_draw_a_profile_of_bounded_size():
    rng = np.random.default_rng(7)
    n = 2000
    z = rng.normal(size=n)
    sig = np.where(np.abs(z) >= 3, "action", np.where(np.abs(z) > 2, "warning", "acceptable"))
    f = F.z_bar_figure([f"X{i}" for i in range(n)], z, list(sig), key="z-big", title="big")
    assert len(f.svg) < 150_000 and "X17<" not in f.svg  # no codes for 2000 labs
    assert len(f.marks) == n and "your lab (X17)" in f.for_lab("X17")


def test_density_marks_results_and_counts_those_outside():
    vals = np.array([10.0, 10.2, 9.9, 10.1, 9.8, 10.05, 31.0])
    labs = [f"L{i}" for i in range(7)]
    f = F.density_figure(labs, vals, assigned=10.0, sigma_pt=0.2, key="d-t", title="t", unit="mg/kg")
    assert "1 result(s) lie outside" in f.caption
    assert f.x_limits[1] <= 10.0 + F.RANGE_SIGMAS * 0.2 + 1e-9
    assert "outside the plotted range" in f.for_lab("L6")
    assert "outside the plotted range" not in f.for_lab("L1")


def test_youden_marks_points_and_skips_missing():
    a = [10.0, 10.3, 9.6, np.nan, 10.9]
    b = [5.0, 5.2, 4.7, 5.1, 5.6]
    f = F.youden_figure(["A", "B", "C", "D", "E"], a, b, names=("x", "y"), assigned=(10.0, 5.0),
                        sigma_pt=(0.3, 0.2), key="y-t", title="t")
    assert set(f.marks) == {"A", "B", "C", "E"}
    assert "<circle" in f.for_lab("E")
    sx, sy = f.to_svg(10.0, 5.0)
    left, top, right, bottom = f.axes_box
    assert left < sx < right and top < sy < bottom


@pytest.mark.parametrize("p, n", [(10, 2), (31, 2), (8, 3)])
def test_mandel_limits_come_from_stats_precision(p, n):
    lim = F.mandel_limits(p, n)
    assert lim["h_5"] == mandel_h_critical(p, 0.05) and lim["k_1"] == mandel_k_critical(p, n, 0.01)
    # ISO 5725-2:1994 Table 6 (from memory): p = 10 → h 1 % 2.18, 5 % 1.80.
    if (p, n) == (10, 2):
        assert (lim["h_1"], lim["h_5"]) == pytest.approx((2.18, 1.80), abs=0.006)


def test_mandel_figure_draws_both_indicator_lines():
    h = [0.2, -1.9, 2.3, 0.4, -0.1]
    f = F.mandel_figure(list("ABCDE"), h, statistic="h", critical_5=1.5, critical_1=2.0, key="mh", title="t")
    assert "5 %: 1.50" in f.svg and "1 %: 2.00" in f.svg
    assert "beyond 1 %" in f.svg and "beyond 5 %" in f.svg


def test_homogeneity_figure():
    items = ["I1", "I1", "I2", "I2", "I3", "I3"]
    f = F.homogeneity_figure(items, [1.0, 1.1, 0.9, 1.0, 1.2, 1.1], item_labels=["I1", "I2", "I3"],
                             item_means=[1.05, 0.95, 1.15], general_mean=1.05, sigma_pt=0.2, key="it", title="t")
    assert "I3" in f.svg and "0.3σ_pt" in f.svg and f.kind == "none"


def test_png_render_for_looking():
    png = F.z_bar_figure(LABS, SCORES, SIGNALS, key="z", title="t", png=True)
    assert png[:8] == b"\x89PNG\r\n\x1a\n"


def test_mandel_many_labs_bounded_and_extreme_lab_named():
    rng = np.random.default_rng(5)
    n = 2000
    h = rng.normal(size=n)
    h[17] = 4.5  # one invented lab far beyond the 1 % line
    labs = [f"X{i}" for i in range(n)]
    f = F.mandel_figure(labs, h, statistic="h", critical_5=1.96, critical_1=2.57, key="mh", title="t")
    assert len(f.svg) < 150_000  # was about 600 KB before the envelope (2000 bars and every code beyond 5 %)
    assert ">X17<" in f.svg and "beyond 5 %" in f.svg and "beyond 1 %" in f.svg
    assert len(re.findall(r">X\d+<", f.svg)) <= F.MAX_BARS
    assert "your lab (X17)" in f.for_lab("X17")
