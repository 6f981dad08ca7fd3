"""The figure of a nominal or ordinal measurand: the categories reported for each test item as a stacked bar,
the assigned category marked; a lab's page marks its own result on each bar.

Drawn from the evaluation's ``qualitative_distribution`` table (nothing is counted here), in the look of
:mod:`roundscore.outputs.look`; a lab's mark carries its signal as symbol and word, never by colour alone.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, field

import pandas as pd

from roundscore.outputs.figure_base import SvgFigure, finish_figure, new_figure
from roundscore.outputs.look import PALETTE, SIGNAL_SYMBOL, SIGNAL_WORD

__all__ = ["QualitativeFigure", "qualitative_figure", "CATEGORY_COLOURS"]

#: Category colours in order (ordinal: from the lowest category up); the palette's colour-blind safe hues.
CATEGORY_COLOURS = (PALETTE["sky"], PALETTE["blue"], PALETTE["yellow"], PALETTE["orange"], PALETTE["vermillion"],
                    PALETTE["purple"], PALETTE["green"], PALETTE["grey"])


@dataclass(frozen=True, slots=True, kw_only=True)
class QualitativeFigure:
    """The shared figure and, by lab, where its results sit: (x at the middle of the category's segment, y the
    item's bar, the signal) per item."""

    figure: SvgFigure
    marks: dict[str, list[tuple[float, float, str]]] = field(default_factory=dict)

    def for_lab(self, lab: str, words: str = "signals") -> str:
        """The SVG with a ring on the lab's category of each item and its signal in symbol and word."""
        spots = self.marks.get(lab)
        if not spots:
            return self.figure.svg
        ink = PALETTE["black"]
        parts = []
        for x, y, signal in spots:
            sx, sy = self.figure.to_svg(x, y)
            word = SIGNAL_WORD[words].get(signal, signal)
            text = html.escape(f"your lab ({lab}): {SIGNAL_SYMBOL.get(signal, '')} {word}")
            left, _, right, _ = self.figure.axes_box
            anchor, tx = ("end", sx - 10) if sx > (left + right) / 2 else ("start", sx + 10)
            width = 4.7 * len(f"your lab ({lab}): x {word}")  # about the width of 8 pt DejaVu Sans
            bx = tx - width if anchor == "end" else tx
            parts.append(f'<circle cx="{sx:.2f}" cy="{sy:.2f}" r="7" fill="none" stroke="{ink}" stroke-width="2.2"/>'
                         f'<rect x="{bx - 1:.2f}" y="{sy - 17:.2f}" width="{width + 2:.2f}" height="10" '
                         f'fill="white" fill-opacity="0.85"/>'
                         f'<text x="{tx:.2f}" y="{sy - 9:.2f}" font-size="8" font-family="DejaVu Sans" '
                         f'text-anchor="{anchor}" fill="{ink}">{text}</text>')
        svg = self.figure.svg
        end = svg.rfind("</svg>")
        label = html.escape(f"your results ({lab})", quote=True)
        return svg[:end] + f'<g class="lab-mark" aria-label="{label}">{"".join(parts)}</g>' + svg[end:]


def qualitative_figure(name: str, title: str, kind: str, dist: pd.DataFrame, rows: pd.DataFrame,
                       ) -> QualitativeFigure | None:
    """One measurand's figure from its distribution rows (and its ``qualitative`` rows for the labs' marks)."""
    if not len(dist) or not dist["count"].sum():
        return None
    items = list(dict.fromkeys(dist["item"]))
    cats = list(dict.fromkeys(dist.sort_values("order", kind="stable")["category"]))
    height = 0.6 * len(items) + 1.4
    fig, ax = new_figure((7.2, height), left=0.14, right=0.97, top=1 - 0.55 / height, bottom=0.6 / height)
    starts: dict[tuple[str, str], tuple[float, float]] = {}
    for y, item in enumerate(items):
        g = dist[dist["item"] == item].set_index("category")
        total = float(g["count"].sum())
        left = 0.0
        for j, c in enumerate(cats):
            share = float(g.at[c, "count"]) / total if total else 0.0
            assigned = bool(g.at[c, "assigned"])
            ax.barh(y, share, left=left, height=0.6, color=CATEGORY_COLOURS[j % len(CATEGORY_COLOURS)],
                    edgecolor=PALETTE["black"] if assigned else "white", linewidth=2.4 if assigned else 0.6)
            if assigned:  # a shape and a word, not only the outline (hatching does not survive the PDF)
                ax.plot([left + share / 2], [y - 0.42], marker="v", color=PALETTE["black"], markersize=6,
                        linestyle="none")
                ax.text(left + share / 2 + 0.012, y - 0.42, "assigned", fontsize=7, va="center", ha="left")
            if share >= 0.08:
                ax.text(left + share / 2, y + 0.02, str(int(g.at[c, "count"])), ha="center", va="center",
                        fontsize=8, bbox={"boxstyle": "round,pad=0.15", "facecolor": "white", "edgecolor": "none"})
            starts[(item, c)] = (left + share / 2, float(y))
            left += share
    ax.set_yticks(range(len(items)), [i or "(one item)" for i in items])
    ax.set_ylim(len(items) - 0.4, -0.75)
    ax.set_xlim(0, 1)
    ax.set_xlabel("share of laboratories reporting each category (count in the bar)")
    from matplotlib.patches import Patch

    handles = [Patch(facecolor=CATEGORY_COLOURS[j % len(CATEGORY_COLOURS)], edgecolor="white")
               for j in range(len(cats))]
    labels = list(cats)
    handles.append(Patch(facecolor="white", edgecolor=PALETTE["black"], linewidth=2.4))
    labels.append("▼ assigned category (outlined)")
    ax.legend(handles=handles, labels=labels, frameon=False, fontsize=7, loc="lower center",
           bbox_to_anchor=(0.5, 1.0), ncol=min(len(handles), 5), borderaxespad=0.2)
    order = " < ".join(cats) if kind == "ordinal" else ", ".join(cats)
    svg = finish_figure(fig, ax, key=f"qual-{name}", title=f"{title}: categories reported per item",
                        caption=f"Categories reported ({order}) per test item; the assigned category is outlined "
                                "and marked ▼ assigned.")
    marks: dict[str, list[tuple[float, float, str]]] = {}
    for lab, item, reported, signal in zip(rows["lab"], rows["item"], rows["reported"], rows["signal"]):
        spot = starts.get((str(item), str(reported)))
        if reported and spot is not None:
            marks.setdefault(str(lab), []).append((*spot, str(signal)))
    return QualitativeFigure(figure=svg, marks=marks)
