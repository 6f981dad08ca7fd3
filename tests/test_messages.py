"""Messages that say where, values as typed, numbers read one way only, and exit codes (issue 12 §8).

Forms and tables are filled in as a lab would; the rules checked are the tool's own contract (internal
behaviour): a cell is named as the person sees it (``Results!D10``; a text file's line and header), a
value is shown as typed, each problem is listed once with what to do, a number whose reading depends on
the decimal mark is refused unless declared and, when declared, read so with a line in the audit trail.
"""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import datetime as dt
import hashlib
from pathlib import Path

import openpyxl
import pytest

from roundscore.intake.cells import HINT_DECLARE
from roundscore.cli import main
from roundscore.commands.history import refused_summary
from roundscore.errors import InputError, Problem, RoundFileError, shown_value
from roundscore.intake.forms import DECIMAL_CELL, FIRST_ROW, RESULTS_SHEET, write_form
from roundscore.intake.readers import read_results
from roundscore.pipeline import load_and_evaluate
from roundscore.intake.roundfile import load_round
from roundscore.intake.validate import MAX_LISTED_AMBIGUOUS

FORMS_TOML = """
[round]
id = "M1"
results = "returned"
replicates = 2
{extra}
[measurand.iron]
unit = "mg/kg"
sigma_pt = 1.0
[measurand.zinc]
unit = "mg/kg"
sigma_pt = 2.0
"""


def hash_tree(folder: Path) -> dict[str, str]:
    """Every file of a round folder by its digest, but for ROUND/out (score's outputs, check's cache)."""
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file() and p.relative_to(folder).parts[0] != "out"}


def _form(folder: Path, lab: str, cells: dict[str, object]) -> Path:
    """A blank form written as `roundscore forms` writes it, then filled in cell by cell (A1 references)."""
    rnd = load_round(folder)
    path = folder / "returned" / f"M1-{lab}.xlsx"
    path.parent.mkdir(exist_ok=True)
    write_form(rnd, lab, path)
    wb = openpyxl.load_workbook(path)
    ws = wb[RESULTS_SHEET]
    for ref, value in cells.items():
        ws[ref] = value
    wb.save(path)
    return path


# Columns of a two-replicate form: A measurand, B unit, C Result 1, D Result 2, E u, F U, G k.
IRON, ZINC = FIRST_ROW, FIRST_ROW + 1


@pytest.fixture(scope="module")
def bad_form(tmp_path_factory):
    """A round whose one form holds an ambiguous number, a date, a bad U (read once per replicate)."""
    folder = tmp_path_factory.mktemp("bad") / "round"
    folder.mkdir()
    (folder / "round.toml").write_text(FORMS_TOML.format(extra=""), encoding="utf-8")
    _form(folder, "A1", {f"C{IRON}": 12.0, f"D{IRON}": "1,234", f"F{IRON}": "x",
                         f"C{ZINC}": dt.date(2027, 6, 1), f"D{ZINC}": "0,4 2"})
    before = hash_tree(folder)
    with pytest.raises(InputError) as info:
        read_results(load_round(folder), jobs=1)
    return folder, before, info.value


def test_the_cell_is_named_as_the_person_sees_it(bad_form):
    _, _, err = bad_form
    text = str(err)
    assert (f"returned/M1-A1.xlsx, Results!D{IRON} (column 'Result 2', lab A1, measurand iron): value '1,234': "
            "ambiguous: 1234 if ',' separates thousands, or 1.234 if ',' is the decimal mark") in text
    assert f"Results!D{ZINC} (column 'Result 2', lab A1, measurand zinc): value '0,4 2': a space inside" in text
    assert "column 'value'" not in text and "row 10" not in text


def test_values_are_shown_as_typed(bad_form):
    text = str(bad_form[2])
    assert f"Results!C{ZINC} (column 'Result 1', lab A1, measurand zinc): value 2027-06-01: a date" in text
    assert "datetime" not in text


