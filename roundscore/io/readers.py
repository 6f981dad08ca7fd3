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
    """One returned form given as the round's single results file (read in isolation)."""
    shown = _shown(rnd, path)
    (got,) = _read_sheets([str(path)], rnd.limits)
    if not isinstance(got, tuple):  # a ReadFailure or an InputError
        probs = got.as_problems() if hasattr(got, "as_problems") else list(got.problems)
        return [], [_with_file(p, shown) for p in probs], ()
    results, info = got
    results = SheetRows(file=shown, sheet=results.sheet, rows=results.rows, warnings=results.warnings)
    recs, problems = records_from_form(rnd, results, info)
    return recs, problems, results.warnings + info.warnings


def read_results(rnd: Round, *, jobs: int | None = None, progress=None) -> ResultTable:
    """All results of the round as one validated table.

    ``round.results`` names one long-layout table (CSV or workbook), or a
    folder or glob of returned submission forms. Every problem in every file
    is collected before the import is refused. Forms are read and checked
    by ``jobs`` worker processes (None = all cores), in batches of
    :data:`FORMS_PER_BATCH` fixed files, so the table and the problems
    listed are the same for any ``jobs``; ``progress(stage, done, total)``
    follows the files read.
    """
    files = rnd.result_files()
    records: list = []
    problems: list[Problem] = []
    warnings: list[str] = []
    single_table = len(files) == 1 and not (Path(rnd.folder / rnd.results).is_dir()
                                            or any(ch in rnd.results for ch in "*?["))
    if not single_table:
        return _read_forms(rnd, files, jobs=jobs, progress=progress)
    for f in files:
        shown = _shown(rnd, f)
        if single_table:
            got = _isolated_read(f, rnd.results_sheet, rnd.limits)
            if not hasattr(got, "sheets"):  # a ReadFailure: refused, crashed or timed out
                problems += [_with_file(p, shown) for p in got.as_problems()]
                continue
            sheet = got.sheets[0]
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


#: Returned forms read and checked per batch: fixed, so results do not depend on the number of jobs;
#: large enough to amortise a worker round trip, small enough to spread the work (common practice).
FORMS_PER_BATCH = 64


def _read_forms(rnd: Round, files: list[Path], *, jobs: int | None, progress) -> ResultTable:
    """A folder of returned forms: batches read and validated in worker processes, then joined.

    Each worker turns its batch into a validated frame with :func:`build_table`
    (so the rows of 2000 forms never travel as Python objects); here the
    frames are joined, a lab code returned in forms of two different batches
    is reported as the same duplicate :func:`build_table` reports inside a
    batch, and the rows are put in the table's order.
    """
    from ..parallel import run_batches

    batches = [[str(f) for f in files[i:i + FORMS_PER_BATCH]] for i in range(0, len(files), FORMS_PER_BATCH)]
    report = None
    if progress:
        def report(stage: str, done: int, total: int) -> None:
            progress("read forms", min(len(files), done * FORMS_PER_BATCH), len(files))
    parts = run_batches(_form_batch, batches, jobs=jobs, shared=rnd, batch_size=1, progress=report,
                        stage="read forms")
    problems: list[Problem] = []
    warnings: list[str] = []
    shown: list[str] = []
    frames = []
    for part in parts:
        shown += part["shown"]
        warnings += part["warnings"]
        problems += part["problems"]
        if part["frame"] is not None:
            frames.append(part["frame"])
    import pandas as pd

    if frames:
        frame = pd.concat(frames, ignore_index=True) if len(frames) > 1 else frames[0]
        for col in frame.columns:
            if len({str(f[col].dtype) for f in frames}) > 1:
                # A text column all blank in one batch is inferred as object there: infer it again over
                # all rows, as one build_table over every record would.
                frame[col] = pd.Series(frame[col].tolist(), index=frame.index)
    else:
        frame = build_table(rnd, [], problems=[]).frame
    dup = frame.duplicated(["lab", "measurand", "replicate"], keep="first").to_numpy()
    if dup.any():
        first = frame[~dup].set_index(["lab", "measurand", "replicate"])
        for r in frame[dup].itertuples(index=False):
            f = first.loc[(r.lab, r.measurand, r.replicate)]
            problems.append(Problem(
                message=f"duplicate result for lab {r.lab}, {r.measurand}, replicate {r.replicate} "
                        f"(also in {f['file']}" + (f" sheet {f['sheet']!r}" if f["sheet"] else "") +
                        f" row {f['row']})",
                file=r.file, sheet=r.sheet, row=int(r.row), column="replicate", lab=r.lab,
                measurand=r.measurand, value=int(r.replicate)))
    if problems:
        raise InputError(problems, summary="the results cannot be imported")
    if len(frames) > 1:
        frame = frame.sort_values(["measurand", "lab", "replicate"], kind="stable").reset_index(drop=True)
    return ResultTable(frame=frame, files=tuple(shown), warnings=tuple(warnings))


def _read_sheets(paths: list[str], limits) -> list:
    """Both sheets of each form, each file read by the isolated reader (io.safety.read_many)."""
    from .safety import read_many

    return [r.sheets if hasattr(r, "sheets") else r for r in
            read_many(paths, [RESULTS_SHEET, INFO_SHEET], jobs=1, limits=limits)]


def _form_batch(batches: list[list[str]]) -> list[dict]:
    """Worker side of :func:`_read_forms`: read, turn into records and validate one batch of forms."""
    from ..parallel import shared

    rnd: Round = shared()
    out = []
    for paths in batches:
        records: list = []
        problems: list[Problem] = []
        warnings: list[str] = []
        shown_all = [_shown(rnd, Path(p)) for p in paths]
        forms = [p for p in paths if _is_form(Path(p))]
        read = dict(zip(forms, _read_sheets(forms, rnd.limits)))
        for p, shown in zip(paths, shown_all):
            if p not in read:
                problems.append(Problem(message="not a submission workbook (.xlsx)", file=shown))
                continue
            got = read[p]
            if not isinstance(got, tuple):  # a ReadFailure or an InputError
                probs = got.as_problems() if hasattr(got, "as_problems") else list(got.problems)
                problems += [_with_file(q, shown) for q in probs]
                continue
            results, info = got
            results = SheetRows(file=shown, sheet=results.sheet, rows=results.rows, warnings=results.warnings)
            recs, probs = records_from_form(rnd, results, info)
            records += recs
            problems += probs
            warnings += list(results.warnings + info.warnings)
        del read
        frame = None
        try:
            frame = build_table(rnd, records, problems=problems).frame
            problems = []
        except InputError as exc:
            problems = list(exc.problems)
        out.append({"frame": frame, "problems": problems, "warnings": warnings, "shown": shown_all})
    return out


def _with_file(problem: Problem, shown: str) -> Problem:
    from dataclasses import replace

    return replace(problem, file=shown)


def _isolated_read(path: Path, sheet: str | None, limits):
    """One untrusted file read in a bounded worker process (io.safety.read_many)."""
    from .safety import read_many

    return read_many([path], [sheet], jobs=1, limits=limits)[0]


def _sheet_names(path: Path) -> list[str]:
    # The package check names the sheets without handing the file to a compiled reader.
    from .safety import inspect_workbook

    try:
        return list(inspect_workbook(path).sheets)
    except InputError:
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
    sheet = read_rows(rnd.participants, limits=rnd.limits)
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
    sheet = read_rows(path, limits=rnd.limits)
    return SheetRows(file=_shown(rnd, path), sheet=sheet.sheet, rows=sheet.rows, warnings=sheet.warnings)
