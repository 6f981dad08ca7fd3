"""roundscore.support.paths against pathlib itself: each answer is the one Path.resolve() and
Path.parents give, path by path (the reference is the standard library's own definition)."""
# Source of expected values: Python's pathlib (Path.resolve, Path.parents) and os.path on the same paths, computed
# in the test; no hard-coded results.

from __future__ import annotations

import os
from pathlib import Path

import pytest

from roundscore.support.paths import inside_each, resolve_each


@pytest.fixture()
def tree(tmp_path: Path) -> tuple[Path, list[Path]]:
    """A round-like folder: plain files, a file linked out of it, a linked folder, a missing file, '..' parts."""
    top = tmp_path / "round"
    (top / "forms").mkdir(parents=True)
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    (outside / "far.xlsx").write_text("x")
    for i in range(5):
        (top / "forms" / f"L{i}.xlsx").write_text("x")
    (top / "forms" / "link.xlsx").symlink_to(outside / "far.xlsx")
    (top / "linked").symlink_to(outside, target_is_directory=True)
    (outside / "back").symlink_to(top / "forms", target_is_directory=True)
    paths = sorted((top / "forms").iterdir()) + [
        top / "linked" / "far.xlsx", top / "forms" / "missing.xlsx", top / "linked" / ".." / "round",
        outside / "back" / "L1.xlsx", top, top / "forms", Path("/"), Path(os.path.relpath(top / "forms" / "L2.xlsx")),
    ]
    return top, paths


def test_resolve_each_is_resolve(tree):
    _, paths = tree
    assert resolve_each(paths) == [Path(os.path.abspath(p)).resolve() for p in paths]
    assert resolve_each(paths, lexical=False)[:-1] == [Path(p).resolve() for p in paths[:-1]]


@pytest.mark.parametrize("lexical", [True, False])
def test_inside_each_is_parents(tree, lexical):
    top, paths = tree
    for folder in (top.resolve(), (top / "forms").resolve(), top.parent.resolve(), Path("/"),
                   (top / "forms" / "L1.xlsx").resolve()):
        real = [Path(os.path.abspath(p)).resolve() if lexical else Path(p).resolve() for p in paths]
        expected = [r == folder or folder in r.parents for r in real]
        assert inside_each(paths, folder, lexical=lexical) == expected
        assert (any(expected) and not all(expected)) or folder == Path("/")  # the cases cover both answers


def test_names_shown_relative_to_the_round_folder_are_those_of_relative_to(tree):
    """The reader's names for many forms (roundscore.intake.readers._shown_all, compared as strings) are those of
    Path.relative_to on each resolved path, with the path as given outside the round folder."""
    from types import SimpleNamespace

    from roundscore.intake.readers import _shown, _shown_all

    top, paths = tree
    rnd = SimpleNamespace(folder=top)
    texts = [str(p) for p in paths] + [str(top) + "x/L1.xlsx"]  # a sibling whose name starts like the folder's
    expected = [_shown(rnd, Path(p)) for p in texts]
    assert _shown_all(rnd, texts) == expected
    assert "." in expected and any(e.startswith("forms") for e in expected) and expected[-1] == texts[-1]
