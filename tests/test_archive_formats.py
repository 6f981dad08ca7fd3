"""Archives written before the store interface open, read and accept stores the same (SQLite files).

SQLite only: the reference files under ``tests/data/archives/`` are SQLite archives written by the
code before the archive store interface (see the README there: commit, script, versions); the
expected reads (``expected.json``) and the schema (``schema.sql``) were recorded by that code. The
data are invented; the checks compare this code with that one, no outside value is involved.
"""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import importlib.util
import json
import shutil
import sqlite3
from pathlib import Path

import pytest

from roundscore.errors import ArchiveConflict
from roundscore.history import store as archive

DATA = Path(__file__).resolve().parent / "data" / "archives"


def _load_maker():
    spec = importlib.util.spec_from_file_location("make_archives", DATA / "make_archives.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


maker = _load_maker()  # the same inputs, reads and schema dump the reference files were made with
EXPECTED = json.loads((DATA / "expected.json").read_text(encoding="utf-8"))
SCHEMA = (DATA / "schema.sql").read_text(encoding="utf-8")
#: The schema of version 4: version 3's and the tables of migration 4 (investigation records, laboratories),
#: recorded from a new archive when migration 4 was released (README there).
SCHEMA_V4 = (DATA / "schema-v4.sql").read_text(encoding="utf-8")
#: The schema this roundscore writes: version 4's and the qualitative table of migration 5, recorded the same way
#: when migration 5 was released.
SCHEMA_NOW = (DATA / "schema-v5.sql").read_text(encoding="utf-8")


def released_versions() -> list[tuple[int, str]]:
    """The versions a migrated or new archive logs: the reference file's three, then the later migrations."""
    from roundscore.history.sqlite_schema import MIGRATIONS

    return versions(DATA / "archive-v3.sqlite") + [(m.version, m.description) for m in MIGRATIONS[3:]]


def copy(name: str, folder: Path) -> Path:
    folder.mkdir(exist_ok=True)
    return Path(shutil.copy(DATA / name, folder / name))


def versions(db: Path) -> list[tuple[int, str]]:
    with sqlite3.connect(db) as conn:
        got = conn.execute("SELECT version, description FROM schema_version ORDER BY version").fetchall()
    conn.close()
    return got


def test_the_reference_files_are_what_the_readme_says():
    assert maker.schema(DATA / "archive-v3.sqlite") == SCHEMA
    assert EXPECTED["statuses"] == ["added", "replaced", "added", "added"]
    assert [v for v, _ in versions(DATA / "archive-v3.sqlite")] == [1, 2, 3]


def test_an_archive_written_before_reads_the_same_and_is_not_changed(tmp_path):
    db = copy("archive-v3.sqlite", tmp_path / "old")
    before = db.read_bytes()
    got = json.loads(json.dumps(maker.reads(db), ensure_ascii=False))  # tuples as lists, as in the file
    assert got == EXPECTED["reads"]
    assert db.read_bytes() == before
    assert sorted(p.name for p in db.parent.iterdir()) == [db.name]  # no -wal/-shm left


def test_an_archive_written_before_accepts_the_same_stores(tmp_path):
    db = copy("archive-v3.sqlite", tmp_path / "old")
    settings = json.loads((maker.INPUTS / "settings.json").read_text(encoding="utf-8"))
    aq = dict(scheme="AQ", round_id="2024-1", round_date="2024-03-04", title="Invented water round",
              settings=settings["AQ"], statistics=maker.read("aq-2024-1-statistics.csv"),
              precision=maker.read("aq-2024-1-precision.csv"))
    # the stored content hashes as it did: the same again is unchanged, the old content a conflict
    assert archive.store_round(db, scores=maker.read("aq-2024-1-scores-corrected.csv"), **aq).status \
        == "unchanged"
    with pytest.raises(ArchiveConflict, match="different content"):
        archive.store_round(db, scores=maker.read("aq-2024-1-scores.csv"), **aq)
    assert archive.store_round(db, scheme="SOIL", round_id="2024-2", round_date="2024-06-10",
                               title="Invented soil round", settings=settings["SOIL"],
                               statistics=maker.read("soil-2024-2-statistics.csv"),
                               scores=maker.read("soil-2024-2-scores.csv")).status == "unchanged"
    [lab] = archive.add_files(db, [maker.INPUTS / "lab-L02-aq-2023-4-scores.csv"])
    assert lab.status == "unchanged"
    # a new round goes in beside the old ones, and the old ones read as before
    new = maker.scores(scheme="AQ", round_id="2025-1", date="2025-02-01", labs=("N01",),
                       measurands=("lead",))
    assert archive.store_round(db, scheme="AQ", round_id="2025-1", round_date="2025-02-01",
                               title="", settings={}, statistics=maker.read("aq-2024-1-statistics.csv"),
                               scores=new).status == "added"
    got = json.loads(json.dumps(maker.reads(db), ensure_ascii=False))
    assert got.pop("archived_labs") == sorted(EXPECTED["reads"]["archived_labs"] + ["N01"])
    assert got == {k: v for k, v in EXPECTED["reads"].items() if k != "archived_labs"}
    assert maker.schema(db) == SCHEMA_NOW  # migrated by the first write
    with sqlite3.connect(db) as conn:
        assert conn.execute("SELECT COUNT(*) FROM audit").fetchone()[0] == 11  # nothing replaced
    conn.close()


def test_a_new_archive_has_the_released_schema(tmp_path):
    db = tmp_path / "new.sqlite"
    assert maker.store_everything(db) == EXPECTED["statuses"]
    assert maker.schema(db) == SCHEMA_NOW  # every CREATE text, index, user version, application id
    assert versions(db) == released_versions()
    assert json.loads(json.dumps(maker.reads(db), ensure_ascii=False)) == EXPECTED["reads"]


@pytest.mark.parametrize("version", [1, 2])
def test_archives_of_older_versions_read_as_is_then_migrate_to_the_released_schema(tmp_path, version):
    db = copy(f"archive-v{version}.sqlite", tmp_path / "old")
    before = db.read_bytes()
    hist = archive.lab_history(db, lab="L01")
    assert hist["score_value"].tolist() == [2.5] and hist["round"].tolist() == ["R0"]
    assert db.read_bytes() == before  # reading never migrates
    statuses = maker.store_everything(db)  # the first write migrates
    assert statuses == EXPECTED["statuses"]
    assert maker.schema(db) == SCHEMA_NOW
    assert versions(db) == released_versions()
    old = archive.lab_history(db, lab="L01", scheme="AQ", measurand="lead")
    assert old["round"].tolist() == ["R0", "2024-1"]
    with sqlite3.connect(db) as conn:
        origin = conn.execute("SELECT origin FROM rounds WHERE round_id = 'R0'").fetchone()[0]
    conn.close()
    assert origin == "lab"  # migration 2's default for a round stored before it


# --------------------------------------------------------------------------- the frozen migrations

def master(db: Path) -> dict[str, str]:
    with sqlite3.connect(db) as conn:
        got = dict(conn.execute("SELECT name, sql FROM sqlite_master WHERE sql IS NOT NULL"))
    conn.close()
    return got


def test_the_released_migrations_are_the_text_the_files_were_made_with():
    from roundscore.history.db import APPLICATION_ID
    from roundscore.history.sqlite_schema import MIGRATIONS, SCHEMA_VERSION

    assert [m.version for m in MIGRATIONS] == list(range(1, SCHEMA_VERSION + 1))
    released = versions(DATA / "archive-v3.sqlite")
    assert [(m.version, m.description) for m in MIGRATIONS[:3]] == released
    v1, v2 = master(DATA / "archive-v1.sqlite"), master(DATA / "archive-v2.sqlite")
    rounds, scores = MIGRATIONS[0].statements
    assert (v1["rounds"], v1["scores"]) == (rounds, scores)  # SQLite keeps each CREATE as written
    alter, round_tables, audit, index = MIGRATIONS[1].statements
    assert (v2["round_tables"], v2["audit"], v2["scores_by_lab"]) == (round_tables, audit, index)
    assert alter == "ALTER TABLE rounds ADD COLUMN origin TEXT NOT NULL DEFAULT 'lab'"
    assert MIGRATIONS[2].statements == (f"PRAGMA application_id = {APPLICATION_ID:d}",)
    # migration 4 adds two tables and changes nothing of version 3's schema
    v4 = [line for line in SCHEMA_V4.splitlines() if line not in SCHEMA.splitlines()]
    assert v4[0] == "-- PRAGMA user_version = 4"
    investigations, laboratories = MIGRATIONS[3].statements
    assert f"{investigations};" in SCHEMA_V4 and f"{laboratories};" in SCHEMA_V4
    assert all(line in SCHEMA_V4.splitlines() for line in SCHEMA.splitlines()[1:])
    # migration 5 adds the qualitative table and its index and changes nothing of version 4's schema
    now = [line for line in SCHEMA_NOW.splitlines() if line not in SCHEMA_V4.splitlines()]
    assert now[0] == "-- PRAGMA user_version = 5"
    qualitative, index = MIGRATIONS[4].statements
    assert f"{qualitative};" in SCHEMA_NOW and f"{index};" in SCHEMA_NOW
    assert all(line in SCHEMA_NOW.splitlines() for line in SCHEMA_V4.splitlines()[1:])


def test_the_migrations_are_literal_text_built_from_nothing_live():
    import ast

    from roundscore.history import sqlite_schema

    tree = ast.parse(Path(sqlite_schema.__file__).read_text(encoding="utf-8"))
    imported = {alias.name for node in ast.walk(tree) if isinstance(node, ast.Import)
                for alias in node.names}
    imported |= {node.module for node in ast.walk(tree) if isinstance(node, ast.ImportFrom)}
    assert imported <= {"__future__", "sqlite3", "dataclasses"}  # no column list of the package
    assert not any(isinstance(node, ast.JoinedStr) for node in ast.walk(tree))  # no f-string


def test_the_scores_table_holds_the_row_contract(tmp_path):
    from roundscore.history.sheets import ROW_FIELDS

    db = tmp_path / "new.sqlite"
    maker.store_everything(db)
    with sqlite3.connect(db) as conn:
        columns = [r[1] for r in conn.execute("PRAGMA table_info(scores)")]
    conn.close()
    assert columns == ["scheme", "round_id", *ROW_FIELDS], (
        "the score row fields and the archive's scores table differ: a new field needs a new "
        "migration appended to roundscore.history.sqlite_schema.MIGRATIONS")
