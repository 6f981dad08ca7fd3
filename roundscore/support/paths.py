"""Many paths resolved at once: each folder once, each file only when it is a symbolic link.

A round of 2000 returned forms names 2000 files in one folder. Checking
them one by one with :meth:`pathlib.Path.resolve` walks the same folders
2000 times (a system call per part of each path). :func:`resolve_each`
gives the same paths: ``Path(os.path.abspath(p)).resolve()`` of a file is
its folder's resolved path joined with its name, unless the name itself is a
symbolic link (then that file is resolved in full), because resolving walks
a path from its first part to its last. Which names of a folder are links is
read from one listing of the folder (:func:`os.scandir`, whose entries say
whether they are links without a system call per file on most file
systems), not from one ``lstat`` per path. :func:`inside_each` answers "is this
path, resolved, the folder or inside it" (``real == folder or folder in
real.parents``) for many paths, the same way.
"""

from __future__ import annotations

import os
from collections.abc import Iterable
from pathlib import Path

__all__ = ["resolve_each", "inside_each"]


def _has_parent_part(p: str | os.PathLike[str]) -> bool:
    """Whether a path has a ``..`` part (as ``".." in Path(p).parts``, without building the Path).

    >>> [_has_parent_part(p) for p in ("a/../b", "a/..b", "..", "a/b")]
    [True, False, True, False]
    """
    text = os.fspath(p)
    if os.altsep:
        text = text.replace(os.altsep, os.sep)
    return ".." in text.split(os.sep)


class _Links:
    """Whether a path's last part is a symbolic link, each folder listed once.

    A name the listing does not hold as spelled (a file missing, or named in another case on a file system that
    ignores case) is asked about directly (``os.path.islink``), so a link is never missed.
    """

    def __init__(self) -> None:
        self._folders: dict[str, tuple[frozenset[str], frozenset[str]] | None] = {}

    def __call__(self, head: str, name: str, full: str) -> bool:
        if head not in self._folders:
            try:
                with os.scandir(head) as entries:
                    listed = [(e.name, e.is_symlink()) for e in entries]
                self._folders[head] = (frozenset(n for n, _ in listed), frozenset(n for n, link in listed if link))
            except OSError:  # not a folder we may list: ask about each path
                self._folders[head] = None
        known = self._folders[head]
        if known is None or name not in known[0]:
            return os.path.islink(full)
        return name in known[1]


def resolve_each(paths: Iterable[str | os.PathLike[str]], *, lexical: bool = True) -> list[Path]:
    """``Path(os.path.abspath(p)).resolve()`` for each path, in order (the same paths, fewer system calls).

    ``lexical=False``: ``Path(p).resolve()`` instead, which follows a link before a ``..`` after it (the two
    differ only for a path with a ``..`` part, which is then resolved as given).
    """
    folders: dict[str, Path] = {}
    out: list[Path] = []
    is_link = _Links()
    for p in paths:
        if not lexical and _has_parent_part(p):
            out.append(Path(p).resolve())
            continue
        full = os.path.abspath(p)
        head, name = os.path.split(full)
        if not name or is_link(head, name, full):
            out.append(Path(full).resolve())
            continue
        real = folders.get(head)
        if real is None:
            real = folders[head] = Path(head).resolve()
        out.append(real / name)
    return out


def inside_each(paths: Iterable[str | os.PathLike[str]], folder: Path, *, lexical: bool = True) -> list[bool]:
    """For each path, whether its resolved form (as :func:`resolve_each` gives it) is ``folder`` or lies inside
    it (``folder`` resolved): ``real == folder or folder in real.parents``, compared as strings in the
    system's case (``os.path.normcase``), each folder of the paths resolved and compared once."""
    top = os.path.normcase(str(folder))
    prefix = top.rstrip(os.sep) + os.sep  # a resolved path has no trailing separator but the root's own

    def holds(real: str) -> bool:
        key = os.path.normcase(real)
        return key == top or key.startswith(prefix)

    folders: dict[str, tuple[str, bool]] = {}  # folder as given → (resolved, whether inside)
    out: list[bool] = []
    is_link = _Links()
    for p in paths:
        if not lexical and _has_parent_part(p):
            out.append(holds(str(Path(p).resolve())))
            continue
        full = os.path.abspath(p)
        head, name = os.path.split(full)
        if not name or is_link(head, name, full):
            out.append(holds(str(Path(full).resolve())))
            continue
        known = folders.get(head)
        if known is None:
            real = str(Path(head).resolve())
            known = folders[head] = (real, holds(real))
        real, within = known
        out.append(within or os.path.normcase(os.path.join(real, name)) == top)
    return out
