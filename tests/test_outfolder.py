"""Output folders: only a folder roundscore wrote is ever replaced; interrupted runs are recovered.

Source of expected behaviour: the tool's own contract (README, "Outputs", and the rule in
roundscore/outputs/outfolder.py): no outside reference values here. Every test that refuses a target
proves that what was there is still there, byte for byte.
"""

from __future__ import annotations

import hashlib
import json
import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from roundscore.cli import main
from roundscore.outputs import outfolder
from roundscore.outputs.outfolder import MARKER_NAME, OutputFolderError, atomic_folder, check_target, read_marker

ROUND = """\
[round]
id = "T-1"
participants = "participants.csv"
[measurand.lead]
unit = "mg/kg"
sigma_pt = 0.05
"""


def tree(folder: Path) -> dict[str, str]:
    """Every file and folder under ``folder`` with a hash of its bytes (folders as 'dir')."""
    out = {}
    for p in sorted(folder.rglob("*")):
        rel = str(p.relative_to(folder))
        out[rel] = "dir" if p.is_dir() else hashlib.sha256(p.read_bytes()).hexdigest()
    return out


@pytest.fixture
def round_dir(make_round) -> Path:
    lines = ["lab,measurand,replicate,value"]
    for i in range(1, 9):
        for rep in (1, 2):
            lines.append(f"L{i},lead,{rep},{0.50 + 0.01 * i + 0.002 * rep:.3f}")
    parts = "lab,name\n" + "".join(f"L{i},Lab {i}\n" for i in range(1, 9))
    return make_round(ROUND, "\n".join(lines) + "\n", participants__csv=parts)


def score(*args: str, capsys) -> tuple[int, str]:
    code = main(["score", *args, "--quiet", "--jobs", "1"])
    return code, capsys.readouterr().err


def refused(capsys, *args: str) -> str:
    code, err = score(*args, capsys=capsys)
    assert code == 2, err
    assert "Traceback" not in err
    return err


# ------------------------------------------------------------------ targets that are refused


def test_round_folder_as_out_is_refused_and_kept(round_dir, capsys):
    before = tree(round_dir)
    err = refused(capsys, str(round_dir), "--out", str(round_dir))
    assert f"output folder {round_dir} is the round folder" in err
    assert tree(round_dir) == before


def test_folder_containing_the_round_is_refused(round_dir, capsys):
    parent = round_dir.parent
    before = tree(parent)
    err = refused(capsys, str(round_dir), "--out", str(parent))
    assert "contains the round folder" in err
    assert tree(parent) == before


def test_someone_elses_folder_is_refused(round_dir, tmp_path, capsys):
    home = tmp_path / "home"
    (home / "docs").mkdir(parents=True)
    (home / "docs" / "thesis.txt").write_text("years of work\n")
    (home / ".bashrc").write_text("alias ll='ls -l'\n")
    before = tree(home)
    err = refused(capsys, str(round_dir), "--out", str(home))
    assert "was not written by roundscore" in err and MARKER_NAME in err
    assert tree(home) == before
    assert not [p for p in home.parent.iterdir() if p.name.startswith(".home.")]  # nothing hidden beside it


def test_a_file_as_out_is_refused_and_not_hidden(round_dir, tmp_path, capsys):
    f = tmp_path / "notes.txt"
    f.write_text("mine\n")
    before = tree(tmp_path)
    err = refused(capsys, str(round_dir), "--out", str(f))
    assert "is a file" in err
    assert tree(tmp_path) == before


def test_a_symbolic_link_as_out_is_refused(round_dir, tmp_path, capsys):
    real = tmp_path / "real"
    real.mkdir()
    (real / "keep.txt").write_text("x")
    link = tmp_path / "link"
    link.symlink_to(real)
    before = tree(real)
    err = refused(capsys, str(round_dir), "--out", str(link))
    assert "symbolic link" in err
    assert link.is_symlink() and tree(real) == before


def test_an_archive_inside_the_output_folder_is_refused(round_dir, tmp_path, capsys):
    out = tmp_path / "out"
    err = refused(capsys, str(round_dir), "--out", str(out), "--archive", str(out / "h.sqlite"))
    assert "h.sqlite" in err
    assert not out.exists()


def test_round_file_archive_in_the_default_output_folder_is_refused(round_dir, capsys):
    toml = round_dir / "round.toml"
    toml.write_text(toml.read_text().replace('[round]\n', '[round]\narchive = "out/history.sqlite"\n'))
    before = tree(round_dir)
    err = refused(capsys, str(round_dir))
    assert "history.sqlite" in err
    assert tree(round_dir) == before


