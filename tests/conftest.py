"""Shared fixtures: small round folders built in a temporary directory."""

from __future__ import annotations

import shutil
import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "rounds" / "skw-2026-14"


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
