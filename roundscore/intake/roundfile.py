"""``round.toml`` → :class:`~roundscore.model.round.Round`: the round file read and validated.

The file has a ``[round]`` table and one ``[measurand.NAME]`` table per
measurand. Every mistake is reported with the file, the key, what was found
and what is allowed; unknown keys are reported as warnings with the nearest
valid key, so a typo does not silently fall back to a default.
:func:`result_files` finds the results the round names (one table, or the
workbooks of a folder or glob).
"""

from __future__ import annotations

import datetime as _dt
import difflib
import glob as _glob
import math
import os
import tomllib
import unicodedata
from pathlib import Path
from typing import Any

from roundscore.errors import Problem, RoundFileError, shown_value
from roundscore.choices import is_choice, options_text
from roundscore.intake.consensus_keys import reference_value, subset_assigned
from roundscore.intake.qualitative_keys import QUALITATIVE_ONLY_KEYS, qualitative_measurand
from roundscore.model.items import ItemConsequence, StabilityChoice
from roundscore.model.labcodes import read_lab_code
from roundscore.model.limits import DEFAULT_LIMITS, ReadLimits
from roundscore.model.qualitative import QualitativeSettings
from roundscore.model.round import (LIMIT_KEYS, MAX_FORM_REPLICATES, MEASURAND_KEYS, ROUND_KEYS, AssignedMethod,
                                    DecimalMark, Exclusion, MeasurandSettings, OutlierAction, Paper, Round, ScoreName,
                                    SigmaMethod, SigmaSpec, UnknownLabs, limit_range)
from roundscore.model.signals import Words
from roundscore.model.units import UnitError, mass_fraction, unit_text_problem
from roundscore.support.paths import inside_each
from roundscore.ranges import (MAX_MAGNITUDE, MIN_MAGNITUDE, SIGMA_MIN_RELATIVE, confidence_problem, magnitude_problem,
                               sigma_relative_problem)
from roundscore.text import TEXT_LIMITS, quote, too_long

__all__ = ["load_round", "with_warnings", "result_files", "MAX_MEASURANDS", "MAX_ROUND_FILE_BYTES"]

#: Most measurands a round file may define. Each costs about 20 ms of evaluation and writing (measured:
#: benchmarks/measurands.py); past this a round is refused when it is loaded, before anything is read.
MAX_MEASURANDS = 10_000
#: Largest round file read (a round of MAX_MEASURANDS measurands with labels and item tables is about 1 MiB).
MAX_ROUND_FILE_BYTES = 4 << 20


class _Checker:
    """Collects every problem in the file so the user sees them all at once."""

    def __init__(self, file: str) -> None:
        self.file = file
        self.problems: list[Problem] = []
        self.warnings: list[str] = []

    def bad(self, key: str, found: object, allowed: str) -> None:
        self.problems.append(
            Problem(message=f"{self.file}: key {quote(key, 80)}: found {shown_value(found)}; allowed: {allowed}")
        )

    def unknown(self, table: str, keys: dict[str, Any], allowed: dict[str, str]) -> None:
        for key in keys:
            if key in allowed:
                continue
            near = difflib.get_close_matches(key, list(allowed), n=1, cutoff=0.6) if len(key) <= 80 else []
            hint = f"; did you mean {near[0]!r}?" if near else f"; known keys: {', '.join(allowed)}"
            self.warnings.append(f"{self.file}: unknown key {table}{quote(key, 80)} is ignored{hint}")

    def text(self, key: str, value: object, default: str | None = None, required=False,
             limit: str | None = None) -> str | None:
        """A text value; ``limit`` names its bound in :data:`roundscore.text.TEXT_LIMITS`."""
        if value is None:
            if required:
                self.problems.append(Problem(message=f"{self.file}: key {key!r} is required"))
            return default
        if isinstance(value, (_dt.date, _dt.datetime)) and key.endswith("date"):
            return value.isoformat()[:10]
        if not isinstance(value, str) or (required and not value.strip()):
            self.bad(key, value, "text")
            return default
        if _has_control(value.strip()):
            self.bad(key, value, "text without control characters (escape sequences, line breaks, tabs)")
            return default
        if limit is not None:
            why = too_long(limit, value.strip())
            if why:
                self.bad(key, value, f"text of at most {TEXT_LIMITS[limit]} characters ({why})")
                return default
        return value.strip()

    def number(self, key: str, value: object, *, low=-math.inf, positive=False, ranged=True) -> float | None:
        """A number; ``ranged`` also requires the range of roundscore.ranges (0, or 1e-50 ≤ |v| ≤ 1e50)."""
        if value is None:
            return None
        sign = " > 0" if positive else (f" ≥ {low:g}" if low > -math.inf else "")
        allowed = "a number" + sign
        if ranged:
            allowed += (f" (from {MIN_MAGNITUDE:g} to {MAX_MAGNITUDE:g})" if positive else
                        f" (0, or from {MIN_MAGNITUDE:g} to {MAX_MAGNITUDE:g})" if low == 0 else
                        f" (0, or of magnitude {MIN_MAGNITUDE:g} to {MAX_MAGNITUDE:g})")
        real = _real(value)
        if real is None:
            self.bad(key, value, allowed)
            return None
        if (positive and real <= 0) or real < low:
            self.bad(key, value, allowed)
            return None
        why = magnitude_problem(real) if ranged else None
        if why is not None:
            self.bad(key, value, f"{allowed} ({why.split(':')[0]}; numbers outside this range overflow or lose "
                     "their digits in the computations)")
            return None
        return real

    def whole(self, key: str, value: object, default: int, low: int, high: int) -> int:
        if value is None:
            return default
        if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
            self.bad(key, value, f"a whole number from {low} to {high}")
            return default
        return value

    def choice(self, key: str, value: object, allowed: Any, default: str) -> Any:
        """``value`` when it is one of the values of the ``Literal`` ``allowed``; else a problem and ``default``."""
        if value is None:
            return default
        if not is_choice(value, allowed):
            self.bad(key, value, options_text(allowed))
            return default
        return value


