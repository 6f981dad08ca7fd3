"""Figures of the precision and item checks: Mandel's h and k by laboratory, homogeneity and stability.

Drawn once per measurand like every shared figure (see :mod:`roundscore.outputs.figures`, which draws them for
a round); the plumbing they share with the score figures is in :mod:`roundscore.outputs.figure_base`.
"""

from __future__ import annotations

import textwrap
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal, overload

import numpy as np

from roundscore.model.signals import SIGNALS
from roundscore.outputs.look import PALETTE, SIGNAL_MARKER
from roundscore.stats.precision import mandel_h_critical, mandel_k_critical
from roundscore.outputs.figure_base import (MAX_BARS, PROFILE_POINTS, WIDE, SvgFigure, codes_under_axis, finish_figure,
                                            legend, new_figure, png_bytes, step_columns)

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from roundscore.stats.items import StabilityResult

__all__ = ["mandel_limits", "mandel_figure", "homogeneity_figure", "stability_figure", "stability_verdict",
           "StabilityPlot", "MandelStatistic", "MANDEL_STATISTICS"]

#: Mandel's between-lab (h) and within-lab (k) statistic, in the order they are drawn.
MandelStatistic = Literal["h", "k"]
MANDEL_STATISTICS: tuple[MandelStatistic, MandelStatistic] = ("h", "k")
#: Values as the figures take them: a sequence or an array of floats.
Values = Sequence[float] | np.ndarray


def mandel_limits(p: int, n: int) -> dict[str, float]:
    """Mandel indicator values from :mod:`roundscore.stats.precision` (ISO 5725-2 §7.3.1, Table 6).

    Returns ``h_5, h_1`` for p labs and ``k_5, k_1`` for p labs of n replicates.
    """
    return {"h_5": mandel_h_critical(p, 0.05), "h_1": mandel_h_critical(p, 0.01),
            "k_5": mandel_k_critical(p, n, 0.05), "k_1": mandel_k_critical(p, n, 0.01)}


@overload
def mandel_figure(labs: Sequence[str], values: Values, *, statistic: MandelStatistic, critical_5: float,
                  critical_1: float, key: str, title: str, png: Literal[False] = False) -> SvgFigure: ...
@overload
def mandel_figure(labs: Sequence[str], values: Values, *, statistic: MandelStatistic, critical_5: float,
                  critical_1: float, key: str, title: str, png: Literal[True]) -> bytes: ...
