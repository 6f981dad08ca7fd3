"""``roundscore score --formats`` and ``circulation.csv`` (outputs/circulation.py): what is written, what is listed.

Source of expected values: the tool's own contract (internal behaviour); invented rounds, no outside values.
"""

from __future__ import annotations

import csv

import pytest

from roundscore.cli import main
from roundscore.outputs.writers import FORMATS

from .conftest import ALL_FORMATS
from .test_cli import SMALL_RESULTS, SMALL_TOML

PARTICIPANTS = "lab,name,contact\n" + "".join(f"L{i},Lab {i},l{i}@x.example\n" for i in range(1, 6)) + \
    "L6,=HYPERLINK(\"http://x.example\"),@evil\n"


def _rows(path):
    with open(path, newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def test_every_format_and_the_circulation_list(make_round, tmp_path):
    folder = make_round(SMALL_TOML.replace('scheme = "CLI"', 'scheme = "CLI"\nparticipants = "participants.csv"'),
                        SMALL_RESULTS, participants__csv=PARTICIPANTS)
    out = tmp_path / "out"
    assert main(["score", str(folder), "--out", str(out), "--formats", ALL_FORMATS, "--quiet", "--jobs", "1"]) == 0
    rows = _rows(out / "circulation.csv")
    assert [r["lab"] for r in rows] == [f"L{i}" for i in range(1, 7)]
    l2 = next(r for r in rows if r["lab"] == "L2")
    assert l2["name"] == "Lab 2" and l2["contact"] == "l2@x.example"
    files = l2["files"].split(";")
    assert files == ["labs/L2.xlsx", "labs/L2.html", "labs/L2.pdf"] and l2["file_xlsx"] == "labs/L2.xlsx"
    for r in rows:  # every path listed exists, and is that lab's
        for f in r["files"].split(";") + r["shared"].split(";"):
            assert (out / f).is_file(), f
        assert all(f.startswith(f"labs/{r['lab']}.") for f in r["files"].split(";"))
    assert l2["shared"].split(";") == ["round-summary.xlsx", "report.html", "report.pdf"]


def test_the_formats_variable_is_the_default_and_is_checked(make_round, tmp_path, monkeypatch, capsys):
    folder = make_round(SMALL_TOML, SMALL_RESULTS)
    monkeypatch.setenv("ROUNDSCORE_FORMATS", " CSV , html")
    out = tmp_path / "out"
    assert main(["score", str(folder), "--out", str(out), "--quiet", "--jobs", "1"]) == 0
    names = {p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file()}
    assert "scores.csv" in names and "report.html" in names and "labs/L1.html" in names
    assert not [n for n in names if n.endswith((".xlsx", ".pdf"))]
    monkeypatch.setenv("ROUNDSCORE_FORMATS", "csv,docx")
    bad = tmp_path / "bad"
    assert main(["score", str(folder), "--out", str(bad), "--quiet", "--jobs", "1"]) == 2
    err = capsys.readouterr().err
    assert "ROUNDSCORE_FORMATS" in err and "'docx'" in err and "Traceback" not in err and not bad.exists()
    # an option given wins over the variable
    assert main(["score", str(folder), "--out", str(bad), "--quiet", "--jobs", "1", "--formats", "csv"]) == 0
    monkeypatch.delenv("ROUNDSCORE_FORMATS")
    from roundscore.outputs.writers import default_formats

    assert default_formats() == FORMATS  # unset: every format


def test_formats_choose_the_writers_and_the_list_follows(make_round, tmp_path):
    folder = make_round(SMALL_TOML.replace('scheme = "CLI"', 'scheme = "CLI"\nparticipants = "participants.csv"'),
                        SMALL_RESULTS, participants__csv=PARTICIPANTS)
    out = tmp_path / "out"
    assert main(["score", str(folder), "--out", str(out), "--formats", "xlsx", "--quiet", "--jobs", "1"]) == 0
    names = sorted(p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file())
    assert "round-summary.xlsx" in names and "labs/L1.xlsx" in names
    assert not [n for n in names if n.endswith((".html", ".pdf"))]
    assert [n for n in names if n.endswith(".csv")] == ["circulation.csv"]  # the csv writer did not run
    rows = _rows(out / "circulation.csv")
    assert list(rows[0]) == ["lab", "name", "contact", "files", "file_xlsx", "shared"]
    assert rows[0]["files"] == "labs/L1.xlsx" and rows[0]["shared"] == "round-summary.xlsx"
    evil = rows[-1]
    assert evil["name"].startswith("'=") and evil["contact"] == "'@evil"  # neutralised (csvout.py)
    out2 = tmp_path / "out2"
    assert main(["score", str(folder), "--out", str(out2), "--formats", "csv", "--quiet", "--jobs", "1"]) == 0
    rows = _rows(out2 / "circulation.csv")
    assert rows[0]["files"] == "" and rows[0]["shared"] == "" and "file_xlsx" not in rows[0]
    assert (out2 / "scores.csv").is_file() and not (out2 / "labs").exists()


@pytest.mark.parametrize("given", ["docx", "csv,docx", ",", "xlsx;html"])
def test_an_unknown_format_is_refused_listing_the_allowed(make_round, tmp_path, capsys, given):
    folder = make_round(SMALL_TOML, SMALL_RESULTS)
    with pytest.raises(SystemExit) as err:
        main(["score", str(folder), "--out", str(tmp_path / "out"), "--formats", given])
    assert err.value.code == 2
    text = capsys.readouterr().err
    assert "--formats" in text and f"allowed: {', '.join(FORMATS)}" in text and "Traceback" not in text
    assert not (tmp_path / "out").exists()