def test_each_problem_once_and_what_to_do_once(bad_form):
    err = bad_form[2]
    text = str(err)
    # U sits on the form's row once but was read with each replicate: one problem, not two.
    assert text.count(f"Results!F{IRON}") == 1
    assert len(err.problems) == 4
    assert text.count(HINT_DECLARE) == 1 and "What to do:" in text
    assert err.problems == sorted(err.problems, key=lambda p: (p.row, p.cell))  # in reading order


def test_a_refused_form_is_left_as_it_was(bad_form):
    folder, before, _ = bad_form
    assert hash_tree(folder) == before


@pytest.fixture(scope="module")
def declared_forms(tmp_path_factory):
    """Lab B2 says 'comma' in its Decimal mark cell; lab C3 leaves it blank; the round declares nothing."""
    folder = tmp_path_factory.mktemp("declared") / "round"
    folder.mkdir()
    (folder / "round.toml").write_text(FORMS_TOML.format(extra=""), encoding="utf-8")
    _form(folder, "B2", {DECIMAL_CELL: "comma (12,5)", f"C{IRON}": "1,250", f"D{IRON}": "1.234,5",
                         f"C{ZINC}": 40.0, f"D{ZINC}": "<0,5"})
    _form(folder, "C3", {f"C{IRON}": 1.3, f"D{IRON}": "1,35", f"C{ZINC}": 41.0, f"D{ZINC}": 42.0})
    _form(folder, "D4", {f"C{IRON}": 1.2, f"D{IRON}": 1.25, f"C{ZINC}": 39.0, f"D{ZINC}": 40.0})
    return load_and_evaluate(folder, jobs=1)


def test_a_form_declaring_its_decimal_mark_is_read_by_it(declared_forms):
    t = declared_forms.table.frame.set_index(["lab", "measurand", "replicate"])
    assert t.loc[("B2", "iron", 1), "value"] == 1.25       # "1,250" with a decimal comma
    assert t.loc[("B2", "iron", 2), "value"] == 1234.5     # "1.234,5": the point groups thousands
    assert t.loc[("B2", "zinc", 2), "limit"] == 0.5
    assert t.loc[("C3", "iron", 2), "value"] == 1.35       # one reading: needs no declaration


def test_the_audit_trail_says_how_a_forms_cells_were_read(declared_forms):
    audit = declared_forms.audit
    lines = audit[audit["action"] == "decimal mark"]
    assert len(lines) == 1  # one line for the one form that declares, none per cell, none for the others
    row = lines.iloc[0]
    assert row["lab"] == "B2" and "returned/M1-B2.xlsx" in row["reason"]
    assert "decimal comma" in row["reason"] and f"Results!{DECIMAL_CELL}" in row["reason"]


def test_the_forms_decimal_mark_cell_is_written_and_checked(tmp_path):
    folder = tmp_path / "round"
    folder.mkdir()
    (folder / "round.toml").write_text(FORMS_TOML.format(extra='decimal = "point"'), encoding="utf-8")
    path = _form(folder, "E5", {})
    wb = openpyxl.load_workbook(path)
    assert wb[RESULTS_SHEET][DECIMAL_CELL].value == "point"  # prefilled from [round] decimal
    lists = [d for d in wb[RESULTS_SHEET].data_validations.dataValidation if d.type == "list"]
    assert [d.formula1 for d in lists] == ['"point,comma"'] and str(lists[0].sqref) == DECIMAL_CELL
    assert wb[RESULTS_SHEET][DECIMAL_CELL].protection.locked is False  # the lab can change it
    info = {r[0].value: r[1].value for r in wb["form-info"].iter_rows(min_row=2)}
    assert info["decimal"] == "point" and info["decimal_cell"] == DECIMAL_CELL
    _form(folder, "E5", {DECIMAL_CELL: "Komma", f"C{IRON}": 1.0})
    with pytest.raises(InputError) as err:
        read_results(load_round(folder), jobs=1)
    assert (f"returned/M1-E5.xlsx, Results!{DECIMAL_CELL} (column 'Decimal mark'): value 'Komma': "
            "the decimal mark must be point or comma") in str(err.value)


LONG_TOML = """
[round]
id = "L1"
{extra}
[measurand.cu]
unit = "mg/kg"
sigma_pt = 0.5
"""


