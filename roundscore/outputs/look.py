"""The tool's look: one colour-blind-safe palette, and a word and a symbol for every signal.

Colours are from the Okabe–Ito palette (M. Okabe and K. Ito, "Color Universal
Design", 2002; also B. Wong, Nature Methods 8 (2011) 441), which stays
distinguishable for the common colour-vision deficiencies. Colour is never
the only carrier of meaning: every signal also has a word and a marker shape.
"""

from __future__ import annotations

__all__ = ["SIGNAL_COLOUR", "SIGNAL_MARKER", "SIGNAL_SYMBOL", "SIGNAL_WORD", "PALETTE", "signal_label",
           "CAUTION"]

PALETTE = {
    "black": "#000000", "orange": "#E69F00", "sky": "#56B4E9", "green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "purple": "#CC79A7",
    "grey": "#8C8C8C",
}
SIGNAL_COLOUR = {"acceptable": PALETTE["green"], "warning": PALETTE["orange"],
                 "action": PALETTE["vermillion"], "not-scored": PALETTE["grey"]}
#: matplotlib marker codes.
SIGNAL_MARKER = {"acceptable": "o", "warning": "^", "action": "s", "not-scored": "x"}
#: Text symbols for tables and terminals, matching the marker shapes.
SIGNAL_SYMBOL = {"acceptable": "●", "warning": "▲", "action": "■", "not-scored": "×"}
#: ISO 13528 words, and ISO/IEC 17043's performance words for schemes that prefer them.
SIGNAL_WORD = {
    "signals": {"acceptable": "acceptable", "warning": "warning signal", "action": "action signal",
                "not-scored": "not scored"},
    "performance": {"acceptable": "satisfactory", "warning": "questionable", "action": "unsatisfactory",
                    "not-scored": "not scored"},
}

CAUTION = (
    "This evaluation supports, and does not replace, the proficiency-testing provider's documented "
    "procedures, ISO/IEC 17043 and the accreditation body's rules. Decisions on a laboratory's competence, "
    "or on food, water or other products, need the judgement of competent people with the full context."
)


def signal_label(signal: str, words: str = "signals") -> str:
    """"▲ warning signal": symbol and word together."""
    return f"{SIGNAL_SYMBOL.get(signal, '')} {SIGNAL_WORD[words].get(signal, signal)}".strip()
