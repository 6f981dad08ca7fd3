"""Output folders: written whole into a temporary folder, moved into place, and only ours are ever replaced.

The rule, for every command that writes a folder of outputs (``score``,
``demo``, ``history show --out``):

* A folder roundscore wrote carries a **marker**, ``.roundscore-output``: a
  small JSON file with the format version, the kind of output and the list
  of every file and folder written. It is written last, so a folder with a
  complete marker is a complete output.
* An existing target is replaced only when it carries a complete marker and
  holds nothing that the marker does not list (a file the user added is
  named and the run refused); an empty folder may be used; a new folder is
  created. Anything else (a file, a symbolic link, a mount point, a folder
  of someone else's, a folder that contains the round's inputs or the
  archive, or one that lies inside the round's inputs) is refused before
  anything is written, with :class:`OutputFolderError` (exit 2).
* The outputs are written into ``.NAME.partial-XXXX`` beside the target,
  marked "writing" from its first moment and locked (``flock`` on the
  folder) while the run lives. On Linux the finished folder and the old
  one are swapped in one step (``renameat2(RENAME_EXCHANGE)``), so at every
  moment the target holds the old or the new outputs in full; elsewhere two
  renames, with the old folder kept as ``.NAME.old-XXXX`` in between.
* Each run first recovers what an interrupted run left beside the target:
  folders found by their marker (never by the name pattern alone) that
  name this target and are not locked by a live run. A missing target gets
  back the newest complete one; the rest are removed.

Nothing that does not carry our marker is ever removed or renamed.
"""

from __future__ import annotations

import ctypes
import errno
import json
import os
import shutil
import sys
import tempfile
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from collections.abc import Iterable, Iterator
from typing import Literal

from roundscore.errors import RoundscoreError
from roundscore.support.paths import inside_each

__all__ = ["MARKER_NAME", "MARKER_FORMAT", "OutputFolderError", "Marker", "read_marker", "check_target",
           "atomic_folder", "recover", "mark_folder"]

#: The marker file's name inside every output folder roundscore writes.
MARKER_NAME = ".roundscore-output"
#: The marker's format version (an integer; a marker of a newer format is not replaced by this version).
MARKER_FORMAT = 1
#: A marker larger than this is not ours (the list of files of a 2000-lab round is about 0.2 MB).
_MARKER_MAX_BYTES = 64 * 1024 * 1024

State = Literal["writing", "complete"]
TargetState = Literal["new", "empty", "ours"]


class OutputFolderError(RoundscoreError):
    """The output folder given cannot be used: nothing was written, removed or renamed."""


@dataclass(frozen=True, slots=True, kw_only=True)
class Marker:
    """What the marker file of an output folder says."""

    format: int
    state: State
    target: str
    kind: str
    files: frozenset[str]


def _marker_text(*, state: State, target: str, kind: str, files: Iterable[str] = ()) -> str:
    return json.dumps({"written_by": "roundscore", "format": MARKER_FORMAT, "state": state,
                       "target": target, "kind": kind, "files": sorted(files)},
                      ensure_ascii=False, indent=0) + "\n"


def read_marker(folder: Path) -> Marker | None:
    """The marker of ``folder``, or None when it has none we recognise (not a roundscore output)."""
    p = Path(folder) / MARKER_NAME
    try:
        if p.is_symlink() or not p.is_file() or p.stat().st_size > _MARKER_MAX_BYTES:
            return None
        data = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, ValueError, UnicodeDecodeError):
        return None
    if not isinstance(data, dict) or data.get("written_by") != "roundscore":
        return None
    fmt, state, files = data.get("format"), data.get("state"), data.get("files")
    if not isinstance(fmt, int) or isinstance(fmt, bool) or state not in ("writing", "complete") \
            or not isinstance(files, list) or not all(isinstance(f, str) for f in files):
        return None
    return Marker(format=fmt, state=state, target=str(data.get("target", "")), kind=str(data.get("kind", "")),
                  files=frozenset(files))


def mark_folder(folder: Path, *, kind: str, files: Iterable[str] = ()) -> None:
    """Give a folder roundscore just created its complete marker, listing ``files`` (all it may hold), so
    that :func:`check_target` takes it, and an output folder holding it, for ours (e.g. the input cache)."""
    part = Path(folder) / (MARKER_NAME + ".new")
    part.write_text(_marker_text(state="complete", target=Path(folder).name, kind=kind, files=files),
                    encoding="utf-8")
    os.replace(part, Path(folder) / MARKER_NAME)


def _foreign(folder: Path, marker: Marker, *, limit: int = 5) -> list[Path]:
    """Entries of ``folder`` its marker does not list (a folder with a complete marker of its own is ours)."""
    found: list[Path] = []
    stack = [(folder, marker)]
    while stack and len(found) < limit:
        top, mark = stack.pop()
        for dirpath, dirnames, filenames in os.walk(top):
            here = Path(dirpath)
            keep_dirs = []
            for name in sorted(dirnames):
                sub = here / name
                rel = sub.relative_to(top).as_posix()
                if rel in mark.files and not sub.is_symlink():
                    keep_dirs.append(name)
                    continue
                inner = None if sub.is_symlink() else read_marker(sub)
                if inner is not None and inner.state == "complete":
                    stack.append((sub, inner))
                else:
                    found.append(sub)
            dirnames[:] = keep_dirs
            for name in sorted(filenames):
                if here == top and name == MARKER_NAME:
                    continue
                sub = here / name
                if sub.relative_to(top).as_posix() not in mark.files:
                    found.append(sub)
            if len(found) >= limit:
                break
    return found[:limit]


