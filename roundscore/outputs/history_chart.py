"""One lab's series of scores across rounds drawn with matplotlib, in the look of the circulated score sheets.

The time axis shows each round's identifier (one tick per round, in round-date order), not months: a PT
series is a sequence of rounds. The limit lines are the score family's (±2 warning dashed, ±3 action solid;
En ±1), each point has its signal's colour and marker shape (:mod:`roundscore.outputs.look`), and every
point where a trend rule fired is ringed and labelled with the rule numbers ("R3"), so a drift is seen
where the rules found it. Scores beyond the axis are drawn at its edge with their value printed.

Used by ``history show --out`` (``history.png``/``.svg``, several series in one figure,
:mod:`roundscore.outputs.history_workbook`) and by the lab's pack (``history report``, one SVG per series).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from roundscore.model.scores import ScoreFamily
from roundscore.model.signals import SCORED_SIGNALS
from roundscore.outputs.figure_base import SvgFigure, finish_figure, new_figure
from roundscore.outputs.look import LIMIT_LINE, SIGNAL_COLOUR, SIGNAL_MARKER, SIGNAL_WORD

__all__ = ["draw_series", "series_figure", "legend_handles", "RULE_RING", "rule_tag", "round_labels", "TICK_PT"]

#: How a point where a trend rule fired is marked: a ring around it (colour never alone: a shape and a label).
RULE_RING = {"marker": "o", "size": 150, "colour": "#000000"}
_GREY = "#555555"


def rule_tag(rules: Sequence[int]) -> str:
    """The label of a point where rules fired: "R3", "R1 R4"."""
    return " ".join(f"R{r}" for r in sorted(set(rules)))


def draw_series(ax, *, rounds: Sequence[str], values: Sequence[float] | np.ndarray, signals: Sequence[str],
                family: ScoreFamily, rules: Sequence[Sequence[int]], words: str = "signals") -> None:
    """Draw a series on ``ax``: positions 0..n-1 labelled with the round ids; ``rules[i]`` the rules firing at i."""
    n = len(rounds)
    v = np.asarray(values, dtype=float)
    ok = np.isfinite(v)
    top = family.action + 1.0
    bound = float(min(max(top, float(np.max(np.abs(v[ok]), initial=0.0)) + 0.5), 2 * top))
    shown = np.clip(v, -bound, bound)
    pos = np.arange(n, dtype=float)
    ax.plot(pos[ok], shown[ok], color=_GREY, linewidth=1.0, zorder=1)
    sig = np.asarray(signals, dtype=object)
    for s in SCORED_SIGNALS:
        pick = ok & (sig == s)
        if pick.any():
            ax.scatter(pos[pick], shown[pick], marker=SIGNAL_MARKER[s], color=SIGNAL_COLOUR[s], edgecolors="black",
                       linewidths=0.4, s=36, zorder=3, label=SIGNAL_WORD[words][s])
    for i in np.flatnonzero(ok & (np.abs(v) > bound)):
        ax.annotate(f"{v[i]:.3g}", (pos[i], shown[i]), xytext=(6, 0), textcoords="offset points", fontsize=7,
                    va="center")
    for k, hit in enumerate(rules):
        if hit and ok[k]:
            ax.scatter([pos[k]], [shown[k]], marker=RULE_RING["marker"], s=RULE_RING["size"], facecolors="none",
                       edgecolors=RULE_RING["colour"], linewidths=1.1, zorder=4)
            up = shown[k] < bound - 1.0
            ax.annotate(rule_tag(hit), (pos[k], shown[k]), xytext=(0, 10 if up else -14), textcoords="offset points",
                        ha="center", fontsize=7, fontweight="bold")
    for lim, s in family.limits():
        for y in (lim, -lim):
            ax.axhline(y, color=_GREY, linestyle=LIMIT_LINE[s]["matplotlib"], linewidth=0.8, zorder=0)
    ax.axhline(0.0, color="#BBBBBB", linewidth=0.6, zorder=0)
    ax.set_ylim(-bound - 0.5, bound + 0.5)
    ax.set_xlim(-0.6, max(n, 1) - 0.4)
    ax.set_xticks(pos)
    labels, rotate = round_labels(list(rounds), _axis_points(ax))
    ax.set_xticklabels(labels, rotation=45 if rotate else 0, ha="right" if rotate else "center",
                       fontsize=TICK_PT, rotation_mode="anchor" if rotate else "default")
    ax.set_xlabel("round")
    ax.set_ylabel(family.symbols if len(family.members) == 1 else f"score ({family.symbols})")


#: Size (points) of the round ids under the time axis.
TICK_PT = 7.0


def _axis_points(ax) -> float:
    """The width of ``ax`` in points (before a constrained layout: the figure's default subplot share)."""
    fig = ax.figure
    return float(ax.get_position().width * fig.get_figwidth() * 72)


def round_labels(rounds: Sequence[str], axis_points: float, size: float = TICK_PT) -> tuple[list[str], bool]:
    """The round ids as the time axis shows them: (labels, rotated), none overlapping its neighbour.

    Level while every id fits its share of the axis; else turned 45°, where a label needs about 1.9 times
    its size of the axis between ticks (its height across the slant, with a little room). When even that is
    more than a tick's share, only every k-th round is labelled, the last (the latest round) always; the
    others keep their tick. Text widths are estimated at 0.6 of the size a character (DejaVu Sans).

    >>> round_labels(["R1", "R2", "R3"], 400)
    (['R1', 'R2', 'R3'], False)
    >>> labels, turned = round_labels([f"SKW-2026-{k:02d}" for k in range(60)], 450)
    >>> turned, labels[-1], labels[-2], sum(1 for t in labels if t)
    (True, 'SKW-2026-59', '', 30)
    """
    n = len(rounds)
    if not n:
        return [], False
    share = axis_points / n
    widest = max(len(str(r)) for r in rounds) * 0.6 * size
    if widest <= 0.9 * share:
        return [str(r) for r in rounds], False
    step = max(1, math.ceil(1.9 * size / share))
    last = n - 1
    return [str(r) if (last - i) % step == 0 else "" for i, r in enumerate(rounds)], True


def legend_handles(words: str = "signals") -> list:
    """The legend of a series figure: the signals, the rule ring and the limit lines."""
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], linestyle="none", marker=SIGNAL_MARKER[s], color=SIGNAL_COLOUR[s],
                      markeredgecolor="black", markeredgewidth=0.4, label=SIGNAL_WORD[words][s])
               for s in SCORED_SIGNALS]
    handles.append(Line2D([], [], linestyle="none", marker="o", markersize=10, markerfacecolor="none",
                          markeredgecolor="black", label="trend rule fired (R1-R4)"))
    handles += [Line2D([], [], color=_GREY, linestyle=LIMIT_LINE[s]["matplotlib"], label=f"{s} limit")
                for s in ("action", "warning")]
    return handles


def series_figure(*, key: str, title: str, caption: str, rounds: Sequence[str], values: Sequence[float] | np.ndarray,
                  signals: Sequence[str], family: ScoreFamily, rules: Sequence[Sequence[int]],
                  words: str = "signals") -> SvgFigure:
    """One series as a reproducible SVG figure (the pack's chart of a scheme × measurand)."""
    # no title drawn in the figure: the page's heading and the figure's title name it (drawn once, not twice)
    fig, ax = new_figure((7.2, 3.3), bottom=0.36, top=0.97, right=0.97, left=0.09)
    draw_series(ax, rounds=rounds, values=values, signals=signals, family=family, rules=rules, words=words)
    # the legend at the figure's foot, inside its canvas (below the axes it was cut off where SVG clips)
    fig.legend(handles=legend_handles(words), loc="lower center", bbox_to_anchor=(0.5, 0.005), ncol=6,
               frameon=False, fontsize=7)
    return finish_figure(fig, ax, key=key, title=title, caption=caption)