def _real(value: object) -> float | None:
    """A TOML number as a finite float, or None (text, a boolean, inf, nan, an integer too large for a float)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    try:
        v = float(value)
    except OverflowError:  # TOML integers have no size limit in Python
        return None
    return v if math.isfinite(v) else None


def _has_control(text: str) -> bool:
    """Whether ``text`` holds a control character or a line/paragraph separator (format characters such as
    the zero-width non-joiner of Persian are kept: they are escaped when shown on a terminal)."""
    if text.isascii():
        return not text.isprintable()
    return any(unicodedata.category(ch) in ("Cc", "Zl", "Zp") for ch in text)


def _sigma(c: _Checker, key: str, raw: object) -> SigmaSpec:
    if raw is None:
        c.problems.append(Problem(message=f"{c.file}: key {key!r} is required; allowed: {MEASURAND_KEYS['sigma_pt']}"))
        return SigmaSpec(kind="robust-sd")
    if isinstance(raw, str):
        if is_choice(raw, SigmaMethod):
            return SigmaSpec(kind=raw)  # type: ignore[arg-type]  # is_choice checked it is a SigmaMethod
        c.bad(key, raw, MEASURAND_KEYS["sigma_pt"])
        return SigmaSpec(kind="robust-sd")
    if isinstance(raw, dict):
        extra = set(raw) - {"s_R", "s_r", "replicates"}
        missing = {"s_R", "s_r", "replicates"} - set(raw)
        if extra or missing:
            c.bad(key, raw, "{ s_R = number, s_r = number, replicates = whole number }")
            return SigmaSpec(kind="robust-sd")
        s_R = c.number(f"{key}.s_R", raw["s_R"], positive=True)
        s_r = c.number(f"{key}.s_r", raw["s_r"], low=0.0)
        n = c.whole(f"{key}.replicates", raw["replicates"], 1, 1, 1000)
        if s_R is not None and s_r is not None and s_R**2 - s_r**2 * (1 - 1 / n) <= 0:
            c.bad(key, raw, "s_R² − s_r²(1 − 1/n) > 0 (s_R must exceed s_r)")
        return SigmaSpec(kind="precision", s_R=s_R, s_r=s_r, replicates=n)
    value = c.number(key, raw, positive=True)
    return SigmaSpec(kind="fixed", value=value)


def _inside(c: _Checker, folder: Path, key: str, value: str | None) -> Path | None:
    """A path named in the round file, resolved in the round folder; outside it is refused."""
    if value is None:
        return None
    p = (folder / value).resolve()
    try:
        p.relative_to(folder.resolve())
    except ValueError:
        c.bad(key, value, "a path inside the round folder")
        return None
    return p


def _archive_file(c: _Checker, folder: Path, value: str | None) -> Path | None:
    """``[round] archive``: the one round-file path that may lie outside the round folder.

    A provider keeps one archive for all its rounds, so an absolute path, a
    path starting with ``~`` (the home folder, expanded as a shell would) or a
    relative path leading out of the folder (``../history.sqlite``) is
    accepted; a relative path is taken from the round folder.
    """
    if not value:
        return None
    try:
        p = Path(value).expanduser()
    except RuntimeError as exc:  # no home folder known, or an unknown ~user
        c.bad("round.archive", value, f"a path whose '~' can be expanded ({exc})")
        return None
    return p if p.is_absolute() else folder / p


def _measurand(c: _Checker, folder: Path, name: str, raw: object
               ) -> MeasurandSettings | QualitativeSettings | None:
    t = f"measurand.{name}"
    why = too_long("measurand", name) or (
        "it holds control characters (escape sequences, line breaks, tabs)" if _has_control(name) else None)
    if why:
        c.problems.append(Problem(message=f"{c.file}: measurand {quote(name)}: {why} (the name of a "
                                  f"[measurand.NAME] table; give the long name as label = \"...\")"))
        return None
    if not isinstance(raw, dict):
        c.bad(t, raw, "a table of keys (unit, assigned, sigma_pt, ...)")
        return None
    if raw.get("kind", "quantitative") != "quantitative":  # nominal or ordinal (roundscore.intake.qualitative_keys)
        return qualitative_measurand(c, name, raw)
    for key in QUALITATIVE_ONLY_KEYS:
        if key in raw:
            c.bad(f"{t}.{key}", raw[key], "a key of a qualitative measurand only: add kind = \"nominal\" or "
                  "\"ordinal\" (or leave the key out)")
    c.unknown(f"[{t}] ", raw, MEASURAND_KEYS)
    unit = c.text(f"{t}.unit", raw.get("unit"), required=True, limit="unit") or ""
    if unit_text_problem(unit) is not None:
        c.bad(f"{t}.unit", unit, "a unit such as mg/kg, µg/L, g/100 g or % (no markup such as < > & ; "
              "and no control characters)")
        unit = ""
    assigned_raw = raw.get("assigned", "algorithm-a")
    assigned: AssignedMethod | float
    subset = None
    if isinstance(assigned_raw, dict):  # a consensus of some labs only (roundscore.intake.consensus_keys)
        assigned, subset = subset_assigned(c, f"{t}.assigned", assigned_raw, lambda k, v: _inside(c, folder, k, v))
    elif isinstance(assigned_raw, str):
        assigned = c.choice(f"{t}.assigned", assigned_raw, AssignedMethod, "algorithm-a")
    else:
        assigned = c.number(f"{t}.assigned", assigned_raw) or 0.0
    u_assigned = c.number(f"{t}.u_assigned", raw.get("u_assigned"), low=0.0)
    if not isinstance(assigned, str) and "u_assigned" not in raw:
        c.problems.append(
            Problem(message=f"{c.file}: key '{t}.u_assigned' is required when assigned is a number "
                    f"(found assigned = {assigned_raw!r}); allowed: a standard uncertainty ≥ 0")
        )
    if isinstance(assigned, str) and "u_assigned" in raw:
        c.warnings.append(f"{c.file}: '{t}.u_assigned' is ignored: the consensus value's uncertainty is computed")
        u_assigned = None
    decimals_raw = raw.get("decimals")
    decimals = None if decimals_raw is None else c.whole(f"{t}.decimals", decimals_raw, 3, 0, 10)
    allow_negative = raw.get("allow_negative", False)
    if not isinstance(allow_negative, bool):
        c.bad(f"{t}.allow_negative", allow_negative, "true or false")
        allow_negative = False
    sigma = _sigma(c, f"{t}.sigma_pt", raw.get("sigma_pt"))
    if sigma.kind == "horwitz" and unit:
        try:
            mass_fraction(unit)
        except UnitError as exc:  # σ_pt could never be computed: say so now, naming the key
            c.bad(f"{t}.unit", unit, f"a mass-fraction unit for sigma_pt = \"horwitz\" (such as mg/kg, µg/kg, "
                  f"g/100 g or %): {exc}")
    if sigma.kind == "fixed" and sigma.value is not None and not isinstance(assigned, str):
        why = sigma_relative_problem(sigma.value, assigned)
        if why is not None:
            c.bad(f"{t}.sigma_pt", raw.get("sigma_pt"), f"σ_pt ≥ {SIGMA_MIN_RELATIVE:g} × |assigned|: {why}")
    return MeasurandSettings(
        name=name,
        unit=unit,
        label=c.text(f"{t}.label", raw.get("label"), default=name, limit="label") or name,
        assigned=assigned,
        u_assigned=u_assigned,
        sigma_pt=sigma,
        score=c.choice(f"{t}.score", raw.get("score"), ScoreName, "z"),
        decimals=decimals,
        allow_negative=allow_negative,
        homogeneity=_inside(c, folder, f"{t}.homogeneity", c.text(f"{t}.homogeneity", raw.get("homogeneity"))),
        stability=_inside(c, folder, f"{t}.stability", c.text(f"{t}.stability", raw.get("stability"))),
        item_checks=c.choice(f"{t}.item_checks", raw.get("item_checks"), ItemConsequence, "uncertainty"),
        stability_criterion=c.choice(f"{t}.stability_criterion", raw.get("stability_criterion"),
                                     StabilityChoice, "auto"),
        consensus_labs=subset, reference=reference_value(c, f"{t}.reference", raw.get("reference")),
    )


def _exclusions(c: _Checker, raw: object, measurands: dict) -> tuple[Exclusion, ...]:
    allowed = ("a list of tables: [[exclude]] lab = \"L07\", measurand = \"...\" (optional), reason = \"...\", "
               "scored = true")
    if not isinstance(raw, list):
        c.bad("exclude", raw, allowed)
        return ()
    out = []
    for i, e in enumerate(raw, start=1):
        key = f"exclude[{i}]"
        if not isinstance(e, dict):
            c.bad(key, e, allowed)
            continue
        c.unknown(f"[[exclude]] #{i} ", e, {"lab": "", "measurand": "", "reason": "", "scored": ""})
        lab = e.get("lab")
        lab = str(lab) if isinstance(lab, int) and not isinstance(lab, bool) else lab
        lab = c.text(f"{key}.lab", lab, required=True)
        if lab:
            lab, why = read_lab_code(lab)  # the same rule as the codes of the results
            if lab is None:
                c.bad(f"{key}.lab", e.get("lab"), why or "a lab code")
        reason = c.text(f"{key}.reason", e.get("reason"), required=True, limit="exclusion reason")
        name = c.text(f"{key}.measurand", e.get("measurand"))
        if name is not None and name not in measurands:
            c.bad(f"{key}.measurand", name, ", ".join(measurands) or "a measurand of this round")
        scored = e.get("scored", True)
        if not isinstance(scored, bool):
            c.bad(f"{key}.scored", scored, "true or false")
            scored = True
        if lab and reason:
            out.append(Exclusion(lab=lab, measurand=name, reason=reason, scored=scored))
    return tuple(out)


def _limits(c: _Checker, raw: object) -> ReadLimits:
    """``[limits]`` → ReadLimits; sizes in MiB, the timeout in seconds."""
    if not isinstance(raw, dict):
        c.bad("limits", raw, "a table: [limits] max_part_mib = 64, max_total_mib = 256, ...")
        return DEFAULT_LIMITS
    c.unknown("[limits] ", raw, {k: "" for k in LIMIT_KEYS})
    kw: dict[str, Any] = {}  # ReadLimits field → value (an int, or a float for timeout_s)
    for key, value in raw.items():
        if key not in LIMIT_KEYS:
            continue
        field_name, unit, _ = LIMIT_KEYS[key]
        low, high = limit_range(key)
        whole = key == "max_parts"
        allowed = f"a {'whole ' if whole else ''}number from {low:g} to {high:g}"
        real = _real(value)
        if real is None or not low <= real <= high or (whole and not isinstance(value, int)):
            c.bad(f"limits.{key}", value, allowed)
            continue
        kw[field_name] = real if field_name == "timeout_s" else int(real * unit)
    try:
        return ReadLimits(**kw)
    except ValueError as exc:
        c.bad("limits", raw, str(exc))
        return DEFAULT_LIMITS


def _iso_date(c: _Checker, key: str, value: object) -> str:
    """A date key (a TOML date, or text such as 2026-10-14) in ISO form; "" when not given."""
    if isinstance(value, (_dt.date, _dt.datetime)):
        return value.isoformat()[:10]
    text = c.text(key, value, default="") or ""
    if text:
        try:
            return _dt.date.fromisoformat(text).isoformat()
        except ValueError:
            c.bad(key, text, "a date in the form 2026-10-14")
    return text


def load_round(path: str | Path) -> Round:
    """Read and validate a round file (or a folder holding ``round.toml``).

    Raises
    ------
    RoundFileError
        Listing every mistake found, each naming the file and key.
    """
    p = Path(path)
    if p.is_dir():
        p = p / "round.toml"
    shown = str(p)
    if not p.is_file():
        raise RoundFileError.single(f"{shown}: round file not found")
    size = p.stat().st_size
    if size > MAX_ROUND_FILE_BYTES:
        raise RoundFileError.single(
            f"{shown}: the round file is {size / 2**20:.1f} MiB; at most {MAX_ROUND_FILE_BYTES >> 20} MiB is read "
            f"(a round of {MAX_MEASURANDS} measurands fits in about 1 MiB)")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8-sig"))
    except tomllib.TOMLDecodeError as exc:
        raise RoundFileError.single(f"{shown}: not valid TOML: {exc}") from None
    except UnicodeDecodeError as exc:
        raise RoundFileError.single(f"{shown}: not UTF-8 text: {exc}") from None
    except RecursionError:  # tomllib parses nested arrays and inline tables recursively
        raise RoundFileError.single(
            f"{shown}: not a usable round file: arrays or inline tables are nested too deeply to read "
            "(a round file needs at most three levels)") from None
    c = _Checker(shown)
    folder = p.parent
    c.unknown("", {k: v for k, v in data.items() if k not in ("round", "measurand", "exclude", "limits")},
              {"round": "", "measurand": "", "exclude": "", "limits": ""})
    r = data.get("round")
    if not isinstance(r, dict):
        raise RoundFileError.single(f"{shown}: a [round] table with at least id = \"...\" is required")
    c.unknown("[round] ", r, ROUND_KEYS)
    round_id = c.text("round.id", r.get("id"), required=True, limit="round id") or ""
    date = _iso_date(c, "round.date", r.get("date"))
    return_by = _iso_date(c, "round.return_by", r.get("return_by"))
    results = c.text("round.results", r.get("results"), default="results.csv") or "results.csv"
    if Path(results).is_absolute() or ".." in Path(results).parts:
        c.bad("round.results", results, "a path (or glob) inside the round folder")
    youden_raw = r.get("youden", [])
    youden: list[tuple[str, str]] = []
    if not isinstance(youden_raw, list) or not all(
        isinstance(x, list) and len(x) == 2 and all(isinstance(v, str) for v in x) for x in youden_raw
    ):
        c.bad("round.youden", youden_raw, 'a list of pairs, e.g. [["iodine", "bromine"]]')
    else:
        youden = [(a, b) for a, b in youden_raw]
    archive_text = c.text("round.archive", r.get("archive"))
    measurands_raw = data.get("measurand")
    measurands: dict[str, MeasurandSettings] = {}
    qualitative: dict[str, QualitativeSettings] = {}
    if not isinstance(measurands_raw, dict) or not measurands_raw:
        c.problems.append(Problem(message=f"{shown}: at least one [measurand.NAME] table is required"))
    elif len(measurands_raw) > MAX_MEASURANDS:
        raise RoundFileError.single(
            f"{shown}: {len(measurands_raw)} [measurand.NAME] tables; a round has at most {MAX_MEASURANDS} "
            "measurands (split it into several rounds)")
    else:
        for name, raw in measurands_raw.items():
            m = _measurand(c, folder, name, raw)
            if isinstance(m, QualitativeSettings):
                qualitative[name] = m
            elif m is not None:
                measurands[name] = m
    for a, b in youden:
        for name in (a, b):
            if name not in measurands:
                c.bad("round.youden", name, "names of measurands in this file")
    exclusions = _exclusions(c, data.get("exclude", []), {**measurands, **qualitative})
    limits = _limits(c, data.get("limits", {}))
    if r.get("outliers") == "keep" and r.get("stragglers") == "exclude":
        c.bad("round.stragglers", "exclude",
              "'keep' while outliers = 'keep' (leaving out stragglers while keeping outliers contradicts "
              "itself); or set outliers = \"exclude\" too")
    decimal = r.get("decimal")
    if decimal is not None and not is_choice(decimal, DecimalMark):
        c.bad("round.decimal", decimal, options_text(DecimalMark, last=" or ")
              + " (leave it out to refuse numbers such as 1,234 whose reading depends on it)")
        decimal = None
    confidence = 0.95
    conf_raw = r.get("confidence")
    if conf_raw is not None:
        why = confidence_problem(conf_raw)  # never silently replaced by the default
        if why is not None:
            c.bad("round.confidence", conf_raw, why)
        else:
            confidence = float(conf_raw)
    rnd = Round(
        path=p,
        folder=folder,
        id=round_id,
        title=c.text("round.title", r.get("title"), default=round_id, limit="title") or round_id,
        scheme=c.text("round.scheme", r.get("scheme"), default="", limit="scheme") or "",
        date=date,
        provider=c.text("round.provider", r.get("provider"), default="", limit="provider") or "",
        material=c.text("round.material", r.get("material"), default="", limit="material") or "",
        results=results,
        results_sheet=c.text("round.results_sheet", r.get("results_sheet"), limit="results sheet"),
        participants=_inside(c, folder, "round.participants", c.text("round.participants", r.get("participants"))),
        replicates=c.whole("round.replicates", r.get("replicates"), 2, 1, MAX_FORM_REPLICATES),
        confidence=confidence,
        outliers=c.choice("round.outliers", r.get("outliers"), OutlierAction, "exclude"),
        stragglers=c.choice("round.stragglers", r.get("stragglers"), OutlierAction, "keep"),
        archive=_archive_file(c, folder, archive_text),
        history_rounds=c.whole("round.history_rounds", r.get("history_rounds"), 8, 1, 100),
        youden=tuple(youden),
        words=c.choice("round.words", r.get("words"), Words, "signals"),
        measurands=measurands,
        decimal=decimal,
        unknown_labs=c.choice("round.unknown_labs", r.get("unknown_labs"), UnknownLabs, "warn"),
        paper=c.choice("round.paper", r.get("paper"), Paper, "a4"),
        return_by=return_by,
        exclusions=exclusions,
        limits=limits,
        warnings=tuple(c.warnings),
        qualitative=qualitative,
    )
    if c.problems:
        raise with_warnings(RoundFileError(c.problems, summary=f"{shown} has mistakes"), c.warnings)
    return rnd


def with_warnings(exc: BaseException, warnings) -> BaseException:
    """``exc`` with the round file's warnings attached as notes, so they are shown even when it stops the run.

    The command line prints an error's notes (``exc.__notes__``) as warnings before the error itself.
    """
    for w in warnings:
        if w not in getattr(exc, "__notes__", ()):
            exc.add_note(w)
    return exc


def result_files(rnd: Round) -> list[Path]:
    """The results file(s) of a round: one table, or every workbook in a folder or glob."""
    files = _find_results(rnd)
    folder = rnd.folder.resolve()
    for f, inside in zip(files, inside_each(files, folder, lexical=False)):  # a link may point out of the folder
        if not inside:
            raise RoundFileError.single(
                f"{rnd.path}: key 'round.results': {f.name} leads outside the round folder "
                f"(a link to {f.resolve()}); results must be inside {rnd.folder}")
    return files


def _find_results(rnd: Round) -> list[Path]:
    folder = rnd.folder.resolve()
    target = rnd.results
    shown = f"{rnd.path}: key 'round.results'"
    if any(ch in target for ch in "*?["):
        found = sorted(Path(x) for x in _glob.glob(str(folder / target), recursive=True))
        files = [f for f in found if f.is_file()]
        if not files:
            raise RoundFileError.single(f"{shown}: the pattern {target!r} matches no file in {rnd.folder}")
        return files
    p = folder / target
    if p.is_dir():
        with os.scandir(p) as entries:  # names only: one Path per workbook, sorted as names (one folder)
            names = sorted(e.name for e in entries if os.path.splitext(e.name)[1].lower() in (".xlsx", ".xlsm")
                           and not e.name.startswith(("~$", ".")))
        files = [p / name for name in names]
        if not files:
            raise RoundFileError.single(f"{shown}: the folder {target!r} holds no .xlsx workbooks")
        return files
    if not p.is_file():
        raise RoundFileError.single(f"{shown}: file {target!r} not found in {rnd.folder}")
    return [p]