def _inside(path: Path, folder: Path) -> bool:
    return path == folder or folder in path.parents


Protected = Path | tuple[Path, str]


def check_target(target: str | os.PathLike[str], *, protect: Iterable[Protected] = (),
                 input_folders: Iterable[Path] = ()) -> TargetState:
    """Whether ``target`` may receive a folder of outputs: "new", "empty" or "ours" (a previous output).

    Parameters
    ----------
    target : path
        The output folder asked for.
    protect : paths, or (path, what it is) pairs
        Files and folders that must survive: the round folder, its inputs,
        the archive. A target that is one of them or contains one is refused;
        the message names it by ``what`` ("the archive").
    input_folders : paths
        Folders the round reads from (a folder of returned forms): a target
        inside one is refused.

    Raises
    ------
    OutputFolderError
        When the target is refused; the message says why and what to do.
    """
    target = Path(target)
    shown = str(target)
    absolute = Path(os.path.abspath(target))
    if absolute.is_symlink():
        raise OutputFolderError(f"output folder {shown} is a symbolic link (to {os.readlink(absolute)}); "
                                "give the folder it leads to, or a new folder")
    real = absolute.resolve()
    items = [item if isinstance(item, tuple) else (item, "a file the command needs") for item in protect]
    # A round's 2000 forms share one folder: resolved and compared once (support.paths).
    for (p, what), inside in zip(items, inside_each([p for p, _ in items], real)):
        if inside:
            rp = Path(os.path.abspath(p)).resolve()
            how = f"is {what}" if rp == real else f"contains {what}, {p}"
            raise OutputFolderError(
                f"output folder {shown} {how}; nothing was written. Give --out a folder of its own "
                "(a new or empty folder, or an earlier output folder)")
    for folder in input_folders:
        rf = Path(os.path.abspath(folder)).resolve()
        if _inside(real, rf):
            raise OutputFolderError(
                f"output folder {shown} lies inside {folder}, which the round reads its results from; "
                "nothing was written. Give --out a folder outside it")
    if not absolute.exists():
        return "new"
    if not absolute.is_dir():
        raise OutputFolderError(f"output folder {shown} is a file, not a folder; nothing was changed. "
                                "Give --out a new or empty folder")
    if os.path.ismount(absolute):
        raise OutputFolderError(f"output folder {shown} is a mount point, which cannot be replaced in one step; "
                                f"give a folder inside it (for example {target / 'out'})")
    try:
        with os.scandir(absolute) as it:
            empty = next(it, None) is None
    except OSError as exc:
        raise OutputFolderError(f"output folder {shown} cannot be read ({exc.strerror}); nothing was changed") \
            from None
    if empty:
        return "empty"
    marker = read_marker(absolute)
    if marker is None:
        raise OutputFolderError(
            f"output folder {shown} already exists and was not written by roundscore "
            f"(it has no {MARKER_NAME} marker); nothing was changed. roundscore replaces only a folder "
            "it wrote itself: give a new or empty folder")
    if marker.format > MARKER_FORMAT:
        raise OutputFolderError(f"output folder {shown} was written by a newer roundscore "
                                f"(marker format {marker.format}); nothing was changed")
    foreign = _foreign(absolute, marker)
    if foreign:
        names = ", ".join(str(f.relative_to(absolute)) for f in foreign)
        raise OutputFolderError(
            f"output folder {shown} holds files roundscore did not write ({names}); nothing was changed. "
            "Move them out of the folder, or give another output folder")
    return "ours"


# --- locks: a live run's partial folder is never taken for a leftover --------------------------------------

