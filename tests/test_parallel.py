"""Process-pool helpers, and the jobs plumbing of reading forms and writing outputs (invented data)."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import filecmp
import os
import shutil
from pathlib import Path

import pytest

from roundscore.support import parallel
from roundscore.demo.big_round import make_big_round
from roundscore.errors import InputError, Problem
from roundscore.intake import isolation, readers
from roundscore.support.parallel import batches, resolve_jobs, run_batches
from roundscore.outputs.outfolder import MARKER_NAME
from roundscore.pipeline import atomic_folder, load_and_evaluate, write_outputs
from roundscore.intake.roundfile import load_round


def _square(batch):
    return [x * x for x in batch]


def _with_shared(batch):
    return [parallel.shared() + x for x in batch]


def _pid(batch):
    return [os.getpid() for _ in batch]


def _fails(batch):
    if 7 in batch:
        raise InputError([Problem(message="bad cell", file="f.xlsx", row=7, value=7)], summary="refused")
    return list(batch)


def _wrong_length(batch):
    return [0]


def _dies(batch):
    if 7 in batch:
        os.kill(os.getpid(), 9)  # as the out-of-memory killer or a user's kill -9 of a worker would
    return list(batch)


@pytest.mark.parametrize("jobs, expected", [(1, 1), (3, 3)])
def test_resolve_jobs_number(jobs, expected):
    assert resolve_jobs(jobs) == expected


@pytest.mark.parametrize("jobs", [None, 0])
def test_resolve_jobs_all_cores(jobs):
    assert resolve_jobs(jobs) == len(os.sched_getaffinity(0))


@pytest.mark.parametrize("jobs", [-1, True, 1.5])
def test_resolve_jobs_refuses(jobs):
    with pytest.raises(ValueError, match="jobs must be a whole number"):
        resolve_jobs(jobs)


@pytest.mark.parametrize("n, jobs, size", [(10, 2, None), (10, 2, 3), (1, 4, None), (37, 3, None)])
def test_batches_cover_items_in_order(n, jobs, size):
    parts = batches(list(range(n)), jobs, size)
    assert [x for p in parts for x in p] == list(range(n))
    if size:
        assert all(len(p) == size for p in parts[:-1])


@pytest.mark.parametrize("jobs", [1, 2])
def test_run_batches_keeps_order_and_shares(jobs):
    items = list(range(50))
    assert run_batches(_square, items, jobs=jobs, batch_size=3) == [x * x for x in items]
    assert run_batches(_with_shared, items, jobs=jobs, shared=100, batch_size=4) == [100 + x for x in items]


def test_run_batches_uses_other_processes_and_inline_for_one_job():
    pids = set(run_batches(_pid, list(range(20)), jobs=2, batch_size=2))
    assert os.getpid() not in pids
    assert set(run_batches(_pid, list(range(20)), jobs=1, batch_size=2)) == {os.getpid()}


@pytest.mark.parametrize("jobs", [1, 2])
def test_progress_reaches_total(jobs):
    seen = []
    run_batches(_square, list(range(30)), jobs=jobs, batch_size=4,
                progress=lambda stage, done, total: seen.append((stage, done, total)), stage="squares")
    assert seen[-1] == ("squares", 30, 30)
    assert [d for _, d, _ in seen] == sorted(d for _, d, _ in seen)


@pytest.mark.parametrize("jobs", [1, 2])
def test_worker_error_keeps_type_and_problems(jobs):
    with pytest.raises(InputError) as info:
        run_batches(_fails, list(range(20)), jobs=jobs, batch_size=2)
    assert info.value.summary == "refused"
    assert info.value.problems[0].message == "bad cell" and info.value.problems[0].row == 7


def test_a_worker_that_dies_is_a_clear_error_not_a_traceback():
    from roundscore.errors import RoundscoreError, WorkerError

    with pytest.raises(WorkerError, match=r"worker process ended before giving its results \(scores\)") as info:
        run_batches(_dies, list(range(20)), jobs=2, batch_size=2, stage="scores")
    assert isinstance(info.value, RoundscoreError)  # the command line prints it as an error, exit code 2


@pytest.mark.parametrize("jobs", [1, 2])
def test_batch_function_must_return_one_result_per_item(jobs):
    with pytest.raises(TypeError, match="one result per item"):
        run_batches(_wrong_length, list(range(8)), jobs=jobs, batch_size=2)


def test_empty_items():
    assert run_batches(_square, [], jobs=2) == []


@pytest.fixture(scope="module")
def big(tmp_path_factory) -> Path:
    """A small generated round: 40 labs, enough for several read batches and lab-sheet tasks."""
    folder = tmp_path_factory.mktemp("big") / "round"
    make_big_round(folder, labs=40, measurands=5, replicates=2, jobs=2)
    return folder


def _write(ev, target: Path, jobs: int, progress=None) -> Path:
    with atomic_folder(target) as tmp:
        write_outputs(ev, tmp, jobs=jobs, progress=progress)
    return target


def _same_tree(a: Path, b: Path) -> None:
    names_a = sorted(p.relative_to(a) for p in a.rglob("*") if p.is_file())
    names_b = sorted(p.relative_to(b) for p in b.rglob("*") if p.is_file())
    assert names_a == names_b and names_a
    for rel in names_a:
        if rel.name == MARKER_NAME:  # names its own folder ("one", "two"); the outputs are compared
            continue
        assert filecmp.cmp(a / rel, b / rel, shallow=False), f"{rel} differs"


@pytest.fixture(scope="module")
def written(big, tmp_path_factory):
    """The round read and written with one job and with two (forms read in several batches per worker);
    the two-job write's progress reports recorded."""
    root = tmp_path_factory.mktemp("written")
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(isolation, "BATCH_FILES", 8)  # several read batches per worker
        ev1 = load_and_evaluate(big, jobs=1)
        ev2 = load_and_evaluate(big, jobs=2)
    seen: list[tuple[str, int, int]] = []
    one = _write(ev1, root / "one", 1)
    two = _write(ev2, root / "two", 2, progress=lambda s, d, t: seen.append((s, d, t)))
    return ev1, ev2, one, two, seen


