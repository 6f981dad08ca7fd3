"""What every figure of the report shares: the SVG figure with its data → SVG maps, and the drawing plumbing.

:class:`SvgFigure` is a figure rendered once as SVG, with what a lab's own
version needs to mark it by string composition (see :mod:`roundscore.outputs.figures`).
The functions here make a figure with fixed margins and style (:func:`new_figure`),
write it as reproducible SVG (:func:`finish_figure`) or PNG (:func:`png_bytes`), and
draw the parts the score, precision and item figures have in common (codes under
an axis, step-shaped columns, legends). The score figures live in
:mod:`roundscore.outputs.figures`, the precision and item-check figures in
:mod:`roundscore.outputs.figures_precision`; both build on this module.
"""

from __future__ import annotations

import contextlib
import hashlib
import html
import io
import re
import unicodedata
from dataclasses import dataclass, field
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from roundscore.model.signals import SCORED_SIGNALS
from roundscore.outputs.look import PALETTE, SIGNAL_COLOUR, SIGNAL_MARKER, SIGNAL_WORD

if TYPE_CHECKING:
    from matplotlib.typing import RcKeyType

__all__ = ["SvgFigure", "MarkKind", "SVG_HASHSALT", "MAX_BARS", "PROFILE_POINTS", "MIN_PLOT_HEIGHT", "WIDE",
           "SQUARE", "new_figure", "finish_figure", "png_bytes", "legend", "signal_legend", "codes_under_axis",
           "step_columns"]

#: Salt of matplotlib's SVG ids: fixed so the same round gives the same SVG bytes.
SVG_HASHSALT = "roundscore-svg"
#: Up to this many scored labs the ranked chart draws one bar per lab with its code; above, a ranked
#: profile filled per signal (a 500-point-wide axis cannot show more bars anyway; common practice).
MAX_BARS = 60
#: Samples of the ranked profile (about one per pixel of the axis; common practice).
PROFILE_POINTS = 400
#: Figure size in inches (SVG user units are points: 72 per inch).
WIDE = (7.2, 3.0)
SQUARE = (6.6, 4.4)
_RC: dict[RcKeyType, Any] = {"svg.hashsalt": SVG_HASHSALT, "svg.fonttype": "none", "font.size": 9, "axes.titlesize": 10,
        "axes.spines.top": False, "axes.spines.right": False, "font.family": "DejaVu Sans"}


def _floats(pair: tuple[float, float]) -> tuple[float, float]:
    """An axis's limits as plain floats."""
    return float(pair[0]), float(pair[1])

MarkKind = Literal["bar", "vline", "point", "none"]


