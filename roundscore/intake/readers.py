"""Read a round's results (a long-layout table, or a folder of returned forms) and its participants."""

from __future__ import annotations

import functools
import os
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from roundscore.errors import InputError, Problem, Place, is_text_file
from roundscore.intake.roundfile import result_files
from roundscore.model.inputs import Participant
from roundscore.model.round import Round
from roundscore.model.labcodes import LabCodeReader, clash_problems, lab_key, read_lab_code
from roundscore.model.table import COLUMNS, ResultTable, SampleReceipt, columns_of, frame_from_columns
from roundscore.intake.cache import CachedForm, FileKey, InputCache, file_key, unchanged
from roundscore.intake.validate import (build_table, cell_label, records_from_long, summarise_ambiguous,
                                       validate_records)
from roundscore.text import clip, quote, too_long
from roundscore.support.paths import resolve_each
from roundscore.intake.forms import (INFO_SHEET, RECEIPT_FIELDS, RESULTS_SHEET, date_text, form_decimal,
                                     form_receipt, lab_cell, records_from_form)
from roundscore.intake.safety import hidden_by_design
from roundscore.intake.xlsx import SheetRows, read_rows

__all__ = ["read_results", "read_participants", "read_item_table", "check_labs", "receipts_from_long",
           "RECEIPT_COLUMNS"]

#: The long layout's optional columns of the sample's receipt (the forms' fields, :data:`RECEIPT_FIELDS`):
#: the date the sample arrived, its condition on arrival, the date of analysis.
RECEIPT_COLUMNS = tuple(key for key, _, _ in RECEIPT_FIELDS)


def _is_form(path: Path) -> bool:
    return path.suffix.lower() in (".xlsx", ".xlsm")


_MARK_WORDS = {"comma": "a decimal comma (1,234 is 1.234 and 1.234 is 1234)",
               "point": "a decimal point (1,234 is 1234 and 1.234 is 1.234)"}


def round_reading(rnd: Round) -> tuple[tuple[str, str], ...]:
    """The audit line on how the round's text cells are read, when round.toml declares the decimal mark."""
    if rnd.decimal is None:
        return ()
    return (("", f"numbers typed as text that could be read two ways read with {_MARK_WORDS[rnd.decimal]}, "
                 f"as round.toml declares ([round] decimal = \"{rnd.decimal}\"); numbers with one reading "
                 "(4,75) and numbers stored as numbers read as they are"),)


def form_reading(rnd: Round, results: SheetRows, info: SheetRows, lab: str | None) -> list[tuple[str, str]]:
    """The audit line of one form whose own decimal mark differs from the round's (none when it agrees)."""
    declared, _ = form_decimal(results, info)
    if declared is None or declared.mark == rnd.decimal:
        return []
    return [(lab or "", f"{results.file}: numbers typed as text that could be read two ways read with "
                        f"{_MARK_WORDS[declared.mark]}, as the form declares ({declared.source})")]


def _read_form(rnd: Round, path: Path):
    """One returned form given as the round's single results file (read in isolation)."""
    shown = _shown(rnd, path)
    (got,) = _read_sheets([str(path)], rnd.limits)
    if not isinstance(got, tuple):  # a ReadFailure or an InputError
        probs = got.as_problems() if hasattr(got, "as_problems") else list(got.problems)
        return [], [_with_file(p, shown) for p in probs], (), [], {}
    results, info = got
    results = replace(results, file=shown)
    recs, problems = records_from_form(rnd, results, info)
    lab = str(recs[0].lab) if recs else None
    receipt = form_receipt(results, info)[0]
    receipts = {lab: receipt} if lab is not None and receipt is not None else {}
    warnings = results.warnings + hidden_by_design(info.warnings, str(path), [INFO_SHEET])
    return recs, problems, warnings, form_reading(rnd, results, info, lab), receipts


