"""The writer interface: every kind of output of a round is a :class:`Writer`, and :data:`WRITERS` lists them.

A writer takes the evaluation, the output folder and the :class:`WriteOptions`,
and writes files into the folder. Its work comes in two parts, called with
those same arguments:

``tasks(ev, folder, options)``
    The files it can write independently of each other (a CSV table, the
    summary workbook, a batch of lab sheets), as :class:`WriteTask`\\ s. The
    pipeline runs the tasks of every writer in one pool of worker processes
    (:func:`run_tasks`), large tasks first, so the summary workbook is written
    beside the lab sheets; a worker writes a task with the writer's ``run(ev,
    task)``. Each file depends only on the evaluation, so the outputs are
    byte-identical for any number of jobs.
``write(ev, folder, options)``
    What has to come after the pool or needs a pool of its own, returning the
    files written: the HTML report draws its figures once (in parallel) before
    the pages that embed them are composed.

Each writer has a ``name`` and a ``format`` ("csv", "xlsx", "html"): a new kind
of output (a PDF report, say) is a writer module and its row in
:data:`WRITERS`, and :func:`writers_for` picks the writers of the formats asked
for (the place a ``--formats`` option plugs in). Writers read the evaluation
and never recompute a statistic.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from collections.abc import Callable, Iterable, Sequence
from typing import Any, ClassVar

import pandas as pd

from roundscore.errors import RoundscoreError
from roundscore.model.evaluation import AUDIT_COLUMNS, SCORE_COLUMNS, STATISTICS_COLUMNS, RoundEvaluation
from roundscore.outputs import lab_workbook
from roundscore.outputs.circulation import write_circulation
from roundscore.outputs.csvout import write_csv
from roundscore.outputs.payloads import lab_payload
from roundscore.outputs.workbook import write_summary
from roundscore.support.filenames import lab_file_name
from roundscore.support.parallel import Progress, run_batches, shared
from roundscore.text import terminal_text

__all__ = ["WriteOptions", "WriteTask", "Writer", "CsvTables", "SummaryWorkbook", "LabWorkbooks", "HtmlReport",
           "PdfFiles", "report_parts_of", "WRITERS", "FORMATS", "FORMATS_VARIABLE", "parse_formats",
           "default_formats", "writers_for", "run_tasks", "write_with",
           "LAB_SHEETS_PER_TASK"]

#: Lab sheets per task sent to a worker: fixed (not tied to the number of jobs) and small enough that the
#: summary workbook, the largest single task, runs beside the lab sheets (common practice for pools).
LAB_SHEETS_PER_TASK = 16


@dataclass(frozen=True, slots=True, kw_only=True)
class WriteOptions:
    """What a writer may take besides the evaluation.

    Attributes
    ----------
    history : callable or None
        ``history(lab)``: the lab's earlier rounds from the archive (a frame
        of :data:`roundscore.history.store.HISTORY_COLUMNS`, or None), shown on its sheet.
    jobs : int or None
        Worker processes (None = all cores; 1 = here, one task after another).
    progress : callable or None
        ``progress(stage, done, total)``.
    """

    history: Callable[[str], pd.DataFrame | None] | None = None
    jobs: int | None = None
    progress: Progress | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class WriteTask:
    """Files one worker writes from the shared evaluation.

    Attributes
    ----------
    writer : str
        The name of the writer whose ``run`` writes it.
    files : tuple of Path
        The files it writes.
    item : object
        What the writer needs besides the evaluation (sent to the worker: plain, picklable data).
    labs : int
        Lab files among them (the progress of the lab sheets counts these).
    large : bool
        A task much longer than the others: started first.
    """

    writer: str
    files: tuple[Path, ...]
    item: Any = None
    labs: int = 0
    large: bool = False


class Writer:
    """One kind of output. Subclasses set ``name`` and ``format`` and implement ``tasks`` and ``run``, or
    ``write``, or both (see the module docstring)."""

    name: ClassVar[str]
    format: ClassVar[str]

    def tasks(self, ev: RoundEvaluation, folder: Path, options: WriteOptions) -> list[WriteTask]:
        """The files this writer writes in the shared pool, as tasks (none by default)."""
        return []

    def run(self, ev: RoundEvaluation, task: WriteTask) -> None:
        """Worker side: write one of this writer's tasks."""
        raise NotImplementedError(f"the {self.name} writer has no tasks")

    def write(self, ev: RoundEvaluation, folder: Path, options: WriteOptions) -> list[Path]:
        """What this writer writes after the pool; the files written (none by default)."""
        return []


