"""Figures: deterministic SVG, the data → SVG map, per-lab marks, limit lines, ISO 5725-2 indicator values.

Data are invented for these tests (small hand-made sets) unless a source is named.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from roundscore.outputs import figure_base as FB
from roundscore.outputs import figures as F
from roundscore.outputs.figures_precision import stability_verdict
from roundscore.stats.items import stability
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
    left, _top, right, _bottom = f.axes_box
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


# ------------------------------------------------------------------------------------ the stability figure
# Invented studies; the expected means, difference and allowances are computed here from the definitions of
# ISO 13528:2015 B.5 (ȳ₁ − ȳ₂ against 0.3σ_pt, or 0.3σ_pt + 2√(u²(ȳ₁) + u²(ȳ₂)) with u = s/√n of a set
# unless the study gives it), independently of roundscore.stats.items.

SIGMA_PT = 0.1  # invented: 0.3σ_pt = 0.030


def _b5(first, second, u1=None, u2=None):
    """ISO 13528 B.5 by hand: means, their u, the difference and both allowances."""
    y1, y2 = float(np.mean(first)), float(np.mean(second))
    u1 = float(np.std(first, ddof=1) / np.sqrt(len(first))) if u1 is None else u1
    u2 = float(np.std(second, ddof=1) / np.sqrt(len(second))) if u2 is None else u2
    simple = 0.3 * SIGMA_PT
    return y1, y2, u1, u2, y1 - y2, simple, simple + 2 * np.sqrt(u1 ** 2 + u2 ** 2)


def _stability_fig(first, second, names=("before", "after"), key="st", **kw):
    res = stability(first, second, SIGMA_PT, **kw)
    sets = [names[0]] * len(first) + [names[1]] * len(second)
    plot = F.StabilityPlot.of(res, sets=sets, values=[*first, *second], set_labels=names, unit="mg/kg")
    fig = F.stability_figure(plot, key=key, title="invented: stability")
    return res, fig


def _group(svg: str, key: str, gid: str) -> str:
    start = svg.index(f'<g id="{key}-{gid}">')
    return svg[start:svg.index("</g>", start)]


def _path_points(group: str) -> list[tuple[float, float]]:
    d = re.search(r' d="([^"]+)"', group).group(1)
    return [(float(x), float(y)) for x, y in re.findall(r"[ML] ([-\d.]+) ([-\d.]+)", d)]


PASSING = ([5.01, 4.99, 5.00, 4.98], [5.00, 5.02, 5.01, 4.998])  # ȳ₁ − ȳ₂ = 4.995 − 5.007 = −0.012
FAILING = ([2.51, 2.49, 2.50], [2.44, 2.45, 2.46])  # ȳ₁ − ȳ₂ = 2.50 − 2.45 = 0.050 > 0.030


def test_stability_figure_draws_means_bars_and_band_at_their_data_coordinates():
    y1, y2, u1, u2, _diff, simple, expanded = _b5(*PASSING)
    res, f = _stability_fig(*PASSING)
    assert (res.mean_first, res.mean_second, res.criterion) == pytest.approx((y1, y2, simple))
    assert f.kind == "none" and not f.marks  # no lab marks on an item figure
    assert ">before<" in f.svg and ">after<" in f.svg  # the study's own set labels
    left, top, right, bottom = f.axes_box
    means = {}
    for which, y in (("first", y1), ("second", y2)):
        use = re.search(r'<use [^>]*x="([-\d.]+)" y="([-\d.]+)"', _group(f.svg, "st", f"mean-{which}"))
        sx, sy = float(use.group(1)), float(use.group(2))
        assert sy == pytest.approx(f.to_svg(0.0, y)[1], abs=0.01) and left < sx < right
        means[which] = sx
    assert means["first"] < means["second"]  # first set left, second right
    for which, y, u in (("first", y1, u1), ("second", y2, u2)):  # the bars reach ± 2u
        ys = sorted(p[1] for p in _path_points(_group(f.svg, "st", f"bar-{which}")))
        assert ys == pytest.approx(sorted(f.to_svg(0.0, y + s * 2 * u)[1] for s in (-1, 1)), abs=0.01)
    band = _path_points(_group(f.svg, "st", "band"))
    assert sorted({p[1] for p in band}) == pytest.approx(sorted(f.to_svg(0.0, y1 + s * simple)[1] for s in (-1, 1)),
                                                         abs=0.01)
    assert sorted({p[0] for p in band}) == pytest.approx([left, right], abs=0.01)  # across the whole axes
    for gid, sign in (("expanded-high", 1), ("expanded-low", -1)):  # the dashed expanded allowance
        line = _path_points(_group(f.svg, "st", gid))
        assert [p[1] for p in line] == pytest.approx([f.to_svg(0.0, y1 + sign * expanded)[1]] * 2, abs=0.01)
    assert top <= f.to_svg(0.0, y1 + expanded)[1] and f.to_svg(0.0, y1 - expanded)[1] <= bottom


@pytest.mark.parametrize("study, kw, expect_pass, used", [
    (PASSING, {}, True, "simple"),
    (FAILING, {}, False, "simple"),
    (FAILING, {"u_first": 0.01, "u_second": 0.01}, True, "expanded"),  # 0.050 ≤ 0.030 + 2√(2·0.01²) = 0.0583
])
def test_stability_verdict_in_words_follows_the_check(study, kw, expect_pass, used):
    _y1, _y2, _u1, _u2, diff, simple, expanded = _b5(*study, kw.get("u_first"), kw.get("u_second"))
    allowance = simple if used == "simple" else expanded
    assert bool(abs(diff) <= allowance) is expect_pass  # the hand computation itself
    res, f = _stability_fig(*study, **kw)
    assert bool(res.passed) is expect_pass and res.criterion_used == used
    word = "within" if expect_pass else "exceeds"
    d = 3  # two significant digits of the allowance (0.030; 0.058)
    text = (f"difference {diff:.{d}f}".replace("-", "−") + f" mg/kg {word} the allowance {allowance:.{d}f} "
            f"({used} criterion")
    assert text in f.caption
    assert ("Passed" if expect_pass else "Not passed") in f.svg and f"{used} criterion" in f.svg
    assert ("exceeds" in f.caption) is not expect_pass
    if used == "expanded":  # passed on the expanded criterion only: said so
        assert f"beyond 0.3σ_pt = {simple:.{d}f}" in f.caption
        assert 'id="st-expanded-high"' in f.svg  # the lines of the criterion that gave the verdict


def test_stability_verdict_shows_enough_decimals_to_tell_difference_from_allowance():
    # 0.0304 against 0.030: at two significant digits both print 0.030
    assert stability_verdict(0.0304, 0.030, passed=False, criterion_used="simple") == (
        "difference 0.0304 exceeds the allowance 0.0300 (simple criterion)")


def test_stability_figure_without_u_has_no_bar_and_is_reproducible():
    first, second = [0.0861, 0.0879, 0.0860], [0.0850]  # a single value: u unknown (invented)
    res, f = _stability_fig(first, second, names=("frozen", "40 °C"), key="sx")
    assert np.isnan(res.u_second) and np.isnan(res.allowed_expanded)
    assert 'id="sx-bar-first"' in f.svg and 'id="sx-bar-second"' not in f.svg
    assert 'id="sx-expanded-high"' not in f.svg and "u unknown" in f.svg
    assert ">40 °C<" in f.svg and ">frozen<" in f.svg
    assert _stability_fig(first, second, names=("frozen", "40 °C"), key="sx")[1].svg == f.svg  # same bytes
    ids = re.findall(r'\bid="([^"]+)"', f.svg)
    assert ids and all(i.startswith("sx-") for i in ids)


def test_stability_png_render_for_looking():
    plot = F.StabilityPlot(sets=("a", "b"), values=(1.0, 1.1), set_labels=("a", "b"), mean_first=1.0,
                           mean_second=1.1, u_first=float("nan"), u_second=float("nan"), difference=-0.1,
                           criterion=0.03, allowed_expanded=float("nan"), criterion_used="simple", passed=False)
    png = F.stability_figure(plot, key="p", title="t", png=True)
    assert png[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize("first", ["roundscore.outputs.figures", "roundscore.outputs.figures_precision",
                                   "roundscore.outputs.figure_base"])
def test_either_figures_module_imports_first(first):
    # Both figure modules build on figure_base and figures imports the precision figures: any order works.
    import subprocess
    import sys

    code = (f"import {first}; from roundscore.outputs.figures import mandel_figure, stability_figure, "
            "homogeneity_figure, mandel_limits; print(mandel_figure.__module__)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "roundscore.outputs.figures_precision"


def test_step_columns_fill_each_run_without_gaps():
    # Columns centred on x reach half-way to their neighbours (as fill_between's step="mid"); a run of
    # one colour is one polygon, and neighbouring runs meet (no gap where the colour changes).
    from matplotlib.collections import PolyCollection
    from matplotlib.colors import to_hex

    _fig, ax = FB.new_figure((4, 2))
    FB.step_columns(ax, np.array([0.0, 1.0, 2.0, 3.0]), 0.0, np.array([1.0, 2.0, -1.0, 0.5]),
                   ["#111111", "#111111", "#222222", "#222222"])
    (pc,) = [c for c in ax.collections if isinstance(c, PolyCollection)]
    first, second = (p.vertices for p in pc.get_paths())
    assert [to_hex(c) for c in pc.get_facecolor()] == ["#111111", "#222222"]
    assert first[:, 0].min() == 0.0 and first[:, 0].max() == 1.5
    assert second[:, 0].min() == 1.5 and second[:, 0].max() == 3.0
    assert set(first[:, 1]) == {0.0, 1.0, 2.0} and set(second[:, 1]) == {0.0, -1.0, 0.5}


def test_mandel_envelope_colours_a_lone_lab_beyond_the_line():
    # Above MAX_BARS labs the bars become column envelopes coloured by each column's worst lab: one lab
    # beyond the 1 % line among hundreds within must still colour its column (ISO 5725-2 §7.3.1 h plot).
    from matplotlib.colors import to_hex

    n = 1200
    h = np.zeros(n)
    h[::2] = 0.5
    h[777] = 3.0  # invented
    seen = {}
    real_finish = FB.finish_figure

    def keep(fig, ax, **kw):
        seen["faces"] = [to_hex(c).upper() for c in ax.collections[0].get_facecolor()]
        seen["paths"] = ax.collections[0].get_paths()
        return real_finish(fig, ax, **kw)

    import roundscore.outputs.figures_precision as FP

    FP.finish_figure = keep
    try:
        F.mandel_figure([f"L{i}" for i in range(n)], h, statistic="h", critical_5=1.96, critical_1=2.58,
                        key="m", title="t")
    finally:
        FP.finish_figure = real_finish
    vermillion = F.PALETTE["vermillion"].upper()
    assert seen["faces"].count(vermillion) == 1
    run = seen["paths"][seen["faces"].index(vermillion)].vertices
    assert run[:, 0].min() <= 777 <= run[:, 0].max() and run[:, 1].max() == 3.0