def test_outputs_byte_identical_for_any_jobs(written):
    ev1, ev2, one, two, _ = written
    assert ev1.table.frame.equals(ev2.table.frame)
    _same_tree(one, two)
    assert len(list((two / "labs").glob("*.xlsx"))) == 40


def test_batched_read_equals_one_batch(big, monkeypatch):
    rnd = load_round(big)
    monkeypatch.setattr(isolation, "BATCH_FILES", 10_000)
    monkeypatch.setattr(isolation, "_BATCHES_PER_WORKER", 1)
    whole = readers.read_results(rnd, jobs=1)  # all 40 forms in one batch
    monkeypatch.setattr(isolation, "BATCH_FILES", 7)
    monkeypatch.setattr(isolation, "_BATCHES_PER_WORKER", 4)
    parts = readers.read_results(rnd, jobs=2)
    assert whole.frame.equals(parts.frame)
    assert whole.files == parts.files and len(whole.files) == 40


def test_write_progress_reaches_all_labs(written):
    seen = written[4]
    assert ("lab sheets", 40, 40) in seen


@pytest.mark.parametrize("jobs", [1, 2])
def test_lab_returned_twice_across_batches_is_a_duplicate(big, tmp_path, monkeypatch, jobs):
    folder = tmp_path / "round"
    shutil.copytree(big, folder)
    forms = sorted((folder / "forms").glob("*.xlsx"))
    shutil.copy(forms[0], folder / "forms" / "zz-returned-again.xlsx")  # sorts last: another batch
    monkeypatch.setattr(isolation, "BATCH_FILES", 8)
    with pytest.raises(InputError) as info:
        readers.read_results(load_round(folder), jobs=jobs)
    probs = info.value.problems
    # One problem for the repeated form, naming both files (not one per repeated result).
    assert len(probs) == 1 and probs[0].lab == "L0001"
    assert probs[0].file == "forms/zz-returned-again.xlsx"
    assert f"lab L0001 returned two forms: this one and forms/{forms[0].name}" in probs[0].message


def test_one_batch_per_job_runs_the_last_batch_here_beside_the_workers():
    """With as many batches as jobs (how the evaluation cuts its measurands), the last batch runs in this
    process while the others run in workers: the results in order, the shared context there too, errors from
    either side raised with their type (the module's own contract)."""
    items = list(range(20))
    pids = run_batches(_pid, items, jobs=2, batch_size=10)
    assert pids[10:] == [os.getpid()] * 10 and os.getpid() not in pids[:10]
    assert run_batches(_with_shared, items, jobs=2, shared=100, batch_size=10) == [100 + x for x in items]
    assert run_batches(_square, items, jobs=2, batch_size=10) == [x * x for x in items]
    in_parent = [x + 100 if x == 7 else x for x in items]
    in_parent[15] = 7
    for failing in (items, in_parent):  # the bad item 7 in the worker's batch, then in the parent's own
        with pytest.raises(InputError) as info:
            run_batches(_fails, failing, jobs=2, batch_size=10)
        assert info.value.summary == "refused" and info.value.problems[0].row == 7
    with pytest.raises(TypeError, match="one result per item"):
        run_batches(_wrong_length, items, jobs=2, batch_size=10)


def test_a_share_here_and_each_batch_handled_here_as_it_comes_in():
    """``here`` items (the last) run in this process while the workers run the rest in batches, and ``then``
    handles every batch's results in this process, its results replacing them (the module's own contract)."""
    items = list(range(23))
    seen: list[tuple[list[int], int]] = []

    def then(batch, got):
        seen.append((list(batch), os.getpid()))
        return [(x, pid, os.getpid()) for x, pid in zip(batch, got)]

    out = run_batches(_pid, items, jobs=2, batch_size=4, here=7, then=then)
    assert [x for x, _, _ in out] == items
    ran = [pid for _, pid, _ in out]
    assert ran[16:] == [os.getpid()] * 7 and os.getpid() not in ran[:16]  # the last 7 here, the rest elsewhere
    assert {pid for _, _, pid in out} == {os.getpid()}  # every batch handled here
    assert sorted(x for batch, _ in seen for x in batch) == items
    assert seen[0][0] == items[16:]  # this process's own batch first, then the workers' as they come in
    assert sorted(len(b) for b, _ in seen[1:]) == [4, 4, 4, 4]
    # The same results for any split, inline too; the share is checked.
    for jobs, here in ((1, 7), (2, 0), (2, 23), (3, 5)):
        assert run_batches(_square, items, jobs=jobs, batch_size=4, here=here,
                           then=lambda b, g: [v + 1 for v in g]) == [x * x + 1 for x in items]
    with pytest.raises(ValueError, match="here must be between 0 and the 23 items"):
        run_batches(_square, items, jobs=2, here=24)
    with pytest.raises(TypeError, match="one result per item"):
        run_batches(_square, items, jobs=2, batch_size=4, here=7, then=lambda b, g: g[:1])
    in_parent = [x + 100 if x == 7 else x for x in items]
    in_parent[20] = 7
    for failing in (items, in_parent):  # the bad item in a worker's batch, then in this process's own
        with pytest.raises(InputError) as info:
            run_batches(_fails, failing, jobs=2, batch_size=4, here=7)
        assert info.value.problems[0].row == 7