def mandel_figure(labs: Sequence[str], values: Values, *, statistic: MandelStatistic,
                  critical_5: float, critical_1: float, key: str, title: str,
                  png: bool = False) -> SvgFigure | bytes:
    """Mandel's h or k by lab, with the 5 % (dashed) and 1 % (solid) indicator lines.

    Bars beyond the 1 % line are vermillion with a square, beyond 5 % orange
    with a triangle, others blue with a circle (shape and colour both).
    Above :data:`MAX_BARS` labs the bars become the envelope (highest and
    lowest value) of :data:`PROFILE_POINTS` columns of labs, each coloured by
    its worst level, so a single lab beyond a line still shows; labs beyond
    the 5 % line get a marker, and the :data:`MAX_BARS` most extreme of those
    beyond the 1 % line their code (the file stays bounded: measured about
    70-90 KB at 2000 labs, was 600 KB).

    References
    ----------
    .. [1] ISO 5725-2:1994, §7.3.1 and Figures 2-5 (h and k plots).
    """
    v = np.asarray(values, dtype=float)
    pos = np.arange(len(v), dtype=float)
    fig, ax = new_figure(WIDE, bottom=0.2)
    size = np.abs(v) if statistic == "h" else v
    level = np.where(size > critical_1, "action", np.where(size > critical_5, "warning", "acceptable"))
    level = np.where(np.isfinite(v), level, "not-scored")
    colours = [{"action": PALETTE["vermillion"], "warning": PALETTE["orange"]}.get(s, PALETTE["blue"])
               for s in level]
    if len(v) <= MAX_BARS:
        ax.bar(pos, np.nan_to_num(v), width=0.7, color=colours, edgecolor="#333333", linewidth=0.3)
        codes_under_axis(ax, pos, labs, len(v), "laboratory")
    else:  # many labs: the envelope of PROFILE_POINTS columns, coloured by each column's worst level
        rank = {n: k.rank for n, k in SIGNALS.items()}  # the levels are read as signals (roundscore.model.signals)
        col = np.minimum((pos * PROFILE_POINTS / len(v)).astype(int), PROFILE_POINTS - 1)
        vv = np.nan_to_num(v)
        hi, lo = np.zeros(PROFILE_POINTS), np.zeros(PROFILE_POINTS)
        np.maximum.at(hi, col, vv)
        np.minimum.at(lo, col, vv)
        worst = np.zeros(PROFILE_POINTS, dtype=int)
        np.maximum.at(worst, col, np.array([rank[x] for x in level]))
        centre = (np.arange(PROFILE_POINTS) + 0.5) * len(v) / PROFILE_POINTS - 0.5
        colour = {rank["action"]: PALETTE["vermillion"], rank["warning"]: PALETTE["orange"]}
        step_columns(ax, centre, lo, hi, [colour.get(w, PALETTE["blue"]) for w in worst])
        # codes for the most extreme labs beyond the 1 % line only (at most MAX_BARS: they must stay legible)
        far = np.flatnonzero(level == "action")
        far = np.sort(far[np.argsort(-np.abs(v[far]), kind="stable")[:MAX_BARS]])
        codes_under_axis(ax, pos[far], [labs[int(i)] for i in far], len(far), f"{len(v)} laboratories")
    for s, word in (("acceptable", "within the 5 % line"), ("warning", "beyond 5 %"), ("action", "beyond 1 %")):
        sel = (level == s) & ((len(v) <= MAX_BARS) | (level != "acceptable"))
        if sel.any():
            tip = v[sel] + np.where(v[sel] >= 0, 0.12, -0.12)
            ax.plot(pos[sel], tip, linestyle="none", marker=SIGNAL_MARKER[s], markersize=4,
                    markerfacecolor=colours[int(np.flatnonzero(sel)[0])], markeredgecolor="#000000",
                    markeredgewidth=0.5, label=word)
    signs = (1, -1) if statistic == "h" else (1,)
    for crit, style, word in ((critical_5, "--", "5 %"), (critical_1, "-", "1 %")):
        if np.isfinite(crit):
            for sgn in signs:
                ax.axhline(sgn * crit, color="#444444", linestyle=style, linewidth=0.8)
            ax.text(1.0, crit, f" {word}: {crit:.2f}", transform=ax.get_yaxis_transform(), va="center", fontsize=7)
    ax.axhline(0, color="#000000", linewidth=0.6)
    ax.set_xlim(-0.8, max(len(v), 1) - 0.2)
    finite = np.abs(v[np.isfinite(v)])
    reach = max([*finite, *(c for c in (critical_5, critical_1) if np.isfinite(c)), 1.0])
    ax.set_ylim(-1.2 * reach if statistic == "h" else 0.0, 1.4 * reach)  # head room for the legend
    ax.set_ylabel(f"Mandel {statistic}")
    ax.set_title(title, loc="left")
    legend(ax, frameon=False, fontsize=7, loc="upper left", ncol=3)
    if png:
        return png_bytes(fig)
    caption = (f"Mandel's {statistic} for {len(v)} laboratories with the 5 % (dashed) and 1 % (solid) "
               "indicator lines of ISO 5725-2.")
    marks = {lab: (float(p), float(x)) for lab, p, x in zip(labs, pos, v) if np.isfinite(x)}
    return finish_figure(fig, ax, key=key, title=title, caption=caption, kind="bar", marks=marks)


