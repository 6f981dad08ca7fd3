""""How to read your scores": the short explanation every lab's page, workbook and PDF carries, as data.

The text is the project's own. The limits are read from the score registry
(:data:`roundscore.model.scores.SCORE_FAMILIES`) and the signal words from the
signal registry (:data:`roundscore.model.signals.SIGNALS`, in the round's
vocabulary), never written here: a changed limit changes the text. Each
rendering (HTML, workbook, PDF) draws the same :class:`GuidancePart` items in its
own medium.

>>> parts = how_to_read("signals")
>>> parts[0].title
'What the scores compare'
>>> any("|z| ≥ 3" in b for p in parts for b in p.bullets)
True
>>> any("unsatisfactory" in b for p in how_to_read("performance") for b in p.bullets)
True
"""

from __future__ import annotations

from dataclasses import dataclass

from roundscore.model.scores import SCORE_FAMILIES, SCORES
from roundscore.model.signals import signal_word

__all__ = ["GuidancePart", "how_to_read", "GUIDANCE_TITLE", "guidance_lines"]

GUIDANCE_TITLE = "How to read your scores"


@dataclass(frozen=True, slots=True, kw_only=True)
class GuidancePart:
    """One part of the explanation: a title, a lead paragraph and bullets (plain text)."""

    title: str
    text: str
    bullets: tuple[str, ...] = ()


def _fmt(x: float) -> str:
    return f"{x:g}"


def _family_limits(words: str) -> list[str]:
    """One line per score family, from the registry's limits."""
    out = []
    for fam in SCORE_FAMILIES.values():
        s = fam.symbol
        act = "> " if fam.strict else "≥ "
        below = "≤ " if fam.strict else "< "
        if fam.warning is not None:
            out.append(f"{fam.heading}: |{s}| ≤ {_fmt(fam.warning)} is {signal_word('acceptable', words)}; "
                       f"{_fmt(fam.warning)} < |{s}| {below}{_fmt(fam.action)} is a "
                       f"{signal_word('warning', words)}; |{s}| {act}{_fmt(fam.action)} is an "
                       f"{signal_word('action', words)}.")
        else:
            out.append(f"{fam.heading}: |{s}| {below if fam.strict else '< '}{_fmt(fam.action)} is "
                       f"{signal_word('acceptable', words)}; |{s}| {act}{_fmt(fam.action)} is an "
                       f"{signal_word('action', words)}.")
    return out


# The clause numbers below are those of ISO 13528:2022 as recalled from memory (the score clauses are also
# the registry's ``source``); check them against the standard before quoting them elsewhere.
_COMPARE = {
    "z": "how far your result is from the assigned value x_pt, in units of σ_pt, the standard deviation for "
         "proficiency assessment the provider set for this round",
    "z-prime": "the same difference, divided by σ_pt combined with the uncertainty u(x_pt) of the assigned "
               "value; used when u(x_pt) is too large to be ignored",
    "zeta": "the difference, divided by your own standard uncertainty u(x) combined with u(x_pt): whether "
            "your result agrees with the assigned value within the uncertainties stated",
    "en": "the difference, divided by your expanded uncertainty U(x) combined with that of the assigned "
          "value: whether the difference lies within the uncertainties at about 95 %",
}


def how_to_read(words: str = "signals") -> tuple[GuidancePart, ...]:
    """The parts of "How to read your scores" in the vocabulary ``words`` ("signals" or "performance")."""
    compare = tuple(f"{k.symbol} ({k.label}, {k.source}): {_COMPARE[k.name]}."
                    for k in SCORES.values() if k.name in _COMPARE)
    action, warning = signal_word("action", words), signal_word("warning", words)
    return (
        GuidancePart(title="What the scores compare",
                     text="Each score compares your result with the assigned value of the round. The table "
                          "names the score used for each measurand.",
                     bullets=compare),
        GuidancePart(title="The signal limits",
                     text="The size of the score, whatever its sign, gives the signal "
                          "(ISO 13528:2022 §9.4 to §9.7, from memory):",
                     bullets=tuple(_family_limits(words))),
        GuidancePart(title="What a signal asks of you",
                     text="A score is evidence about one result in one round, not a verdict on the laboratory.",
                     bullets=(
                         f"An {action}: look for the cause (calculation, units, transcription, calibration, the "
                         "method, the sample), correct it and record what you found and did, as your quality "
                         "system and your accreditation body require.",
                         f"A {warning} alone is not unusual (about one score in twenty falls there by chance). "
                         "Two of three consecutive scores on the same measurand beyond the warning limit on "
                         f"the same side are treated like an {action}: look for a cause and record it "
                         "(ISO 13528:2022, the clause on combining scores over rounds, from memory; the "
                         "archive's history applies this rule).",
                         "A result that is not scored carries its reason in the note column; a withheld score "
                         "is not shown anywhere.",
                     )),
    )


def guidance_lines(words: str = "signals") -> list[str]:
    """The explanation as plain lines (title, text, "• bullet"), for a workbook sheet or the terminal."""
    out = [GUIDANCE_TITLE]
    for part in how_to_read(words):
        out += ["", part.title, part.text, *(f"• {b}" for b in part.bullets)]
    return out
