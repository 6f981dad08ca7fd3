"""What changed since the previous ``roundscore check`` of the same round: x_pt, σ_pt and the labs' signals.

A coordinator settles a round by deciding (an exclusion, a σ_pt) and checking
again; this shows the consequence at once. Each check stores a summary of its
evaluation (:func:`check_summary`: every measurand's assigned value and σ_pt,
every lab's signal) as ``check.json`` in the round's cache folder (inside the
output folder, :func:`roundscore.pipeline.cache_folder`); the next check of
the same round id compares its own with it (:func:`compare`). The summary is
plain JSON, checked field by field when read: anything else is taken for no
previous check.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

from roundscore.intake.cache import read_json, write_atomic
from roundscore.model.evaluation import RoundEvaluation
from roundscore.outputs.look import SIGNAL_SYMBOL
from roundscore.text import shown_number, terminal_text

__all__ = ["SUMMARY_NAME", "SUMMARY_FORMAT", "check_summary", "Changes", "compare", "changes_text",
           "previous_summary", "store_summary", "number_text"]

#: The previous check's summary, in the cache folder.
SUMMARY_NAME = "check.json"
SUMMARY_FORMAT = 1
#: Signal changes listed by ``--changes`` at most (the count is always given).
MAX_LISTED = 2000
_ABSENT = "absent"


def number_text(x: float | None, decimals: int | None, fallback: str, more: int = 0) -> str:
    """A number as people read it: to ``decimals`` (+ ``more``) places when the measurand sets them.

    >>> number_text(98.95177, 3, ".5g"), number_text(13.85, 3, ".4g", 1), number_text(None, 3, ".5g")
    ('98.952', '13.8500', 'none')
    """
    return "none" if x is None else shown_number(x, decimals, fallback, more)


def _number(x: float) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def check_summary(ev: RoundEvaluation) -> dict:
    """What the next check compares with: the round id, each measurand's x_pt, σ_pt and decimals, each signal."""
    signals: dict[str, dict[str, str]] = {}
    s = ev.scores
    for lab, m, sig in zip(s["lab"].tolist(), s["measurand"].tolist(), s["signal"].tolist()):
        signals.setdefault(str(m), {})[str(lab)] = str(sig)
    return {"written_by": "roundscore", "format": SUMMARY_FORMAT, "round": ev.round.id,
            "measurands": {name: {"assigned": _number(m.assigned), "sigma_pt": _number(m.sigma_pt),
                                  "decimals": m.settings.decimals}
                           for name, m in ev.measurands.items()},
            "signals": signals}


def previous_summary(folder: Path | None, round_id: str) -> dict | None:
    """The summary the previous check of round ``round_id`` stored in ``folder``, or None (none, another round,
    or not a summary of ours)."""
    if folder is None:
        return None
    data = read_json(folder, SUMMARY_NAME)
    if not isinstance(data, dict) or data.get("written_by") != "roundscore" \
            or data.get("format") != SUMMARY_FORMAT or data.get("round") != round_id:
        return None
    ms, sigs = data.get("measurands"), data.get("signals")
    if not isinstance(ms, dict) or not isinstance(sigs, dict):
        return None
    for v in ms.values():
        if not isinstance(v, dict) or not all(_is_number(v.get(k)) for k in ("assigned", "sigma_pt")) \
                or not (v.get("decimals") is None or _is_int(v.get("decimals"))):
            return None
    for v in sigs.values():
        if not isinstance(v, dict) or not set(map(type, v.values())) <= {str}:
            return None
    return data


def _is_number(v: object) -> bool:
    return v is None or (isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v))


def _is_int(v: object) -> bool:
    return isinstance(v, int) and not isinstance(v, bool) and 0 <= v <= 15


def store_summary(folder: Path | None, ev: RoundEvaluation, summary: dict | None = None) -> bool:
    """Store this check's summary for the next one (atomically); False when there is no cache folder.

    ``summary``: :func:`check_summary` of ``ev`` when the caller has it already.
    """
    if folder is None:
        return False
    data = json.dumps(summary if summary is not None else check_summary(ev), ensure_ascii=True, allow_nan=False,
                      separators=(",", ":"))
    try:
        return write_atomic(folder, SUMMARY_NAME, data.encode("ascii"))
    except OSError:
        return False


