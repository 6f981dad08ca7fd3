"""read_many: files read in bounded worker processes; one bad file never takes the run down.

The crashing readers are hooks in this file (``_reader`` or the environment
variable): a real abort, a real segfault, a real hang and a real memory
exhaustion, each on one file of several.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import xlsxwriter

from roundscore.intake.isolation import READER_HOOK_ENV, FileRows, ReadFailure, read_many
from roundscore.model.limits import ReadLimits
from roundscore.intake.xlsx import read_file_sheets

MiB = 1 << 20


def make_files(folder: Path, n: int) -> list[Path]:
    paths = []
    for i in range(n):
        p = folder / f"f{i:02d}.xlsx"
        wb = xlsxwriter.Workbook(str(p))
        wb.add_worksheet("Results").write_row(0, 0, ["file", i])
        wb.add_worksheet("form-info").write_row(0, 0, ["key", "value"])
        wb.close()
        paths.append(p)
    return paths


def _read(path, sheets, limits) -> FileRows:
    """The plain read every test reader below falls back to."""
    return FileRows(file=path, sheets=tuple(read_file_sheets(path, sheets, limits=limits)))


def _bad_name(path: str) -> bool:
    return Path(path).name == "f03.xlsx"


def reader_abort(path, sheets, limits):
    if _bad_name(path):
        os.abort()
    return _read(path, sheets, limits)


def reader_segfault(path, sheets, limits):
    if _bad_name(path):
        os.kill(os.getpid(), signal.SIGSEGV)
    return _read(path, sheets, limits)


def reader_hang(path, sheets, limits):
    if _bad_name(path):
        time.sleep(600)
    return _read(path, sheets, limits)


def reader_memory(path, sheets, limits):
    if _bad_name(path):
        hog = bytearray(4 * limits.memory_bytes)  # more than the worker may have
        hog[-1] = 1
    return _read(path, sheets, limits)


def reader_exit(path, sheets, limits):
    if _bad_name(path):
        os._exit(3)
    return _read(path, sheets, limits)


def reader_bug(path, sheets, limits):
    if _bad_name(path):
        raise KeyError("reader bug")
    return _read(path, sheets, limits)


def _values(results):
    return [r.sheets[0].rows[0][1] if isinstance(r, FileRows) else None for r in results]


@pytest.fixture(scope="module")
def files(tmp_path_factory) -> list[Path]:
    return make_files(tmp_path_factory.mktemp("iso"), 8)


@pytest.mark.parametrize("jobs", [1, 2, 3, None])
def test_results_in_input_order_for_any_jobs(files, jobs):
    got = read_many(files, ["Results", "form-info"], jobs=jobs)
    assert _values(got) == list(range(8))
    assert all(g.sheets[1].sheet == "form-info" for g in got)


def test_single_sheet_and_empty_input(files):
    assert read_many([], "Results") == []
    got = read_many(files[:2], "Results", jobs=1)
    assert [g.sheet("Results").rows[0][1] for g in got] == [0, 1]


@pytest.mark.parametrize("reader, reason", [
    (reader_abort, "SIGABRT"),
    (reader_segfault, "SIGSEGV"),
    (reader_exit, "exited with code 3"),
    (reader_memory, "memory"),
    (reader_bug, "KeyError"),
])
@pytest.mark.parametrize("jobs", [1, 2])
def test_one_crashing_file_costs_only_itself(files, reader, reason, jobs):
    limits = ReadLimits(memory_bytes=256 * MiB)
    got = read_many(files, ["Results"], jobs=jobs, limits=limits, _reader=reader)
    failed = [g for g in got if isinstance(g, ReadFailure)]
    assert len(failed) == 1 and failed[0].file == str(files[3])
    assert reason in failed[0].reason
    assert _values(got) == [0, 1, 2, None, 4, 5, 6, 7]
    assert failed[0].as_problems()[0].file == str(files[3])


def test_hanging_reader_is_stopped_at_the_time_limit(files):
    # reader_hang sleeps 600 s on one file: the test returning at all shows the worker was stopped.
    got = read_many(files, ["Results"], jobs=2, limits=ReadLimits(timeout_s=1.0), _reader=reader_hang)
    failed = [g for g in got if isinstance(g, ReadFailure)]
    assert [f.file for f in failed] == [str(files[3])]
    assert "longer than the limit of 1 s" in failed[0].reason
    assert _values(got) == [0, 1, 2, None, 4, 5, 6, 7]


def test_refusals_come_back_with_their_problems(tmp_path, files):
    bad = tmp_path / "bad.xlsx"
    bad.write_bytes(b"not a zip")
    got = read_many([files[0], bad, tmp_path / "missing.xlsx"], ["Results"], jobs=2)
    assert isinstance(got[0], FileRows)
    assert "corrupt or not an .xlsx file" in got[1].reason
    assert got[1].problems[0].file == str(bad)
    assert got[2].reason == "file not found"


def test_environment_hook_aborts_one_file_in_a_separate_run(files, tmp_path):
    # The whole program survives a real os.abort() in a reader, through the environment hook.
    code = (
        f"import sys; sys.path.insert(0, {str(Path(__file__).parent)!r})\n"
        "from roundscore.intake.isolation import read_many, ReadFailure\n"
        "got = read_many(sys.argv[1:], ['Results'], jobs=2)\n"
        "print(sum(isinstance(g, ReadFailure) for g in got), len(got))\n"
    )
    env = dict(os.environ, **{READER_HOOK_ENV: "test_isolation:reader_abort"})
    out = subprocess.run([sys.executable, "-c", code, *map(str, files)], env=env, capture_output=True,
                         text=True, timeout=120, cwd=str(Path(__file__).parent))
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["1", "8"]
    assert "Traceback" not in out.stderr


def _then_summary(got: FileRows):
    """Runs in the worker: a compact result instead of the rows, and where it ran."""
    from roundscore.errors import InputError

    value = got.sheets[0].rows[0][1]
    if value == 5:
        raise InputError.single("the post step refused this file", file=got.file)
    return ("summary", value, os.getpid())


@pytest.mark.parametrize("jobs", [1, 2])
def test_then_runs_in_the_worker_and_its_refusals_are_failures(files, jobs):
    seen = []
    got = read_many(files, ["Results"], jobs=jobs, then=_then_summary,
                    progress=lambda done, total: seen.append((done, total)))
    assert [g[1] if isinstance(g, tuple) else None for g in got] == [0, 1, 2, 3, 4, None, 6, 7]
    assert all(g[2] != os.getpid() for g in got if isinstance(g, tuple))  # not in this process
    failed = got[5]
    assert isinstance(failed, ReadFailure) and "post step refused" in failed.reason
    # Progress counts files as batches come back, ending at all of them.
    assert seen and seen[-1] == (8, 8) and [d for d, _ in seen] == sorted(d for d, _ in seen)


def reader_abort_participants(path, sheets, limits):
    if Path(path).name == "participants.xlsx":
        os.abort()
    return _read(path, sheets, limits)


def test_participants_workbook_is_read_in_isolation(make_round, monkeypatch):
    # The coordinator's own tables (participants, homogeneity, stability) go through the same bounded
    # reader as the returned forms: a reader crash on one is reported by name, and the program lives on.
    from roundscore.errors import InputError
    from roundscore.intake.readers import read_participants
    from roundscore.intake.roundfile import load_round

    folder = make_round('[round]\nid="P1"\nparticipants = "participants.xlsx"\n[measurand.cu]\nunit="mg/kg"\n'
                        'sigma_pt=0.5\n', "lab,measurand,replicate,value\nL1,cu,1,1.0\n")
    wb = xlsxwriter.Workbook(str(folder / "participants.xlsx"))
    ws = wb.add_worksheet("labs")
    for r, row in enumerate([["lab", "name", "contact"], ["L1", "Invented Lab One", "one@example.org"]]):
        ws.write_row(r, 0, row)
    wb.close()
    rnd = load_round(folder)
    assert read_participants(rnd)["L1"].name == "Invented Lab One"
    monkeypatch.setenv(READER_HOOK_ENV, f"{__name__}:reader_abort_participants")
    with pytest.raises(InputError) as info:
        read_participants(rnd)
    p = info.value.problems[0]
    assert p.file == "participants.xlsx" and "SIGABRT" in p.message
