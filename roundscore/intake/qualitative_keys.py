"""The round-file keys of a nominal or ordinal measurand (``[measurand.NAME] kind = "nominal"`` or ``"ordinal"``).

Called by :mod:`roundscore.intake.roundfile` with its problem collector (anything with ``problems``,
``warnings``, ``bad`` and ``text`` as there), so every mistake is reported with the key, what was found
and what is allowed. The keys are documented in :data:`roundscore.model.round.MEASURAND_KEYS`.
"""

from __future__ import annotations

from types import MappingProxyType
from typing import Any

from roundscore.choices import is_choice, options_text
from roundscore.model.qualitative import (DEFAULT_ACTION_STEPS, DEFAULT_WARNING_STEPS, MAX_CATEGORIES, NEGATIVE_WORDS,
                                          QualitativeKind, QualitativeMethod, QualitativeSettings, normalise)
from roundscore.model.round import MEASURAND_KEYS, QUALITATIVE_ASSIGNED

__all__ = ["qualitative_measurand", "QUALITATIVE_KEYS", "QUALITATIVE_ONLY_KEYS", "MAX_STEPS"]

#: The keys a qualitative measurand reads (the others of MEASURAND_KEYS are quantitative and ignored).
QUALITATIVE_KEYS = ("kind", "label", "categories", "assigned", "items", "aliases", "negative", "deviation_signals")
#: Keys only a qualitative measurand reads: given without ``kind`` they are a mistake, not a typo.
QUALITATIVE_ONLY_KEYS = ("categories", "items", "aliases", "negative", "deviation_signals")
#: Largest deviation_signals step accepted (far more categories than any graded scale has).
MAX_STEPS = 100


def _words(c: Any, key: str, raw: object, what: str, *, limit: str) -> list[str]:
    """A list of distinct texts (distinct after case-folding and collapsing spaces)."""
    if not isinstance(raw, list) or not raw:
        c.bad(key, raw, f"a list of {what}")
        return []
    out: list[str] = []
    seen: dict[str, str] = {}
    for i, v in enumerate(raw, start=1):
        text = c.text(f"{key}[{i}]", v, limit=limit)
        if text is None:
            continue
        if not text:
            c.bad(f"{key}[{i}]", v, f"non-empty text ({what})")
            continue
        k = normalise(text)
        if k in seen:
            c.bad(f"{key}[{i}]", v, f"{what} differing by more than letter case and spaces (also {seen[k]!r})")
            continue
        seen[k] = text
        out.append(text)
    return out


def _aliases(c: Any, key: str, raw: object, categories: list[str]) -> dict[str, str]:
    allowed = "{ \"+\" = \"detected\", ... }: other spellings, each naming one of the categories"
    if raw is None:
        return {}
    if not isinstance(raw, dict):
        c.bad(key, raw, allowed)
        return {}
    by_norm = {normalise(x): x for x in categories}
    out: dict[str, str] = {}
    for spelling, target in raw.items():
        k = normalise(spelling)
        cat = by_norm.get(normalise(target)) if isinstance(target, str) else None
        if not k or cat is None:
            c.bad(f"{key}.{spelling}", target, f"one of the categories: {', '.join(categories)}")
            continue
        if k in by_norm and by_norm[k] != cat:
            c.bad(f"{key}.{spelling}", target, f"{by_norm[k]!r}: {spelling!r} is that category's own name")
            continue
        if out.get(k, cat) != cat:
            c.bad(f"{key}.{spelling}", target, f"{out[k]!r}, as another alias spelt alike says")
            continue
        out[k] = cat
    return out


def _assigned_word(c: Any, key: str, raw: object, kind: str, find) -> str | None:
    """A category (as the round file spells it in ``categories``) or a method name."""
    if isinstance(raw, str):
        cat = find(raw)
        if cat is not None:
            return cat
        if is_choice(raw, QualitativeMethod) and not (raw == "median" and kind == "nominal"):
            return raw
    c.bad(key, raw, QUALITATIVE_ASSIGNED + ("; a nominal property has no median" if raw == "median" else ""))
    return None


