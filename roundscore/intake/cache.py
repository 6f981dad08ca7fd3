"""The cache of validated inputs: each returned form's validated rows, kept beside the round's outputs.

A coordinator checks a round again and again while settling it (an exclusion,
a σ_pt), and the forms do not change between those checks. The cache keeps
what reading and validating each form gave, so a form whose bytes are the
same is not read again.

The cache is only ever an optimisation:

* An entry is used only when everything that shaped it is the same: the
  file's bytes (BLAKE2b-256 of its content) and size, its path and the name
  messages show for it, the reader's version (:func:`reader_version`: the
  cache format, the package and library versions and the source of every
  module that reads and validates a form) and the round's settings that
  affect reading (:func:`reading_settings`: round id, decimal mark,
  replicates, ``[limits]``, each measurand's name, unit and
  ``allow_negative``). Anything else (exclusions, σ_pt, assigned values,
  scores) does not affect reading and does not invalidate it.
* A missing, stale, foreign, truncated or damaged cache, or one of another
  round, is ignored whole or entry by entry, and the forms are read again;
  nothing in it is ever executed (a plain ``.npz`` of numbers and of UTF-8
  JSON text, loaded without pickle and checked field by field, with a
  BLAKE2b digest over all of it).
* Only forms that were read without a problem are kept, and only those of
  the round's current files: the cache never holds anything that is not
  also in the inputs.
* It is written atomically (a temporary file of our own, then a rename),
  under a lock, into a folder carrying roundscore's marker
  (:mod:`roundscore.pipeline` decides where: inside the round's output
  folder).

The rows are stored as columns (:data:`roundscore.model.table.COLUMNS`): text
columns as codes into a list of the distinct strings, numbers as float64 or
int64, in the order the forms are read; :func:`roundscore.model.table.frame_from_columns`
builds the table from them as it does from freshly read rows.
"""

from __future__ import annotations

import functools
import hashlib
import io
import json
import os
from collections.abc import Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from roundscore.errors import Place
from roundscore.model.round import Round
from roundscore.model.table import COLUMNS, NUMBER_COLUMNS, SampleReceipt

__all__ = ["CACHE_FOLDER", "PACK_NAME", "CACHE_FORMAT", "FileKey", "CachedForm", "InputCache", "reader_version",
           "reading_settings", "file_key", "write_atomic", "read_json", "FILES"]

#: The cache's folder inside a round's output folder (it carries its own marker, so it is ours).
CACHE_FOLDER = ".roundscore-cache"
#: The file of cached forms inside :data:`CACHE_FOLDER`.
PACK_NAME = "inputs.npz"
#: The cache's format; a pack of another format is ignored.
CACHE_FORMAT = 1
#: Every name the cache folder may hold (its marker lists them, the temporary names included, so a folder
#: interrupted mid-write is still wholly ours). ``check.json`` is the previous check's summary.
FILES = (PACK_NAME, PACK_NAME + ".partial", "check.json", "check.json.partial", ".lock",
         ".roundscore-output.new")  # the last: the marker's own temporary name (outputs/outfolder.py)
#: A pack larger than this is not read (a 2000-lab × 40-measurand round's is about 20 MB).
MAX_PACK_BYTES = 2048 * (1 << 20)
_READ_CHUNK = 1 << 20

#: The modules whose code shapes a cached entry: a change to any of them makes every entry stale.
_READER_MODULES = (
    "intake/cache.py", "intake/cells.py", "intake/forms.py", "intake/isolation.py", "intake/readers.py",
    "intake/safety.py", "intake/validate.py", "intake/xlsx.py", "model/table.py", "model/labcodes.py",
    "model/units.py", "model/limits.py", "model/round.py", "errors.py", "text.py", "ranges.py",
)
_STRING_COLUMNS = tuple(c for c in COLUMNS if c not in NUMBER_COLUMNS)


