"""The archive store interface and the backend registry (roundscore.history.interface, .backends).

The tests taking ``archive_at`` run over every implementation (tests/archive_backends.py); the
registry tests are about which implementation a location reaches.  All data are invented (a water
scheme "AQ", made-up lab codes); the expected values are the inputs themselves and the contract
written in roundscore.history.interface.
"""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import pytest

from roundscore.cli import main
from roundscore.errors import ArchiveError
from roundscore.history import backends, store as archive
from roundscore.history.interface import ArchiveStore, AuditEntry, HistoryQuery, RoundRecord
from roundscore.history.sheets import ROW_FIELDS
from roundscore.history.sqlite import SqliteArchive

from . import archive_backends, memory_archive
from .archive_backends import exists, totals
from .test_archive import scores_frame, store

archive_at = archive_backends.archive_at  # the fixture: every test taking it runs over every backend


def rows_of(frame, lab=None) -> list[tuple]:
    """Score rows as the interface carries them (ROW_FIELDS order, blanks as None)."""
    part = frame if lab is None else frame[frame["lab"] == lab]
    return [tuple(None if v != v or v == "" else v for v in rec) for rec in
            part.loc[:, list(ROW_FIELDS)].astype(object).itertuples(index=False)]


def record(round_id="R1", date="2024-01-10", **kw) -> RoundRecord:
    return RoundRecord(scheme="AQ", round_id=round_id, round_date=date, title="Invented",
                       stored_at="2024-01-11T08:00:00+00:00", **kw)


# --------------------------------------------------------------------------- the contract, every backend

def test_a_new_archive_is_created_by_the_first_write_at_the_latest_version(archive_at):
    where = archive_at()
    target = backends.open_store(where)
    assert isinstance(target, ArchiveStore) and not target.exists()
    with pytest.raises(ArchiveError, match="no archive at"):  # reading creates nothing
        target.check()
    assert not target.exists()
    store(where, scores_frame())
    assert target.exists()
    target.check()
    with target.reading() as reader:
        assert reader.version() == target.latest_version == archive.SCHEMA_VERSION
        [rnd] = reader.rounds()
        assert (rnd.scheme, rnd.round_id, rnd.round_date, rnd.origin) == \
            ("AQ", "2024-1", "2024-03-04", "coordinator")
        assert json.loads(rnd.settings) == {"sigma_pt": "fixed"}
        assert reader.labs() == ["L01", "L02", "L03"]


def test_values_come_back_as_they_went_in(archive_at):
    frame = scores_frame(labs=("L01",), note="Probe – ok")
    frame.loc[0, "result"] = 10.1 + 2.0 ** -40  # the last bits of a float
    frame = frame.astype({"result": object})
    frame.loc[1, "result"] = "<0.1"  # a censored result's text
    rows = rows_of(frame)
    with backends.open_store(archive_at()).writing() as tx:
        tx.add_round(record())
        tx.add_scores("AQ", "R1", rows)
        tx.add_tables("AQ", "R1", [("statistics", 1, '{"n":2}'), ("precision", 0, "{}"),
                                   ("statistics", 0, '{"n":1}')])
    with backends.open_store(archive_at()).reading() as reader:
        assert sorted(reader.score_rows("AQ", "R1")) == sorted(rows)
        assert reader.score_rows("AQ", "R1", "L02") == []
        assert reader.round_tables("AQ", "R1") == [("precision", "{}"), ("statistics", '{"n":1}'),
                                                    ("statistics", '{"n":2}')]  # kind, position
        assert reader.find_round("AQ", "R1") == record()
        assert reader.find_round("AQ", "R2") is None


def test_a_write_that_fails_keeps_nothing_of_it(archive_at):
    where = archive_at()
    store(where, scores_frame())
    before = archive.lab_history(where, lab="L01")
    with pytest.raises(RuntimeError, match="stop"), backends.open_store(where).writing() as tx:
        tx.remove_round("AQ", "2024-1")
        tx.add_round(record())
        tx.add_scores("AQ", "R1", rows_of(scores_frame(), "L01"))
        tx.add_audit([AuditEntry(replaced_at="x", reason="r", scheme="AQ", round_id="R1",
                                 lab=None, kind="round", row="{}")])
        assert tx.find_round("AQ", "R1") == record()  # a write's reads see its writes
        assert tx.find_round("AQ", "2024-1") is None
        raise RuntimeError("stop")
    assert totals(where) == (1, 6, 0)
    assert archive.lab_history(where, lab="L01").equals(before)