def read_results(rnd: Round, *, jobs: int | None = None, progress=None, cache: InputCache | None = None,
                 ) -> ResultTable:
    """All results of the round as one validated table.

    ``round.results`` names one long-layout table (CSV or workbook), or a
    folder or glob of returned submission forms. Every problem in every file
    is collected before the import is refused. Forms are read and checked
    by ``jobs`` isolated worker processes (None = all cores); the table and
    the problems listed are the same for any ``jobs``; ``progress(stage,
    done, total)`` follows the files read. With ``cache``
    (:class:`~roundscore.intake.cache.InputCache`) a returned form whose
    content and reading settings are those of a cached one is not read
    again, and what this read gave is kept for the cache's next save; the
    table is the same with or without it (a long-layout table is always
    read).
    """
    files = result_files(rnd)
    records: list = []
    problems: list[Problem] = []
    warnings: list[str] = []
    readings: list[tuple[str, str]] = list(round_reading(rnd))
    receipts: dict = {}
    single_table = len(files) == 1 and not (Path(rnd.folder / rnd.results).is_dir()
                                            or any(ch in rnd.results for ch in "*?["))
    if not single_table:
        return _read_forms(rnd, files, jobs=jobs, progress=progress, cache=cache)
    for f in files:
        shown = _shown(rnd, f)
        if single_table:
            got = _isolated_read(f, rnd.results_sheet, rnd.limits)
            if not hasattr(got, "sheets"):  # a ReadFailure: refused, crashed or timed out
                problems += [_with_file(p, shown) for p in got.as_problems()]
                continue
            sheet = got.sheets[0]
            sheet = replace(sheet, file=shown)
            if sheet.sheet and INFO_SHEET in _sheet_names(f):
                recs, probs, warns, notes, got_receipts = _read_form(rnd, f)
                readings += notes
                receipts.update(got_receipts)
            else:
                recs, probs = records_from_long(sheet)
                got_receipts, receipt_probs = receipts_from_long(sheet)
                receipts.update(got_receipts)
                probs = probs + receipt_probs
                warns = sheet.warnings
        elif _is_form(f):
            recs, probs, warns, notes, got_receipts = _read_form(rnd, f)
            readings += notes
            receipts.update(got_receipts)
        else:
            probs = [Problem(message="not a submission workbook (.xlsx)", file=shown)]
            recs, warns = [], ()
        records += recs
        problems += probs
        warnings += list(warns)
    return build_table(rnd, records, files=[_shown(rnd, f) for f in files], warnings=warnings, problems=problems,
                       readings=readings, receipts=receipts)


def receipts_from_long(sheet: SheetRows) -> tuple[dict[str, SampleReceipt], list[Problem]]:
    """The sample receipts a long-layout table gives in its optional columns :data:`RECEIPT_COLUMNS`
    (``arrived``, ``condition``, ``analysed``), by lab; and the problems, each naming the row and the value.

    A lab's fields may stand on any of its rows (on the first, say); blank cells say nothing, and two rows of
    one lab that give a field different values are refused, as is a date that is not one (a date cell or
    ``YYYY-MM-DD`` text, as on the forms). A table without these columns gives none. Rows whose lab code is
    not valid are left to the results' own checks.
    """
    rows = sheet.rows
    start = next((i for i, r in enumerate(rows) if any(c is not None for c in r)), None)
    if start is None:
        return {}, []
    index = {name: j for j, c in enumerate(rows[start]) if (name := (cell_label(c) or "").lower()) in RECEIPT_COLUMNS}
    lab_col = next((j for j, c in enumerate(rows[start]) if (cell_label(c) or "").lower() == "lab"), None)
    if not index or lab_col is None:
        return {}, []
    kinds = {key: (label, kind) for key, label, kind in RECEIPT_FIELDS}
    found: dict[str, dict[str, tuple[str, int]]] = {}
    problems: list[Problem] = []
    for i in range(start + 1, len(rows)):
        r = rows[i]
        lab, _ = read_lab_code(r[lab_col] if lab_col < len(r) else None)
        if lab is None:
            continue
        line = sheet.row_number(i)
        for key, j in index.items():
            v = r[j] if j < len(r) else None
            if v is None or (isinstance(v, str) and not v.strip()) or (isinstance(v, float) and v != v):
                continue
            label, kind = kinds[key]
            where = Place(file=sheet.file, sheet=sheet.sheet, row=line, column=str(cell_label(rows[start][j])))
            if kind == "date":
                text = date_text(v)
                if text is None:
                    problems.append(Problem(message=f"{label.lower()} is not a date", lab=lab, value=v,
                                            hint="write the date as YYYY-MM-DD (2026-10-14), or leave the cell "
                                                 "blank", **where))
                    continue
            else:
                text = clip(" ".join(str(v).split()), 200)
            had = found.setdefault(lab, {}).get(key)
            if had is None:
                found[lab][key] = (text, line)
            elif had[0] != text:
                problems.append(Problem(message=f"{label.lower()} differs from the lab's row {had[1]} "
                                                f"({had[0]!r})",
                                        lab=lab, value=v,
                                        hint="give the sample's receipt once per lab, or the same on every row",
                                        **where))
    out = {}
    for lab, fields in found.items():
        lines = sorted({line for _, line in fields.values()})
        word = "line" if is_text_file(sheet.file, sheet.sheet) else "row"
        rows_text = f"{word} {lines[0]}" if len(lines) == 1 else f"{word}s {', '.join(map(str, lines))}"
        out[lab] = SampleReceipt(**{k: v for k, (v, _) in fields.items()},
                                 source=f"{sheet.file}{', ' + sheet.sheet if sheet.sheet else ''}, {rows_text}")
    return out, problems


