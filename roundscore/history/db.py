"""The SQLite archive file itself: finding it, recognising it, checking it, and opening it to read or to write.

:mod:`roundscore.history.store` says what is stored, :mod:`roundscore.history.sqlite`
how it is kept in SQLite; this module makes sure that the file it is stored in is
a roundscore archive in good order, and that a reading command never changes it.

* **Recognised before use.**  A roundscore archive carries
  :data:`APPLICATION_ID` in its SQLite header (``PRAGMA application_id``,
  set by schema migration 3).  Files written before that migration carry
  schema version 1 or 2 (``PRAGMA user_version``) and roundscore's tables;
  they are recognised by those and get the id on their first write.  An
  empty file (0 bytes, or an SQLite database without any table) is taken as
  a new archive.  Anything else is refused *without writing to it*: the
  header is first read as bytes, then the file is opened read-only.
* **Reading never writes.**  ``history show``, ``history check`` and the
  history read by ``score --archive`` open the file with SQLite's
  ``mode=ro``: no table is created, no schema is migrated.  (SQLite creates
  its companion files ``FILE-wal`` and ``FILE-shm`` beside a file in WAL
  mode while it is read; when they were not there before, SQLite is let to
  remove them afterwards.  The archive file itself is not changed.)
* **Damage is reported, not read around.**  Every opening runs ``PRAGMA
  quick_check``, and an opening to write also checks that every stored text
  is UTF-8; a damaged file is refused naming the file, and nothing is
  written to it.  SQLite's own errors (not a database, malformed, text that
  is not UTF-8) become an :class:`~roundscore.errors.ArchiveError` naming
  the file.
* **A busy archive is waited for.**  When another process holds the write
  lock, a write waits up to :data:`BUSY_TIMEOUT_S` seconds (the
  environment variable :data:`TIMEOUT_ENV` changes it) and then says the
  archive is busy.  A lock is never a reason to replace anything.

References
----------
.. [1] SQLite, "Database File Format", section 1.3 (the header: user version
   at offset 60, application id at offset 68).
.. [2] SQLite, "Pragma statements": application_id, user_version, quick_check.
.. [3] SQLite, "Uniform Resource Identifiers" (``mode=ro``) and "Write-Ahead
   Logging", section "Read-Only Databases".
.. [4] SQLite, "Result and Error Codes" (SQLITE_BUSY, SQLITE_CORRUPT, SQLITE_NOTADB...).
"""

from __future__ import annotations

import math
import os
import sqlite3
from collections.abc import Sequence
from contextlib import contextmanager
from pathlib import Path
from collections.abc import Iterator

from roundscore.errors import ArchiveError
from roundscore.history.interface import now
from roundscore.history.sqlite_schema import VERSION_TABLE, Migration

__all__ = ["APPLICATION_ID", "ARCHIVE_ENV", "TIMEOUT_ENV", "BUSY_TIMEOUT_S", "archive_path",
           "busy_timeout", "open_archive", "transaction"]

#: ``PRAGMA application_id`` of a roundscore archive: the ASCII bytes "RSHA" (roundscore
#: history archive) read as a big-endian 32-bit number, 0x52534841 = 1381189697.
APPLICATION_ID = 0x52534841
#: Schema versions written before migration 3 marked the file with :data:`APPLICATION_ID`.
UNMARKED_VERSIONS = (1, 2)
#: Tables every roundscore archive has had since schema version 1.
OUR_TABLES = frozenset({"rounds", "scores", "schema_version"})
#: Environment variable that overrides the default archive file.
ARCHIVE_ENV = "ROUNDSCORE_ARCHIVE"
#: Environment variable: seconds to wait for another process's write lock.
TIMEOUT_ENV = "ROUNDSCORE_ARCHIVE_TIMEOUT"
#: Default wait for a write lock held by another process (seconds): long enough for another
#: roundscore to store a large round, short enough that a stuck program is reported.
BUSY_TIMEOUT_S = 60.0
#: Longest wait accepted from :data:`TIMEOUT_ENV` (one hour).
MAX_TIMEOUT_S = 3600.0
#: The first 16 bytes of every SQLite database file ("Database File Format", 1.3.1).
SQLITE_MAGIC = b"SQLite format 3\x00"
#: Lines of a failed quick_check quoted in the message.
_CHECK_LINES = 3

# Primary result codes (SQLite, "Result and Error Codes").
_BUSY, _LOCKED, _READONLY, _IOERR, _CORRUPT, _FULL, _CANTOPEN, _NOTADB = 5, 6, 8, 10, 11, 13, 14, 26


