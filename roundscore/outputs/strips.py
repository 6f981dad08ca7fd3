"""Compact score strips for the lab pages: hand-written SVG, a shared part per measurand and a per-lab marker.

A strip is one short row per measurand: on the left the measurand and the
lab's own score and signal, on the right a score axis from
−:data:`STRIP_RANGE` to +:data:`STRIP_RANGE` with the signal bands in the
tool's palette (acceptable, warning, action; En: acceptable and action), the
limit lines, and the distribution of every scored lab's score (anonymous: a
histogram, or one block per lab when the round is small). What all labs share
is written once per measurand as an SVG string; a lab's version only appends
a small group (its marker, shape and colour by signal, and its text), so a
lab page costs string joins, whatever the size of the round.

Every strip uses the same axis, so the marks of one lab line up down the page
and read as its profile across the measurands. The lab's own score beyond the
axis is drawn at its edge with its value written; the distribution says how
many lie beyond each end. Nothing is recomputed: the scores and signals are
those of the evaluation.

The SVG is plain text built from numbers rounded to 0.1 user unit, so the same
evaluation gives the same bytes.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass
from collections.abc import Sequence

import numpy as np

from roundscore.model.evaluation import STATE_SIDE, STATES
from roundscore.model.scores import SCORE_FAMILIES, family_of, score_label, score_symbol
from roundscore.model.signals import SCORED_SIGNALS
from roundscore.outputs.look import LIMIT_LINE, PALETTE, SIGNAL_COLOUR, SIGNAL_SYMBOL, SIGNAL_WORD, tint as _tint

__all__ = ["ScoreStrip", "score_strip", "STRIP_RANGE", "STRIP_BIN", "STRIP_UNIT_BLOCKS", "STRIP_WIDTH",
           "STRIP_HEIGHT", "score_label", "strip_legend"]

#: Half-width of the score axis of every strip (common practice: |z| = 4 leaves room past the action limit).
STRIP_RANGE = 4.0
#: Histogram bin width in score units (common practice: a quarter of a unit, 32 bins over ±4).
STRIP_BIN = 0.25
#: Up to this many labs in the fullest bin, each lab is one block (a dot plot); above, one bar per bin.
STRIP_UNIT_BLOCKS = 12
#: Size of a strip in SVG user units (CSS pixels at 100 %).
STRIP_WIDTH = 720.0
STRIP_HEIGHT = 64.0
#: Left gutter (measurand and the lab's own score) and the plot area, in user units.
_GUTTER = 200.0
_PLOT = (_GUTTER + 12.0, STRIP_WIDTH - 14.0)  # x of score −STRIP_RANGE and +STRIP_RANGE
_TOP, _AXIS = 8.0, 46.0  # y of the plot's top and of the axis line
_FONT = 'font-family="DejaVu Sans, sans-serif"'


def _x(score: float) -> float:
    a, b = _PLOT
    return a + (score + STRIP_RANGE) / (2 * STRIP_RANGE) * (b - a)


def _f(v: float) -> str:
    """A coordinate to 0.1 unit, without a trailing ``.0`` (short and reproducible)."""
    s = f"{v:.1f}"
    return s[:-2] if s.endswith(".0") else s


def _bands(score: str) -> list[tuple[float, float, str]]:
    """(from, to, signal) over the axis: the ISO 13528 signal regions of the score (its family's limits)."""
    limits = family_of(score).limits()  # from the warning limit (if any) out to the action limit
    edges = [lim for lim, _ in limits]
    inner = [(-edges[0], edges[0], "acceptable")]
    # beyond each limit up to the next (the last: to the axis' end), the signal of that limit
    outer = [(lo, hi, sig) for (lo, sig), (hi, _) in zip(limits, [*limits[1:], (STRIP_RANGE, "")])]
    return ([(-hi, -lo, sig) for lo, hi, sig in reversed(outer)] + inner + outer)


def strip_legend(words: str = "signals", *, own: bool = True) -> str:
    """One sentence for the page saying what the bands and marks of the strips mean.

    ``own`` False: for a page where no lab is marked (the round report of a large round).
    """
    w = SIGNAL_WORD[words]
    z, en = SCORE_FAMILIES["z-like"], SCORE_FAMILIES["en"]
    shapes = ", ".join(f"{SIGNAL_SYMBOL[s]} {s}" for s in SCORED_SIGNALS)
    marks = (f"the black line and the marker are yours ({shapes}). A score beyond the "
             "axis is drawn at its edge with its value written." if own else "no laboratory is marked.")
    return (f"Each row: the score axis from −{STRIP_RANGE:g} to +{STRIP_RANGE:g}, shaded {w['acceptable']} "
            f"(|score| ≤ {z.warning:g}; {en.symbol}: ≤ {en.action:g}), {w['warning']} ({z.warning:g} < |score| < "
            f"{z.action:g}, dashed line) and {w['action']} (|score| ≥ {z.action:g}, solid line; {en.symbol}: > "
            f"{en.action:g}); the grey blocks or bars are every laboratory's score (anonymous), " + marks)


@dataclass(frozen=True, slots=True, kw_only=True)
class ScoreStrip:
    """One measurand's strip: the shared SVG and what a lab's marker needs.

    Attributes
    ----------
    key : str
        Unique id within a page (``"strip-iodine"``).
    measurand, title : str
        The measurand's name and the text shown for it (its label).
    score : str
        The official score ("z", "z-prime", "zeta", "en").
    n : int
        Labs with a finite score (drawn in the distribution).
    svg : str
        The shared ``<svg>`` element (no lab marked).
    """

    key: str
    measurand: str
    title: str
    score: str
    n: int
    svg: str

    def for_lab(self, lab: str, value: float | None, signal: str | None, words: str = "signals",
                state: str | None = None) -> str:
        """The strip with ``lab``'s score marked (``value`` None or NaN: the gutter says it is not scored).

        The appended ``<g class="lab-mark">`` holds the lab's text in the
        gutter, a line at its score and a marker whose shape and colour give
        its signal; a score beyond the axis sits at the edge with its value.
        ``state`` is the evaluation's (:data:`roundscore.model.evaluation.STATES`): a censored false
        negative (positive) has no value but its signal, and is drawn with that signal beyond the axis'
        low (high) end; a state without a score (withheld, not reported ...) is said in words, unmarked.
        """
        sig = signal if signal in SIGNAL_COLOUR else "not-scored"
        word = SIGNAL_WORD[words].get(sig, sig)
        finite = value is not None and isinstance(value, (int, float)) and math.isfinite(value)
        side = STATE_SIDE.get(state or "", 0)
        parts = []
        if not finite and side:
            # a censored result judged by its limit: its signal at the axis' end, no number
            x = _x(side * STRIP_RANGE)
            text = f"{SIGNAL_SYMBOL.get(sig, '')} {word}: {STATES[state or '']}"
            parts.append(f'<line x1="{_f(x)}" y1="{_f(_TOP - 2)}" x2="{_f(x)}" y2="{_f(_AXIS)}" stroke="#000000" '
                         f'stroke-width="1.6" stroke-dasharray="3 2"/>')
            parts.append(_marker(x, _AXIS, sig))
        elif finite and value is not None:
            v = float(value)
            text = f"{score_symbol(self.score)} = {v:.2f}  {SIGNAL_SYMBOL.get(sig, '')} {word}"
            clamped = abs(v) > STRIP_RANGE
            x = _x(max(min(v, STRIP_RANGE), -STRIP_RANGE))
            dash = ' stroke-dasharray="3 2"' if clamped else ""
            parts.append(f'<line x1="{_f(x)}" y1="{_f(_TOP - 2)}" x2="{_f(x)}" y2="{_f(_AXIS)}" stroke="#000000" '
                         f'stroke-width="1.6"{dash}/>')
            parts.append(_marker(x, _AXIS, sig))
            if clamped:
                right = v > 0
                tip = x + (9 if right else -9)
                parts.append(f'<path d="M{_f(tip)} {_f(_AXIS)} L{_f(tip + (-5 if right else 5))} {_f(_AXIS - 4)} '
                             f'L{_f(tip + (-5 if right else 5))} {_f(_AXIS + 4)} Z" fill="#000000"/>')
                parts.append(f'<text x="{_f(x + (-9 if right else 9))}" y="{_f(_AXIS - 4)}" font-size="10" '
                             f'font-weight="bold" text-anchor="{"end" if right else "start"}" fill="#000000" '
                             f'stroke="#FFFFFF" stroke-width="3" paint-order="stroke">{v:.3g}</text>')
        else:
            what = STATES.get(state or "", "")
            text = (f"{SIGNAL_SYMBOL['not-scored']} {what}" if state not in (None, "scored", "not-scored")
                    else f"{SIGNAL_SYMBOL['not-scored']} {SIGNAL_WORD[words]['not-scored']}")
        parts.append(f'<text x="8" y="32" font-size="10.5" fill="#000000">{html.escape(text)}</text>')
        label = html.escape(f"{self.title}: {text}, your lab ({lab})")
        overlay = f'<g class="lab-mark" aria-label="{label}">{"".join(parts)}</g>'
        end = self.svg.rfind("</svg>")
        return self.svg[:end] + overlay + self.svg[end:]


def _marker(x: float, y: float, signal: str) -> str:
    """Marker of a signal (shapes as :data:`roundscore.outputs.look.SIGNAL_MARKER`: circle, triangle, square, ×)."""
    fill = SIGNAL_COLOUR.get(signal, PALETTE["grey"])
    edge = 'stroke="#000000" stroke-width="1.2"'
    if signal == "acceptable":
        return f'<circle cx="{_f(x)}" cy="{_f(y)}" r="5.5" fill="{fill}" {edge}/>'
    if signal == "warning":
        return (f'<path d="M{_f(x)} {_f(y - 7)} L{_f(x + 6.5)} {_f(y + 5)} L{_f(x - 6.5)} {_f(y + 5)} Z" '
                f'fill="{fill}" {edge}/>')
    if signal == "action":
        return f'<rect x="{_f(x - 5.5)}" y="{_f(y - 5.5)}" width="11" height="11" fill="{fill}" {edge}/>'
    return (f'<path d="M{_f(x - 5)} {_f(y - 5)} L{_f(x + 5)} {_f(y + 5)} M{_f(x - 5)} {_f(y + 5)} '
            f'L{_f(x + 5)} {_f(y - 5)}" stroke="{fill}" stroke-width="2.4"/>')


def score_strip(values: Sequence[float], *, measurand: str, score: str = "z", title: str | None = None,
                key: str | None = None) -> ScoreStrip:
    """The shared strip of one measurand from every lab's official score.

    Parameters
    ----------
    values : sequence of float
        Every lab's official score on this measurand (non-finite: not scored,
        left out of the distribution).
    measurand : str
    score : str
        "z", "z-prime", "zeta" or "en": En shows its action limit ±1, the
        others the warning (±2) and action (±3) limits (ISO 13528 §9.4, §9.7;
        :mod:`roundscore.stats.scores`).
    title : str, optional
        Text for the measurand in the gutter (default: its name).
    key : str, optional
        Unique id within a page (default ``"strip-MEASURAND"``).

    Returns
    -------
    ScoreStrip

    Notes
    -----
    Scores are binned in :data:`STRIP_BIN` bins over ±:data:`STRIP_RANGE`
    (a bin holds scores in [lower, upper); the top edge closes the last bin);
    scores beyond the axis are not binned (an edge bin holding them would
    bend the shape): how many lie beyond is written at each end. With at most :data:`STRIP_UNIT_BLOCKS`
    labs in the fullest bin each lab is one block, otherwise the bars are
    scaled to the fullest bin. The file size does not grow with the number
    of labs (at most 32 bars).

    References
    ----------
    .. [1] ISO 13528:2015, §9.4 (z-scores: 2 and 3) and §9.7 (En: 1); clauses from memory.
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    n = len(v)
    title = measurand if title is None else title
    key = f"strip-{measurand}" if key is None else key
    r = STRIP_RANGE
    nbins = round(2 * r / STRIP_BIN)
    # Text style set once on the root (inherited), so each text element carries only its position.
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" class="strip" viewBox="0 0 {_f(STRIP_WIDTH)} '
             f'{_f(STRIP_HEIGHT)}" width="{_f(STRIP_WIDTH)}" height="{_f(STRIP_HEIGHT)}" {_FONT} font-size="9" '
             f'fill="#333333" role="img" '
             f'aria-label="{html.escape(f"{title}: {score_label(score)} of {n} laboratories")}">']
    # signal bands (one path per signal) and the limit lines (dashed: warning, solid: action)
    bands: dict[str, list[str]] = {}
    for lo, hi, sig in _bands(score):
        bands.setdefault(sig, []).append(f"M{_f(_x(lo))} {_f(_TOP)}H{_f(_x(hi))}V{_f(_AXIS)}H{_f(_x(lo))}z")
    for sig, paths in bands.items():
        parts.append(f'<path d="{"".join(paths)}" fill="{_tint(SIGNAL_COLOUR[sig], 0.22)}"/>')
    lims = [(lim, LIMIT_LINE[sig]["svg"]) for lim, sig in family_of(score).limits()]
    for lim, dash in lims:
        d = "".join(f"M{_f(_x(x))} {_f(_TOP)}V{_f(_AXIS)}" for x in (-lim, lim))
        parts.append(f'<path d="{d}" stroke="#444444" stroke-width="0.9"{dash}/>')
    # the distribution of every lab's score (anonymous): one vertical stroke per bin
    if n:
        inside = v[np.abs(v) <= r]
        idx = np.clip(np.floor((inside + r) / STRIP_BIN).astype(int), 0, nbins - 1)
        counts = np.bincount(idx, minlength=nbins)
        top = max(int(counts.max()), 1)
        width = (_PLOT[1] - _PLOT[0]) / nbins
        room = _AXIS - _TOP - 3.0
        if top <= STRIP_UNIT_BLOCKS:  # a dot plot: the stroke dashed into one block per lab
            h = room / max(top, 4)
            heights = counts * h
            pattern = f' stroke-dasharray="{_f(h - 1.2)} 1.2"'
            tip = f"one block per laboratory, bins of {STRIP_BIN:g}"
        else:
            heights = np.where(counts > 0, np.maximum(room * counts / top, 1.0), 0.0)
            pattern = ""
            tip = f"laboratories per bin of {STRIP_BIN:g}; the tallest bar is {top}"
        d = "".join(f"M{_f(_PLOT[0] + (i + 0.5) * width)} {_f(_AXIS)}v-{_f(heights[i])}"
                    for i in np.flatnonzero(counts))
        parts.append(f'<path d="{d}" stroke="#6B6B6B" stroke-width="{_f(width - 1.6)}"{pattern}>'
                     f"<title>{tip}</title></path>")
        below, above = int(np.sum(v < -r)), int(np.sum(v > r))
        for count, x, anchor, text in ((below, _PLOT[0] + 2, "start", f"← {below} below −{r:g}"),
                                       (above, _PLOT[1] - 2, "end", f"{above} above {r:g} →")):
            if count:
                parts.append(f'<text x="{_f(x)}" y="{_f(_TOP + 8)}" font-size="8" text-anchor="{anchor}">'
                             f"{text}</text>")
    else:
        parts.append(f'<text x="{_f((_PLOT[0] + _PLOT[1]) / 2)}" y="{_f(_TOP + 22)}" font-size="10" '
                     'text-anchor="middle">no scores for this measurand</text>')
    # axis and ticks
    ticks = "".join(f'<text x="{_f(_x(t))}" y="{_f(_AXIS + 13)}">{"−" if t < 0 else ""}{abs(t):g}</text>'
                    for t in np.arange(-r, r + 0.5))
    parts.append(f'<path d="M{_f(_PLOT[0])} {_f(_AXIS)}H{_f(_PLOT[1])}" stroke="#000000" stroke-width="0.8"/>'
                 f'<g text-anchor="middle">{ticks}</g>')
    # the gutter: measurand, score and how many labs
    parts.append(f'<text x="8" y="16" font-size="11.5" font-weight="bold" fill="#000000">'
                 f"{html.escape(_short(title))}</text>")
    parts.append(f'<text x="8" y="{_f(_AXIS + 2)}">{html.escape(score_label(score))}, {n} laboratories</text>')
    parts.append("</svg>")
    return ScoreStrip(key=key, measurand=measurand, title=title, score=score, n=n, svg="".join(parts))


#: Characters of the measurand's title that fit the gutter at 11.5 px (about 0.62 em per character).
_TITLE_CHARS = 26


def _short(text: str) -> str:
    return text if len(text) <= _TITLE_CHARS else text[:_TITLE_CHARS - 1] + "…"
