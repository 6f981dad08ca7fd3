"""The SQLite archive's schema: every released migration, frozen as the literal SQL it ran.

A migration is data, not code built from the live column lists: migration 1 was first generated
from the score columns of its day, and is kept here as the exact text it produced, so that adding a
score column can never change what a released migration does.  SQLite keeps each ``CREATE``
statement's text as written (``sqlite_master.sql``), so the text below is the schema of every
archive written since (``tests/test_archive_formats.py`` compares it with archives written before
the text was frozen; ``tests/data/archives/``).

**Never edit a released migration** (its statements or its description, which is logged in the
``schema_version`` table): append a new one to :data:`MIGRATIONS`.  A new score column, for
instance, is a new migration ``ALTER TABLE scores ADD COLUMN ...`` plus the field in
:data:`roundscore.history.sheets.ROW_FIELDS`; ``tests/test_archive_formats.py`` fails while the
two disagree.

References
----------
.. [1] SQLite, "The Schema Table" (the ``sql`` column keeps the statement's original text).
.. [2] SQLite, "ALTER TABLE" (``ADD COLUMN`` appends the column's text to the stored ``CREATE``).
.. [3] SQLite, "Pragma statements": user_version, application_id.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass

__all__ = ["Migration", "MIGRATIONS", "SCHEMA_VERSION", "VERSION_TABLE"]


@dataclass(frozen=True, slots=True, kw_only=True)
class Migration:
    """One released schema step.

    Attributes
    ----------
    version : int
        The schema version a file has after this step (``PRAGMA user_version``).
    description : str
        One line, logged in the ``schema_version`` table.
    statements : tuple of str
        The SQL, run in order inside the migrating transaction (one statement each: Python's
        ``executescript`` would commit, so it is not used).
    """

    version: int
    description: str
    statements: tuple[str, ...]

    def apply(self, conn: sqlite3.Connection) -> None:
        """Run the statements on ``conn`` (the caller holds the transaction)."""
        for sql in self.statements:
            conn.execute(sql)


#: The table that logs each applied migration (made before migration 1, with it).
VERSION_TABLE = ("CREATE TABLE IF NOT EXISTS schema_version ("
                 "version INTEGER PRIMARY KEY, applied_at TEXT NOT NULL, description TEXT)")

_MIGRATION_1 = Migration(
    version=1,
    description="Initial layout: rounds and their score rows.",
    statements=(
        "CREATE TABLE rounds (\n"
        "        scheme TEXT NOT NULL, round_id TEXT NOT NULL, round_date TEXT NOT NULL,\n"
        "        title TEXT NOT NULL DEFAULT '', settings TEXT NOT NULL DEFAULT '{}',\n"
        "        stored_at TEXT NOT NULL, PRIMARY KEY (scheme, round_id))",
        # one line up to the score columns' end, as the generated text was
        "CREATE TABLE scores (scheme TEXT NOT NULL, round_id TEXT NOT NULL, "
        "lab TEXT, measurand TEXT, unit TEXT, n_replicates INTEGER, result REAL, assigned REAL, "
        "u_assigned REAL, sigma_pt REAL, z REAL, z_prime REAL, zeta REAL, en REAL, d REAL, "
        "d_percent REAL, signal TEXT, note TEXT, score TEXT,\n"
        "        PRIMARY KEY (scheme, round_id, lab, measurand),\n"
        "        FOREIGN KEY (scheme, round_id) REFERENCES rounds (scheme, round_id))",
    ),
)

_MIGRATION_2 = Migration(
    version=2,
    description="Add the round's origin, the statistics/precision tables, the audit table and a lab index.",
    statements=(
        "ALTER TABLE rounds ADD COLUMN origin TEXT NOT NULL DEFAULT 'lab'",
        "CREATE TABLE round_tables (\n"
        "        scheme TEXT NOT NULL, round_id TEXT NOT NULL, kind TEXT NOT NULL,\n"
        "        position INTEGER NOT NULL, row TEXT NOT NULL,\n"
        "        PRIMARY KEY (scheme, round_id, kind, position))",
        "CREATE TABLE audit (\n"
        "        id INTEGER PRIMARY KEY, replaced_at TEXT NOT NULL, reason TEXT NOT NULL,\n"
        "        scheme TEXT NOT NULL, round_id TEXT NOT NULL, lab TEXT, kind TEXT NOT NULL,\n"
        "        row TEXT NOT NULL)",
        "CREATE INDEX scores_by_lab ON scores (lab, measurand)",
    ),
)

_MIGRATION_3 = Migration(
    version=3,
    description="Mark the file as a roundscore archive (PRAGMA application_id).",
    # 0x52534841, the ASCII bytes "RSHA": roundscore.history.db.APPLICATION_ID
    statements=("PRAGMA application_id = 1381189697",),
)

_MIGRATION_4 = Migration(
    version=4,
    description="Add the labs' investigation records and the laboratories behind the lab codes.",
    statements=(
        "CREATE TABLE investigations (\n"
        "        scheme TEXT NOT NULL, round_id TEXT NOT NULL, lab TEXT NOT NULL, measurand TEXT NOT NULL,\n"
        "        status TEXT NOT NULL, cause TEXT NOT NULL DEFAULT '', action TEXT NOT NULL DEFAULT '',\n"
        "        by_name TEXT NOT NULL, recorded_on TEXT NOT NULL, stored_at TEXT NOT NULL,\n"
        "        PRIMARY KEY (scheme, round_id, lab, measurand))",
        "CREATE TABLE laboratories (\n"
        "        scheme TEXT NOT NULL, lab TEXT NOT NULL, name TEXT NOT NULL, stored_at TEXT NOT NULL,\n"
        "        PRIMARY KEY (scheme, lab))",
    ),
)

_MIGRATION_5 = Migration(
    version=5,
    description="Add the qualitative results: one row per lab, nominal or ordinal measurand and test item.",
    statements=(
        "CREATE TABLE qualitative (\n"
        "        scheme TEXT NOT NULL, round_id TEXT NOT NULL, lab TEXT NOT NULL, measurand TEXT NOT NULL,\n"
        "        item TEXT NOT NULL DEFAULT '', reported TEXT, assigned TEXT, agreement TEXT,\n"
        "        deviation INTEGER, signal TEXT, note TEXT,\n"
        "        PRIMARY KEY (scheme, round_id, lab, measurand, item),\n"
        "        FOREIGN KEY (scheme, round_id) REFERENCES rounds (scheme, round_id))",
        "CREATE INDEX qualitative_by_lab ON qualitative (lab, measurand)",
    ),
)

#: The released migrations in order; ``MIGRATIONS[i]`` brings a file to version ``i + 1``.
MIGRATIONS: tuple[Migration, ...] = (_MIGRATION_1, _MIGRATION_2, _MIGRATION_3, _MIGRATION_4, _MIGRATION_5)
#: The schema version this roundscore writes.
SCHEMA_VERSION = len(MIGRATIONS)