def archive_path(path: str | os.PathLike[str] | None = None) -> Path:
    """The archive file: ``path`` if given, else ``$ROUNDSCORE_ARCHIVE``, else the user data dir.

    ``~`` and ``~user`` at the start are expanded in ``path`` and in the
    environment variable, as a shell would.  The default is
    ``platformdirs.user_data_dir("roundscore") / "archive.sqlite"``.
    """
    if path:
        return _expand(Path(path), "the archive path")
    if os.environ.get(ARCHIVE_ENV):
        return _expand(Path(os.environ[ARCHIVE_ENV]), f"${ARCHIVE_ENV}")
    import platformdirs

    return Path(platformdirs.user_data_dir("roundscore")) / "archive.sqlite"


def _expand(path: Path, what: str) -> Path:
    try:
        return path.expanduser()
    except RuntimeError as exc:  # no home folder known, or an unknown ~user
        raise ArchiveError(f"{what} {str(path)!r}: cannot expand '~' ({exc})") from None


def busy_timeout() -> float:
    """Seconds a write waits for another process's lock: :data:`TIMEOUT_ENV`, else 60."""
    text = os.environ.get(TIMEOUT_ENV, "").strip()
    if not text:
        return BUSY_TIMEOUT_S
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    if not 0 < value <= MAX_TIMEOUT_S:
        raise ArchiveError(f"${TIMEOUT_ENV} = {text[:40]!r}: give the seconds to wait for a busy "
                           f"archive, a number above 0 and at most {MAX_TIMEOUT_S:g}")
    return value


# --------------------------------------------------------------------------- errors

def _code(exc: sqlite3.Error) -> int | None:
    code = getattr(exc, "sqlite_errorcode", None)
    if code is not None:
        return code & 0xFF
    text = str(exc).lower()  # Python < 3.11: only the text is there
    for needle, value in (("not a database", _NOTADB), ("malformed", _CORRUPT),
                          ("locked", _BUSY), ("busy", _BUSY), ("readonly", _READONLY),
                          ("read-only", _READONLY), ("disk is full", _FULL),
                          ("unable to open", _CANTOPEN), ("disk i/o", _IOERR)):
        if needle in text:
            return value
    return None


def busy_message(file: Path, timeout: float) -> str:
    return (f"{file}: the archive is busy: another roundscore, or another program, is writing to "
            f"it. roundscore waited {timeout:g} s for it to finish (${TIMEOUT_ENV} sets how long); "
            "nothing was stored. Run the command again when the other program is done")


def damaged_message(file: Path, what: str) -> str:
    return (f"{file}: the archive is damaged ({what}); roundscore read nothing from it and wrote "
            "nothing to it. Restore it from a backup (keep this copy: a database tool may "
            "recover rows from it)")


def _translate(file: Path, exc: BaseException, timeout: float) -> ArchiveError:
    """An SQLite (or decoding) error as one message naming the file."""
    if isinstance(exc, UnicodeDecodeError):
        return ArchiveError(damaged_message(file, "a text value is not valid UTF-8"))
    if "decode" in str(exc).lower() and "utf" in str(exc).lower():  # Python's own text decoding
        return ArchiveError(damaged_message(file, "a text value is not valid UTF-8"))
    code = _code(exc)  # type: ignore[arg-type]  # any exception: _code reads only its code attribute and text
    if code in (_BUSY, _LOCKED):
        return ArchiveError(busy_message(file, timeout))
    if code == _NOTADB:
        return ArchiveError(f"{file}: not a roundscore archive: SQLite cannot read it as a "
                            f"database ({exc}). It may be another kind of file, or an archive "
                            "damaged at its start; roundscore did not change it")
    if code == _CORRUPT:
        return ArchiveError(damaged_message(file, str(exc)))
    if code == _READONLY:
        return ArchiveError(f"{file}: cannot write to the archive: the file or its folder is "
                            f"read-only ({exc}); nothing was stored")
    if code == _FULL:
        return ArchiveError(f"{file}: the disk is full; nothing was stored (the change was "
                            "rolled back)")
    if code == _CANTOPEN:
        return ArchiveError(f"{file}: cannot open the archive ({exc}); check that the folder "
                            "exists and that you may read (and, to store, write) there")
    if code == _IOERR:
        return ArchiveError(f"{file}: the archive could not be read or written (an input/output "
                            f"error: {exc}); nothing was stored")
    return ArchiveError(f"{file}: the archive cannot be used ({type(exc).__name__}: {exc})")


# --------------------------------------------------------------------------- recognising