@dataclass(frozen=True, slots=True, kw_only=True)
class Changes:
    """What moved between two checks of one round.

    ``moved``: (measurand, what ("assigned" or "σ_pt"), old text, new text), at the measurand's decimals;
    ``signals``: (lab, measurand, old signal, new signal), "absent" where the lab had no score;
    ``measurands``: measurands added or removed, in words.
    """

    moved: tuple[tuple[str, str, str, str], ...]
    signals: tuple[tuple[str, str, str, str], ...]
    measurands: tuple[str, ...] = ()

    @property
    def labs(self) -> int:
        """How many labs have at least one signal that changed."""
        return len({lab for lab, *_ in self.signals})


def compare(previous: dict, ev: RoundEvaluation, summary: dict | None = None) -> Changes:
    """What changed from ``previous`` (:func:`previous_summary`) to this evaluation.

    A value moved when its text at the measurand's decimals (σ_pt one place
    more, as the summary table shows it) differs; a measurand without
    decimals is compared to 5 (x_pt) and 4 (σ_pt) significant digits.
    """
    now = summary if summary is not None else check_summary(ev)
    moved: list[tuple[str, str, str, str]] = []
    notes: list[str] = []
    before_m, now_m = previous["measurands"], now["measurands"]
    for name, m in now_m.items():
        old = before_m.get(name)
        if old is None:
            notes.append(f"{name}: new since the previous check")
            continue
        d = m["decimals"]
        for key, what, fallback, more in (("assigned", "assigned", ".5g", 0), ("sigma_pt", "σ_pt", ".4g", 1)):
            a, b = number_text(old[key], d, fallback, more), number_text(m[key], d, fallback, more)
            if a != b:
                moved.append((name, what, a, b))
    notes += [f"{name}: no longer in the round" for name in before_m if name not in now_m]
    signals: list[tuple[str, str, str, str]] = []
    before_s, now_s = previous["signals"], now["signals"]
    for name in now_m:
        old_labs, new_labs = before_s.get(name, {}), now_s.get(name, {})
        if name not in before_m:
            continue
        if old_labs == new_labs:
            continue
        differ = [lab for lab in old_labs.keys() | new_labs.keys() if old_labs.get(lab) != new_labs.get(lab)]
        for lab in sorted(differ):
            signals.append((lab, name, old_labs.get(lab, _ABSENT), new_labs.get(lab, _ABSENT)))
    return Changes(moved=tuple(moved), signals=tuple(signals), measurands=tuple(notes))


def _signal(name: str) -> str:
    symbol = SIGNAL_SYMBOL.get(name)  # a name read back from our own JSON: unknown ones are shown as they are
    return f"{symbol} {name}" if symbol else name


def changes_text(changes: Changes | None, *, listed: bool = False) -> str:
    """The lines ``roundscore check`` prints (``listed``: every signal change, for ``--changes``)."""
    t = terminal_text
    if changes is None:
        return "Changes: no earlier check of this round to compare with (this check is kept for the next one)."
    lines = ["Since the previous check of this round:"]
    for note in changes.measurands:
        lines.append(f"  {t(note)}")
    for name, what, a, b in changes.moved:
        lines.append(f"  {t(name)}: {what} {a} → {b}")
    if not changes.moved:
        lines.append("  no assigned value or σ_pt moved")
    n, k = changes.labs, len(changes.signals)
    if not k:
        lines.append("  no lab changed signal")
    else:
        lines.append(f"  {n} lab{'s' if n != 1 else ''} changed signal ({k} score{'s' if k != 1 else ''})"
                     + ("" if listed else "; --changes lists them"))
    if listed and k:
        for lab, name, a, b in changes.signals[:MAX_LISTED]:
            lines.append(f"    {t(lab)} {t(name)}: {_signal(a)} → {_signal(b)}")
        if k > MAX_LISTED:
            lines.append(f"    ... and {k - MAX_LISTED} more")
    return "\n".join(lines)