def _long(make_round, extra: str, rows: str) -> Path:
    return make_round(LONG_TOML.format(extra=extra), rows)


def test_a_round_declaring_its_decimal_mark_reads_and_audits_once(make_round):
    folder = _long(make_round, 'decimal = "point"', """
        lab,measurand,replicate,value
        L1,cu,1,"1,234"
        L1,cu,2,1.234
        L2,cu,1,"4,75"
        L3,cu,1,1250.5
        L4,cu,1,"1,250.5"
    """)
    ev = load_and_evaluate(folder, jobs=1)
    t = ev.table.frame.set_index(["lab", "replicate"])["value"]
    assert t[("L1", 1)] == 1234.0 and t[("L1", 2)] == 1.234 and t[("L2", 1)] == 4.75
    assert t[("L4", 1)] == 1250.5
    lines = ev.audit[ev.audit["action"] == "decimal mark"]["reason"].tolist()
    assert len(lines) == 1 and '[round] decimal = "point"' in lines[0]


def test_undeclared_the_same_table_is_refused_naming_line_and_header(make_round):
    folder = _long(make_round, "", """
        Lab,Measurand,Replicate,Value,Comment
        L1,cu,1,"1,234",
        L2,cu,1,2.5,"two lines
        of comment"
        L3,cu,1,"0,4 2",
    """)
    with pytest.raises(InputError) as info:
        read_results(load_round(folder))
    text = str(info.value)
    assert "results.csv, line 2, column 'Value' (lab L1, measurand cu): value '1,234': ambiguous" in text
    # The comment spans lines 3-4, so L3's row is line 5 of the file, as an editor shows it.
    assert "results.csv, line 5, column 'Value' (lab L3, measurand cu): value '0,4 2'" in text


def test_many_ambiguous_numbers_of_a_column_are_one_problem(make_round):
    n = MAX_LISTED_AMBIGUOUS + 20
    rows = "lab,measurand,replicate,value\n" + "".join(f"L{i},cu,1,{20 + i / 100:.3f}\n" for i in range(n))
    rows += "Lx,cu,1,oops\n"
    folder = _long(make_round, "", rows)
    with pytest.raises(InputError) as info:
        read_results(load_round(folder))
    problems = info.value.problems
    assert len(problems) == 2
    assert f"{n} numbers typed as text can be read two ways" in problems[0].message
    assert f"all at lines 2-{n + 1}" in problems[0].message
    assert "line 2" in problems[0].message and "'20.000'" in problems[0].message


def test_round_file_warnings_are_shown_when_the_import_fails(make_round, capsys):
    folder = _long(make_round, 'decimals = "point"', "lab,measurand,replicate,value\nL1,cu,1,\"1,234\"\n")
    before = hash_tree(folder)
    assert main(["check", str(folder)]) == 2
    err = capsys.readouterr().err
    assert "warning:" in err and "unknown key [round] 'decimals' is ignored; did you mean 'decimal'?" in err
    assert "error:" in err and "ambiguous" in err and err.index("warning:") < err.index("error:")
    assert hash_tree(folder) == before


def test_round_file_warnings_are_shown_with_its_mistakes(make_round, capsys):
    folder = _long(make_round, 'replicates = "two"\ndecimal_mark = "comma"', "lab,measurand,replicate,value\n")
    with pytest.raises(RoundFileError) as info:
        load_round(folder)
    assert any("decimal_mark" in note for note in info.value.__notes__)
    assert main(["check", str(folder)]) == 2
    err = capsys.readouterr().err
    assert "unknown key [round] 'decimal_mark'" in err and "replicates" in err


def test_a_bad_decimal_value_in_the_round_file(make_round):
    folder = _long(make_round, 'decimal = "dot"', "lab,measurand,replicate,value\n")
    with pytest.raises(RoundFileError, match=r"round.decimal.*'comma' or 'point'"):
        load_round(folder)


# --------------------------------------------------------------------------- exit codes

CHECK_ROWS = "lab,measurand,replicate,value\n" + "".join(f"L{i},cu,1,{10 + i}\n" for i in range(1, 8))