def _header_check(file: Path) -> None:
    """Refuse, from the first 100 bytes alone, a file that is surely not ours (SQLite never opens it)."""
    try:
        with open(file, "rb") as fh:
            head = fh.read(100)
    except OSError as exc:
        raise ArchiveError(f"{file}: cannot read the archive ({exc.strerror or exc})") from None
    if len(head) < 100 or not head.startswith(SQLITE_MAGIC):
        raise ArchiveError(f"{file}: not a roundscore archive: not an SQLite database (it does "
                           "not start with the SQLite header; another kind of file, or an archive "
                           "damaged at its start); roundscore did not change it")
    app = int.from_bytes(head[68:72], "big", signed=True)
    if app not in (0, APPLICATION_ID):
        raise ArchiveError(_foreign(file, app, None, None))


def _foreign(file: Path, app: int, version: int | None, names: Sequence[str] | None) -> str:
    what = [f"application id {app & 0xFFFFFFFF:#010x}"]
    if version is not None:
        what.append(f"schema version {version}")
    if names is not None:
        shown = ", ".join(sorted(names)[:8]) + (" ..." if len(names) > 8 else "")
        what.append(f"tables: {shown or 'none'}")
    return (f"{file}: not a roundscore archive (an SQLite database of another program: "
            f"{'; '.join(what)}); roundscore did not change it. Name another file with --archive, "
            f"${ARCHIVE_ENV} or [round] archive")


def _identify(conn: sqlite3.Connection, file: Path, newest: int) -> str:
    """``"ours"`` or ``"empty"``; anything else raises without writing."""
    app = conn.execute("PRAGMA application_id").fetchone()[0]
    version = conn.execute("PRAGMA user_version").fetchone()[0]
    names = [r[0] for r in conn.execute("SELECT name FROM sqlite_master")]
    if app == 0 and version == 0 and not names:
        return "empty"
    ours = app == APPLICATION_ID or (app == 0 and version in UNMARKED_VERSIONS
                                     and OUR_TABLES <= set(names))
    if not ours:
        raise ArchiveError(_foreign(file, app, version, names))
    if version > newest:
        raise ArchiveError(f"{file}: archive schema version {version} was written by a newer "
                           f"roundscore; this version reads up to {newest}")
    return "ours"


def _integrity(conn: sqlite3.Connection, file: Path) -> None:
    rows = [r[0] for r in conn.execute(f"PRAGMA quick_check({_CHECK_LINES})")]
    if rows != ["ok"]:
        raise ArchiveError(damaged_message(file, "SQLite quick_check: " + "; ".join(map(str, rows))))


def _text_check(conn: sqlite3.Connection, file: Path) -> None:
    """Every stored text must be UTF-8 (SQLite's quick_check does not look inside values).

    Run before a write: a file whose rows were damaged in place is not
    written to, whichever rows the write concerns.  About 0.2 s per 40,000
    score rows (measured on a 2-core machine, 2026-12).
    """
    tables = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")]
    conn.text_factory = bytes
    try:
        for table in tables:
            for row in conn.execute(f'SELECT * FROM "{table}"'):
                for value in row:
                    if type(value) is bytes:
                        try:
                            value.decode("utf-8")
                        except UnicodeDecodeError:
                            raise ArchiveError(damaged_message(
                                file, f"a text value in table {table!r} is not valid UTF-8")) from None
    finally:
        conn.text_factory = str


# --------------------------------------------------------------------------- opening

@contextmanager
def transaction(conn: sqlite3.Connection) -> Iterator[sqlite3.Connection]:
    """``BEGIN IMMEDIATE`` ... ``COMMIT``; rolled back on any exception."""
    conn.execute("BEGIN IMMEDIATE")
    try:
        yield conn
    except BaseException:
        if conn.in_transaction:
            try:
                conn.execute("ROLLBACK")
            except sqlite3.Error:  # SQLite may have rolled back already (a full disk, damage)
                pass
        raise
    conn.execute("COMMIT")


def _read_only(file: Path, timeout: float, *, immutable: bool = False) -> sqlite3.Connection:
    uri = file.resolve().as_uri() + ("?immutable=1" if immutable else "?mode=ro")
    return sqlite3.connect(uri, uri=True, timeout=timeout, isolation_level=None)


def _open_to_read(file: Path, timeout: float, newest: int) -> tuple[sqlite3.Connection, str]:
    """A read-only connection and the file's kind.

    In a folder where SQLite may not create ``FILE-shm`` (a read-only share,
    a backup medium) a WAL file cannot be opened ``mode=ro``; when no
    ``FILE-wal`` exists, no process can be writing to it either (a writer
    needs that file), so it is read as immutable (SQLite, "Write-Ahead
    Logging", 8, "Read-Only Databases").
    """
    conn = None
    try:
        conn = _read_only(file, timeout)
        return conn, _identify(conn, file, newest)
    except sqlite3.Error as exc:
        if conn is not None:
            conn.close()
        if _code(exc) not in (_READONLY, _CANTOPEN) or _companions(file)[0].exists():
            raise
    conn = _read_only(file, timeout, immutable=True)
    try:
        return conn, _identify(conn, file, newest)
    except BaseException:
        conn.close()
        raise