@functools.lru_cache(maxsize=1)
def reader_version() -> str:
    """The reader's version: a digest of the cache format, the package and library versions and the source of
    every module that reads and validates a form (so a changed reader never uses an entry an older one made)."""
    from importlib import metadata

    h = hashlib.blake2b(digest_size=16)
    h.update(f"{CACHE_FORMAT}".encode())
    for lib in ("roundscore", "python-calamine", "pint", "numpy", "pandas"):
        try:
            h.update(f"|{lib} {metadata.version(lib)}".encode())
        except metadata.PackageNotFoundError:
            h.update(f"|{lib} ?".encode())
    root = Path(__file__).resolve().parents[1]  # the package folder
    for name in _READER_MODULES:
        try:
            h.update(name.encode() + b"\0" + (root / name).read_bytes())
        except OSError:
            h.update(name.encode() + b"\0missing")
    return h.hexdigest()


def reading_settings(rnd: Round) -> str:
    """A digest of the round's settings that affect how a form is read and validated."""
    settings = {
        "id": rnd.id, "decimal": rnd.decimal, "replicates": rnd.replicates, "limits": asdict(rnd.limits),
        "folder": str(rnd.folder.resolve()),
        "measurands": [[m.name, m.unit, bool(m.allow_negative)] for m in rnd.measurands.values()],
    }
    text = json.dumps(settings, sort_keys=True, ensure_ascii=True)
    return hashlib.blake2b(text.encode(), digest_size=16).hexdigest()


@dataclass(frozen=True, slots=True, kw_only=True)
class FileKey:
    """What identifies one input file's content: the path as read, the name shown, size and BLAKE2b-256."""

    path: str
    shown: str
    size: int
    digest: str
    #: Modification time when hashed: not part of the identity; a file changed while it was read is not kept.
    mtime_ns: int = field(default=0, compare=False)

    def ident(self) -> tuple[str, str, int, str]:
        return (self.path, self.shown, self.size, self.digest)


def file_key(path: str, shown: str, max_bytes: int) -> FileKey | None:
    """The key of one file, or None when it cannot be hashed (missing, not a regular file, larger than
    ``max_bytes``): such a file is simply read without the cache."""
    try:
        with open(path, "rb") as fh:
            st = os.fstat(fh.fileno())
            if not _regular(st.st_mode) or st.st_size > max_bytes:
                return None
            h = hashlib.blake2b(digest_size=32)
            size = 0
            while chunk := fh.read(_READ_CHUNK):
                h.update(chunk)
                size += len(chunk)
    except OSError:
        return None
    if size != st.st_size:
        return None
    return FileKey(path=path, shown=shown, size=size, digest=h.hexdigest(), mtime_ns=st.st_mtime_ns)


def _regular(mode: int) -> bool:
    import stat

    return stat.S_ISREG(mode)


def unchanged(key: FileKey) -> bool:
    """Whether the file still has the size and modification time it had when ``key`` was made."""
    try:
        st = os.stat(key.path)
    except OSError:
        return False
    return st.st_size == key.size and st.st_mtime_ns == key.mtime_ns


@dataclass(frozen=True, slots=True, kw_only=True)
class CachedForm:
    """What a form's reading gave besides its rows: warnings, reading notes, where its lab code is, the receipt."""

    warnings: tuple[str, ...] = ()
    readings: tuple[tuple[str, str], ...] = ()
    lab_place: Place | None = None
    receipt: SampleReceipt | None = None


@dataclass(slots=True)
class _Entry:
    key: FileKey
    form: CachedForm
    start: int  # rows [start, stop) of the pack's columns
    stop: int