@dataclass(frozen=True, slots=True, kw_only=True)
class SvgFigure:
    """A figure rendered as an SVG element, with what a lab's version needs to mark it.

    Attributes
    ----------
    key : str
        Short unique id (``"z-iodine"``); prefixes every id inside the SVG.
    title, caption : str
        Plain text for the HTML ``<figcaption>`` (the caption says what is drawn).
    svg : str
        The ``<svg>`` element, without the XML prolog.
    x_map, y_map : tuple of float
        ``(a, b)`` with SVG coordinate = a·data + b, for each axis.
    axes_box : tuple of float
        The axes area in SVG units: (left, top, right, bottom).
    x_limits, y_limits : tuple of float
        The data limits of the axes.
    kind : {"bar", "vline", "point", "none"}
        How a lab is marked: its bar outlined, a vertical line at its result,
        or a ring round its point.
    marks : dict of str to tuple of float
        Lab code → data coordinates of the thing to mark ((x, y); for "bar"
        x is the bar's position and y its score, for "vline" y is NaN).
    """

    key: str
    title: str
    caption: str
    svg: str
    x_map: tuple[float, float]
    y_map: tuple[float, float]
    axes_box: tuple[float, float, float, float]
    x_limits: tuple[float, float]
    y_limits: tuple[float, float]
    kind: MarkKind = "none"
    marks: dict[str, tuple[float, float]] = field(default_factory=dict)

    def to_svg(self, x: float, y: float) -> tuple[float, float]:
        """Data coordinates → SVG user units."""
        return self.x_map[0] * x + self.x_map[1], self.y_map[0] * y + self.y_map[1]

    def for_lab(self, lab: str, label: str = "your lab") -> str:
        """The SVG with ``lab`` marked (the shared SVG unchanged when the lab has no mark here).

        The overlay is a ``<g class="lab-mark">`` appended inside the root
        element; positions outside the axes are clamped to its edge with an
        arrow, so an extreme result is still shown.
        """
        if self.kind == "none" or lab not in self.marks:
            return self.svg
        x, y = self.marks[lab]
        left, top, right, bottom = self.axes_box
        text = html.escape(f"{label} ({lab})")
        ink = PALETTE["black"]
        parts = []
        if self.kind == "bar":
            x0, y0 = self.to_svg(x - 0.5, 0.0)
            x1, y1 = self.to_svg(x + 0.5, y)
            y1c = min(max(y1, top), bottom)
            ya, yb = sorted((y0, y1c))
            parts.append(f'<rect x="{x0:.2f}" y="{ya:.2f}" width="{max(x1 - x0, 1.5):.2f}" '
                         f'height="{max(yb - ya, 1.0):.2f}" fill="none" stroke="{ink}" stroke-width="2.2"/>')
            tip = ya - 4 if y >= 0 else yb + 4
            tip = min(max(tip, top + 4), bottom - 4)
            sx = (x0 + x1) / 2
            up = y >= 0
            parts.append(_arrow(sx, tip, up, ink))
            ty = tip - 12 if up else tip + 20
            parts.append(_label(sx, min(max(ty, top + 8), bottom - 2), text, left, right))
        elif self.kind == "vline":
            sx, _ = self.to_svg(x, 0.0)
            clamped = sx < left or sx > right
            sx = min(max(sx, left), right)
            dash = ' stroke-dasharray="4 2"' if clamped else ""
            parts.append(f'<line x1="{sx:.2f}" y1="{top:.2f}" x2="{sx:.2f}" y2="{bottom:.2f}" stroke="{ink}" '
                         f'stroke-width="2"{dash}/>')
            parts.append(_arrow(sx, top + 2, False, ink))
            out = " (outside the plotted range)" if clamped else ""
            parts.append(_label(sx, bottom - 0.3 * (bottom - top), text + html.escape(out), left, right))
        else:
            sx, sy = self.to_svg(x, y)
            sx, sy = min(max(sx, left), right), min(max(sy, top), bottom)
            parts.append(f'<circle cx="{sx:.2f}" cy="{sy:.2f}" r="8" fill="none" stroke="{ink}" '
                         f'stroke-width="2.2"/>')
            parts.append(_label(sx, sy - 12, text, left, right))
        overlay = f'<g class="lab-mark" aria-label="{text}">{"".join(parts)}</g>'
        end = self.svg.rfind("</svg>")
        return self.svg[:end] + overlay + self.svg[end:]


def _arrow(x: float, y: float, pointing_down: bool, ink: str) -> str:
    d = -7 if pointing_down else 7
    return (f'<path d="M {x - 5:.2f} {y + d:.2f} L {x + 5:.2f} {y + d:.2f} L {x:.2f} {y:.2f} Z" '
            f'fill="{ink}"/>')


def _label(x: float, y: float, text: str, left: float, right: float) -> str:
    anchor = "middle"
    if x - left < 60:
        anchor = "start"
    elif right - x < 60:
        anchor = "end"
    return (f'<text x="{x:.2f}" y="{y:.2f}" text-anchor="{anchor}" font-family="DejaVu Sans, sans-serif" '
            f'font-size="10" font-weight="bold" fill="#000000" stroke="#FFFFFF" stroke-width="3" '
            f'paint-order="stroke">{text}</text>')