@overload
def homogeneity_figure(items: Sequence[str], values: Values, *, item_labels: Sequence[str],
                       item_means: Sequence[float], general_mean: float, sigma_pt: float, key: str, title: str,
                       unit: str = "", png: Literal[False] = False) -> SvgFigure: ...
@overload
def homogeneity_figure(items: Sequence[str], values: Values, *, item_labels: Sequence[str],
                       item_means: Sequence[float], general_mean: float, sigma_pt: float, key: str, title: str,
                       unit: str = "", png: Literal[True]) -> bytes: ...
def homogeneity_figure(items: Sequence[str], values: Values, *, item_labels: Sequence[str],
                       item_means: Sequence[float], general_mean: float, sigma_pt: float, key: str, title: str,
                       unit: str = "", png: bool = False) -> SvgFigure | bytes:
    """Homogeneity: each item's replicates (small dots) and mean (circle), the general mean ± 0.3σ_pt.

    The band shows the size of 0.3σ_pt, the scale of the criterion
    s_s ≤ 0.3σ_pt (ISO 13528:2015 §B.2, from memory); the check itself is in
    the items table.
    """
    fig, ax = new_figure(WIDE, right=0.97, bottom=0.2)
    index = {lab: i for i, lab in enumerate(item_labels)}
    xs = np.array([index.get(it, -1) for it in items], dtype=float)
    vals = np.asarray(values, dtype=float)
    ax.plot(xs, vals, linestyle="none", marker=".", markersize=4, color="#555555", label="replicates")
    ax.plot(np.arange(len(item_means)), item_means, linestyle="none", marker="o", markersize=6,
            markerfacecolor=PALETTE["blue"], markeredgecolor="#000000", markeredgewidth=0.5, label="item mean")
    ax.axhline(general_mean, color="#000000", linewidth=1.0, label="general mean")
    if np.isfinite(sigma_pt) and sigma_pt > 0:
        ax.axhspan(general_mean - 0.3 * sigma_pt, general_mean + 0.3 * sigma_pt, color=PALETTE["sky"], alpha=0.3,
                   linewidth=0, label="general mean ± 0.3σ_pt")
    codes_under_axis(ax, np.arange(len(item_labels), dtype=float), list(item_labels), 40, "test item")
    lo, hi = ax.get_ylim()
    ax.set_ylim(lo, hi + 0.25 * (hi - lo))  # head room for the legend
    ax.set_ylabel(f"value ({unit})" if unit else "value")
    ax.set_title(title, loc="left")
    ax.legend(frameon=False, fontsize=7, loc="upper left", ncol=4)
    if png:
        return png_bytes(fig)
    caption = (f"Homogeneity: replicates and means of {len(item_labels)} test items, the general mean and a band "
               "of ± 0.3σ_pt for scale.")
    return finish_figure(fig, ax, key=key, title=title, caption=caption)



#: Horizontal place of each stability set on the axis, and of its mean beside its values (axis units).
_SET_POS = (0.0, 1.0)
_MEAN_SHIFT = 0.16
#: Half-width of the column of a set's values, spread by item left of its mean (common practice).
_VALUE_SPREAD = 0.12
#: Colour and marker of the first and second stability set (not the signal colours: a set is not a signal).
_SET_LOOK = ((PALETTE["blue"], "o"), (PALETTE["purple"], "D"))
#: Characters per line of the stability figure's legend and verdict (they sit right of the axes).
_LEGEND_WIDTH = 42


def _sig(x: float, digits: int) -> int:
    """Decimals that show ``x`` to about ``digits`` significant digits (at least 0)."""
    return max(0, digits - 1 - int(np.floor(np.log10(abs(x))))) if np.isfinite(x) and x != 0 else digits


def _num(x: float, decimals: int) -> str:
    return f"{x:.{decimals}f}".replace("-", "−")