def test_out_inside_the_folder_of_returned_forms_is_refused(round_dir, capsys):
    forms = round_dir / "returned"
    forms.mkdir()
    toml = round_dir / "round.toml"
    toml.write_text(toml.read_text().replace('[round]\n', '[round]\nresults = "returned"\n'))
    (forms / "a.xlsx").write_bytes(b"not really")
    before = tree(round_dir)
    err = refused(capsys, str(round_dir), "--out", str(forms / "out"))
    assert "reads its results from" in err
    assert tree(round_dir) == before


def test_a_user_file_added_to_an_earlier_output_blocks_the_replacement(round_dir, tmp_path, capsys):
    out = tmp_path / "out"
    assert score(str(round_dir), "--out", str(out), capsys=capsys)[0] == 0
    (out / "my-notes.txt").write_text("written by a person\n")
    before = tree(out)
    err = refused(capsys, str(round_dir), "--out", str(out))
    assert "my-notes.txt" in err
    assert tree(out) == before


# ------------------------------------------------------------------ targets that are used


def test_new_empty_and_own_folders_are_used(round_dir, tmp_path, capsys):
    empty = tmp_path / "empty"
    empty.mkdir()
    os.chmod(empty, 0o750)
    assert score(str(round_dir), "--out", str(empty), capsys=capsys)[0] == 0
    assert (empty / "scores.csv").is_file() and (empty.stat().st_mode & 0o777) == 0o750
    marker = read_marker(empty)
    assert marker is not None and marker.state == "complete" and "scores.csv" in marker.files
    assert "labs/L1.xlsx" in marker.files
    first = (empty / "scores.csv").read_bytes()
    assert score(str(round_dir), "--out", str(empty), capsys=capsys)[0] == 0  # an earlier output: replaced
    assert (empty / "scores.csv").read_bytes() == first
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []  # nothing left beside


def test_a_nested_roundscore_output_is_not_foreign(tmp_path):
    """The demo folder holds the demo round; scoring it writes round/out inside, which is ours too."""
    out = tmp_path / "demo"
    with atomic_folder(out, kind="demo") as tmp:
        (tmp / "round").mkdir()
        (tmp / "round" / "round.toml").write_text("x")
    with atomic_folder(out / "round" / "out") as tmp:
        (tmp / "scores.csv").write_text("y")
    assert check_target(out) == "ours"
    with atomic_folder(out, kind="demo") as tmp:
        (tmp / "round").mkdir()
    assert not (out / "round" / "out").exists()


def test_a_forged_or_damaged_marker_is_not_ours(tmp_path):
    for text in ("", "{", '{"written_by": "someone else", "format": 1, "state": "complete", "files": []}',
                 '["written_by"]'):
        d = tmp_path / f"d{len(text)}"
        d.mkdir()
        (d / MARKER_NAME).write_text(text)
        (d / "data.csv").write_text("keep")
        with pytest.raises(OutputFolderError, match="not written by roundscore"):
            check_target(d)
    d = tmp_path / "linked"
    d.mkdir()
    good = tmp_path / "good.json"
    good.write_text(json.dumps({"written_by": "roundscore", "format": 1, "state": "complete", "target": "x",
                                "kind": "outputs", "files": ["data.csv"]}))
    (d / MARKER_NAME).symlink_to(good)  # a marker must be a file of the folder, not a link to one
    (d / "data.csv").write_text("keep")
    with pytest.raises(OutputFolderError):
        check_target(d)


def test_a_failed_run_removes_only_its_own_temporary_folder(tmp_path):
    out = tmp_path / "out"
    with atomic_folder(out) as tmp:
        (tmp / "a.csv").write_text("old")
    (tmp_path / "sibling.txt").write_text("keep")
    with pytest.raises(RuntimeError), atomic_folder(out) as tmp:
        (tmp / "a.csv").write_text("new")
        raise RuntimeError("boom")
    assert (out / "a.csv").read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out", "sibling.txt"]


# ------------------------------------------------------------------ interrupted runs


_CHILD = """
import os, signal, sys
from pathlib import Path
from roundscore.outputs import outfolder
out = Path(sys.argv[1]); how = sys.argv[2]
die = lambda: os.kill(os.getpid(), signal.SIGKILL)
if how == "between":
    outfolder._exchange = lambda a, b: False
    outfolder._between_renames = die
with outfolder.atomic_folder(out) as tmp:
    (tmp / "a.csv").write_text("new")
    if how == "writing":
        die()
"""