class CsvTables(Writer):
    """``scores.csv``, ``statistics.csv``, ``audit.csv`` and one ``NAME.csv`` per stage table (deterministic CSV
    with formula-injection neutralising: :mod:`roundscore.outputs.csvout`)."""

    name = "tables"
    format = "csv"

    def tasks(self, ev: RoundEvaluation, folder: Path, options: WriteOptions) -> list[WriteTask]:
        tables: list[tuple[str, Sequence[str] | None]] = [
            ("scores", SCORE_COLUMNS), ("statistics", STATISTICS_COLUMNS), ("audit", AUDIT_COLUMNS)]
        tables += [(name, None) for name, frame in ev.extras.items() if hasattr(frame, "columns")]
        return [WriteTask(writer=self.name, files=(folder / f"{name}.csv",), item=(name, columns))
                for name, columns in tables]

    def run(self, ev: RoundEvaluation, task: WriteTask) -> None:
        name, columns = task.item
        frame = {"scores": ev.scores, "statistics": ev.statistics, "audit": ev.audit}.get(name)
        write_csv(frame if frame is not None else ev.extras[name], task.files[0], columns)


class SummaryWorkbook(Writer):
    """``round-summary.xlsx`` (:func:`roundscore.outputs.workbook.write_summary`): the largest single file."""

    name = "summary"
    format = "xlsx"

    def tasks(self, ev: RoundEvaluation, folder: Path, options: WriteOptions) -> list[WriteTask]:
        return [WriteTask(writer=self.name, files=(folder / "round-summary.xlsx",), large=True)]

    def run(self, ev: RoundEvaluation, task: WriteTask) -> None:
        write_summary(ev, task.files[0])


class LabWorkbooks(Writer):
    """``labs/LAB.xlsx``, one confidential score sheet per lab (:mod:`roundscore.outputs.lab_workbook`), in
    tasks of :data:`LAB_SHEETS_PER_TASK` labs, each sheet written from its typed payload."""

    name = "lab sheets"
    format = "xlsx"

    def tasks(self, ev: RoundEvaluation, folder: Path, options: WriteOptions) -> list[WriteTask]:
        (folder / "labs").mkdir()
        labs = ev.labs
        ev.split_by_lab()  # once, here: each worker would otherwise split the tables again
        paths = [folder / "labs" / lab_file_name(lab, ".xlsx") for lab in labs]
        history = options.history
        out = []
        for i in range(0, len(labs), LAB_SHEETS_PER_TASK):
            group = tuple((lab, path, history(lab) if history is not None else None)
                          for lab, path in zip(labs[i:i + LAB_SHEETS_PER_TASK], paths[i:i + LAB_SHEETS_PER_TASK]))
            out.append(WriteTask(writer=self.name, files=tuple(p for _, p, _ in group), item=group,
                                 labs=len(group)))
        return out

    def run(self, ev: RoundEvaluation, task: WriteTask) -> None:
        for lab, path, hist in task.item:
            lab_workbook.write_lab_workbook(lab_payload(ev, lab, hist), path)


def report_parts_of(ev: RoundEvaluation, options: WriteOptions) -> Any:
    """The shared parts of the round's pages (figures drawn once, in a pool of their own), built once per
    evaluation: the HTML and the PDF writers of one run share them."""
    from roundscore.outputs.figures import round_figures  # matplotlib: imported only when pages are written
    from roundscore.outputs.report import report_parts

    if _PARTS and _PARTS[0][0] is ev:
        return _PARTS[0][1]
    parts = report_parts(ev, round_figures(ev, jobs=options.jobs, progress=options.progress))
    _PARTS[:] = [(ev, parts)]
    return parts


_PARTS: list[tuple[RoundEvaluation, Any]] = []  # the last evaluation's parts (one run writes one evaluation)


class HtmlReport(Writer):
    """``report.html`` and ``labs/LAB.html`` (:mod:`roundscore.outputs.report`): the figures are drawn once, in
    a pool of their own, then the pages are composed."""

    name = "report"
    format = "html"

    def write(self, ev: RoundEvaluation, folder: Path, options: WriteOptions) -> list[Path]:
        from roundscore.outputs.report import write_report

        return write_report(ev, folder, jobs=options.jobs, progress=options.progress,
                            parts=report_parts_of(ev, options))


class PdfFiles(Writer):
    """``report.pdf`` and ``labs/LAB.pdf`` (:mod:`roundscore.outputs.pdf_files`): the same documents as the
    HTML pages, drawn by :mod:`roundscore.outputs.pdf` on the round's paper, the lab files in a pool of their
    own after the shared parts (the HTML writer's, when both are written) are built."""

    name = "pdf"
    format = "pdf"

    def write(self, ev: RoundEvaluation, folder: Path, options: WriteOptions) -> list[Path]:
        from roundscore.outputs.pdf_files import write_pdfs

        return write_pdfs(ev, folder, report_parts_of(ev, options), jobs=options.jobs, progress=options.progress)


