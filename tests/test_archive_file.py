"""The archive file (roundscore.history.db): recognised before use, read without writing, damage
and locks reported by name, ``~`` expanded, ``[round] archive`` allowed outside the round folder.

SQLite only: every test here is about the SQLite file (its header, its bytes, its locks, its
companion files); the store's behaviour over every implementation is in tests/test_archive.py.

All data are invented (a water scheme "AQ" with made-up lab codes).  Expected behaviour comes
from SQLite's documentation (cited beside the checks: "Database File Format", "Pragma
statements", "Write-Ahead Logging", "Result and Error Codes") and the tool's own contract.
Every refusal is checked to leave the files as they were (hashes of the whole folder) and to
name the file.
"""

from __future__ import annotations

import hashlib
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from roundscore.history import store as archive, db as archive_db
from roundscore.history.sqlite import SqliteArchive
from roundscore.history.sqlite_schema import MIGRATIONS
from roundscore.history.sheets import read_lab_file
from roundscore.errors import ArchiveConflict, ArchiveError, RoundFileError
from roundscore.intake.roundfile import load_round

from .test_archive import count, scores_frame, store
from .test_history_roundtrip import run_cli, small_round


def snapshot(folder: Path) -> dict[str, str]:
    """Every file under ``folder`` by name, with the SHA-256 of its bytes."""
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def rows(db: Path) -> tuple[int, int, int]:
    return (count(db, "SELECT COUNT(*) FROM rounds"), count(db, "SELECT COUNT(*) FROM scores"),
            count(db, "SELECT COUNT(*) FROM audit"))


def lab_csv(tmp_path: Path, **kw) -> Path:
    path = tmp_path / "scores.csv"
    scores_frame(**{"labs": ("L01",), **kw}).to_csv(path, index=False)
    return path


def every_command(db: Path, tmp_path: Path) -> list[tuple[str, int, str]]:
    """(command, exit code, stderr + stdout) of the reading and writing commands on ``db``."""
    csv = lab_csv(tmp_path)
    out = []
    for argv in (["history", "show", "--lab", "L01"], ["history", "check"],
                 ["history", "add", str(csv)]):
        code, text, err = run_cli(*argv, "--archive", db)
        out.append((argv[1], code, err + text))
    return out


# --------------------------------------------------------------------------- not ours

def _other_program(path: Path, kind: str) -> Path:
    with sqlite3.connect(path) as conn:
        if kind == "app_id":  # another program's id (SQLite "Database File Format" 1.3.9)
            conn.execute("PRAGMA application_id = 1196444487")  # "GPKG", from memory
        if kind == "half_ours":  # a user_version and a 'scores' table, but not our tables
            conn.execute("PRAGMA user_version = 2")
            conn.execute("CREATE TABLE scores (lab TEXT, z REAL)")
        conn.execute("CREATE TABLE notes (id INTEGER PRIMARY KEY, body TEXT)")
        conn.execute("INSERT INTO notes (body) VALUES ('keep me')")
    conn.close()
    return path


@pytest.mark.parametrize("kind", ["plain", "app_id", "half_ours"])
def test_another_programs_database_is_refused_and_left_alone(tmp_path, kind):
    folder = tmp_path / "data"
    folder.mkdir()
    db = _other_program(folder / "notes.sqlite", kind)
    before = snapshot(folder)
    for command, code, text in every_command(db, tmp_path):
        assert code == 2, (command, text)
        assert f"{db}: not a roundscore archive" in text and "did not change it" in text
        assert "Traceback" not in text
    with pytest.raises(ArchiveError, match="not a roundscore archive"):
        archive.round_history(db, scheme="AQ", labs=["L01"], round_id="R", round_date="2025-01-01",
                              last=8)
    with pytest.raises(ArchiveError, match="not a roundscore archive"):
        store(db, scores_frame())
    assert snapshot(folder) == before  # not a byte changed, no companion file left
    tables = [r[0] for r in sqlite3.connect(db).execute("SELECT name FROM sqlite_master")]
    assert "rounds" not in tables and "schema_version" not in tables


