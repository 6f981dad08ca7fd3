"""Which backend keeps the archive: chosen in one place, from the archive's location.

A location is what the user gives as ``--archive``, ``[round] archive`` or
``$ROUNDSCORE_ARCHIVE``.  One that starts with ``NAME://`` where ``NAME`` is registered in
:data:`BACKENDS` goes to that backend, with the whole text; anything else is a file path and goes
to the SQLite backend, exactly as before there was a choice (``~`` expanded, the default file when
none is given).  A location whose ``NAME://`` is not registered is therefore a file path too, as
it always was.

Adding a backend (say a server database) is one module implementing
:class:`roundscore.history.interface.ArchiveStore` and one line here::

    BACKENDS = {"": SqliteArchive, "postgresql": PostgresArchive}

The archive tests then run over it once it is listed in ``tests/archive_backends.py``.
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable

from roundscore.history.db import ARCHIVE_ENV
from roundscore.history.interface import ArchiveStore
from roundscore.history.sqlite import SqliteArchive

__all__ = ["BACKENDS", "Location", "scheme_of", "open_store"]

Location = str | os.PathLike[str] | None
#: Backends by the location's scheme; ``""`` is a plain file path (and the default archive).
#: Each is called with the location as given and returns the store (it opens nothing yet).
BACKENDS: dict[str, Callable[[Location], ArchiveStore]] = {
    "": SqliteArchive,
}

_SCHEME = re.compile(r"([A-Za-z][A-Za-z0-9+.-]*)://")


def scheme_of(location: Location) -> str:
    """The registered scheme of ``location`` (``"NAME"`` of ``NAME://...``), else ``""``.

    ``None`` or ``""`` means the default archive: ``$ROUNDSCORE_ARCHIVE`` when set (it may name a
    registered scheme too), else the default file.
    """
    text = os.fspath(location) if location else os.environ.get(ARCHIVE_ENV, "")
    found = _SCHEME.match(text) if isinstance(text, str) else None
    return found.group(1).lower() if found and found.group(1).lower() in BACKENDS else ""


def open_store(location: Location = None) -> ArchiveStore:
    """The archive store at ``location`` (nothing is opened or created until it is used)."""
    scheme = scheme_of(location)
    if scheme == "":
        return BACKENDS[""](location)  # the path as given: SqliteArchive resolves ~ and the default
    return BACKENDS[scheme](location if location else os.environ[ARCHIVE_ENV])
