"""Shared fixtures: the demo round scored once per session, and small round folders built in a temporary directory."""

from __future__ import annotations

import contextlib
import hashlib
import io
import os
import shutil
import textwrap
from dataclasses import dataclass
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "rounds" / "skw-2026-14"


#: Most worker processes for the whole suite (measured on 2 cores; each worker scores its own shared demo).
MAX_WORKERS = 4

#: The formats the tests' runs write when a test names none (``$ROUNDSCORE_FORMATS``, set for this process and
#: every process it starts): the PDFs take most of a run's time, so only the tests that read PDFs write them,
#: asking with ``--formats`` / ``formats=`` (or :data:`ALL_FORMATS`), and the shared demo's PDFs are made once
#: by :func:`demo_pdfs`. A test of the default itself removes the variable (``monkeypatch.delenv``).
TEST_FORMATS = "csv,xlsx,html"
#: Every format, for a test that reads the PDFs too (``--formats`` takes it as is).
ALL_FORMATS = "csv,xlsx,html,pdf"
os.environ["ROUNDSCORE_FORMATS"] = TEST_FORMATS


@pytest.hookimpl(optionalhook=True)
def pytest_xdist_auto_num_workers(config) -> int:
    """Workers for ``-n auto`` (pyproject.toml): the usable cores for the whole suite, none for chosen tests.

    The whole suite (``python -m pytest``, the README's command and CI's) is spread over the cores, at most
    :data:`MAX_WORKERS`, whole files per worker (``--dist loadfile``: a module's fixtures are made once).
    Files or tests named on the command line run in this process, without the workers' start-up cost.
    ``-n N`` on the command line overrides both.
    """
    if config.args_source != pytest.Config.ArgsSource.TESTPATHS:
        return 0
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    return min(cores, MAX_WORKERS) if cores > 1 else 0


@dataclass(frozen=True, slots=True, kw_only=True)
class ScoredDemo:
    """The invented demo round as ``roundscore demo --out OUT`` leaves it: read it, never change it.

    Attributes
    ----------
    out : Path
        Everything the command wrote (scores.csv ... round-summary.xlsx, labs/*.xlsx and *.html, report.html),
        in the formats of :data:`TEST_FORMATS`: no PDFs (:func:`demo_pdfs` has them).
    round : Path
        ``OUT/round``: the demo round the command wrote (equal to rounds/skw-2026-14, tests/test_demo.py).
    evaluation : RoundEvaluation
        ``load_and_evaluate(round)``: the evaluation the outputs were written from (the same inputs and code).
    printed : str
        What the command printed.
    """

    out: Path
    round: Path
    evaluation: object
    printed: str


def _file_digests(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file() or p.is_symlink()}


def _evaluation_digests(ev) -> dict[str, str]:
    """A digest of every table of the evaluation (its frames are mutable: a test must not change them)."""
    frames = {"scores": ev.scores, "statistics": ev.statistics, "audit": ev.audit, "table": ev.table.frame}
    frames |= {f"extras.{k}": v for k, v in ev.extras.items()}
    frames |= {f"measurand.{k}.labs": m.labs for k, m in ev.measurands.items()}
    return {k: hashlib.sha256(f.to_csv().encode("utf-8")).hexdigest() for k, f in frames.items()}


@pytest.fixture(scope="session")
def scored_demo(tmp_path_factory) -> ScoredDemo:
    """The demo round scored once for the whole session, shared by the tests that only read ordinary outputs.

    Read-only: a test that needs to change a file copies it first (``shutil.copytree(scored_demo.out, ...)``).
    At the end of the session every file and every table of the evaluation is compared with its state
    when it was made; a difference fails the run, naming what changed.
    """
    from roundscore.cli import main
    from roundscore.pipeline import load_and_evaluate

    out = tmp_path_factory.mktemp("scored-demo") / "roundscore-demo"
    printed = io.StringIO()
    with contextlib.redirect_stdout(printed):
        code = main(["demo", "--out", str(out)])
    assert code == 0, printed.getvalue()
    shared = ScoredDemo(out=out, round=out / "round", evaluation=load_and_evaluate(out / "round"),
                        printed=printed.getvalue())
    before = snapshot(shared)
    yield shared
    changed = changes(before, snapshot(shared))
    assert not changed, f"a test changed the shared scored demo (copy it before changing it): {changed}"


@pytest.fixture(scope="session")
def demo_pdfs(scored_demo, tmp_path_factory) -> Path:
    """The shared demo's PDFs (report.pdf, labs/LAB.pdf), written once per session from its evaluation by the
    pipeline's own PDF writer, as ``roundscore demo`` writes them by default. Read-only, like the demo."""
    from roundscore.pipeline import write_outputs

    folder = tmp_path_factory.mktemp("demo-pdfs")
    write_outputs(scored_demo.evaluation, folder, formats=("pdf",))
    return folder


def snapshot(shared: ScoredDemo) -> dict[str, str]:
    """A digest of every file under ``shared.out`` and of every table of ``shared.evaluation``."""
    return {**{f"file {k}": v for k, v in _file_digests(shared.out).items()},
            **{f"evaluation {k}": v for k, v in _evaluation_digests(shared.evaluation).items()}}


def changes(before: dict[str, str], after: dict[str, str]) -> list[str]:
    """What differs between two snapshots: changed, added and removed files and tables."""
    return sorted(k for k in before.keys() | after.keys() if before.get(k) != after.get(k))


@pytest.fixture
def demo_round(tmp_path: Path) -> Path:
    """A copy of the demo round folder (so tests never change the committed files)."""
    dst = tmp_path / "demo"
    shutil.copytree(DEMO, dst)
    return dst


def write_round(folder: Path, toml: str, results: str | None = None, **files: str) -> Path:
    """Write round.toml (dedented), results.csv and any other named files into ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "round.toml").write_text(textwrap.dedent(toml), encoding="utf-8")
    if results is not None:
        (folder / "results.csv").write_text(textwrap.dedent(results).lstrip(), encoding="utf-8")
    for name, text in files.items():
        (folder / name.replace("__", ".")).write_text(textwrap.dedent(text).lstrip(), encoding="utf-8")
    return folder


@pytest.fixture
def make_round(tmp_path: Path):
    """Factory: make_round(toml, results, **files) -> folder."""
    counter = {"n": 0}

    def make(toml: str, results: str | None = None, **files: str) -> Path:
        counter["n"] += 1
        return write_round(tmp_path / f"round{counter['n']}", toml, results, **files)

    return make
