"""Score strips of the lab pages: bins, limits by score, the lab's marker, clamping, size and reproducibility.

Scores are small invented sets, so each expected count is worked out by hand in the comment beside it.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from roundscore.outputs import strips as S
from roundscore.outputs.look import SIGNAL_COLOUR

# invented scores: bins of 0.25 over ±4 → 0.1 and 0.2 share [0, 0.25); -2.6 in [-2.75, -2.5); 5.0 beyond +4
VALUES = [0.1, 0.2, -2.6, 1.9, 5.0, -4.5, float("nan")]


def _strip(values=VALUES, score="z"):
    return S.score_strip(values, measurand="iodine", score=score, title="iodine")


def _bars(svg: str) -> list[tuple[float, float]]:
    """(x, height) of each stroke of the distribution path."""
    d = re.search(r'<path d="([^"]+)" stroke="#6B6B6B"', svg).group(1)
    return [(float(x), float(h)) for x, h in re.findall(r"M([\d.]+) [\d.]+v-([\d.]+)", d)]


def test_counts_bins_and_beyond():
    f = _strip()
    assert f.n == 6  # NaN is not scored
    bars = _bars(f.svg)
    assert len(bars) == 3  # [0, 0.25) twice, [-2.75, -2.5) and [1.75, 2) once each, hand count; 5.0 and -4.5 beyond
    heights = sorted(h for _, h in bars)
    assert heights[-1] == pytest.approx(2 * heights[0], abs=0.11)  # unit blocks: 2 labs twice as tall as 1
    assert "1 above 4 →" in f.svg and "← 1 below −4" in f.svg


def test_bar_positions_follow_the_axis():
    f = _strip([0.1])
    (x, _), = _bars(f.svg)
    assert S._x(0.0) < x < S._x(0.25)  # centre of the bin [0, 0.25)
    assert S._x(-S.STRIP_RANGE) == S._PLOT[0] and S._x(S.STRIP_RANGE) == S._PLOT[1]


@pytest.mark.parametrize("score, dashed, solid", [("z", 2, 2), ("z-prime", 2, 2), ("en", 0, 2)])
def test_limit_lines_follow_the_score(score, dashed, solid):
    # ISO 13528 §9.4 (z: warning ±2 dashed, action ±3 solid) and §9.7 (En: action ±1), from memory
    svg = _strip(score=score).svg
    lines = re.findall(r'<path d="((?:M[\d.]+ [\d.]+V[\d.]+)+)" stroke="#444444" '
                       r'stroke-width="0.9"( stroke-dasharray)?',
                       svg)
    n_dashed = sum(p.count("M") for p, d in lines if d)
    n_solid = sum(p.count("M") for p, d in lines if not d)
    assert (n_dashed, n_solid) == (dashed, solid)
    xs = sorted(float(x) for p, _ in lines for x in re.findall(r"M([\d.]+)", p))
    expect = [-1.0, 1.0] if score == "en" else [-3.0, -2.0, 2.0, 3.0]
    assert xs == pytest.approx([S._x(v) for v in expect], abs=0.06)


@pytest.mark.parametrize("value, signal, shape", [(0.5, "acceptable", "<circle"), (2.4, "warning", "<path d="),
                                                  (-3.3, "action", "<rect")])
def test_marker_shape_and_colour_by_signal(value, signal, shape):
    f = _strip()
    out = f.for_lab("K07", value, signal)
    assert out.startswith(f.svg[:f.svg.rfind("</svg>")])  # the shared part kept as it is
    mark = out[out.index('<g class="lab-mark"'):]
    assert shape in mark and SIGNAL_COLOUR[signal] in mark and f"{value:.2f}" in mark
    assert 'aria-label="iodine: ' in mark and mark.count("(K07)") == 1
    x = float(re.search(r'<line x1="([\d.]+)"', mark).group(1))
    assert x == pytest.approx(S._x(value), abs=0.06)


@pytest.mark.parametrize("value", [6.25, -9.0])
def test_score_beyond_the_axis_is_clamped_with_its_value(value):
    mark = _strip().for_lab("K07", value, "action")
    mark = mark[mark.index('<g class="lab-mark"'):]
    x = float(re.search(r'<line x1="([\d.]+)"', mark).group(1))
    assert x == pytest.approx(S._x(np.sign(value) * S.STRIP_RANGE), abs=0.06)
    assert f">{value:.3g}</text>" in mark and "stroke-dasharray" in mark


def test_not_scored_lab_has_no_marker():
    mark = _strip().for_lab("K07", float("nan"), "not-scored")
    mark = mark[mark.index('<g class="lab-mark"'):]
    assert "not scored" in mark and "<line" not in mark


def test_no_scores_at_all():
    f = _strip([])
    assert f.n == 0 and "no scores for this measurand" in f.svg and "#6B6B6B" not in f.svg


def test_size_does_not_grow_with_labs_and_output_is_reproducible():
    rng = np.random.default_rng(3)
    small = _strip(rng.normal(size=30))
    big = _strip(rng.normal(size=20_000))
    assert len(big.svg) < 3_000 and len(small.svg) < 3_000  # about 1.7 KB measured
    assert ' stroke-dasharray="' in small.svg.split('stroke="#6B6B6B"')[1][:40]  # unit blocks when few
    assert ' stroke-dasharray="' not in big.svg.split('stroke="#6B6B6B"')[1][:40]  # bars when many
    assert _strip(VALUES).svg == _strip(list(VALUES)).svg
    assert big.for_lab("X1", 0.3, "acceptable") == big.for_lab("X1", 0.3, "acceptable")


def test_legend_names_the_limits():
    text = S.strip_legend("performance")
    assert "satisfactory" in text and "unsatisfactory" in text and "±" not in text and "|score| ≥ 3" in text