def _killed(out: Path, how: str) -> None:
    proc = subprocess.run([sys.executable, "-c", textwrap.dedent(_CHILD), str(out), how],
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == -signal.SIGKILL, proc.stderr


@pytest.mark.parametrize("how", ["writing", "between"])
def test_a_killed_run_is_recovered_by_the_next(tmp_path, how):
    out = tmp_path / "out"
    with atomic_folder(out) as tmp:
        (tmp / "a.csv").write_text("old")
    decoy = tmp_path / ".out.partial-decoy"  # the name pattern alone: not ours, never touched
    decoy.mkdir()
    (decoy / "precious.txt").write_text("keep")
    _killed(out, how)
    left = sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".out.") and p != decoy)
    assert left, "the kill should leave a temporary folder behind"
    if how == "between":
        assert not out.exists()  # the moment the fallback's two renames are not atomic
    else:
        assert (out / "a.csv").read_text() == "old"
    with atomic_folder(out) as tmp:  # the next run recovers first, then writes
        assert (out / "a.csv").read_text() in ("old", "new")  # either complete output is back in place
        (tmp / "a.csv").write_text("newest")
    assert (out / "a.csv").read_text() == "newest"
    assert sorted(p.name for p in tmp_path.iterdir()) == [".out.partial-decoy", "out"]
    assert (decoy / "precious.txt").read_text() == "keep"


def test_a_live_runs_temporary_folder_is_left_alone(tmp_path):
    out = tmp_path / "out"
    with atomic_folder(out) as tmp:
        (tmp / "a.csv").write_text("first")
        assert outfolder.recover(out) == []  # another run's recovery: the folder is locked
        assert tmp.exists()
    assert (out / "a.csv").read_text() == "first"


def test_the_swap_is_one_step_on_linux(tmp_path):
    if not sys.platform.startswith("linux"):
        pytest.skip("renameat2 is Linux only")
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir()
    b.mkdir()
    (a / "x").write_text("a")
    (b / "x").write_text("b")
    if not outfolder._exchange(a, b):
        pytest.skip("this file system cannot exchange in one step; the two-rename fallback is used")
    assert (a / "x").read_text() == "b" and (b / "x").read_text() == "a"


# ------------------------------------------------------------------ signals and workers


_SIGTERM_CHILD = """
import os, signal, sys
from roundscore import cli, pipeline
real = pipeline.write_outputs
def write_then_term(ev, folder, **kw):
    files = real(ev, folder, **kw)
    os.kill(os.getpid(), signal.SIGTERM)
    return files
pipeline.write_outputs = write_then_term
sys.exit(cli.main(["score", sys.argv[1], "--out", sys.argv[2], "--quiet", "--jobs", "1"]))
"""


def test_sigterm_cleans_up_and_exits_non_zero(round_dir, tmp_path, capsys):
    out = tmp_path / "out"
    assert score(str(round_dir), "--out", str(out), capsys=capsys)[0] == 0
    before = tree(out)
    proc = subprocess.run([sys.executable, "-c", _SIGTERM_CHILD, str(round_dir), str(out)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 128 + signal.SIGTERM, proc.stderr
    assert "SIGTERM" in proc.stderr and "Traceback" not in proc.stderr
    assert tree(out) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out", round_dir.name]


_ORPHAN_CHILD = """
import os, sys, time
from pathlib import Path
from roundscore.support.parallel import run_batches
folder = Path(sys.argv[1])
def slow(batch):
    (folder / str(os.getpid())).write_text("")
    time.sleep(600)
    return batch
if __name__ == "__main__":
    run_batches(slow, list(range(4)), jobs=2, batch_size=1)
"""


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    try:  # a zombie waiting for its reaper is dead for our purpose
        with open(f"/proc/{pid}/stat") as f:
            return f.read().split(")")[-1].split()[0] != "Z"
    except OSError:
        return True


_ORPHAN_READER = """
import os, sys, time
from pathlib import Path
from roundscore.intake.isolation import read_many
folder = Path(sys.argv[1])
def hang(path, sheets, limits):
    (folder / str(os.getpid())).write_text("")
    time.sleep(600)
if __name__ == "__main__":
    read_many([folder / "a.xlsx", folder / "b.xlsx"], ["Results"], jobs=2, _reader=hang)
"""


@pytest.mark.parametrize("child", [_ORPHAN_CHILD, _ORPHAN_READER], ids=["pool", "isolated-reader"])
def test_workers_end_when_the_parent_is_killed(tmp_path, child):
    script = tmp_path / "orphan.py"
    script.write_text(child)
    pids = tmp_path / "pids"
    pids.mkdir()
    proc = subprocess.Popen([sys.executable, str(script), str(pids)])
    try:
        for _ in range(300):  # wait until both workers have started their batch
            if len(list(pids.iterdir())) >= 2:
                break
            proc.poll()
            import time
            time.sleep(0.1)
        workers = [int(p.name) for p in pids.iterdir()]
        assert len(workers) == 2
    finally:
        proc.kill()
        proc.wait()
    import time
    for _ in range(100):  # the kernel ends them at once; the watchdog within PARENT_POLL_S
        if not any(_alive(pid) for pid in workers):
            break
        time.sleep(0.1)
    still = [pid for pid in workers if _alive(pid)]
    for pid in still:
        os.kill(pid, signal.SIGKILL)
    assert not still, "workers outlived their killed parent"