#: Every kind of output of ``roundscore score``, in the order their files are listed.
WRITERS: tuple[Writer, ...] = (CsvTables(), SummaryWorkbook(), LabWorkbooks(), HtmlReport(), PdfFiles())
#: The output formats, in the order of :data:`WRITERS`.
FORMATS: tuple[str, ...] = tuple(dict.fromkeys(w.format for w in WRITERS))
_BY_NAME = {w.name: w for w in WRITERS}


#: The environment variable naming the formats written when none are asked for (no ``--formats``, or
#: ``formats=None``): comma-separated as ``--formats``, e.g. ``csv,xlsx,html`` for a scheme that circulates no
#: PDFs. Unset or empty: every format.
FORMATS_VARIABLE = "ROUNDSCORE_FORMATS"


def parse_formats(text: str) -> tuple[str, ...]:
    """Comma-separated output formats (``--formats``, :data:`FORMATS_VARIABLE`), each one a writer's.

    >>> parse_formats("xlsx, CSV,xlsx")
    ('xlsx', 'csv')

    Raises
    ------
    ValueError
        For a format no writer writes, or none at all; the message says what was found and what is allowed.
    """
    wanted = tuple(dict.fromkeys(w.strip().lower() for w in text.split(",") if w.strip()))
    unknown = [w for w in wanted if w not in FORMATS]
    if unknown or not wanted:
        found = ", ".join(repr(terminal_text(w)) for w in unknown) if unknown else "nothing"
        raise ValueError(f"found {found}; allowed: {', '.join(FORMATS)} (comma-separated)")
    return wanted


def default_formats() -> tuple[str, ...]:
    """The formats written when none are asked for: :data:`FORMATS_VARIABLE`'s, else every format.

    Raises
    ------
    RoundscoreError
        When the variable names a format no writer writes (the variable is named in the message).
    """
    text = os.environ.get(FORMATS_VARIABLE, "")
    if not text.strip():
        return FORMATS
    try:
        return parse_formats(text)
    except ValueError as exc:
        raise RoundscoreError(f"environment variable {FORMATS_VARIABLE}: {exc}") from None


def writers_for(formats: Iterable[str] | None = None) -> tuple[Writer, ...]:
    """The writers of the given formats (None: :func:`default_formats`), in the order of :data:`WRITERS`.

    Raises
    ------
    ValueError
        For a format no writer writes.
    RoundscoreError
        When ``formats`` is None and :data:`FORMATS_VARIABLE` names a format no writer writes.
    """
    wanted = list(default_formats() if formats is None else formats)
    unknown = [f for f in wanted if f not in FORMATS]
    if unknown:
        raise ValueError(f"unknown output formats {unknown}; known: {', '.join(FORMATS)}")
    return tuple(w for w in WRITERS if w.format in wanted)


def run_tasks(ev: RoundEvaluation, tasks: Sequence[WriteTask], options: WriteOptions) -> None:
    """Run every task in one pool of ``options.jobs`` workers (large tasks first), the evaluation shared.

    ``options.progress("lab sheets", done, total)`` follows the lab files as their tasks finish.
    """
    ordered = sorted(tasks, key=lambda t: not t.large)  # stable: otherwise in the writers' order
    report = None
    if options.progress is not None:
        progress = options.progress
        n_labs = sum(t.labs for t in ordered)
        per_task = max((t.labs for t in ordered), default=0)
        n_other = sum(1 for t in ordered if not t.labs)

        def report(stage: str, done: int, total: int) -> None:
            # the other tasks are counted as finished first: they start first and are shorter
            progress("lab sheets", min(n_labs, max(0, done - n_other) * per_task), n_labs)
    run_batches(_run_batch, ordered, jobs=options.jobs, shared=ev, batch_size=1, progress=report, stage="outputs")


def _run_batch(tasks: Sequence[WriteTask]) -> list[None]:
    """Worker side of :func:`run_tasks`: each task written by its writer from the shared evaluation."""
    ev: RoundEvaluation = shared()
    for task in tasks:
        _BY_NAME[task.writer].run(ev, task)
    return [None] * len(tasks)


def write_with(writers: Iterable[Writer], ev: RoundEvaluation, folder: Path,
               options: WriteOptions | None = None) -> list[Path]:
    """Write the outputs of ``writers`` into ``folder`` (which must exist): their tasks in one pool, then each
    writer's ``write``, then ``circulation.csv`` (:mod:`roundscore.outputs.circulation`: what to send each lab,
    listing only the files written); the files written, in the writers' order (the tasks' files first)."""
    options = options or WriteOptions()
    writers = tuple(writers)
    tasks = [t for w in writers for t in w.tasks(ev, folder, options)]
    files = [p for t in tasks for p in t.files]
    run_tasks(ev, tasks, options)
    try:
        for w in writers:
            files += w.write(ev, folder, options)
    finally:
        _PARTS.clear()
    files.append(write_circulation(ev, folder, files))  # last: it lists what the writers wrote
    return files
