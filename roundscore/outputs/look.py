"""The tool's look: one colour-blind-safe palette, and a colour, a word, a symbol and a shape for every signal.

Colours are from the Okabe–Ito palette (M. Okabe and K. Ito, "Color Universal
Design", 2002; also B. Wong, Nature Methods 8 (2011) 441), which stays
distinguishable for the common colour-vision deficiencies. Colour is never
the only carrier of meaning: every signal also has a word and a marker shape.
The words, symbols and shapes are the signal table's
(:data:`roundscore.model.signals.SIGNALS`); this module gives each its colour
and the marker codes of matplotlib and of workbook charts, for every output
(CSV aside: figures, workbooks, the HTML report and strips, the terminal, the
history workbook and charts).
"""

from __future__ import annotations

from typing import Any

from roundscore.model.signals import SIGNALS, WORDS, signal_label

__all__ = ["SIGNAL_COLOUR", "SIGNAL_MARKER", "SIGNAL_CHART_MARKER", "SIGNAL_SYMBOL", "SIGNAL_WORD", "PALETTE",
           "LIMIT_LINE", "signal_label", "signal_legend_text", "CAUTION", "PAGE_COLOUR", "tint"]

PALETTE = {
    "black": "#000000", "orange": "#E69F00", "sky": "#56B4E9", "green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "purple": "#CC79A7",
    "grey": "#8C8C8C",
}
#: The colours of a page a person reads (HTML and PDF): text, muted text, table rules, table heads, links,
#: the caution box (its rule and fill) and the alert box.
PAGE_COLOUR = {"ink": "#1A1A1A", "muted": "#555555", "rule": "#C8C8C8", "head": "#DDE6F0", "link": "#0B4F8A",
               "caution": PALETTE["blue"], "caution_fill": "#EEF5FB", "alert": PALETTE["vermillion"],
               "alert_fill": "#FBEEE6"}
SIGNAL_COLOUR = {"acceptable": PALETTE["green"], "warning": PALETTE["orange"],
                 "action": PALETTE["vermillion"], "not-scored": PALETTE["grey"]}
#: matplotlib marker codes of the signal shapes.
_MATPLOTLIB_SHAPE = {"circle": "o", "triangle": "^", "square": "s", "cross": "x"}
#: xlsxwriter chart marker types of the signal shapes.
_CHART_SHAPE = {"circle": "circle", "triangle": "triangle", "square": "square", "cross": "x"}
#: matplotlib marker codes.
SIGNAL_MARKER = {n: _MATPLOTLIB_SHAPE[s.shape] for n, s in SIGNALS.items()}
#: Workbook chart marker types (the same shapes).
SIGNAL_CHART_MARKER = {n: _CHART_SHAPE[s.shape] for n, s in SIGNALS.items()}
#: Text symbols for tables and terminals, matching the marker shapes.
SIGNAL_SYMBOL = {n: s.symbol for n, s in SIGNALS.items()}
#: ISO 13528 words, and ISO/IEC 17043's performance words for schemes that prefer them.
SIGNAL_WORD = {words: {n: s.word(words) for n, s in SIGNALS.items()} for words in WORDS}
#: How a limit line is drawn, by the signal it bounds: the warning limit dashed, the action limit solid
#: (matplotlib line style, workbook chart dash type, SVG stroke attribute).
LIMIT_LINE: dict[str, dict[str, Any]] = {
    "warning": {"matplotlib": "--", "chart": "dash", "svg": ' stroke-dasharray="4 3"'},
    "action": {"matplotlib": "-", "chart": "solid", "svg": ""},
}

def tint(hex_colour: str, keep: float = 0.3) -> str:
    """``hex_colour`` mixed with white, keeping the share ``keep`` of the colour (a cell's background).

    >>> tint("#009E73")
    '#B2E1D5'
    """
    r, g, b = (int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
    return "#{:02X}{:02X}{:02X}".format(*(int(c + (255 - c) * (1 - keep)) for c in (r, g, b)))


CAUTION = (
    "This evaluation supports, and does not replace, the proficiency-testing provider's documented "
    "procedures, ISO/IEC 17043 and the accreditation body's rules. Decisions on a laboratory's competence, "
    "or on food, water or other products, need the judgement of competent people with the full context."
)


def signal_legend_text(words: str = "signals", sep: str = "  ") -> str:
    """Every signal's symbol and word in one line.

    >>> signal_legend_text()
    '● acceptable  ▲ warning signal  ■ action signal  × not scored'
    """
    return sep.join(signal_label(n, words) for n in SIGNALS)