def _lock(folder: Path) -> int | None:
    """An exclusive lock on ``folder`` held through the returned descriptor (None where flock is missing)."""
    try:
        import fcntl
    except ImportError:  # pragma: no cover - Windows
        return None
    fd = os.open(folder, os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        os.close(fd)
        raise
    return fd


def _unlock(fd: int | None) -> None:
    if fd is not None:
        os.close(fd)


def _locked_by_another(folder: Path) -> bool:
    try:
        fd = _lock(folder)
    except OSError:
        return True
    _unlock(fd)
    return False


# --- the swap ----------------------------------------------------------------------------------------------

def _exchange(a: Path, b: Path) -> bool:
    """Swap two paths in one step (Linux renameat2 with RENAME_EXCHANGE); False where that is not available."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return False
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    at_fdcwd, rename_exchange = -100, 2
    if fn(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP, errno.EOPNOTSUPP):
        return False
    raise OSError(err, os.strerror(err), str(b))


def _between_renames() -> None:
    """Called between the two renames of the fallback swap (a hook for the fault-injection test)."""


def _remove_ours(folder: Path, name: str | None) -> bool:
    """Remove ``folder`` if it has our marker (naming ``name``, unless None) and nothing foreign; True if removed."""
    marker = read_marker(folder)
    if marker is None or (name is not None and marker.target != name):
        return False
    # A folder still being written lists no files yet: everything in it is that run's (it was marked when
    # created, under a hidden temporary name); a complete one must hold only what it lists.
    if marker.state == "complete" and _foreign(folder, marker, limit=1):
        return False
    shutil.rmtree(folder, ignore_errors=True)
    return not folder.exists()


def _leftovers(target: Path) -> list[tuple[Path, Marker]]:
    parent, name = target.parent, target.name
    found = []
    try:
        entries = list(os.scandir(parent))
    except OSError:
        return []
    for entry in entries:
        if not entry.name.startswith((f".{name}.partial-", f".{name}.old-")):
            continue
        path = Path(entry.path)
        if path.is_symlink() or not path.is_dir():
            continue
        marker = read_marker(path)
        if marker is None or marker.target != name or _locked_by_another(path):
            continue
        found.append((path, marker))
    return found


def recover(target: str | os.PathLike[str]) -> list[str]:
    """Tidy what interrupted runs left beside ``target``; returns what was done, in words.

    A missing target gets back the newest complete output found (a finished
    run killed before its swap, or the old outputs of a run killed between
    its two renames); the other leftovers, found by their marker, are removed.
    """
    target = Path(os.path.abspath(target))
    done = []
    left = _leftovers(target)
    if not target.exists() and not target.is_symlink():
        complete = sorted((p for p, m in left if m.state == "complete"), key=lambda p: p.stat().st_mtime)
        if complete:
            chosen = complete[-1]
            os.rename(chosen, target)
            done.append(f"restored {target} from an interrupted run ({chosen.name})")
            left = [(p, m) for p, m in left if p != chosen]
    for path, _ in left:
        if _remove_ours(path, target.name):
            done.append(f"removed {path.name}, left by an interrupted run")
    return done


def _mode_for_new() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o777 & ~umask


@contextmanager
def atomic_folder(target: str | os.PathLike[str], *, kind: str = "outputs", protect: Iterable[Protected] = (),
                  input_folders: Iterable[Path] = ()) -> Iterator[Path]:
    """Yield a temporary folder; on success it takes the place of ``target``, on failure it is removed.

    ``target`` is checked by :func:`check_target` first (with ``protect`` and
    ``input_folders``), after :func:`recover` has tidied earlier interrupted
    runs. The marker is written last, then the folders are swapped.
    """
    target = Path(target)
    absolute = Path(os.path.abspath(target))
    protect, input_folders = list(protect), list(input_folders)
    recover(absolute)
    state = check_target(target, protect=protect, input_folders=input_folders)
    absolute.parent.mkdir(parents=True, exist_ok=True)
    name = absolute.name
    tmp = Path(tempfile.mkdtemp(prefix=f".{name}.partial-", dir=absolute.parent))
    lock = old_lock = None
    old: Path | None = None
    try:
        lock = _lock(tmp)
        (tmp / MARKER_NAME).write_text(_marker_text(state="writing", target=name, kind=kind), encoding="utf-8")
        yield tmp
        files = []
        for dirpath, dirnames, filenames in os.walk(tmp):
            here = Path(dirpath)
            files += [(here / n).relative_to(tmp).as_posix() for n in dirnames + filenames]
        files = [f for f in files if f != MARKER_NAME]
        part = tmp / (MARKER_NAME + ".new")
        part.write_text(_marker_text(state="complete", target=name, kind=kind, files=files), encoding="utf-8")
        os.replace(part, tmp / MARKER_NAME)
        # The target may have changed while we worked: check it again just before the swap.
        state = check_target(target, protect=protect, input_folders=input_folders)
        if state == "ours":
            os.chmod(tmp, absolute.stat().st_mode & 0o7777)
            if _exchange(tmp, absolute):
                _remove_ours(tmp, None)  # the old outputs, now at the temporary name
            else:
                old_lock = _lock(absolute)  # held across the renames: a concurrent run leaves it alone
                old = absolute.parent / f".{name}.old-{tmp.name.rsplit('-', 1)[-1]}"
                os.rename(absolute, old)
                _between_renames()
                os.rename(tmp, absolute)
                _remove_ours(old, None)
        elif state == "empty":
            os.chmod(tmp, absolute.stat().st_mode & 0o7777)
            os.replace(tmp, absolute)  # an empty folder is replaced in one step (POSIX rename)
        else:
            os.chmod(tmp, _mode_for_new())
            os.rename(tmp, absolute)
    except BaseException:
        # Only what this run made: its temporary folder (or, after a swap, the old outputs now there), and the
        # old outputs put back where the user left them if the second rename did not happen.
        if old is not None and old.exists() and not absolute.exists():
            os.rename(old, absolute)
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)
        raise
    finally:
        _unlock(old_lock)
        _unlock(lock)