def _steps(c: Any, key: str, raw: object, kind: str) -> tuple[int, int]:
    default = (DEFAULT_WARNING_STEPS, DEFAULT_ACTION_STEPS)
    if raw is None:
        return default
    if kind != "ordinal":
        c.warnings.append(f"{c.file}: '{key}' is ignored: a nominal property has no deviation in categories")
        return default
    allowed = f"{{ warning = whole number, action = whole number }} with 1 ≤ warning ≤ action ≤ {MAX_STEPS}"
    if not isinstance(raw, dict) or set(raw) - {"warning", "action"}:
        c.bad(key, raw, allowed)
        return default
    w, a = raw.get("warning", DEFAULT_WARNING_STEPS), raw.get("action", DEFAULT_ACTION_STEPS)
    if any(isinstance(v, bool) or not isinstance(v, int) for v in (w, a)) or not 1 <= w <= a <= MAX_STEPS:
        c.bad(key, raw, allowed)
        return default
    return int(w), int(a)


def qualitative_measurand(c: Any, name: str, raw: dict[str, Any]) -> QualitativeSettings | None:
    """``[measurand.NAME]`` with ``kind`` nominal or ordinal → :class:`QualitativeSettings` (None after a problem
    that leaves nothing to build)."""
    t = f"measurand.{name}"
    kind: QualitativeKind = raw.get("kind")  # type: ignore[assignment]  # narrowed by the check below
    if not is_choice(kind, QualitativeKind):
        c.bad(f"{t}.kind", kind, options_text(QualitativeKind, last=" or ") + " (leave kind out for a number)")
        return None
    c.unknown(f"[{t}] ", {k: v for k, v in raw.items() if k not in MEASURAND_KEYS}, MEASURAND_KEYS)
    for key in raw:
        if key in MEASURAND_KEYS and key not in QUALITATIVE_KEYS:
            c.warnings.append(f"{c.file}: '{t}.{key}' is ignored: {name} is {kind} (a quantitative key)")
    categories = _words(c, f"{t}.categories", raw.get("categories"), "categories", limit="label")
    if len(categories) > MAX_CATEGORIES or (categories and len(categories) < 2):
        c.bad(f"{t}.categories", raw.get("categories"), f"from 2 to {MAX_CATEGORIES} categories")
        return None
    if not categories:
        return None
    aliases = _aliases(c, f"{t}.aliases", raw.get("aliases"), categories)
    probe = QualitativeSettings(name=name, kind=kind, categories=tuple(categories), aliases=aliases)
    items = _words(c, f"{t}.items", raw["items"], "item codes", limit="measurand") if "items" in raw else []
    assigned_raw = raw.get("assigned", "median" if kind == "ordinal" else None)
    assigned: str | None = None
    per_item: dict[str, str] = {}
    if assigned_raw is None:
        c.bad(f"{t}.assigned", assigned_raw, QUALITATIVE_ASSIGNED)
    elif isinstance(assigned_raw, dict):
        for item, v in assigned_raw.items():
            code = c.text(f"{t}.assigned.{item}", item, limit="measurand")
            got = _assigned_word(c, f"{t}.assigned.{item}", v, kind, probe.category_of)
            if code and got is not None:
                per_item[code] = got
        if items and (extra := [i for i in per_item if i not in items]):
            c.bad(f"{t}.assigned", assigned_raw, f"items of {t}.items ({', '.join(items)}); not {', '.join(extra)}")
        if not items:
            items = list(per_item)
        if kind == "ordinal":
            assigned = "median"  # an item not listed gets the participants' median
        elif missing := [i for i in items if i not in per_item]:
            c.bad(f"{t}.assigned", assigned_raw, f"an entry for every item ({', '.join(missing)} has none)")
    else:
        assigned = _assigned_word(c, f"{t}.assigned", assigned_raw, kind, probe.category_of)
    negative = None
    if "negative" in raw:
        negative = probe.category_of(raw["negative"]) if isinstance(raw["negative"], str) else None
        if negative is None:
            c.bad(f"{t}.negative", raw["negative"], f"one of the categories: {', '.join(categories)}")
    else:
        found = [x for x in categories if normalise(x) in NEGATIVE_WORDS]
        negative = found[0] if len(found) == 1 else None
    warning, action = _steps(c, f"{t}.deviation_signals", raw.get("deviation_signals"), kind)
    return QualitativeSettings(
        name=name, kind=kind, categories=tuple(categories),
        label=c.text(f"{t}.label", raw.get("label"), default=name, limit="label") or name,
        assigned=assigned, assigned_items=MappingProxyType(per_item), items=tuple(items),
        aliases=MappingProxyType(aliases), negative=negative, warning_steps=warning, action_steps=action)