def stability_verdict(difference: float, allowance: float, *, passed: bool, criterion_used: str,
                      unit: str = "", criterion: float = float("nan")) -> str:
    """The stability verdict in words: "difference −0.012 mg/kg within the allowance 0.030 (simple criterion)".

    ``passed`` and the numbers are the check's own (nothing is recomputed);
    they are shown to two significant digits of the allowance, with more
    decimals when the two would otherwise print alike. When the expanded
    criterion passed a difference beyond 0.3σ_pt (``criterion``), it says so.
    """
    d = _sig(allowance, 2)
    while d < 12 and _num(abs(difference), d) == _num(allowance, d) and abs(difference) != allowance:
        d += 1
    u = f" {unit}" if unit else ""
    text = (f"difference {_num(difference, d)}{u} {'within' if passed else 'exceeds'} the allowance "
            f"{_num(allowance, d)} ({criterion_used} criterion")
    if passed and criterion_used == "expanded" and np.isfinite(criterion) and abs(difference) > criterion:
        text += f"; beyond 0.3σ_pt = {_num(criterion, d)}"
    return text + ")"


@dataclass(frozen=True, slots=True, kw_only=True)
class StabilityPlot:
    """What the stability figure draws: the stability table's measurements and the check's own numbers.

    Attributes
    ----------
    sets, values : tuples of equal length
        Set label and value of each measurement of the stability table.
    items : tuple of str or None
        Item label of each measurement: a set's values are spread by item
        (replicates of an item one above the other).
    set_labels : (str, str)
        The first (ȳ₁: e.g. before, reference storage) and second (ȳ₂: after,
        transport) set, as the study names them.
    mean_first, mean_second, u_first, u_second, difference : float
        The check's means, their standard uncertainties (nan: no bar) and
        ȳ₁ − ȳ₂ (:class:`~roundscore.stats.items.StabilityResult`).
    criterion, allowed_expanded : float
        0.3σ_pt (the band ȳ₁ ± 0.3σ_pt) and 0.3σ_pt + 2√(u₁² + u₂²)
        (dashed lines; left out when nan).
    criterion_used, passed
        Which criterion gives the verdict and the verdict (written in the
        figure and the caption by :func:`stability_verdict`).
    unit : str
        The measurand's unit, for the axis.
    """

    sets: tuple[str, ...]
    values: tuple[float, ...]
    items: tuple[str, ...] | None = None
    set_labels: tuple[str, str]
    mean_first: float
    mean_second: float
    u_first: float
    u_second: float
    difference: float
    criterion: float
    allowed_expanded: float
    criterion_used: str
    passed: bool
    unit: str = ""

    @classmethod
    def of(cls, check: StabilityResult, *, sets: Sequence[str], values: Values, set_labels: tuple[str, str],
           items: Sequence[str] | None = None, unit: str = "") -> StabilityPlot:
        """The plot of a stability check and the measurements it was computed from (nothing is recomputed)."""
        return cls(sets=tuple(str(s) for s in sets), values=tuple(float(v) for v in values),
                   items=None if items is None else tuple(items), set_labels=set_labels,
                   mean_first=check.mean_first, mean_second=check.mean_second, u_first=check.u_first,
                   u_second=check.u_second, difference=check.difference, criterion=check.criterion,
                   allowed_expanded=check.allowed_expanded, criterion_used=check.criterion_used,
                   passed=bool(check.passed), unit=unit)