def _read_forms(rnd: Round, files: list[Path], *, jobs: int | None, progress,
                cache: InputCache | None = None) -> ResultTable:
    """A folder of returned forms: each read and validated in an isolated worker process, then joined.

    Each worker turns a form into validated row tuples where it read it
    (:func:`_form_rows`), so the cells of 2000 forms never travel between
    processes. Here the rows are joined into one frame, a lab code returned
    in two forms is reported as the duplicate :func:`build_table` reports
    within one file, and the rows are put in the table's order. The result
    is the same for any ``jobs``. A form the ``cache`` holds is taken from
    it instead of being read; the forms read without a problem are handed
    back to the cache (before any problem is raised, so fixing one form of
    many reads only that one again).
    """
    from roundscore.intake.isolation import read_many

    paths = [str(f) for f in files]
    shown = _shown_all(rnd, paths)
    forms = [p for p in paths if _is_form(Path(p))]
    keys: dict[str, FileKey | None] = {}
    cached: dict[str, CachedForm] = {}
    if cache is not None:
        for p, name in zip(paths, shown):
            if _is_form(Path(p)):
                keys[p] = key = file_key(p, name, cache.max_bytes)
                got_form = cache.get(key)
                if got_form is not None:
                    cached[p] = got_form
    to_read = [p for p in forms if p not in cached]
    report = None
    if progress:
        def report(done: int, total: int) -> None:
            progress("read forms", done, total)
    read = dict(zip(to_read, read_many(to_read, [RESULTS_SHEET, INFO_SHEET], jobs=jobs, limits=rnd.limits,
                                       then=functools.partial(_form_rows, rnd), progress=report)))
    problems: list[Problem] = []
    warnings: list[str] = []
    readings: list[tuple[str, str]] = list(round_reading(rnd))
    segments: list[dict] = []
    places: dict[str, Place] = {}
    receipts: dict = {}
    kept: list[tuple[FileKey, CachedForm, int]] = []  # (key, form, segment index) of the forms read cleanly
    for p, name in zip(paths, shown):
        got = read.get(p)
        hit = cached.get(p)
        if hit is not None:
            key = keys[p]
            assert key is not None, "a cached form has a key"
            columns = cache.rows_of(key)  # type: ignore[union-attr]  # cached forms come from a cache
            form = hit
        elif got is None:
            problems.append(Problem(message="not a submission workbook (.xlsx)", file=name,
                                    hint="the results folder holds returned forms (.xlsx) only"))
            continue
        elif isinstance(got, _FormRows):
            columns = columns_of(got.rows)
            problems += got.problems
            form = CachedForm(warnings=tuple(got.warnings), readings=tuple(got.readings),
                              lab_place=got.lab_place, receipt=got.receipt)
            key = keys.get(p)
        else:  # a ReadFailure: refused, crashed, out of memory or timed out
            problems += [_with_file(q, name) for q in got.as_problems()]
            continue
        warnings += form.warnings
        readings += form.readings
        n = len(columns["lab"])
        if n and form.receipt is not None:
            receipts.setdefault(columns["lab"][0], form.receipt)
        if n and form.lab_place is not None:
            places.setdefault(columns["lab"][0], form.lab_place)
        read_cleanly = hit is not None or (isinstance(got, _FormRows) and not got.problems)
        if key is not None and read_cleanly and (hit is not None or unchanged(key)):
            kept.append((key, form, len(segments)))
        segments.append(columns)
    del read
    merged = _joined(segments)
    if cache is not None:
        clean = merged if len(kept) == len(segments) else _joined([segments[i] for _, _, i in kept])
        cache.keep([k for k, _, _ in kept], [f for _, f, _ in kept], clean,
                   [len(segments[i]["lab"]) for _, _, i in kept])
    del segments
    problems += clash_problems(places)
    frame = frame_from_columns(merged)
    problems = summarise_ambiguous(problems + _duplicate_forms(frame))
    if problems:
        raise InputError(problems, summary="the results cannot be imported")
    return ResultTable(frame=frame, files=tuple(shown), warnings=tuple(warnings), readings=tuple(readings),
                       lab_places=places, receipts=dict(sorted(receipts.items())))