class InputCache:
    """The cached forms of one round, and what a read adds to them (saved by :meth:`save`).

    ``folder`` is the cache folder to read from (None: start empty). Nothing
    here raises on a bad cache: :attr:`ignored` says why a pack was not used.
    """

    def __init__(self, rnd: Round, folder: Path | None) -> None:
        self.reader = reader_version()
        self.settings = reading_settings(rnd)
        self.max_bytes = max(rnd.limits.max_total_bytes, rnd.limits.max_text_bytes)
        self.ignored: str | None = None
        self._entries: dict[tuple[str, str, int, str], _Entry] = {}
        self._columns: dict[str, np.ndarray] = {}
        self._pending: tuple[list[FileKey], list[CachedForm], dict[str, np.ndarray]] | None = None
        self.hits = 0
        self.misses = 0
        if folder is not None:
            try:
                self._load(Path(folder) / PACK_NAME)
            except FileNotFoundError:
                self.ignored = "no cache yet"
            except Exception as exc:  # any damage at all: the cache is ignored and the forms read again
                self._entries, self._columns = {}, {}
                self.ignored = f"{type(exc).__name__}: {exc}"

    # -- reading ----------------------------------------------------------------------------------------

    def _load(self, path: Path) -> None:
        with open(path, "rb") as fh:
            st = os.fstat(fh.fileno())
            if not _regular(st.st_mode) or st.st_size > MAX_PACK_BYTES:
                raise ValueError("not a cache file")
            data = fh.read()
        with np.load(io.BytesIO(data), allow_pickle=False) as z:
            arrays = {name: z[name] for name in z.files}
        digest = arrays.pop("digest", None)
        if digest is None or digest.dtype != np.uint8 or digest.tobytes() != _digest(arrays):
            raise ValueError("the digest does not match")
        meta = json.loads(_text(arrays.pop("meta")))
        if not isinstance(meta, dict) or meta.get("format") != CACHE_FORMAT:
            raise ValueError("another cache format")
        if meta.get("reader") != self.reader or meta.get("settings") != self.settings:
            raise ValueError("written by another reader or for other settings")
        n = meta.get("rows")
        if not isinstance(n, int) or n < 0:
            raise ValueError("bad row count")
        columns: dict[str, np.ndarray] = {}
        for c in COLUMNS:
            if c in NUMBER_COLUMNS:
                a = arrays.pop(f"n_{c}")
                if a.dtype != np.dtype(NUMBER_COLUMNS[c]) or a.shape != (n,):
                    raise ValueError(f"bad column {c}")
                columns[c] = a
            else:
                codes = arrays.pop(f"c_{c}")
                strings = json.loads(_text(arrays.pop(f"s_{c}")))
                if codes.dtype != np.int32 or codes.shape != (n,) or not isinstance(strings, list) \
                        or not set(map(type, strings)) <= {str}:
                    raise ValueError(f"bad column {c}")
                if n and (int(codes.min()) < -1 or int(codes.max()) >= len(strings)):
                    raise ValueError(f"bad codes in column {c}")
                table = np.empty(len(strings) + 1, dtype=object)
                table[:-1] = strings
                table[-1] = None  # code -1
                columns[c] = table[codes]
        if arrays:
            raise ValueError("unexpected arrays")
        entries: dict[tuple[str, str, int, str], _Entry] = {}
        at = 0
        for e in _list(meta.get("entries")):
            key = FileKey(path=_str(e["path"]), shown=_str(e["shown"]), size=_int(e["size"]),
                          digest=_str(e["digest"]))
            rows = _int(e["rows"])
            form = CachedForm(warnings=tuple(_str(w) for w in _list(e["warnings"])),
                              readings=tuple(_pair(r) for r in _list(e["readings"])),
                              lab_place=_place(e["lab_place"]), receipt=_receipt(e["receipt"]))
            if key.ident() in entries or rows < 0:
                raise ValueError("bad entry")
            entries[key.ident()] = _Entry(key=key, form=form, start=at, stop=at + rows)
            at += rows
        if at != n:
            raise ValueError("the entries do not cover the rows")
        self._entries, self._columns = entries, columns

    def keys(self, files: Sequence[tuple[str, str]]) -> list[FileKey | None]:
        """The key of each (path, shown name), None for a file that is not cached."""
        return [file_key(p, s, self.max_bytes) for p, s in files]

    def get(self, key: FileKey | None) -> CachedForm | None:
        """The cached form of this key (None: not cached, read the file)."""
        got = self._entries.get(key.ident()) if key is not None else None
        if got is None:
            self.misses += 1
            return None
        self.hits += 1
        return got.form

    def rows_of(self, key: FileKey) -> dict[str, np.ndarray]:
        """The cached rows of a key :meth:`get` found, as columns."""
        e = self._entries[key.ident()]
        return {c: a[e.start:e.stop] for c, a in self._columns.items()}

    # -- what a read adds ---------------------------------------------------------------------------------

    def keep(self, keys: list[FileKey], forms: list[CachedForm], columns: dict[str, np.ndarray],
             counts: list[int]) -> None:
        """What :meth:`save` will write: the forms of this read (keys and forms in read order; their rows
        are ``columns``, ``counts[i]`` rows for form ``i``, in that order). Forms that were not read cleanly
        are left out by the caller. Nothing is written if it is what the pack already holds."""
        ordered = sorted(self._entries.values(), key=lambda e: e.start)
        same = bool(self._columns) and [e.key.ident() for e in ordered] == [k.ident() for k in keys]
        self._pending = None if same else (keys, forms, {c: columns[c] for c in COLUMNS})
        self._counts = counts

    @property
    def changed(self) -> bool:
        """Whether :meth:`save` has something new to write (an empty cache is never written)."""
        return self._pending is not None and bool(self._pending[0] or self._entries)

    @property
    def empty(self) -> bool:
        """Whether there is nothing to keep: no cached form and none read cleanly."""
        return not self._entries if self._pending is None else not self._pending[0]

    def save(self, folder: Path, *, force: bool = False) -> bool:
        """Write what the last read gave into ``folder`` (atomically, under the folder's lock); True if written.

        ``force``: write even when the pack there already holds it (a new folder). Never raises on an
        OS error: the cache is an optimisation.
        """
        if self._pending is None:
            if not force or not self._entries:
                return False
            ordered = sorted(self._entries.values(), key=lambda e: e.start)
            keys, forms = [e.key for e in ordered], [e.form for e in ordered]
            columns, counts = self._columns, [e.stop - e.start for e in ordered]
        else:
            keys, forms, columns = self._pending
            counts = self._counts
        try:
            data = self._pack(keys, forms, columns, counts)
            return write_atomic(Path(folder), PACK_NAME, data)
        except (OSError, ValueError):
            return False

    def _pack(self, keys: list[FileKey], forms: list[CachedForm], columns: dict[str, np.ndarray],
              counts: list[int]) -> bytes:
        n = int(sum(counts))
        arrays: dict[str, np.ndarray] = {}
        for c in COLUMNS:
            a = columns[c]
            if len(a) != n:
                raise ValueError(f"column {c} has {len(a)} rows, not {n}")
            if c in NUMBER_COLUMNS:
                arrays[f"n_{c}"] = np.ascontiguousarray(a, dtype=NUMBER_COLUMNS[c])
            else:
                codes, strings = _codes(a)
                arrays[f"c_{c}"] = codes
                arrays[f"s_{c}"] = _bytes(json.dumps(strings, ensure_ascii=True))
        entries = [{"path": k.path, "shown": k.shown, "size": k.size, "digest": k.digest, "rows": int(r),
                    "warnings": list(f.warnings), "readings": [list(x) for x in f.readings],
                    "lab_place": f.lab_place,
                    "receipt": asdict(f.receipt) if f.receipt is not None else None}
                   for k, f, r in zip(keys, forms, counts)]
        meta = {"format": CACHE_FORMAT, "written_by": "roundscore", "reader": self.reader,
                "settings": self.settings, "rows": n, "entries": entries}
        arrays["meta"] = _bytes(json.dumps(meta, ensure_ascii=True, allow_nan=False))
        arrays["digest"] = np.frombuffer(_digest(arrays), dtype=np.uint8)
        buf = io.BytesIO()
        np.savez(buf, **arrays)  # type: ignore[arg-type]  # numpy's stub types **kwds loosely
        return buf.getvalue()