def test_check_exits_1_when_a_check_fails_and_score_needs_strict(make_round, tmp_path, capsys):
    # σ_pt = 0.01 against a spread of whole units: u(x_pt) far above 0.3 σ_pt, so that check fails.
    folder = make_round(LONG_TOML.format(extra="").replace("sigma_pt = 0.5", "sigma_pt = 0.01"), CHECK_ROWS)
    before = hash_tree(folder)
    assert main(["check", str(folder)]) == 1
    out, err = capsys.readouterr()
    assert "CHECK FAILED: cu: u(x_pt) exceeds 0.3 σ_pt" in out and "1 check failed" in out
    assert "checks failed" in err
    # score writes the outputs the coordinator must look at, and exits 0 unless --strict.
    assert main(["score", str(folder), "--out", str(tmp_path / "a"), "--quiet"]) == 0
    assert (tmp_path / "a" / "scores.csv").is_file()
    assert main(["score", str(folder), "--out", str(tmp_path / "b"), "--quiet", "--strict"]) == 1
    assert (tmp_path / "b" / "scores.csv").is_file()
    assert hash_tree(folder) == before


def test_check_exits_0_when_every_check_passes(make_round, capsys):
    folder = make_round(LONG_TOML.format(extra="").replace("sigma_pt = 0.5", "sigma_pt = 5"), CHECK_ROWS)
    assert main(["check", str(folder)]) == 0
    assert "The round file and results are valid; no outputs were written" in capsys.readouterr().out


@pytest.mark.parametrize("refused, total, text", [
    (1, 1, "The file was refused; nothing was stored from it."),
    (3, 3, "All 3 files were refused; nothing was stored from them."),
    (1, 2, "1 of 2 files was refused; the other file is in the archive"),
    (2, 5, "2 of 5 files were refused; the other 3 are in the archive"),
])
def test_refused_counts_in_plain_words(refused, total, text):
    assert refused_summary(refused, total).startswith(text)


# --------------------------------------------------------------------------- the message itself

@pytest.mark.parametrize("value, shown", [
    (dt.date(2027, 6, 1), "2027-06-01"), (dt.datetime(2027, 6, 1), "2027-06-01"),
    (dt.datetime(2027, 6, 1, 8, 30), "2027-06-01 08:30"), (dt.time(8, 30), "08:30:00"),
    (3.0, "3"), (0.1, "0.1"), (True, "TRUE"), ("1,234", "'1,234'"), ("1\u2009234", "'1\\u2009234'"),
])
def test_shown_value(value, shown):
    assert shown_value(value) == shown


def test_sheet_names_are_quoted_as_a_spreadsheet_writes_them():
    p = Problem(message="damaged", file="f.xlsx", sheet="form-info", row=4, cell="B4")
    assert str(p) == "f.xlsx, 'form-info'!B4: damaged"
    assert str(Problem(message="x", file="r.csv", row=3, column="value")) == "r.csv, line 3, column 'value': x"
    assert str(Problem(message="x", file="r.xlsx", sheet="Data", row=3, column="value")) == \
        "r.xlsx, sheet 'Data', row 3, column 'value': x"


@pytest.mark.parametrize("extra, ok", [('decimal = "comma"', True), ("", False)])
def test_item_tables_follow_the_rounds_decimal_mark(make_round, extra, ok):
    from roundscore.intake.items import read_item_values

    toml = LONG_TOML.format(extra=extra) + 'homogeneity = "hom.csv"\n'
    hom = "item,replicate,value\n" + "".join(f"B{i},{r},\"10,{100 + 10 * i + r}\"\n"
                                             for i in range(1, 6) for r in (1, 2))
    folder = make_round(toml, None, hom__csv=hom)
    rnd = load_round(folder)
    if ok:
        table = read_item_values(rnd, rnd.measurands["cu"], "homogeneity")
        assert table.values[0] == pytest.approx(10.111)  # "10,111" with a decimal comma
    else:
        with pytest.raises(InputError, match=r"hom.csv, column 'value'.*10 numbers typed as text can be read two"):
            read_item_values(rnd, rnd.measurands["cu"], "homogeneity")