def _joined(segments: list[dict]) -> dict:
    """Columns of several forms, one after another (:data:`~roundscore.model.table.COLUMNS`)."""
    if not segments:
        return columns_of([])
    return {c: np.concatenate([s[c] for s in segments]) for c in COLUMNS}


def _duplicate_forms(frame) -> list[Problem]:
    """One problem per form whose results repeat those of an earlier form (the same lab code twice).

    A lab's second form repeats every result of its first: that is one
    problem, said once with both files, not one per result.
    """
    keys = ["lab", "measurand", "replicate"]
    if "item" in frame.columns:  # a qualitative measurand's test items are results of their own
        frame = frame.assign(item=frame["item"].fillna("").astype(str))
        keys.append("item")
    dup = frame.duplicated(keys, keep="first").to_numpy()
    if not dup.any():
        return []
    first = frame[~dup].set_index(keys)["file"]
    found: dict[tuple[str, str, str], int] = {}
    for r in frame[dup].to_dict(orient="records"):
        key = (r["file"], r["lab"], first.loc[tuple(r[k] for k in keys)])
        found[key] = found.get(key, 0) + 1
    return [Problem(message=f"lab {lab} returned two forms: this one and {other} ({n} result"
                            f"{'s' if n != 1 else ''} given in both)",
                    file=file, lab=lab,
                    hint="keep one form per lab: remove the extra form, or correct its laboratory code")
            for (file, lab, other), n in found.items()]


@dataclass(frozen=True, slots=True)
class _FormRows:
    """One returned form, validated where it was read: its row tuples (table COLUMNS) and findings.

    ``lab_place`` is where the form keeps its lab code (the form-info cell), named by clash messages.
    """

    rows: list
    problems: list
    warnings: list
    readings: list
    lab_place: Place | None = None
    receipt: SampleReceipt | None = None


def _read_sheets(paths: list[str], limits) -> list:
    """Both sheets of each form, each file read by the isolated reader (io.safety.read_many)."""
    from roundscore.intake.isolation import read_many

    return [r.sheets if hasattr(r, "sheets") else r for r in
            read_many(paths, [RESULTS_SHEET, INFO_SHEET], jobs=1, limits=limits)]


def _form_rows(rnd: Round, got) -> _FormRows:
    """Worker side of :func:`_read_forms`: one form's two sheets turned into validated rows."""
    results, info = got.sheets
    shown = _shown(rnd, Path(got.file))
    results = replace(results, file=shown)
    records, problems = records_from_form(rnd, results, info)
    rows, found = validate_records(rnd, records)
    readings = form_reading(rnd, results, info, str(records[0].lab) if records else None)
    warnings = results.warnings + hidden_by_design(info.warnings, str(got.file), [INFO_SHEET])
    return _FormRows(rows=rows, problems=problems + found, warnings=list(warnings),
                     readings=readings, lab_place={**lab_cell(info), "file": shown},
                     receipt=form_receipt(results, info)[0])


def _with_file(problem: Problem, shown: str) -> Problem:
    return replace(problem, file=shown)


