"""The whole job for one round folder: read, evaluate, write every output atomically.

Outputs are written into a temporary folder beside the target and moved into
place only when all of them are complete, so a failed or interrupted run
leaves the previous outputs as they were.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from pathlib import Path
from collections.abc import Callable, Iterable

from roundscore.errors import RoundscoreError
from roundscore.evaluation import evaluate as _evaluation
from roundscore.intake.cache import CACHE_FOLDER, FILES as CACHE_FILES, InputCache
from roundscore.intake.inputs import read_inputs
from roundscore.intake.items import read_item_tables
from roundscore.intake.readers import read_participants
from roundscore.intake.roundfile import load_round, result_files, with_warnings
from roundscore.model.evaluation import RoundEvaluation
from roundscore.model.inputs import Participant
from roundscore.model.round import Round
from roundscore.model.table import ResultTable
from roundscore.outputs.outfolder import (OutputFolderError, TargetState, atomic_folder, check_target, mark_folder,
                                          read_marker)
from roundscore.outputs.writers import LAB_SHEETS_PER_TASK, WriteOptions, write_with, writers_for  # noqa: F401

__all__ = ["run_round", "write_outputs", "atomic_folder", "Outputs", "load_and_evaluate", "round_inputs",
           "evaluate", "cache_folder", "check_round", "Checked", "CachePlace", "CACHE_KIND"]

#: The kind the input cache's folder marker names (outputs/outfolder.py).
CACHE_KIND = "input cache"


@dataclass(frozen=True, slots=True, kw_only=True)
class Outputs:
    """Where a run wrote its files."""

    folder: Path
    files: tuple[Path, ...]


def round_inputs(rnd: Round, archive: str | Path | None = None, *,
                 for_forms: bool = False) -> tuple[list[tuple[Path, str]], list[Path]]:
    """What an output folder must not touch: (paths to protect, folders the results are read from).

    The protected paths are the round folder, its round file, every results
    file, the participants file, the item tables and the archive (with the
    files SQLite keeps beside it). The input folders are a folder of
    returned forms, or the folder a results pattern reads: for a pattern in
    the round folder itself, only a recursive one (``**``) makes the round
    folder an input folder for outputs, any pattern does for blank forms
    (``for_forms``: they would be read back as returned forms). With
    ``for_forms`` results that do not exist yet are no error.
    """
    from roundscore.errors import RoundFileError

    protect: list[tuple[Path, str]] = [(rnd.folder, "the round folder"),
                                       (rnd.path, "the round file")]
    try:
        protect += [(f, "a results file") for f in result_files(rnd)]
    except RoundFileError:
        if not for_forms:
            raise
    if rnd.participants is not None:
        protect.append((rnd.participants, "the participants file"))
    for m in rnd.measurands.values():
        protect += [(p, "an item table") for p in (m.homogeneity, m.stability) if p is not None]
    if archive is not None:
        a = Path(archive).expanduser()
        protect += [(a, "the archive")] + [(a.with_name(a.name + end), "the archive's journal")
                                           for end in ("-wal", "-shm", "-journal")]
    folders: list[Path] = []
    target = rnd.results
    if any(ch in target for ch in "*?["):
        static = list(itertools.takewhile(lambda part: not any(c in part for c in "*?["), Path(target).parts))
        base = rnd.folder.joinpath(*static)
        if for_forms or base.resolve() != rnd.folder.resolve() or "**" in target:
            folders.append(base)
    elif (rnd.folder / target).is_dir():
        folders.append(rnd.folder / target)
    return protect, folders


def load_and_evaluate(round_path: str | Path | Round, *, jobs: int | None = None,
                      progress: Callable[[str, int, int], None] | None = None,
                      cache: InputCache | None = None) -> RoundEvaluation:
    """Read the round file (or take a loaded :class:`Round`), its results, participants and item tables, and
    evaluate it.

    ``jobs`` worker processes read the returned forms and evaluate the
    measurands of a large round (None = all cores); neither the table nor the
    evaluation depends on it, nor on ``cache`` (the input cache the returned
    forms are taken from where they are unchanged).
    """
    rnd = round_path if isinstance(round_path, Round) else load_round(round_path)
    try:
        inputs = read_inputs(rnd, jobs=jobs, progress=progress, cache=cache)
        return _evaluation.evaluate(inputs.round, inputs.table, inputs.participants, items=inputs.items,
                                    jobs=jobs)
    except RoundscoreError as exc:  # the round file's warnings (unknown keys...) still reach the user
        with_warnings(exc, rnd.warnings)
        raise


def evaluate(rnd: Round, table: ResultTable, participants: dict[str, Participant] | None = None, *,
             jobs: int | None = 1) -> RoundEvaluation:
    """Evaluate a round from its settings and results (the public :func:`roundscore.evaluate`).

    Reads the homogeneity and stability tables the round names
    (:func:`roundscore.intake.items.read_item_tables`), then runs the pure
    evaluation, :func:`roundscore.evaluation.evaluate.evaluate`, which reads
    no file (``jobs``: worker processes for a large round's measurands, None =
    all cores; the evaluation does not depend on it).
    """
    return _evaluation.evaluate(rnd, table, participants, items=read_item_tables(rnd), jobs=jobs)


def write_outputs(ev: RoundEvaluation, folder: Path, *, history=None,
                  progress: Callable[[str, int, int], None] | None = None,
                  jobs: int | None = None, formats: Iterable[str] | None = None) -> list[Path]:
    """Write every output of an evaluation into ``folder`` (which must exist); the files written.

    Each kind of output is a writer of :data:`roundscore.outputs.writers.WRITERS` (``formats``: only the
    writers of these formats, e.g. ``("csv", "xlsx")``; None: ``$ROUNDSCORE_FORMATS``, else all). The CSV
    tables, the summary workbook and the lab sheets are independent files, written by ``jobs`` worker
    processes (None = all cores; 1 = here, one after another); then the report. Every file depends only on
    the evaluation, so the outputs are byte-identical for any ``jobs``. ``progress(stage, done, total)`` is
    called as the lab sheets are finished (and by the report's stages). ``history(lab)`` gives a lab's
    archived rounds for its sheet.
    """
    options = WriteOptions(history=history, jobs=jobs, progress=progress)
    return write_with(writers_for(formats), ev, folder, options)


def run_round(round_path: str | Path, out: str | Path, *, archive: str | Path | None = None,
              jobs: int | None = None, progress=None, replace_archive: bool = False,
              on_archive: Callable[[object], None] | None = None, formats: Iterable[str] | None = None,
              use_cache: bool = True) -> tuple[RoundEvaluation, Outputs]:
    """Score a round folder and write all outputs into ``out`` atomically (``formats``: only the writers of
    these output formats, :func:`roundscore.outputs.writers.writers_for`; None: ``$ROUNDSCORE_FORMATS``, else
    all).

    With ``archive`` (or ``[round] archive`` in the round file; the argument
    wins) each lab sheet shows the lab's earlier rounds of this scheme (the
    last ``[round] history_rounds``, read in one query before writing), and
    the round is stored in the archive after the outputs are complete.  No
    archive file yet: no history, and the store creates it.  Storing the same
    content again changes nothing; different content is refused unless
    ``replace_archive``.  ``on_archive`` receives the
    :class:`~roundscore.history.store.StoreOutcome`. With ``use_cache`` the
    returned forms unchanged since the last check or score are taken from
    the input cache in ``out`` (:func:`cache_folder`), and the cache is
    written into the new outputs; the outputs are the same either way.
    """
    writers_for(formats)  # an unknown format is refused before any work is done
    rnd = load_round(round_path)
    store = archive if archive is not None else rnd.archive
    try:
        protect, input_folders = round_inputs(rnd, store)
        check_target(out, protect=protect, input_folders=input_folders)  # refused before any work is done
    except RoundscoreError as exc:
        with_warnings(exc, rnd.warnings)
        raise
    cache = InputCache(rnd, cache_folder(out, protect=protect, input_folders=input_folders)) if use_cache else None
    try:
        ev = load_and_evaluate(rnd, jobs=jobs, progress=progress, cache=cache)
    except RoundscoreError:  # the outputs stay as they were; their cache learns the forms that were read cleanly
        if cache is not None and Path(out).is_dir():
            _save_cache(cache, out, protect=protect, input_folders=input_folders)
        raise
    history = None
    if store is not None:
        from roundscore.history import store as history_archive
        from roundscore.errors import ArchiveConflict, ArchiveError

        history_archive.check_round_keys(ev.round)
        history = history_archive.round_history(
            store, scheme=ev.round.scheme, labs=ev.labs, round_id=ev.round.id,
            round_date=ev.round.date, last=ev.round.history_rounds).get
    with atomic_folder(Path(out), kind="round outputs", protect=protect, input_folders=input_folders) as tmp:
        written = write_outputs(ev, tmp, history=history, progress=progress, jobs=jobs, formats=formats)
    final = Path(out)
    if cache is not None:
        _save_cache(cache, final, protect=protect, input_folders=input_folders, new=True)
    if store is not None:
        try:
            outcome = history_archive.store_evaluation(store, ev, replace=replace_archive)
        except ArchiveError as exc:  # only a content conflict is resolved by replacing
            advice = ("; 'roundscore score --replace-archive' replaces it"
                      if isinstance(exc, ArchiveConflict) else "")
            raise type(exc)(f"the outputs were written to {final}, but the round was not "
                            f"archived: {exc}{advice}") from None
        if on_archive is not None:
            on_archive(outcome)
    return ev, Outputs(folder=final, files=tuple(final / p.relative_to(tmp) for p in written))


def cache_folder(out: str | Path, *, protect: Iterable[tuple[Path, str]] = (), input_folders: Iterable[Path] = (),
                 create: bool = False, state: TargetState | None = None) -> Path | None:
    """The input cache's folder inside the output folder ``out``, or None where there is none to use.

    The cache lives only inside an output folder roundscore owns (one
    :func:`~roundscore.outputs.outfolder.check_target` accepts with the
    round's ``protect`` and ``input_folders``), as ``out/.roundscore-cache``
    carrying a marker of its own that lists every name it may hold, so the
    output folder's marker rules still hold: ``score`` replaces the folder
    with it. With ``create`` a missing cache folder is made, and a missing
    (or empty) output folder too, marked as an output folder holding no
    outputs yet; a folder of that name that is not ours is never used. ``state``: what
    :func:`~roundscore.outputs.outfolder.check_target` said of ``out`` moments ago in this run, to look for an
    existing cache without checking the target again (a round's thousands of forms are protected paths); never
    with ``create``, which always checks before it makes anything.
    """
    out = Path(out)
    if state is None or create:
        try:
            state = check_target(out, protect=list(protect), input_folders=list(input_folders))
        except OutputFolderError:
            return None
    folder = out / CACHE_FOLDER
    if state != "ours":
        if not create:
            return None
        try:
            out.mkdir(parents=True, exist_ok=state == "empty")
            mark_folder(out, kind="round outputs")
        except OSError:
            return None
    if folder.is_symlink() or (folder.exists() and not folder.is_dir()):
        return None
    if folder.is_dir():
        marker = read_marker(folder)
        return folder if marker is not None and marker.kind == CACHE_KIND and marker.state == "complete" else None
    if not create:
        return None
    try:
        folder.mkdir()
        mark_folder(folder, kind=CACHE_KIND, files=CACHE_FILES)
    except OSError:
        return None
    return folder


def _save_cache(cache: InputCache, out: str | Path, *, protect, input_folders, new: bool = False) -> Path | None:
    """Write what a read added to the input cache in ``out`` (``new``: a fresh output folder, write it all)."""
    if cache.empty or not (new or cache.changed):
        return cache_folder(out, protect=protect, input_folders=input_folders)
    folder = cache_folder(out, protect=protect, input_folders=input_folders, create=True)
    if folder is not None:
        cache.save(folder, force=new)
    return folder


@dataclass(slots=True, kw_only=True)
class CachePlace:
    """Where a round's cache folder is, inside its output folder ``out`` (:func:`cache_folder`).

    ``state``: what :func:`~roundscore.outputs.outfolder.check_target` said of ``out`` when the place was made
    (None: not checked). :meth:`existing` only reads, and trusts it; :meth:`create` checks the target again
    before it makes anything, and then knows the folder is ours.
    """

    out: Path
    protect: tuple[tuple[Path, str], ...] = ()
    input_folders: tuple[Path, ...] = ()
    state: TargetState | None = None

    def existing(self) -> Path | None:
        """The cache folder if it is there and ours (None otherwise)."""
        return cache_folder(self.out, protect=self.protect, input_folders=self.input_folders, state=self.state)

    def create(self) -> Path | None:
        """The cache folder, made (with the output folder) when missing; None where it may not be."""
        folder = cache_folder(self.out, protect=self.protect, input_folders=self.input_folders, create=True)
        self.state = "ours" if folder is not None else None
        return folder


@dataclass(frozen=True, slots=True, kw_only=True)
class Checked:
    """What :func:`check_round` did: the evaluation, and where the round's cache is (None: it may have none)."""

    evaluation: RoundEvaluation
    cache: CachePlace | None


def check_round(round_path: str | Path, *, out: str | Path | None = None, use_cache: bool = True,
                jobs: int | None = None) -> Checked:
    """Read and evaluate a round as ``score`` would, writing no outputs; only the cache folder is updated.

    ``out`` is the round's output folder (default: ``ROUND/out``, as for
    ``score``). With ``use_cache`` the input cache in it
    (:func:`cache_folder`) is used and, when the read added to it, written
    (the cache folder, and the output folder marked as ours, are made when
    missing). A folder that is not ours, or one that would hold the round's
    inputs, gets no cache: the round is read in full, and ``cache`` is None.
    """
    rnd = load_round(round_path)
    target = Path(out) if out is not None else rnd.folder / "out"
    try:
        protect, input_folders = round_inputs(rnd)
        state = check_target(target, protect=protect, input_folders=input_folders)
        place: CachePlace | None = CachePlace(out=target, protect=tuple(protect), input_folders=tuple(input_folders),
                                              state=state)
    except OutputFolderError:
        place = None
    except RoundscoreError as exc:
        with_warnings(exc, rnd.warnings)
        raise
    cache = InputCache(rnd, place.existing()) if use_cache and place is not None else None
    try:
        ev = load_and_evaluate(rnd, jobs=jobs, cache=cache)
    finally:  # also when a form has problems: the others, read cleanly, are kept
        if place is not None and cache is not None and cache.changed:
            folder = place.create()
            if folder is not None:
                cache.save(folder)
    return Checked(evaluation=ev, cache=place)


def default_forms(rnd: Round) -> list[tuple[str, str | None]]:
    parts = read_participants(rnd)
    return [(lab, p.name) for lab, p in parts.items()]