def _companions(file: Path) -> tuple[Path, Path]:
    return Path(f"{file}-wal"), Path(f"{file}-shm")


def _tidy(file: Path) -> None:
    """Let SQLite remove the companion files a read-only connection left beside a WAL file.

    A read-only connection cannot remove ``FILE-wal`` and ``FILE-shm``; a
    read-write connection that only reads removes them when it is the last
    one to close (SQLite, "Write-Ahead Logging", 2.2), and writes nothing to
    the database itself while the write-ahead log is empty.  When another
    process has the file open, SQLite leaves them for it.
    """
    wal, _ = _companions(file)
    try:
        if not wal.is_file() or wal.stat().st_size != 0 or not os.access(file, os.W_OK):
            return
        conn = sqlite3.connect(file.resolve().as_uri() + "?mode=rw", uri=True, timeout=0.1,
                               isolation_level=None)
        try:
            conn.execute("SELECT COUNT(*) FROM sqlite_master").fetchone()
        finally:
            conn.close()
    except (OSError, sqlite3.Error):
        pass  # tidiness only: the files are SQLite's own and harmless


def _migrate(conn: sqlite3.Connection, migrations: Sequence[Migration]) -> None:
    """Apply the missing migrations in one transaction, each logged in ``schema_version``."""
    if conn.execute("PRAGMA user_version").fetchone()[0] >= len(migrations):
        return
    with transaction(conn):
        version = conn.execute("PRAGMA user_version").fetchone()[0]  # re-read under the lock
        if version >= len(migrations):
            return
        if version == 0:
            conn.execute(VERSION_TABLE)
        for number in range(version + 1, len(migrations) + 1):
            step = migrations[number - 1]
            step.apply(conn)
            conn.execute("INSERT INTO schema_version VALUES (?, ?, ?)",
                         (number, now(), step.description))
            conn.execute(f"PRAGMA user_version = {number:d}")


@contextmanager
def open_archive(path: str | os.PathLike[str] | None, *, write: bool,
                 migrations: Sequence[Migration],
                 ) -> Iterator[sqlite3.Connection | None]:
    """Open the archive; yields a connection, or ``None`` for an empty file opened to read.

    Parameters
    ----------
    path : path or None
        The archive (see :func:`archive_path`).
    write : bool
        ``False``: the file must exist and is opened read-only (nothing is
        created or migrated).  ``True``: a missing file is created, an older
        schema is migrated; the file is first recognised and checked through
        a read-only connection.
    migrations : sequence of Migration
        The schema migrations (:data:`roundscore.history.sqlite_schema.MIGRATIONS`; a test
        passes the first ones to make a file of an older version).

    Raises
    ------
    ArchiveError
        Missing (to read), not a roundscore archive, from a newer roundscore,
        damaged, busy past :func:`busy_timeout`, or not readable/writable;
        always naming the file.  SQLite errors raised inside the ``with``
        block are translated the same way.
    """
    file = archive_path(path)
    timeout = busy_timeout()
    exists = file.exists()
    if exists and not file.is_file():
        raise ArchiveError(f"{file}: a folder or device, not an archive file")
    if not write and not exists:
        raise ArchiveError(f"no archive at {file}; add rounds first with 'roundscore history add'")
    size = file.stat().st_size if exists else 0
    if size:
        _header_check(file)
    kind = "empty"
    conn = None
    tidy = not any(p.exists() for p in _companions(file))
    try:
        if size:
            conn, kind = _open_to_read(file, timeout, len(migrations))
            if kind == "ours":
                _integrity(conn, file)
                if write:
                    _text_check(conn, file)
        if write:
            if conn is not None:
                conn.close()
            if not exists:
                try:
                    file.parent.mkdir(parents=True, exist_ok=True)
                except OSError as exc:
                    raise ArchiveError(f"{file}: cannot create the archive's folder "
                                       f"({exc.strerror or exc})") from None
            conn = sqlite3.connect(file, timeout=timeout, isolation_level=None)
            conn.execute("PRAGMA journal_mode = WAL")
            conn.execute("PRAGMA synchronous = FULL")
            conn.execute("PRAGMA foreign_keys = ON")
            _migrate(conn, migrations)
            yield conn
        else:
            yield conn if kind == "ours" else None
    except (sqlite3.Error, UnicodeDecodeError) as exc:
        raise _translate(file, exc, timeout) from None
    finally:
        if conn is not None:
            conn.close()
        if tidy:
            _tidy(file)