def _isolated_read(path: Path, sheet: str | None, limits):
    """One untrusted file read in a bounded worker process (io.safety.read_many)."""
    from roundscore.intake.isolation import read_many

    return read_many([path], [sheet], jobs=1, limits=limits)[0]


def _sheet_names(path: Path) -> list[str]:
    # The package check names the sheets without handing the file to a compiled reader.
    from roundscore.intake.safety import inspect_workbook

    try:
        return list(inspect_workbook(path).sheets)
    except InputError:
        return []


def _shown(rnd: Round, path: Path) -> str:
    """A file's name as messages and tables show it: relative to the round folder when inside it."""
    try:
        return str(path.resolve().relative_to(_resolved(rnd.folder)))
    except ValueError:
        return str(path)


def _shown_all(rnd: Round, paths: list[str]) -> list[str]:
    """:func:`_shown` of each path (each folder resolved once: support.paths.resolve_each)."""
    top = str(_resolved(rnd.folder))
    key = os.path.normcase(top)
    prefix = key.rstrip(os.sep) + os.sep
    out = []
    for p, real in zip(paths, resolve_each(paths, lexical=False)):  # as Path.relative_to, compared as strings
        text = str(real)
        if os.path.normcase(text) == key:
            out.append(".")
        elif os.path.normcase(text).startswith(prefix):
            out.append(text[len(prefix):])
        else:
            out.append(str(Path(p)))
    return out


@functools.lru_cache(maxsize=64)
def _resolved(folder: Path) -> Path:
    # A round folder is resolved once per process, not once per file of a 2000-form round.
    return folder.resolve()


def read_participants(rnd: Round) -> dict[str, Participant]:
    """The participants' names and contacts by lab code (empty when the round names no file).

    Lab codes follow the lab-code rule (:mod:`roundscore.model.labcodes`); names
    and contacts are bounded (:data:`roundscore.text.TEXT_LIMITS`); a code
    given twice, or two codes that differ only in letter case or Unicode
    form, are refused with both rows named.
    """
    if rnd.participants is None:
        return {}
    shown = _shown(rnd, rnd.participants)
    sheet = _read_table(rnd, rnd.participants, shown)
    # Rows as the person numbers them in the file (blank rows skipped, not renumbered).
    numbered = [(sheet.row_number(i), r) for i, r in enumerate(sheet.rows) if any(c is not None for c in r)]
    if not numbered:
        raise InputError.single("the participants file is empty", file=shown)
    head_row, head = numbered[0]
    header = [str(c).strip().lower() if c is not None else "" for c in head]
    if "lab" not in header:
        raise InputError.single(
            f"the participants file needs a 'lab' column (and 'name', 'contact'); found: "
            f"{', '.join(quote(h, 40) for h in header)}", file=shown, sheet=sheet.sheet, row=head_row)
    il = header.index("lab")
    iname = header.index("name") if "name" in header else None
    icontact = header.index("contact") if "contact" in header else None
    out: dict[str, Participant] = {}
    problems: list[Problem] = []
    codes = LabCodeReader(problems)
    for i, r in numbered[1:]:
        def cell(j, kind, r=r, i=i):  # this row's cell
            if j is None or j >= len(r) or r[j] is None:
                return ""
            v = r[j]
            text = str(int(v)) if isinstance(v, float) and v.is_integer() else str(v).strip()
            why = too_long(kind, text)
            if why:
                problems.append(Problem(message=why, file=shown, sheet=sheet.sheet, row=i, column=header[j],
                                        value=v))
            return text
        raw = r[il] if il < len(r) else None
        lab = codes.read(raw, file=shown, sheet=sheet.sheet, row=i, column="lab")
        if lab is None:
            continue
        if lab in out:
            first = codes.first_seen[lab]
            line = "line" if is_text_file(shown, sheet.sheet) else "row"
            problems.append(Problem(message=f"the lab appears twice (first in {line} {first['row']})", file=shown,
                                    sheet=sheet.sheet, row=i, column="lab", lab=lab))
            continue
        out[lab] = Participant(lab=lab, name=cell(iname, "participant name"), contact=cell(icontact, "contact"),
                               row=i)
    problems += clash_problems(codes.first_seen)
    if problems:
        raise InputError(problems, summary="the participants file has problems")
    return out