def _codes(a: np.ndarray) -> tuple[np.ndarray, list[str]]:
    """A text column as int32 codes into its distinct strings (-1: None)."""
    import pandas as pd

    if len(a) == 0:
        return np.zeros(0, dtype=np.int32), []
    values = np.asarray(a, dtype=object)
    isnull = np.fromiter((v is None for v in values), dtype=bool, count=len(values))
    if not all(isinstance(v, str) for v in values[~isnull]):
        raise ValueError("a text column holds something that is not text")
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    codes = codes.astype(np.int32)
    codes[isnull] = -1
    return codes, [str(u) for u in uniques]


def _digest(arrays: dict[str, np.ndarray]) -> bytes:
    h = hashlib.blake2b(digest_size=32)
    for name in sorted(arrays):
        a = arrays[name]
        h.update(f"{name}|{a.dtype.str}|{a.shape}|".encode())
        h.update(np.ascontiguousarray(a).tobytes())
    return h.digest()


def _bytes(text: str) -> np.ndarray:
    return np.frombuffer(text.encode("utf-8"), dtype=np.uint8)


def _text(a: np.ndarray) -> str:
    if a.dtype != np.uint8 or a.ndim != 1:
        raise ValueError("not text")
    return a.tobytes().decode("utf-8")


def _list(v: object) -> list:
    if not isinstance(v, list):
        raise ValueError("not a list")
    return v