def test_history_rows_select_and_order_as_documented(archive_at):
    where = archive_at()
    for round_id, date in (("R2", "2024-05-01"), ("R1", "2024-01-10"), ("R0", "2024-05-01")):
        store(where, scores_frame(round_id=round_id, date=date, labs=("L02", "L01")))
    with backends.open_store(where).reading() as reader:
        got = reader.history_rows(HistoryQuery(labs=("L01", "L02")))
        assert [(r[1], r[4], r[5]) for r in got] == [  # date, round, scheme, lab, measurand
            (rid, lab, m) for rid in ("R1", "R0", "R2") for lab in ("L01", "L02")
            for m in ("lead", "nitrate")]
        assert len(got[0]) == 4 + len(ROW_FIELDS)
        some = reader.history_rows(HistoryQuery(labs=("L02",), measurand="lead", since="2024-05-01",
                                                before="2024-06-01", exclude_round="R2"))
        assert [(r[1], r[4], r[5]) for r in some] == [("R0", "L02", "lead")]
        assert reader.history_rows(HistoryQuery(labs=("L02",), scheme="SOIL")) == []


def test_an_archive_without_rounds_reads_as_empty(archive_at):
    where = archive_at()
    with backends.open_store(where).writing():
        pass  # opened to write, nothing stored: the archive exists and is empty of rounds
    assert exists(where)
    assert archive.archived_labs(where) == []
    assert archive.lab_history(where, lab="L01").empty


def test_the_history_commands_work_on_any_backend(archive_at, tmp_path):
    where, csv = archive_at("lab"), tmp_path / "scores.csv"
    scores_frame(labs=("L01",)).to_csv(csv, index=False)

    def run(*argv):
        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = main([str(a) for a in (*argv, "--archive", where)])
        return code, out.getvalue() + err.getvalue()

    with backends.open_store(where).writing():
        pass  # an archive without rounds
    code, text = run("history", "check")
    assert code == 2 and f"{backends.open_store(where).name}: the archive holds no scores" in text
    code, text = run("history", "add", csv)
    assert code == 0 and "added: lab 'L01', round '2024-1' of scheme 'AQ': added 2 rows" in text
    code, text = run("history", "show", "--lab", "L01")
    assert code == 0 and "History of lab L01: 1 rounds, 2 measurands" in text
    code, text = run("history", "check")
    assert code == 0 and "0 of 2 series" in text
    code, text = run("history", "show", "--lab", "L99")
    assert code == 2 and "labs in the archive: L01" in text


# --------------------------------------------------------------------------- the registry

def test_a_plain_path_is_an_sqlite_file(tmp_path, monkeypatch):
    monkeypatch.setenv("HOME", str(tmp_path))
    monkeypatch.delenv(archive.ARCHIVE_ENV, raising=False)
    for location, file in ((tmp_path / "a.sqlite", tmp_path / "a.sqlite"),
                           (str(tmp_path / "b.sqlite"), tmp_path / "b.sqlite"),
                           ("~/c.sqlite", tmp_path / "c.sqlite"),
                           ("C:/data/d.sqlite", Path("C:/data/d.sqlite")),  # a drive, not a scheme
                           # an unregistered NAME:// stays a path, as before there were backends
                           ("unknown://host/e", Path("unknown://host/e"))):
        got = backends.open_store(location)
        assert isinstance(got, SqliteArchive) and got.file == file and got.name == str(file)
    assert backends.open_store().file == archive.archive_path()  # the user data folder's
    monkeypatch.setenv(archive.ARCHIVE_ENV, str(tmp_path / "env.sqlite"))
    assert backends.open_store(None).file == tmp_path / "env.sqlite"
    assert backends.open_store("").file == tmp_path / "env.sqlite"


def test_a_registered_scheme_reaches_its_backend(monkeypatch):
    monkeypatch.setitem(backends.BACKENDS, "memory", memory_archive.MemoryArchive)
    for location in ("memory://one", "MEMORY://one"):
        got = backends.open_store(location)
        assert isinstance(got, memory_archive.MemoryArchive) and got.name == location
    monkeypatch.setenv(archive.ARCHIVE_ENV, "memory://from-env")
    got = backends.open_store()
    assert isinstance(got, memory_archive.MemoryArchive) and got.name == "memory://from-env"
    monkeypatch.delitem(backends.BACKENDS, "memory")
    assert isinstance(backends.open_store("memory://one"), SqliteArchive)  # no longer registered
    assert list(backends.BACKENDS) == [""]  # today: the SQLite file only
