"""The signals a score gives, in one frozen table: name, words in both vocabularies, symbol, shape, seriousness.

Every output (CSV, workbooks, figures, score strips, the HTML report, the
terminal) and the archive read this table; the colours are the palette's
(:mod:`roundscore.outputs.look`, which derives its symbols, words and marker
codes from here). A round chooses the vocabulary with ``[round] words``:
ISO 13528's signals (acceptable, warning signal, action signal) or ISO/IEC
17043's performance words (satisfactory, questionable, unsatisfactory).

>>> SIGNALS["warning"].symbol, SIGNALS["warning"].word("performance")
('▲', 'questionable')
>>> signal_label("action")
'■ action signal'

References
----------
.. [1] ISO 13528:2022 §9.4 (warning and action signals).
.. [2] ISO/IEC 17043:2023 (satisfactory, questionable, unsatisfactory performance).
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from collections.abc import Mapping
from typing import Literal

from roundscore.choices import options
from roundscore.stats.scores import Signal

__all__ = ["SignalName", "Words", "Shape", "SignalKind", "SIGNALS", "SIGNAL_NAMES", "SCORED_SIGNALS", "WORDS",
           "signal_kind", "signal_word", "signal_label"]

#: A signal's name, as in scores.csv and the archive (the values :func:`roundscore.stats.scores.signals` gives).
SignalName = Signal
#: The signal vocabulary of a round (``[round] words``).
Words = Literal["signals", "performance"]
#: The marker shape of a signal; colour is never the only carrier of meaning.
Shape = Literal["circle", "triangle", "square", "cross"]


@dataclass(frozen=True, slots=True, kw_only=True)
class SignalKind:
    """One signal.

    Attributes
    ----------
    name : {"acceptable", "warning", "action", "not-scored"}
    signal_word : str
        The ISO 13528 word ("warning signal").
    performance_word : str
        The ISO/IEC 17043 word ("questionable").
    symbol : str
        The text symbol of tables and terminals (● ▲ ■ ×), matching ``shape``.
    shape : {"circle", "triangle", "square", "cross"}
        The marker shape of figures and workbook charts.
    rank : int
        Seriousness, 0 (not scored) to 3 (action): a Youden point shows the worse of its two signals.
    """

    name: SignalName
    signal_word: str
    performance_word: str
    symbol: str
    shape: Shape
    rank: int

    @property
    def scored(self) -> bool:
        """Whether the signal judges a score (every signal but "not-scored")."""
        return self.name != "not-scored"

    def word(self, words: str = "signals") -> str:
        """The signal's word in the vocabulary ``words`` ("signals" or "performance")."""
        return self.performance_word if words == "performance" else self.signal_word

    def label(self, words: str = "signals") -> str:
        """Symbol and word: "▲ warning signal"."""
        return f"{self.symbol} {self.word(words)}"


#: The signals, from acceptable to not scored (the order of every legend and count).
SIGNALS: Mapping[str, SignalKind] = MappingProxyType({s.name: s for s in (
    SignalKind(name="acceptable", signal_word="acceptable", performance_word="satisfactory", symbol="●",
               shape="circle", rank=1),
    SignalKind(name="warning", signal_word="warning signal", performance_word="questionable", symbol="▲",
               shape="triangle", rank=2),
    SignalKind(name="action", signal_word="action signal", performance_word="unsatisfactory", symbol="■",
               shape="square", rank=3),
    SignalKind(name="not-scored", signal_word="not scored", performance_word="not scored", symbol="×",
               shape="cross", rank=0),
)})
SIGNAL_NAMES: tuple[str, ...] = tuple(SIGNALS)
#: The signals that judge a score (legends of score figures list these).
SCORED_SIGNALS: tuple[str, ...] = tuple(n for n, s in SIGNALS.items() if s.scored)
#: The vocabularies a round may choose.
WORDS: tuple[str, ...] = options(Words)

if set(SIGNAL_NAMES) != set(options(Signal)):  # pragma: no cover - a guard for whoever edits the table
    raise AssertionError(f"the signal table {SIGNAL_NAMES} does not match stats.scores.Signal {options(Signal)}")


def signal_kind(name: str) -> SignalKind | None:
    """The row of a signal name (None for a name that is not a signal)."""
    return SIGNALS.get(name)


def signal_word(name: str, words: str = "signals") -> str:
    """A signal's word in a vocabulary; an unknown name is returned as it is."""
    kind = SIGNALS.get(name)
    return kind.word(words) if kind is not None else name


def signal_label(name: str, words: str = "signals") -> str:
    """"▲ warning signal": the symbol and the word (an unknown name alone)."""
    kind = SIGNALS.get(name)
    return kind.label(words) if kind is not None else name