def check_labs(rnd: Round, table: ResultTable, participants: dict[str, Participant]) -> ResultTable:
    """Check the lab codes of the results against the participants file and the coordinator's exclusions.

    * A lab code of the results and one of the participants file (or of an
      ``[[exclude]]``) that differ only in letter case or Unicode form are
      refused, naming both places: they would be two labs with one file name
      on Windows and macOS, and an exclusion meant for the lab would miss it.
    * A lab in the results that is not in the participants file is a warning,
      or an error with ``[round] unknown_labs = "error"`` (no check when the
      round names no participants file).
    * An ``[[exclude]]`` naming a lab that is in neither is a warning: it
      changes nothing.

    Returns the table with the warnings added.
    """
    from dataclasses import replace

    labs = list(table.frame["lab"].unique()) if len(table.frame) else []  # in order of first appearance
    results_places: dict[str, Place] = {lab: table.lab_places.get(lab, {}) for lab in labs}
    part_shown = _shown(rnd, rnd.participants) if rnd.participants is not None else None
    part_places: dict[str, Place] = {lab: {"file": part_shown, "row": p.row, "column": "lab"}
                                     for lab, p in participants.items()}
    problems = clash_problems(results_places, also=part_places)
    excl_places: dict[str, Place] = {e.lab: {"file": str(rnd.path), "column": f"exclude[{i}].lab"}
                                     for i, e in enumerate(rnd.exclusions, start=1)}
    problems += clash_problems(excl_places, also={**part_places, **results_places})
    warnings: list[str] = []
    if rnd.participants is not None:
        keys = {lab_key(p): p for p in participants}
        unknown = [lab for lab in labs if lab not in participants and lab_key(lab) not in keys]
        for lab in unknown:
            where = results_places.get(lab, {})
            message = (f"lab code {quote(lab)} is not in the participants file {_shown(rnd, rnd.participants)}")
            if rnd.unknown_labs == "error":
                problems.append(Problem(message=message + " ([round] unknown_labs = \"error\"); add the lab to "
                                        "the participants file, or correct the code", lab=lab, **where))
            else:
                warnings.append(str(Problem(message=message + "; its sheet carries no name ([round] "
                                            "unknown_labs = \"error\" makes this an error)", lab=lab, **where)))
    known = set(labs) | set(participants)
    known_keys = {lab_key(c) for c in known}
    for i, e in enumerate(rnd.exclusions, start=1):
        if e.lab not in known and lab_key(e.lab) not in known_keys:
            warnings.append(f"{rnd.path}: [[exclude]] #{i}: lab {quote(e.lab)} is not among the round's labs; "
                            "the exclusion changes nothing")
    if problems:
        raise InputError(problems, summary="the lab codes do not agree")
    if not warnings:
        return table
    return replace(table, warnings=tuple(table.warnings) + tuple(warnings))


def read_item_table(rnd: Round, path: Path, *, what: str) -> SheetRows:
    """Read a homogeneity or stability table named in the round file."""
    if not path.is_file():
        raise InputError.single(f"the {what} file named in the round file was not found", file=_shown(rnd, path))
    shown = _shown(rnd, path)
    sheet = _read_table(rnd, path, shown)
    return replace(sheet, file=shown)


def _read_table(rnd: Round, path: Path, shown: str) -> SheetRows:
    """A table the coordinator names (participants, homogeneity, stability): its first sheet.

    A workbook is read as the returned forms are, in a bounded worker process
    (a crash or hang of the compiled reader costs this file only, reported
    by name); a text file is read here, by Python's csv module.
    """
    from roundscore.intake.xlsx import TEXT_SUFFIXES

    if Path(path).suffix.lower() in TEXT_SUFFIXES:
        return read_rows(path, limits=rnd.limits)
    got = _isolated_read(Path(path), None, rnd.limits)
    if not hasattr(got, "sheets"):  # a ReadFailure: refused, crashed, out of memory or timed out
        raise InputError([_with_file(q, shown) for q in got.as_problems()],
                         summary=f"{shown} cannot be read")
    return got.sheets[0]