def _str(v: object) -> str:
    if not isinstance(v, str):
        raise ValueError("not text")
    return v


def _int(v: object) -> int:
    if isinstance(v, bool) or not isinstance(v, int):
        raise ValueError("not a whole number")
    return v


def _pair(v: object) -> tuple[str, str]:
    items = _list(v)
    if len(items) != 2:
        raise ValueError("not a pair")
    return _str(items[0]), _str(items[1])


_PLACE_KEYS = {"file": (str, type(None)), "sheet": (str, type(None)), "row": (int, type(None)),
               "column": (str, type(None)), "cell": (str, type(None))}


def _place(v: object) -> Place | None:
    if v is None:
        return None
    if not isinstance(v, dict) or not set(v) <= set(_PLACE_KEYS):
        raise ValueError("not a place")
    for k, x in v.items():
        if not isinstance(x, _PLACE_KEYS[k]) or isinstance(x, bool):
            raise ValueError("not a place")
    return Place(**v)  # its keys and types were checked just above


def _receipt(v: object) -> SampleReceipt | None:
    if v is None:
        return None
    if not isinstance(v, dict) or set(v) != {"arrived", "condition", "analysed", "source"}:
        raise ValueError("not a receipt")
    return SampleReceipt(**{k: _str(x) for k, x in v.items()})


# -- files of the cache folder ------------------------------------------------------------------------------

def write_atomic(folder: Path, name: str, data: bytes) -> bool:
    """Write ``folder/name`` whole: into ``name.partial`` (ours, listed in the folder's marker), then renamed;
    under an exclusive lock on the folder's lock file, skipped (False) when another run holds it."""
    if name not in FILES:
        raise ValueError(f"{name} is not a cache file")
    lock = _lock(folder)
    if lock is None:
        return False
    tmp = folder / (name + ".partial")
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC | getattr(os, "O_NOFOLLOW", 0), 0o644)
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())
        except BaseException:
            tmp.unlink(missing_ok=True)
            raise
        os.replace(tmp, folder / name)
        return True
    finally:
        os.close(lock)


def _lock(folder: Path) -> int | None:
    try:
        fd = os.open(folder / ".lock", os.O_RDWR | os.O_CREAT | getattr(os, "O_NOFOLLOW", 0), 0o644)
    except OSError:
        return None
    try:
        import fcntl

        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except ImportError:  # pragma: no cover - no flock: the rename alone keeps each file whole
        pass
    except OSError:
        os.close(fd)
        return None
    return fd


def read_json(folder: Path, name: str, *, max_bytes: int = 256 * (1 << 20)) -> Any:
    """A JSON file of the cache folder, or None when it is missing, too large or not JSON."""
    p = Path(folder) / name
    try:
        if p.is_symlink() or not p.is_file() or p.stat().st_size > max_bytes:
            return None
        return json.loads(p.read_text(encoding="utf-8"))
    except (OSError, ValueError, UnicodeDecodeError, RecursionError):
        return None

