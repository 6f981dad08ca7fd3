"""Read a round's results (a long-layout table, or a folder of returned forms) and its participants."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..errors import InputError, Problem
from ..round import Round
from ..table import ResultTable, build_table, records_from_long
from .forms import INFO_SHEET, RESULTS_SHEET, records_from_form
from .xlsx import SheetRows, read_rows

__all__ = ["read_results", "read_participants", "Participant", "read_item_table"]


@dataclass(frozen=True, slots=True, kw_only=True)
class Participant:
    """A participant's confidential details, from ``participants.csv``."""

    lab: str
    name: str
    contact: str


def _is_form(path: Path) -> bool:
    return path.suffix.lower() in (".xlsx", ".xlsm")


def _read_form(rnd: Round, path: Path):
    try:
        results = read_rows(path, RESULTS_SHEET)
        info = read_rows(path, INFO_SHEET)
    except InputError as exc:
        return [], [_with_file(p, _shown(rnd, path)) for p in exc.problems], ()
    shown = _shown(rnd, path)
    results = SheetRows(file=shown, sheet=results.sheet, rows=results.rows, warnings=results.warnings)
    recs, problems = records_from_form(rnd, results, info)
    return recs, problems, results.warnings + info.warnings


def read_results(rnd: Round) -> ResultTable:
    """All results of the round as one validated table.

    ``round.results`` names one long-layout table (CSV or workbook), or a
    folder or glob of returned submission forms. Every problem in every file
    is collected before the import is refused.
    """
    files = rnd.result_files()
    records: list = []
    problems: list[Problem] = []
    warnings: list[str] = []
    single_table = len(files) == 1 and not (Path(rnd.folder / rnd.results).is_dir()
                                            or any(ch in rnd.results for ch in "*?["))
    for f in files:
        shown = _shown(rnd, f)
        if single_table:
            try:
                sheet = read_rows(f, rnd.results_sheet)
            except InputError as exc:
                problems += [_with_file(p, shown) for p in exc.problems]
                continue
            sheet = SheetRows(file=shown, sheet=sheet.sheet, rows=sheet.rows, warnings=sheet.warnings)
            if sheet.sheet and INFO_SHEET in _sheet_names(f):
                recs, probs, warns = _read_form(rnd, f)
            else:
                recs, probs = records_from_long(sheet)
                warns = sheet.warnings
        elif _is_form(f):
            recs, probs, warns = _read_form(rnd, f)
        else:
            probs = [Problem(message="not a submission workbook (.xlsx)", file=shown)]
            recs, warns = [], ()
        records += recs
        problems += probs
        warnings += list(warns)
    return build_table(rnd, records, files=[_shown(rnd, f) for f in files], warnings=warnings, problems=problems)


def _with_file(problem: Problem, shown: str) -> Problem:
    from dataclasses import replace

    return replace(problem, file=shown)


def _sheet_names(path: Path) -> list[str]:
    from python_calamine import CalamineWorkbook

    try:
        return CalamineWorkbook.from_path(str(path)).sheet_names
    except Exception:
        return []


def _shown(rnd: Round, path: Path) -> str:
    try:
        return str(path.resolve().relative_to(rnd.folder.resolve()))
    except ValueError:
        return str(path)


def read_participants(rnd: Round) -> dict[str, Participant]:
    """The participants' names and contacts by lab code (empty when the round names no file)."""
    if rnd.participants is None:
        return {}
    shown = _shown(rnd, rnd.participants)
    sheet = read_rows(rnd.participants)
    rows = [r for r in sheet.rows if any(c is not None for c in r)]
    if not rows:
        raise InputError.single("the participants file is empty", file=shown)
    header = [str(c).strip().lower() if c is not None else "" for c in rows[0]]
    if "lab" not in header:
        raise InputError.single(
            f"the participants file needs a 'lab' column (and 'name', 'contact'); found: {', '.join(header)}",
            file=shown, row=1)
    il = header.index("lab")
    iname = header.index("name") if "name" in header else None
    icontact = header.index("contact") if "contact" in header else None
    out: dict[str, Participant] = {}
    problems = []
    for i, r in enumerate(rows[1:], start=2):
        def cell(j):
            if j is None or j >= len(r) or r[j] is None:
                return ""
            v = r[j]
            return str(int(v)) if isinstance(v, float) and v.is_integer() else str(v).strip()
        lab = cell(il)
        if not lab:
            problems.append(Problem(message="the lab code is empty", file=shown, row=i))
            continue
        if lab in out:
            problems.append(Problem(message="the lab appears twice", file=shown, row=i, lab=lab))
            continue
        out[lab] = Participant(lab=lab, name=cell(iname), contact=cell(icontact))
    if problems:
        raise InputError(problems, summary="the participants file has problems")
    return out


def read_item_table(rnd: Round, path: Path, *, what: str) -> SheetRows:
    """Read a homogeneity or stability table named in the round file."""
    if not path.is_file():
        raise InputError.single(f"the {what} file named in the round file was not found", file=_shown(rnd, path))
    sheet = read_rows(path)
    return SheetRows(file=_shown(rnd, path), sheet=sheet.sheet, rows=sheet.rows, warnings=sheet.warnings)