@overload
def stability_figure(plot: StabilityPlot, *, key: str, title: str, png: Literal[False] = False) -> SvgFigure: ...
@overload
def stability_figure(plot: StabilityPlot, *, key: str, title: str, png: Literal[True]) -> bytes: ...
def stability_figure(plot: StabilityPlot, *, key: str, title: str, png: bool = False) -> SvgFigure | bytes:
    """Stability: the values of both sets, each set's mean ± 2u, the allowance round the first mean.

    Notes
    -----
    The second mean lies inside the band exactly when the simple criterion
    |ȳ₁ − ȳ₂| ≤ 0.3σ_pt is met, inside the dashed lines when the expanded one
    is. The means are the check's (item means averaged when a set holds two
    or more items), so they can differ a little from the plain mean of the
    values drawn.

    References
    ----------
    .. [1] ISO 13528:2015, B.5 (stability criteria).
    """
    fig, ax = new_figure(WIDE, left=0.11, right=0.56, bottom=0.16, top=0.88)
    first, second = (str(s) for s in plot.set_labels)
    have_band, have_expanded = _draw_allowance(ax, plot, first)
    vals = np.asarray(plot.values, dtype=float)
    _draw_sets(ax, plot, vals, (first, second))
    _fit_axes(fig, ax, plot, vals, (first, second), have_band=have_band, have_expanded=have_expanded)
    ax.set_title(title, loc="left")
    allowance = plot.criterion if plot.criterion_used == "simple" else plot.allowed_expanded
    verdict = stability_verdict(plot.difference, allowance, passed=plot.passed, criterion_used=plot.criterion_used,
                                unit=plot.unit, criterion=plot.criterion)
    said = f"{'Passed' if plot.passed else 'Not passed'} ({first} − {second}): {verdict}."
    # the verdict heads the legend: one block right of the axes, so neither covers data nor the other
    legend = ax.legend(frameon=False, fontsize=7, loc="upper left", bbox_to_anchor=(1.03, 1.0), borderaxespad=0,
                       title=_wrap(said, _LEGEND_WIDTH + 4), alignment="left",
                       title_fontproperties={"size": 7.5, "weight": "bold"})
    legend.set_gid("legend")
    if png:
        return png_bytes(fig)
    caption = (f"Stability: the values of the sets “{first}” (circles) and “{second}” (diamonds), each set's "
               "mean with a bar of ± 2 standard uncertainties, and the allowance round the first mean: the band "
               "± 0.3σ_pt of the simple criterion"
               + (" and the dashed lines ± (0.3σ_pt + 2√(u₁² + u₂²)) of the expanded criterion" if have_expanded
                  else "")
               + f" (ISO 13528 B.5). {said}")
    return finish_figure(fig, ax, key=key, title=title, caption=caption)


def _draw_allowance(ax: Axes, plot: StabilityPlot, first: str) -> tuple[bool, bool]:
    """The band ȳ₁ ± 0.3σ_pt and the dashed lines of the expanded criterion; whether each was drawn."""
    criterion, allowed_expanded, mean_first = plot.criterion, plot.allowed_expanded, plot.mean_first
    have_band = bool(np.isfinite(criterion) and criterion > 0)
    have_expanded = bool(np.isfinite(allowed_expanded))
    if have_band:
        band = ax.axhspan(mean_first - criterion, mean_first + criterion, color=PALETTE["sky"], alpha=0.3,
                          linewidth=0, label=_wrap(f"{first} mean ± 0.3σ_pt (simple criterion)", _LEGEND_WIDTH))
        band.set_gid("band")
    if have_expanded:
        for sgn, gid in ((1, "expanded-high"), (-1, "expanded-low")):
            word = _wrap(f"{first} mean ± (0.3σ_pt + 2√(u₁² + u₂²)) (expanded criterion)", _LEGEND_WIDTH)
            line = ax.axhline(mean_first + sgn * allowed_expanded, color="#444444", linestyle="--", linewidth=0.9,
                              label=word if sgn > 0 else None)
            line.set_gid(gid)
    return have_band, have_expanded