def test_empty_files_are_new_archives_and_a_missing_one_is_not_created_by_reading(tmp_path):
    missing = tmp_path / "absent.sqlite"
    code, _, err = run_cli("history", "show", "--lab", "L01", "--archive", missing)
    assert code == 2 and f"no archive at {missing}" in err
    assert archive.round_history(missing, scheme="AQ", labs=["L01"], round_id="R",
                                 round_date="2025-01-01", last=8) == {}
    assert not missing.exists()
    empty = tmp_path / "touched.sqlite"
    empty.touch()  # an empty file, as `touch` or a file dialog makes it
    code, _, err = run_cli("history", "show", "--lab", "L01", "--archive", empty)
    assert code == 2 and "labs in the archive: none" in err and empty.stat().st_size == 0
    assert archive.add_files(empty, [lab_csv(tmp_path)])[0].status == "added"
    assert count(empty, "PRAGMA application_id") == archive.APPLICATION_ID == 0x52534841
    assert rows(empty) == (1, 2, 0)


# --------------------------------------------------------------------------- reading never writes

def test_reading_commands_change_nothing(tmp_path):
    folder = tmp_path / "data"
    folder.mkdir()
    db = folder / "a.sqlite"
    store(db, scores_frame())
    before = snapshot(folder)
    assert archive.lab_history(db, lab="L01")["z"].notna().all()
    assert archive.archived_labs(db) == ["L01", "L02", "L03"]
    assert set(archive.round_history(db, scheme="AQ", labs=["L01", "L02"], round_id="R9",
                                     round_date="2030-01-01", last=8)) == {"L01", "L02"}
    for argv in (["history", "show", "--lab", "L02"], ["history", "check"]):
        code, _text, err = run_cli(*argv, "--archive", db)
        assert code in (0, 1) and "Traceback" not in err, err
    assert snapshot(folder) == before  # the archive's bytes, and no -wal/-shm left behind


def test_an_archive_written_before_the_application_id_is_read_as_is_and_marked_on_write(tmp_path):
    db = tmp_path / "old.sqlite"
    [item] = read_lab_file(lab_csv(tmp_path), None)
    with SqliteArchive(db, migrations=MIGRATIONS[:2]).writing() as tx:  # schema version 2,
        archive._store_lab_rows(tx, item, replace=False, file="scores.csv", reason="")  # as released
    assert (count(db, "PRAGMA user_version"), count(db, "PRAGMA application_id")) == (2, 0)
    before = db.read_bytes()
    assert len(archive.lab_history(db, lab="L01")) == 2  # recognised by its tables, read as is
    code, _text, err = run_cli("history", "show", "--lab", "L01", "--archive", db)
    assert code == 0, err
    assert db.read_bytes() == before
    store(db, scores_frame(round_id="R2", date="2024-09-01"))  # the first write migrates
    assert (count(db, "PRAGMA user_version"), count(db, "PRAGMA application_id")) == \
        (archive.SCHEMA_VERSION, archive.APPLICATION_ID)
    assert rows(db) == (2, 8, 0)  # the old round is still there, beside the new one
    assert count(db, "SELECT description FROM schema_version WHERE version = 3") == \
        "Mark the file as a roundscore archive (PRAGMA application_id)."


# --------------------------------------------------------------------------- damage