# --------------------------------------------------------------------------------------------- plumbing

#: Axes margins as fractions of the figure (fixed rather than tight_layout, so overlays and sizes are stable).
_MARGINS = {"left": 0.085, "right": 0.85, "top": 0.88, "bottom": 0.16}


def new_figure(size: tuple[float, float], **margins: float):
    import matplotlib
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure

    with matplotlib.rc_context(_RC):
        fig = Figure(figsize=size, dpi=72)
        FigureCanvasSVG(fig)
        fig.subplots_adjust(**{**_MARGINS, **margins})
        ax = fig.add_subplot()
    return fig, ax


_ID = re.compile(r'\bid="([^"]+)"')


def finish_figure(fig, ax, *, key: str, title: str, caption: str, kind: MarkKind = "none",
            marks: dict[str, tuple[float, float]] | None = None) -> SvgFigure:
    """Lay out, write the SVG (deterministic), prefix its ids, and keep the data → SVG maps."""
    import matplotlib

    with matplotlib.rc_context(_RC):
        buf = io.StringIO()
        with _no_glyph_warnings():
            fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": "roundscore"})
    text = buf.getvalue()
    text = text[text.index("<svg"):]
    text = re.sub(r"\s*<metadata>.*?</metadata>", "", text, count=1, flags=re.S)  # no RDF block to carry
    ids = set(_ID.findall(text))
    if ids:
        safe = re.sub(r"[^A-Za-z0-9_-]", "_", key)
        if safe != key:  # keys that differ only in replaced characters keep distinct ids on one page
            safe += "-" + hashlib.sha256(key.encode("utf-8", "surrogatepass")).hexdigest()[:8]
        pattern = re.compile(r'(id="|url\(#|href="#)(' + "|".join(map(re.escape, sorted(ids, key=len, reverse=True)))
                             + r')(?=[")])')
        text = pattern.sub(lambda m: f"{m.group(1)}{safe}-{m.group(2)}", text)
    text = text.replace("<svg ", f'<svg role="img" aria-label="{html.escape(title)}" ', 1)
    height = fig.get_figheight() * 72
    t = ax.transData
    p0, p1 = t.transform((0.0, 0.0)), t.transform((1.0, 1.0))
    x_map = (float(p1[0] - p0[0]), float(p0[0]))
    y_map = (float(-(p1[1] - p0[1])), float(height - p0[1]))
    bb = ax.get_window_extent()
    box = (float(bb.x0), float(height - bb.y1), float(bb.x1), float(height - bb.y0))
    return SvgFigure(key=key, title=title, caption=caption, svg=text, x_map=x_map, y_map=y_map, axes_box=box,
                     x_limits=_floats(ax.get_xlim()), y_limits=_floats(ax.get_ylim()),
                     kind=kind, marks=dict(marks or {}))


@contextlib.contextmanager
def _no_glyph_warnings():
    """A lab code in a script the figure font lacks (CJK, emoji) is drawn as boxes; matplotlib's warning about
    each missing glyph is not for the user (the code is in full in every table)."""
    import warnings

    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=r"Glyph \d+ .* missing from", category=UserWarning)
        yield


def png_bytes(fig) -> bytes:
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    with matplotlib.rc_context(_RC):
        FigureCanvasAgg(fig)
        buf = io.BytesIO()
        with _no_glyph_warnings():
            fig.savefig(buf, format="png", dpi=110, metadata={"Software": None})
    return buf.getvalue()


def legend(ax, **kw) -> None:
    """A legend of the labelled artists, or none when nothing is labelled (matplotlib would warn)."""
    if ax.get_legend_handles_labels()[0]:
        ax.legend(**kw)