def _draw_sets(ax: Axes, plot: StabilityPlot, vals: np.ndarray, names: tuple[str, str]) -> None:
    """Each set's values (spread by item) left of its mean, and the mean ± 2u."""
    labels = np.asarray(plot.sets, dtype=object)
    its = np.asarray(plot.items if plot.items is not None else [""] * len(vals), dtype=object)
    means, us = (plot.mean_first, plot.mean_second), (plot.u_first, plot.u_second)
    for i, (name, pos, (colour, marker)) in enumerate(zip(names, _SET_POS, _SET_LOOK)):
        sel = labels == name
        order = list(dict.fromkeys(its[sel]))
        rank = np.array([order.index(it) for it in its[sel]], dtype=float)
        spread = (rank + 0.5) / max(len(order), 1) * 2 * _VALUE_SPREAD - _VALUE_SPREAD
        ax.plot(pos - _MEAN_SHIFT + spread, vals[sel], linestyle="none", marker=marker, markersize=4,
                markerfacecolor=_pale(colour), markeredgecolor=colour, markeredgewidth=0.9,
                label=_wrap(f"{name}: values ({int(sel.sum())})", _LEGEND_WIDTH))
        u = us[i]
        bar = 2 * u if np.isfinite(u) else None
        drawn = ax.errorbar([pos + _MEAN_SHIFT], [means[i]], yerr=bar, linestyle="none", marker=marker,
                            markersize=8, markerfacecolor=colour, markeredgecolor="#000000", markeredgewidth=0.6,
                            ecolor="#000000", elinewidth=1.0, capsize=4,
                            label=_wrap(f"{name}: mean" + (" ± 2u" if bar is not None else " (u unknown: no bar)"),
                                        _LEGEND_WIDTH))
        which = "first" if i == 0 else "second"
        drawn.lines[0].set_gid(f"mean-{which}")
        for bars in drawn.lines[2]:
            bars.set_gid(f"bar-{which}")


def _fit_axes(fig: Figure, ax: Axes, plot: StabilityPlot, vals: np.ndarray, names: tuple[str, str], *,
              have_band: bool, have_expanded: bool) -> None:
    """Set names under the axis (wrapped), the limits holding every value, bar and line, the labels."""
    ticks = [_wrap(names[0], 24), _wrap(names[1], 24)]
    ax.set_xticks(list(_SET_POS), labels=ticks)
    lines = max(t.count("\n") + 1 for t in ticks)
    fig.subplots_adjust(bottom=(lines * 11 + 26) / (fig.get_figheight() * 72))  # room for wrapped set names
    ax.set_xlim(_SET_POS[0] - 0.55, _SET_POS[1] + 0.55)
    means, us = (plot.mean_first, plot.mean_second), (plot.u_first, plot.u_second)
    mean_first, criterion, allowed_expanded = plot.mean_first, plot.criterion, plot.allowed_expanded
    reach = [*vals[np.isfinite(vals)], *means]
    reach += [m + s * 2 * u for m, u in zip(means, us) if np.isfinite(u) for s in (-1, 1)]
    if have_band:
        reach += [mean_first - criterion, mean_first + criterion]
    if have_expanded:
        reach += [mean_first - allowed_expanded, mean_first + allowed_expanded]
    reach = [r for r in reach if np.isfinite(r)]
    if reach:
        lo, hi = min(reach), max(reach)
        pad = 0.08 * (hi - lo) if hi > lo else max(abs(hi) * 0.05, 1e-9)
        ax.set_ylim(lo - pad, hi + pad)
    ax.set_ylabel(f"value ({plot.unit})" if plot.unit else "value")
    ax.set_xlabel("stability set")


def _pale(colour: str, keep: float = 0.45) -> str:
    """``colour`` mixed with white (the face of a set's individual values)."""
    r, g, b = (int(colour[i:i + 2], 16) for i in (1, 3, 5))
    return "#{:02X}{:02X}{:02X}".format(*(round(c + (255 - c) * (1 - keep)) for c in (r, g, b)))


#: Lines of a wrapped label shown in a figure (a longer text ends in "…"; the tables show it whole).
_WRAP_LINES = 4


def _wrap(text: str, width: int) -> str:
    lines = textwrap.wrap(text, width, max_lines=_WRAP_LINES, placeholder=" …")
    return "\n".join(lines)