def _damaged(good: bytes, how: str) -> bytes:
    mid = len(good) // 2
    if how == "truncated":
        return good[:mid]
    if how == "page_overwritten":  # one page of the middle of the file (4096-byte pages)
        start = (mid // 4096) * 4096
        return good[:start] + np.random.default_rng(7).bytes(4096) + good[start + 4096:]
    if how == "bytes_zeroed":
        return good[:mid] + b"\x00" * 64 + good[mid + 64:]
    if how == "text_not_utf8":  # a stored note no longer valid UTF-8; the structure intact
        at = good.index(b"NOTE-0123")
        return good[:at] + b"\xff\xfe\xff\xfe\xff" + good[at + 5:]
    if how == "random":
        return np.random.default_rng(11).bytes(len(good))
    if how == "text_file":
        return b"lab,measurand,z\nL01,lead,0.5\n" * 200
    raise AssertionError(how)


@pytest.fixture(scope="module")
def good_archive(tmp_path_factory) -> bytes:
    """A roundscore archive of several pages (300 labs x 2 measurands), checkpointed."""
    db = tmp_path_factory.mktemp("good") / "a.sqlite"
    labs = tuple(f"L{i:03d}" for i in range(300))
    frame = scores_frame(labs=labs, note="")
    frame.loc[frame["lab"] == "L001", "note"] = "NOTE-0123"
    store(db, frame)
    assert not Path(f"{db}-wal").exists()  # the last connection closed: all in the file
    return db.read_bytes()


@pytest.mark.parametrize("how, said", [
    ("truncated", "the archive is damaged"),
    ("page_overwritten", "the archive is damaged"),
    ("bytes_zeroed", "the archive is damaged"),
    ("text_not_utf8", "the archive is damaged (a text value"),
    ("random", "not a roundscore archive: not an SQLite database"),
    ("text_file", "not a roundscore archive: not an SQLite database"),
])
def test_damaged_archives_are_reported_and_never_written(tmp_path, good_archive, how, said):
    folder = tmp_path / "data"
    folder.mkdir()
    db = folder / "a.sqlite"
    db.write_bytes(_damaged(good_archive, how))
    before = snapshot(folder)
    code, text, err = run_cli("history", "show", "--lab", "L001", "--archive", db)
    assert code == 2 and f"{db}: {said}" in err and "Traceback" not in err, err
    assert text == ""  # nothing shown: no partial table
    code, text, err = run_cli("history", "add", lab_csv(tmp_path, labs=("L001",)), "--archive", db)
    assert code == 2 and f"{db}: {said}" in text and "Traceback" not in text + err
    with pytest.raises(ArchiveError, match=r"damaged|not an SQLite database") as got:
        store(db, scores_frame(round_id="R2"))
    assert not isinstance(got.value, ArchiveConflict)
    assert snapshot(folder) == before


# --------------------------------------------------------------------------- locks

@pytest.fixture
def held(tmp_path, monkeypatch):
    """An archive whose write lock another connection holds (BEGIN IMMEDIATE), a 0.3 s wait."""
    db = tmp_path / "a.sqlite"
    store(db, scores_frame())
    monkeypatch.setenv(archive_db.TIMEOUT_ENV, "0.3")
    other = sqlite3.connect(db, isolation_level=None)
    other.execute("BEGIN IMMEDIATE")
    yield db
    other.execute("ROLLBACK")
    other.close()


def test_a_held_lock_is_waited_for_and_reported_as_busy(held, tmp_path):
    before = rows(held)
    with pytest.raises(ArchiveError) as err:
        store(held, scores_frame(round_id="R2"))
    text = str(err.value)
    assert not isinstance(err.value, ArchiveConflict)
    assert f"{held}: the archive is busy" in text and "waited 0.3 s" in text
    assert archive_db.TIMEOUT_ENV in text and "replace" not in text
    code, out, _ = run_cli("history", "add", lab_csv(tmp_path, round_id="R3"), "--archive", held)
    assert code == 2 and "the archive is busy" in out and "--replace" not in out
    assert len(archive.lab_history(held, lab="L01")) == 2  # reading is not blocked (WAL)
    assert rows(held) == before


def test_score_with_a_busy_archive_says_busy_and_never_advises_replacing(held, tmp_path):
    folder = small_round(tmp_path / "r", round_id="AQ-1", date="2025-01-10")
    before = rows(held)
    code, _text, err = run_cli("score", folder, "--archive", held)
    assert code == 2 and "Traceback" not in err
    assert "the outputs were written to" in err and "the archive is busy" in err
    assert "replace" not in err.lower()
    assert (folder / "out" / "scores.csv").is_file()
    assert rows(held) == before


def test_the_wait_is_documented_and_checked(monkeypatch):
    monkeypatch.delenv(archive_db.TIMEOUT_ENV, raising=False)
    assert archive_db.busy_timeout() == archive_db.BUSY_TIMEOUT_S == 60.0
    monkeypatch.setenv(archive_db.TIMEOUT_ENV, "2.5")
    assert archive_db.busy_timeout() == 2.5
    for bad in ("soon", "0", "-1", "1e9", "nan"):
        monkeypatch.setenv(archive_db.TIMEOUT_ENV, bad)
        with pytest.raises(ArchiveError, match=archive_db.TIMEOUT_ENV):
            archive_db.busy_timeout()


# --------------------------------------------------------------------------- where the file is

def test_tilde_is_expanded_in_the_environment_option_and_round_file(tmp_path, monkeypatch):
    home = tmp_path / "home"
    home.mkdir()
    monkeypatch.setenv("HOME", str(home))
    monkeypatch.setenv(archive.ARCHIVE_ENV, "~/env.sqlite")
    assert archive.archive_path() == home / "env.sqlite"
    assert archive.archive_path("~/opt.sqlite") == home / "opt.sqlite"
    code, _, err = run_cli("history", "add", lab_csv(tmp_path))
    assert code == 0, err
    assert rows(home / "env.sqlite") == (1, 2, 0) and not (tmp_path / "~").exists()
    code, _, err = run_cli("history", "add", lab_csv(tmp_path), "--archive", "~/opt.sqlite")
    assert code == 0 and (home / "opt.sqlite").is_file()
    folder = small_round(tmp_path / "r", round_id="AQ-1", date="2025-01-10",
                         extra='archive = "~/provider/history.sqlite"')
    assert load_round(folder).archive == home / "provider" / "history.sqlite"


@pytest.mark.parametrize("value, expected", [
    ("../shared/history.sqlite", lambda folder: folder / ".." / "shared" / "history.sqlite"),
    ("ABSOLUTE", lambda folder: folder.parent / "elsewhere" / "history.sqlite"),
    ("history.sqlite", lambda folder: folder / "history.sqlite"),
])
def test_round_archive_may_lie_outside_the_round_folder(tmp_path, value, expected):
    folder = tmp_path / "r"
    if value == "ABSOLUTE":
        value = str(tmp_path / "elsewhere" / "history.sqlite")
    small_round(folder, round_id="AQ-1", date="2025-01-10", extra=f'archive = "{value}"')
    assert load_round(folder).archive == expected(folder)
    code, text, err = run_cli("score", folder)
    assert code == 0 and "Archive: added" in text, err
    assert rows(expected(folder)) == (1, 6, 0)


def test_other_round_file_paths_stay_inside_the_round_folder(tmp_path):
    folder = small_round(tmp_path / "r", round_id="AQ-1", date="2025-01-10",
                         extra='participants = "../people.csv"\narchive = "../h.sqlite"')
    (tmp_path / "people.csv").write_text("lab,name\nW1,Somewhere\n", encoding="utf-8")
    with pytest.raises(RoundFileError, match=r"round.participants.*a path inside the round folder"):
        load_round(folder)


def test_an_archive_in_a_read_only_folder_can_still_be_read(tmp_path, monkeypatch):
    # SQLite cannot open a WAL file mode=ro where it may not create FILE-shm ("Write-Ahead
    # Logging", 8); with no FILE-wal nobody can be writing, so it is read as immutable.  (Tests
    # may run as root, for whom folder permissions do not apply, so the refusal is simulated.)
    db = tmp_path / "a.sqlite"
    store(db, scores_frame())
    real = archive_db._read_only
    calls = []

    def no_shm(file, timeout, *, immutable=False):
        calls.append(immutable)
        if not immutable:
            exc = sqlite3.OperationalError("attempt to write a readonly database")
            exc.sqlite_errorcode = 8  # SQLITE_READONLY ("Result and Error Codes")
            raise exc
        return real(file, timeout, immutable=True)

    monkeypatch.setattr(archive_db, "_read_only", no_shm)
    before = snapshot(tmp_path)
    assert archive.lab_history(db, lab="L02")["lab"].tolist() == ["L02", "L02"]
    assert calls == [False, True] and snapshot(tmp_path) == before
