"""Figures of the precision and item checks: Mandel's h and k by laboratory, homogeneity item means.

Drawn once per measurand like every shared figure (see :mod:`roundscore.io.figures`, which re-exports
these names and holds the helpers used here).
"""

from __future__ import annotations

from typing import Literal, Sequence

import numpy as np

from ..look import PALETTE, SIGNAL_MARKER
from ..stats.precision import mandel_h_critical, mandel_k_critical
from .figures import _WIDE, MAX_BARS, PROFILE_POINTS, SvgFigure, _codes, _finish, _new, _png

__all__ = ["mandel_limits", "mandel_figure", "homogeneity_figure"]


def mandel_limits(p: int, n: int) -> dict[str, float]:
    """Mandel indicator values from :mod:`roundscore.stats.precision` (ISO 5725-2 §7.3.1, Table 6).

    Returns ``h_5, h_1`` for p labs and ``k_5, k_1`` for p labs of n replicates.
    """
    return {"h_5": mandel_h_critical(p, 0.05), "h_1": mandel_h_critical(p, 0.01),
            "k_5": mandel_k_critical(p, n, 0.05), "k_1": mandel_k_critical(p, n, 0.01)}


def mandel_figure(labs: Sequence[str], values: Sequence[float], *, statistic: Literal["h", "k"],
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
    fig, ax = _new(_WIDE, bottom=0.2)
    size = np.abs(v) if statistic == "h" else v
    level = np.where(size > critical_1, "action", np.where(size > critical_5, "warning", "acceptable"))
    level = np.where(np.isfinite(v), level, "not-scored")
    colours = [{"action": PALETTE["vermillion"], "warning": PALETTE["orange"]}.get(s, PALETTE["blue"])
               for s in level]
    if len(v) <= MAX_BARS:
        ax.bar(pos, np.nan_to_num(v), width=0.7, color=colours, edgecolor="#333333", linewidth=0.3)
        _codes(ax, pos, labs, len(v), "laboratory")
    else:  # many labs: the envelope of PROFILE_POINTS columns, coloured by each column's worst level
        rank = {"not-scored": 0, "acceptable": 1, "warning": 2, "action": 3}
        col = np.minimum((pos * PROFILE_POINTS / len(v)).astype(int), PROFILE_POINTS - 1)
        vv = np.nan_to_num(v)
        hi, lo = np.zeros(PROFILE_POINTS), np.zeros(PROFILE_POINTS)
        np.maximum.at(hi, col, vv)
        np.minimum.at(lo, col, vv)
        worst = np.zeros(PROFILE_POINTS, dtype=int)
        np.maximum.at(worst, col, np.array([rank[x] for x in level]))
        centre = (np.arange(PROFILE_POINTS) + 0.5) * len(v) / PROFILE_POINTS - 0.5
        for s in ("acceptable", "warning", "action"):
            sel = worst == rank[s]
            if sel.any():
                ax.fill_between(centre, lo, hi, where=sel, step="mid", linewidth=0,
                                color={"action": PALETTE["vermillion"], "warning": PALETTE["orange"]}
                                .get(s, PALETTE["blue"]))
        # codes for the most extreme labs beyond the 1 % line only (at most MAX_BARS: they must stay legible)
        far = np.flatnonzero(level == "action")
        far = np.sort(far[np.argsort(-np.abs(v[far]), kind="stable")[:MAX_BARS]])
        _codes(ax, pos[far], [labs[i] for i in far], len(far), f"{len(v)} laboratories")
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
    ax.legend(frameon=False, fontsize=7, loc="upper left", ncol=3)
    if png:
        return _png(fig)
    caption = (f"Mandel's {statistic} for {len(v)} laboratories with the 5 % (dashed) and 1 % (solid) "
               "indicator lines of ISO 5725-2.")
    marks = {lab: (float(p), float(x)) for lab, p, x in zip(labs, pos, v) if np.isfinite(x)}
    return _finish(fig, ax, key=key, title=title, caption=caption, kind="bar", marks=marks)


def homogeneity_figure(items: Sequence[str], values: Sequence[float], *, item_labels: Sequence[str],
                       item_means: Sequence[float], general_mean: float, sigma_pt: float, key: str, title: str,
                       unit: str = "", png: bool = False) -> SvgFigure | bytes:
    """Homogeneity: each item's replicates (small dots) and mean (circle), the general mean ± 0.3σ_pt.

    The band shows the size of 0.3σ_pt, the scale of the criterion
    s_s ≤ 0.3σ_pt (ISO 13528:2015 §B.2, from memory); the check itself is in
    the items table.
    """
    fig, ax = _new(_WIDE, right=0.97, bottom=0.2)
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
    _codes(ax, np.arange(len(item_labels), dtype=float), list(item_labels), 40, "test item")
    lo, hi = ax.get_ylim()
    ax.set_ylim(lo, hi + 0.25 * (hi - lo))  # head room for the legend
    ax.set_ylabel(f"value ({unit})" if unit else "value")
    ax.set_title(title, loc="left")
    ax.legend(frameon=False, fontsize=7, loc="upper left", ncol=4)
    if png:
        return _png(fig)
    caption = (f"Homogeneity: replicates and means of {len(item_labels)} test items, the general mean and a band "
               "of ± 0.3σ_pt for scale.")
    return _finish(fig, ax, key=key, title=title, caption=caption)

