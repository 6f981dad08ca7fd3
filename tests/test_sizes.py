"""Size: every text that reaches an output is bounded where it is read, messages quoting a value are
bounded, a huge round file or measurand count is refused before the work starts, and a round past the
figure limit gets score strips instead of thousands of figures.

Source of expected values: the tool's own documented limits (roundscore.text.TEXT_LIMITS,
roundscore.intake.roundfile.MAX_MEASURANDS / MAX_ROUND_FILE_BYTES, roundscore.outputs.figures.FIGURES_MAX_MEASURANDS);
Excel's 31-character sheet names (Microsoft's Excel specifications and limits, from memory).
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

import roundscore.intake.roundfile as round_module
from roundscore.cli import main
from roundscore.errors import InputError, Problem, RoundFileError
from roundscore.pipeline import load_and_evaluate
from roundscore.intake.roundfile import load_round
from roundscore.text import TEXT_LIMITS, clip, quote, terminal_text

TOML = """
[round]
id = "SZ-1"
results = "results.csv"
{round_extra}
[measurand.iron]
unit = "mg/kg"
sigma_pt = 1.0
{measurand_extra}
"""
RESULTS = "lab,measurand,replicate,value\n" + "".join(
    f"L{i},iron,{r},{10 + 0.1 * i + 0.05 * r}\n" for i in range(1, 6) for r in (1, 2))


def _round(make_round, round_extra="", measurand_extra="", results=RESULTS, **files):
    return make_round(TOML.format(round_extra=round_extra, measurand_extra=measurand_extra), results, **files)


def _hashes(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.mark.parametrize("where, key, text, kind", [
    ("measurand", "label", "L" * 3_000_000, "label"),    # 3 MB (a 10 MB one is refused by the file size)
    ("measurand", "unit", "m" * 50_000, "unit"),
    ("round", "title", "T" * 201, "title"),
    ("round", "id", "I" * 65, "round id"),
    ("round", "provider", "P" * 201, "provider"),
    ("round", "results_sheet", "S" * 32, "results sheet"),
])
def test_round_file_texts_are_bounded(make_round, capsys, where, key, text, kind):
    extra = f'{key} = "{text}"'
    if where == "round":
        folder = _round(make_round, round_extra=extra)
        if key == "id":
            (folder / "round.toml").write_text(TOML.format(round_extra="", measurand_extra="").replace(
                'id = "SZ-1"', extra), encoding="utf-8")
    else:
        toml = TOML.format(round_extra="", measurand_extra="").replace('unit = "mg/kg"\n', "")
        folder = make_round(toml + extra + ("\nunit = \"mg/kg\"" if key != "unit" else ""), RESULTS)
    before = _hashes(folder)
    assert main(["check", str(folder)]) == 2
    err = capsys.readouterr().err
    assert f"{len(text)} characters long; at most {TEXT_LIMITS[kind]}" in err
    assert key in err
    assert len(err) < 2000  # the message quotes the value clipped
    assert _hashes(folder) == before


def test_measurand_name_bounded_and_without_controls(make_round):
    long = TOML.format(round_extra="", measurand_extra="").replace("iron", "i" * 65)
    with pytest.raises(RoundFileError, match="65 characters long; at most 64"):
        load_round(make_round(long, RESULTS.replace("iron", "i" * 65)))
    ctl = TOML.format(round_extra="", measurand_extra="").replace("[measurand.iron]", '[measurand."ir\\u001bon"]')
    with pytest.raises(RoundFileError) as exc:
        load_round(make_round(ctl, RESULTS))
    assert "control characters" in str(exc.value) and "\x1b" not in str(exc.value)


def test_round_texts_refuse_control_characters(make_round):
    with pytest.raises(RoundFileError) as exc:
        load_round(_round(make_round, round_extra='title = "Round\\u001b[2J one"'))
    assert "round.title" in str(exc.value) and "control characters" in str(exc.value)
    assert "\x1b" not in str(exc.value)
    persian = _round(make_round, round_extra='provider = "می\u200cخواهم"')  # ZWNJ is a format character: kept
    assert load_round(persian).provider == "می\u200cخواهم"


def test_round_file_too_large_is_refused_unread(make_round, monkeypatch):
    folder = _round(make_round, measurand_extra="# " + "x" * (round_module.MAX_ROUND_FILE_BYTES + 10))

    def unread(*a, **k):
        raise AssertionError("the file was parsed")

    monkeypatch.setattr(round_module.tomllib, "loads", unread)
    with pytest.raises(RoundFileError, match=r"4\.0 MiB; at most 4 MiB"):
        load_round(folder)


def test_too_many_measurands_refused_at_load(make_round, monkeypatch):
    monkeypatch.setattr(round_module, "MAX_MEASURANDS", 3)
    extra = "".join(f'\n[measurand.m{i}]\nunit = "mg/kg"\nsigma_pt = 1.0\n' for i in range(3))
    with pytest.raises(RoundFileError, match=r"4 \[measurand.NAME\] tables; a round has at most 3"):
        load_round(_round(make_round, measurand_extra=extra))


@pytest.mark.parametrize("column, text, words", [
    ("unit", "m" * 50_000, "the unit is 50000 characters long; at most 32"),
    ("method", "M" * 201, "the method is 201 characters long; at most 200"),
    ("comment", "C" * 5000, "the comment is 5000 characters long; at most 200"),
])
def test_result_texts_are_bounded(make_round, capsys, monkeypatch, column, text, words):
    import roundscore.intake.validate as table_module

    results = RESULTS.replace("lab,measurand,replicate,value", f"lab,measurand,replicate,value,{column}")
    lines = results.splitlines()
    lines = [lines[0]] + [f"{ln}," for ln in lines[1:]]
    lines[3] = lines[3] + text
    folder = _round(make_round, results="\n".join(lines) + "\n")
    if column == "unit":  # refused before the unit converter sees it
        monkeypatch.setattr(table_module, "factor",
                            lambda a, b: (_ for _ in ()).throw(AssertionError("converter called")))
    before = _hashes(folder)
    assert main(["score", str(folder), "--jobs", "1", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "results.csv, line 4" in err and f"column '{column}'" in err and words in err
    assert len(err) < 1500
    assert not (folder / "out").exists() and _hashes(folder) == before


def test_item_table_texts_are_bounded(make_round):
    rows = ["item,replicate,value,unit"]
    for i in range(1, 6):
        for r in (1, 2):
            item = "B3" + "x" * 40 if (i, r) == (3, 1) else f"B{i}"
            unit = "g" * 5000 if (i, r) == (5, 1) else ""
            rows.append(f"{item},{r},{10 + 0.01 * i + 0.001 * r:.4f},{unit}")
    folder = _round(make_round, measurand_extra='homogeneity = "homogeneity.csv"',
                    homogeneity__csv="\n".join(rows) + "\n")
    with pytest.raises(InputError) as exc:
        load_and_evaluate(folder)
    text = str(exc.value)
    assert "homogeneity.csv, line 6, column 'item'" in text and "item label is 42 characters long" in text
    assert "line 10, column 'unit'" in text and "unit is 5000 characters long" in text
    assert len(text) < 3000


def test_unknown_measurand_message_lists_a_few(make_round, monkeypatch):
    extra = "".join(f'\n[measurand.m{i:03d}]\nunit = "mg/kg"\nsigma_pt = 1.0\n' for i in range(40))
    folder = _round(make_round, measurand_extra=extra, results=RESULTS + "L1,copper,1,3\n")
    with pytest.raises(InputError) as exc:
        load_and_evaluate(folder)
    text = str(exc.value)
    assert "the round has: iron, m000" in text and "and 31 more" in text and "m039" not in text


# ---------------------------------------------------------------------------------------------- messages

def test_clip_and_quote():
    assert clip("abc") == "abc"
    assert clip("x" * 5000) == "x" * 60 + "… (5000 characters)"
    assert quote("K\x1b[2J") == "'K\\x1b[2J'"
    assert quote("a\u202eb") == "'a\\u202eb'"
    assert terminal_text("line\nnext", newlines=True) == "line\nnext"
    assert terminal_text("line\nnext") == "line\\x0anext"
    assert terminal_text("Ärzte 研究所 מעבדה") == "Ärzte 研究所 מעבדה"


def test_json_output_escapes_what_json_leaves_raw():
    import json

    from roundscore.text import json_text

    body = {"lab": "K\u202e01", "note": "x\x85y\x1b", "m": "Ärzte \U000e0001"}
    text = json_text(json.dumps(body, ensure_ascii=False))
    assert "\u202e" not in text and "\x85" not in text and "\x1b" not in text and "\U000e0001" not in text
    assert "Ärzte" in text
    assert json.loads(text) == body  # the same JSON


def test_problem_text_is_bounded_and_escaped():
    p = Problem(message="bad", file="forms/" + "f" * 500 + ".xlsx", sheet="S\x1b[2J" + "s" * 300,
                lab="L" * 400, measurand="m\n" * 200, value="v" * 10_000_000, row=3, column="c")
    text = str(p)
    assert len(text) < 800
    assert "\x1b" not in text and "\n" not in text
    assert "(10000000 characters)" in text


# ----------------------------------------------------------------------------------- many measurands

def test_round_past_the_figure_limit_gets_strips(make_round, monkeypatch):
    import roundscore.outputs.figures as figures_module
    from roundscore.outputs.report import report_html, report_parts

    extra = '\n[measurand.zinc]\nunit = "mg/kg"\nsigma_pt = 2.0\n'
    results = RESULTS + "".join(f"L{i},zinc,{r},{20 + 0.2 * i + 0.1 * r}\n" for i in range(1, 6) for r in (1, 2))
    ev = load_and_evaluate(_round(make_round, measurand_extra=extra, results=results))
    monkeypatch.setattr(figures_module, "FIGURES_MAX_MEASURANDS", 1)
    import roundscore.outputs.report as report_module

    monkeypatch.setattr(report_module, "FIGURES_MAX_MEASURANDS", 1)
    figs = figures_module.round_figures(ev)
    assert not figs.scores and not figs.density and not figs.mandel
    html = report_html(ev, report_parts(ev, figs))
    assert 'id="strip-iron"' in html and 'id="strip-zinc"' in html
    assert "drawn for rounds of at most 1 measurands" in html
    assert 'id="fig-z-iron"' not in html