def signal_legend(ax, signals: Sequence[str], words: str, **kw) -> None:
    from matplotlib.lines import Line2D

    present = [s for s in SCORED_SIGNALS if s in set(signals)]
    handles = [Line2D([], [], linestyle="none", marker=SIGNAL_MARKER[s], markersize=6,
                      markerfacecolor=SIGNAL_COLOUR[s], markeredgecolor="#000000", markeredgewidth=0.5,
                      label=SIGNAL_WORD[words][s]) for s in present]
    if handles:
        ax.legend(handles=handles, frameon=False, fontsize=8, **kw)


def _ems(text: str) -> float:
    """The width of a code in em: about 0.62 em per character of DejaVu Sans, 1.3 em for a wide (East Asian)
    character or one the font lacks (drawn as a box)."""
    if text.isascii():
        return 0.62 * len(text)
    return sum(1.3 if unicodedata.east_asian_width(ch) in "WF" else 0.62 for ch in text)


#: Least height of the plot area (inches) of a figure with codes under its axis: the figure grows
#: rather than the plot shrinking away under long codes.
MIN_PLOT_HEIGHT = 2.0


def codes_under_axis(ax, pos: np.ndarray, labels: Sequence[str], n: int, xlabel: str = "") -> None:
    """Lab (or item) codes under the axis as plain texts, about ten times cheaper to draw than ticks.

    The bottom margin and the axis label's pad grow with the longest code.
    """
    ax.set_xticks([])
    tr = ax.get_xaxis_transform()
    size = 7 if n > 30 else 8
    for x, lab in zip(pos, labels):
        ax.text(x, -0.02, str(lab), transform=tr, rotation=90, ha="center", va="top", fontsize=size)
    longest = max((_ems(str(lab)) for lab in labels), default=0)
    pad = 6 + size * longest  # points
    fig = ax.figure
    height = fig.get_figheight()
    bottom = (pad + 26) / 72  # inches under the axes
    top = (1 - fig.subplotpars.top) * height  # inches above the axes
    if bottom + top + MIN_PLOT_HEIGHT > height:  # long codes: the figure grows, the plot keeps its height
        height = bottom + top + MIN_PLOT_HEIGHT
        fig.set_figheight(height)
        fig.subplots_adjust(top=1 - top / height)
    fig.subplots_adjust(bottom=bottom / height)
    if xlabel:
        ax.set_xlabel(xlabel, labelpad=pad)


def step_columns(ax, x: np.ndarray, low, high, colours: Sequence[str]) -> None:
    """Filled columns, one per x, from ``low`` to ``high``, each reaching half-way to its neighbours.

    The picture of ``fill_between(step="mid")`` per colour, without its gaps
    where the colour changes: each run of columns of one colour becomes one
    step-shaped polygon, and all of them one polygon collection (one artist;
    ``fill_between`` with ``where`` built many small polygons through masked
    arrays, the larger part of a profile figure's drawing time).
    """
    from matplotlib.collections import PolyCollection

    x = np.asarray(x, dtype=float)
    if not x.size:
        return
    edges = np.concatenate([[x[0]], (x[1:] + x[:-1]) / 2, [x[-1]]])
    lo = np.broadcast_to(np.asarray(low, dtype=float), x.shape)
    hi = np.broadcast_to(np.asarray(high, dtype=float), x.shape)
    colours = list(colours)
    starts = [0] + [i for i in range(1, len(colours)) if colours[i] != colours[i - 1]]
    polys, faces = [], []
    for a, b in zip(starts, starts[1:] + [len(colours)]):
        left, right = edges[a:b], edges[a + 1:b + 1]
        top = np.column_stack([np.column_stack([left, right]).ravel(), np.repeat(hi[a:b], 2)])
        bottom = np.column_stack([np.column_stack([left, right]).ravel(), np.repeat(lo[a:b], 2)])[::-1]
        polys.append(np.concatenate([top, bottom]))
        faces.append(colours[a])
    ax.add_collection(PolyCollection(polys, facecolors=faces, edgecolors="none", linewidths=0))
