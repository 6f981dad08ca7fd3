"""Investigation records, findings and laboratory names (roundscore.history.investigations) and the
``history note``, ``history alias`` and ``history check --open`` commands.

The tests taking ``archive_at`` run over every archive implementation (tests/archive_backends.py) and look
only through the store interface. The data are invented: the scores tables of tests/test_archive.py and the
small water and soil rounds of tests/history_rounds.py, whose planted scores say which findings exist.
Expected findings follow from the rules' published definitions (ISO 13528:2022 action signal |z| ≥ 3,
warning signal |z| > 2; Nelson 1984 test 2; Page 1954 CUSUM with k = 0.5, h = 4), worked out beside the series
in tests/history_rounds.py; the rest is the tool's own contract.
"""

from __future__ import annotations

import json
import shutil

import pytest

from roundscore.errors import InputError
from roundscore.history import investigations as records

from . import archive_backends, history_rounds
from .archive_backends import audit
from .history_rounds import run_cli
from .test_archive import scores_frame, store

archive_at = archive_backends.archive_at  # the fixture: every test taking it runs over every backend

#: scores_frame's z = -1 + 0.7 i + 0.3 j + shift (lab i, measurand j: nitrate 0, lead 1); with shift 2.5, L03's
#: lead is 3.2 (action signal), its nitrate 2.9 and L02's nitrate 2.2 (warning signals), L01's nitrate 1.5.
SHIFT = 2.5


def note(where, **kw):
    args = dict(lab="L03", round_id="2024-1", measurand="lead", status="open", by="A. Lindqvist", date="2024-03-10")
    return records.record_investigation(where, **{**args, **kw})


def test_a_record_is_stored_once_and_a_changed_one_keeps_the_old_in_the_audit(archive_at):
    where = archive_at()
    store(where, scores_frame(shift=SHIFT))
    assert note(where).status == "added"
    assert note(where).status == "unchanged"  # the same content again: nothing written
    assert audit(where) == []
    closed = note(where, status="closed", cause="Digestion incomplete", action="Digestion time doubled",
                  date="2024-04-02")
    assert closed.status == "changed"
    [rec] = records.investigations(where)
    assert (rec.status, rec.cause, rec.action, rec.by, rec.recorded_on) == \
        ("closed", "Digestion incomplete", "Digestion time doubled", "A. Lindqvist", "2024-04-02")
    [entry] = audit(where)
    assert (entry.kind, entry.lab, entry.round_id) == ("investigation", "L03", "2024-1")
    old = json.loads(entry.row)
    assert (old["status"], old["recorded_on"], old["cause"]) == ("open", "2024-03-10", "")
    assert records.investigations(where, ["L01"]) == []


@pytest.mark.parametrize("kw, message", [
    (dict(measurand="nitrate", lab="L01"), "acceptable and no trend rule fired"),  # z = 1.5
    (dict(round_id="2099-9"), "no archived scores in round '2099-9'"),
    (dict(measurand="copper"), "no score for measurand 'copper'"),
    (dict(lab="Z99"), "no archived scores for lab 'Z99'"),
    (dict(status="closed"), "a closed record needs the cause found"),
    (dict(status="pending"), "allowed: 'open', 'closed'"),
    (dict(date="2024-02-30"), "not a date YYYY-MM-DD"),
    (dict(date="2024-03-01"), "before round '2024-1'"),  # the round is dated 2024-03-04
    (dict(date="2999-01-01"), "in the future"),
    (dict(by="  "), "say who recorded"),
    (dict(cause="x" * 2001), "2001 characters long; at most 2000"),
])
def test_refusals_name_what_is_wrong_and_store_nothing(archive_at, kw, message):
    where = archive_at()
    store(where, scores_frame(shift=SHIFT))
    with pytest.raises(InputError, match=message):
        note(where, **kw)
    assert records.investigations(where) == [] and audit(where) == []


def test_a_round_id_in_two_schemes_needs_the_scheme(archive_at):
    where = archive_at()
    store(where, scores_frame(shift=SHIFT))
    store(where, scores_frame(shift=SHIFT, scheme="SOIL"))
    with pytest.raises(InputError, match="archived in schemes 'AQ', 'SOIL'; give --scheme"):
        note(where)
    assert note(where, scheme="SOIL").status == "added"
    assert [r.scheme for r in records.investigations(where)] == ["SOIL"]


def test_laboratory_names_group_codes_and_a_change_is_audited(archive_at):
    where = archive_at()
    store(where, scores_frame())
    store(where, scores_frame(scheme="SOIL", labs=("S9", "S8")))
    assert records.name_laboratory(where, scheme="AQ", lab="L02", name="Harbour Lab").status == "added"
    assert records.name_laboratory(where, scheme="SOIL", lab="S9", name="Harbour Lab").status == "added"
    assert records.name_laboratory(where, scheme="SOIL", lab="S9", name="Harbour Lab").status == "unchanged"
    for key in ("L02", "S9", "Harbour Lab"):  # a code or the name
        assert records.laboratory_codes(where, key).codes == (("AQ", "L02"), ("SOIL", "S9"))
    identity, frame = records.lab_frame(where, "S9")
    assert identity.name == "Harbour Lab" and sorted(set(frame["lab"])) == ["L02", "S9"]
    assert records.name_laboratory(where, scheme="AQ", lab="L02", name="Harbour Laboratory").status == "changed"
    [entry] = audit(where)
    assert entry.kind == "laboratory" and json.loads(entry.row)["name"] == "Harbour Lab"
    with pytest.raises(InputError, match="no archived scores for lab 'L09' in scheme 'AQ'"):
        records.name_laboratory(where, scheme="AQ", lab="L09", name="Nobody")
    identity, _ = records.lab_frame(where, "L01")  # no name given: the code itself
    assert identity.name == "" and identity.codes == (("AQ", "L01"),)


