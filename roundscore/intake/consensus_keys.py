"""The round-file keys of a consensus: ``assigned = { method, labs | labs_file }`` and ``reference = { value, u }``.

Called by :mod:`roundscore.intake.roundfile` with its problem collector
(anything with ``problems``, ``bad``, ``number`` and ``choice`` as there), so
every mistake is reported with the key, what was found and what is allowed.
A ``labs_file`` is a CSV or text file inside the round folder with one lab
code per line (a first line ``lab`` is a header); blank lines are skipped.
"""

from __future__ import annotations

import csv
from pathlib import Path
from typing import Any
from collections.abc import Callable

from roundscore.errors import Problem
from roundscore.model.labcodes import read_lab_code
from roundscore.model.round import AssignedMethod

__all__ = ["subset_assigned", "reference_value", "MAX_LABS_FILE_BYTES"]

#: Largest labs_file read (a list of lab codes: tens of kB at most).
MAX_LABS_FILE_BYTES = 1 << 20
_SUBSET = "{ method = 'algorithm-a' (or another consensus method), labs = [\"K03\", ...] or labs_file = \"FILE.csv\" }"


def _codes(c: Any, key: str, values: list[object], where: str) -> list[str]:
    out: list[str] = []
    for i, v in enumerate(values):
        code, why = read_lab_code(v)
        if code is None:
            c.bad(f"{key}[{i + 1}]" if where == "" else key, v, why or f"a lab code{where}")
            continue
        if code not in out:
            out.append(code)
    return out


def _read_labs_file(c: Any, key: str, path: Path) -> list[str]:
    try:
        if path.stat().st_size > MAX_LABS_FILE_BYTES:
            c.bad(key, path.name, f"a file of lab codes of at most {MAX_LABS_FILE_BYTES >> 10} KiB")
            return []
        with path.open(encoding="utf-8-sig", newline="") as fh:
            rows = [r[0].strip() for r in csv.reader(fh) if r and r[0].strip()]
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        c.problems.append(Problem(message=f"{c.file}: key {key!r}: {path.name} cannot be read ({exc})",
                                  file=str(path)))
        return []
    if rows and rows[0].lower() == "lab":
        rows = rows[1:]
    return _codes(c, key, list(rows), f" (in {path.name})")


def subset_assigned(c: Any, key: str, raw: dict, inside: Callable[[str, str | None], Path | None]
                    ) -> tuple[AssignedMethod, tuple[str, ...] | None]:
    """``assigned = { method = …, labs = [...] | labs_file = "..." }``: the method and the labs of the consensus.

    ``inside(key, value)`` resolves a path inside the round folder (a problem otherwise).
    """
    extra = set(raw) - {"method", "labs", "labs_file"}
    if extra or "method" not in raw or ("labs" in raw) == ("labs_file" in raw):
        c.bad(key, raw, _SUBSET)
        return "algorithm-a", None
    method = c.choice(f"{key}.method", raw["method"], AssignedMethod, "algorithm-a")
    if "labs" in raw:
        if not isinstance(raw["labs"], list):
            c.bad(f"{key}.labs", raw["labs"], "a list of lab codes")
            return method, None
        labs = _codes(c, f"{key}.labs", raw["labs"], "")
    else:
        name = raw["labs_file"]
        if not isinstance(name, str) or not name.strip():
            c.bad(f"{key}.labs_file", name, "a file name inside the round folder")
            return method, None
        path = inside(f"{key}.labs_file", name.strip())
        if path is None:
            return method, None
        if not path.is_file():
            c.bad(f"{key}.labs_file", name, "an existing file of lab codes inside the round folder")
            return method, None
        labs = _read_labs_file(c, f"{key}.labs_file", path)
    if len(labs) < 3:
        c.bad(key, raw, "at least 3 labs for a consensus (ISO 13528's robust methods need at least 3)")
        return method, None
    return method, tuple(labs)


def reference_value(c: Any, key: str, raw: object) -> tuple[float, float] | None:
    """``reference = { value = …, u = … }``: an independent reference value and its standard uncertainty."""
    if raw is None:
        return None
    if not isinstance(raw, dict) or set(raw) != {"value", "u"}:
        c.bad(key, raw, "{ value = number, u = standard uncertainty ≥ 0 }")
        return None
    value = c.number(f"{key}.value", raw["value"])
    u = c.number(f"{key}.u", raw["u"], low=0.0)
    if value is None or u is None:
        return None
    return value, u