# --------------------------------------------------------------------------- the commands, on small rounds

@pytest.fixture(scope="module")
def small(tmp_path_factory) -> history_rounds.SmallArchive:
    return history_rounds.build(tmp_path_factory.mktemp("small"))


@pytest.fixture
def db(small, tmp_path):
    """A copy of the small archive (the tests below write to it)."""
    return shutil.copy(small.archive, tmp_path / "archive.sqlite")


def open_lines(db, lab="L01") -> tuple[int, list[str]]:
    code, text, err = run_cli("history", "check", "--open", "--lab", lab, "--archive", db)
    assert err == ""
    return code, [line for line in text.splitlines() if line.startswith("2025-")]


def test_the_planted_findings_are_open_in_order_and_a_closed_record_removes_one(db):
    code, lines = open_lines(db)
    assert code == 1  # findings remain open
    # in round-date order: the action signal (ISO 13528: z = 3.6 ≥ 3), CUSUM at round 8 (sum 4.9 > h = 4),
    # the run at round 9 (nine above 0), then the soil scheme's warning (|z| = 2.3 > 2) under code S-17
    assert [line.split(":")[0] for line in lines] == [
        "2025-04-15 L01 / AQ / AQ-25-04 / nitrate", "2025-08-15 L01 / AQ / AQ-25-08 / lead",
        "2025-09-15 L01 / AQ / AQ-25-09 / lead", "2025-09-20 S-17 / SOIL / SL-25-B / copper"]
    assert "■ action signal, z = +3.60; rule 1 (action signal) - no record" in lines[0]
    assert "rule 4 (CUSUM), high" in lines[1] and "rule 3 (9 in a row on one side), high" in lines[2]
    code, text, err = run_cli("history", "note", "--archive", db, "--lab", "L01", "--round", "AQ-25-04",
                              "--measurand", "nitrate", "--status", "open", "--by", "J. Okafor",
                              "--date", "2025-04-20")
    assert (code, err) == (0, "") and text.startswith("added: ")
    code, lines = open_lines(db)
    assert code == 1 and "record open since 2025-04-20 (J. Okafor)" in lines[0]  # open: still listed
    code, text, _ = run_cli("history", "note", "--archive", db, "--lab", "L01", "--round", "AQ-25-04",
                            "--measurand", "nitrate", "--status", "closed", "--by", "J. Okafor",
                            "--cause", "Expired stock solution", "--action", "New stock; SOP revised",
                            "--date", "2025-05-02")
    assert code == 0 and text.startswith("changed: ")
    code, lines = open_lines(db)
    assert code == 1 and len(lines) == 3 and not any("AQ-25-04" in line for line in lines)
    for round_id, measurand, scheme, lab in (("AQ-25-08", "lead", "AQ", "L01"), ("AQ-25-09", "lead", "AQ", "L01"),
                                             ("SL-25-B", "copper", "SOIL", "S-17")):
        code, _, err = run_cli("history", "note", "--archive", db, "--lab", lab, "--round", round_id,
                               "--measurand", measurand, "--scheme", scheme, "--status", "closed", "--by", "J. O.",
                               "--cause", "Drift of the lead calibration", "--action", "Recalibrated",
                               "--date", "2025-10-01")
        assert code == 0, err
    code, lines = open_lines(db)
    assert (code, lines) == (0, [])  # every finding answered: exit 0
    code, lines = open_lines(db, "L02")  # another lab's findings are its own
    assert code == 1 and [line.split(":")[0] for line in lines] == ["2025-06-15 L02 / AQ / AQ-25-06 / lead"]


def test_note_refusals_exit_2_with_a_message(db):
    code, _, err = run_cli("history", "note", "--archive", db, "--lab", "L01", "--round", "AQ-25-03",
                           "--measurand", "nitrate", "--status", "open", "--by", "X")
    assert code == 2 and "acceptable and no trend rule fired there" in err and "Traceback" not in err
    with pytest.raises(SystemExit) as stop:  # argparse refuses the date: its usage message, exit 2
        run_cli("history", "note", "--archive", db, "--lab", "L01", "--round", "AQ-25-04",
                "--measurand", "nitrate", "--status", "open", "--by", "X", "--date", "2025-13-01")
    assert stop.value.code == 2
    code, _, err = run_cli("history", "alias", "--archive", db, "--lab", "L01", "--scheme", "SOIL", "--name", "X")
    assert code == 2 and "no archived scores for lab 'L01' in scheme 'SOIL'" in err
