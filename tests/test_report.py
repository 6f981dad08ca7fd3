"""The HTML report and the lab pages, on the invented demo round (roundscore.demo.demo_round) and hand-built stage
tables."""

from __future__ import annotations

import dataclasses
import re

import pandas as pd
import pytest

from roundscore.demo.demo_round import make_demo_round
from roundscore.outputs import report as R
from roundscore.outputs.figures import round_figures
from roundscore.outputs.look import CAUTION
from roundscore.pipeline import load_and_evaluate


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    root = tmp_path_factory.mktemp("report-demo")
    make_demo_round(root / "round")
    toml = root / "round" / "round.toml"
    # a Youden pair for this test (the demo round itself has none)
    toml.write_text(toml.read_text().replace("replicates = 2\n", 'replicates = 2\nyouden = [["iodine", "arsenic"]]\n',
                                             1))
    ev = load_and_evaluate(root / "round")
    parts = R.report_parts(ev)
    return ev, parts


def test_report_has_every_section_and_no_names(demo):
    ev, parts = demo
    page = R.report_html(ev, parts)
    for sid in ("round", "items", "measurands", "youden", "precision", "methods", "scores", "audit", "cautions"):
        assert f'<section id="{sid}">' in page
    for p in ev.participants.values():
        assert p.name not in page and p.contact not in page  # names only in a lab's own page
    assert CAUTION.replace("'", "&#x27;") in page
    assert page.count("<figure") >= 2 * len(ev.measurands)


def test_report_is_self_contained_and_printable(demo):
    ev, parts = demo
    page = R.report_html(ev, parts)
    without_ns = re.sub(r'xmlns(:\w+)?="http://www\.w3\.org/[^"]*"', "", page)
    assert not re.search(r"(src|href)=\"(https?:)?//", without_ns) and "<script" not in page
    assert "<img" not in page and "@import" not in page
    assert "@media print" in page and "break-inside: avoid" in page and "table-header-group" in page


def test_report_is_reproducible(demo):
    ev, parts = demo
    assert R.report_html(ev, parts) == R.report_html(ev, R.report_parts(ev, parts.figures))


def test_every_lab_and_signal_in_the_score_matrix(demo):
    ev, parts = demo
    page = R.report_html(ev, parts)
    matrix = page[page.index('<section id="scores">'):page.index('<section id="audit">')]
    for lab in ev.labs:
        assert f"<td>{lab}</td>" in matrix
    # symbol in the cell, the word in its title (ISO 13528 words; roundscore.outputs.look)
    assert 'title="action signal">■' in matrix and 'title="warning signal">▲' in matrix


def test_lab_page_own_name_only_and_marked_figures(demo):
    ev, parts = demo
    lab = "K07"
    page = R.lab_page_html(ev, parts, lab)
    assert ev.participants[lab].name in page
    assert not [p.name for code, p in ev.participants.items() if code != lab and p.name in page]
    marks = re.findall(r'<g class="lab-mark" aria-label="([^"]+)"', page)
    assert marks and all(m.endswith(f"({lab})") for m in marks)
    own = ev.lab_scores(lab)
    assert page.count("<tr><td><a href=\"#strip-") == len(own)
    # one strip per measurand, each linked from the table; a small round also keeps the full figures
    assert page.count('<figure class="strip" id="strip-') == len(ev.measurands)
    assert parts.full_figures and "<h2>In detail</h2>" in page and 'id="fig-z-iodine"' in page


def test_lab_strip_marks_own_score_with_signal_shape(demo):
    ev, parts = demo
    lab = "K07"
    page = R.lab_page_html(ev, parts, lab)
    for rec in ev.lab_scores(lab).to_dict("records"):
        strip = page[page.index(f'id="strip-{rec["measurand"]}"'):]
        strip = strip[:strip.index("</figure>")]
        mark = strip[strip.index('<g class="lab-mark"'):]
        # shape by signal (roundscore.outputs.look: circle, triangle, square); the score written to 2 decimals
        shape = {"acceptable": "<circle", "warning": "<path d=", "action": "<rect"}.get(rec["signal"])
        if shape:
            assert shape in mark and f"{rec[R.SCORE_FIELD[rec['score']]]:.2f}" in mark


def _no_drawing(monkeypatch) -> None:
    """Make any matplotlib figure creation or rendering fail the test."""
    import matplotlib.figure

    def refuse(*args, **kwargs):
        raise AssertionError("a lab page drew a figure: lab pages must be composed from the shared parts")

    monkeypatch.setattr(matplotlib.figure.Figure, "__init__", refuse)
    monkeypatch.setattr(matplotlib.figure.Figure, "savefig", refuse)


def test_lab_pages_are_composed_without_drawing(demo, monkeypatch):
    # The design that keeps thousands of lab pages cheap: every figure is drawn once for the round and
    # each lab's page only adds its marks to the shared SVG (speed itself is measured by
    # benchmarks/scale.py, never by a timed test).
    ev, parts = demo
    _no_drawing(monkeypatch)
    for lab in ev.labs:
        page = R.lab_page_html(ev, parts, lab)
        assert f"your lab ({lab})" in page


def test_write_report_files(demo, tmp_path):
    ev, parts = demo
    written = R.write_report(ev, tmp_path, labs=["K01", "K02"], parts=parts)
    assert [p.name for p in written] == ["report.html", "K01.html", "K02.html"]
    assert (tmp_path / "labs" / "K01.html").read_text(encoding="utf-8").startswith("<!DOCTYPE html>")


@pytest.mark.parametrize("code, name", [("K01", "K01.html"), ("lab 7/β", "lab%207%2Fβ.html"),
                                        ("../x", "%2E.%2Fx.html")])
def test_lab_file_name(code, name):
    assert R.lab_file_name(code) == name


def _stage_tables(ev) -> dict[str, pd.DataFrame]:
    """Hand-built stage tables in the columns the issue fixes (values invented)."""
    labs = ev.labs[:6]
    return {
        "precision": pd.DataFrame([{"measurand": "iodine", "p": 30, "n_bar": 2.0, "s_r": 41.2, "s_L": 90.1,
                                    "s_R": 99.1, "r": 115.4, "R": 277.5, "s_r_robust": 40.0, "excluded": "K07"}]),
        "screens": pd.DataFrame([{"measurand": "iodine", "step": 1, "test": "Cochran C", "labs": "K05",
                                  "statistic": 0.3141, "critical_5": 0.2, "critical_1": 0.25,
                                  "outcome": "outlier"}]),
        "mandel": pd.DataFrame({"lab": labs, "measurand": "iodine", "h": [0.1, -1.2, 2.6, 0.3, -0.9, 0.5],
                                "k": [0.4, 1.9, 0.8, 1.1, 0.2, 1.3], "flag": ["", "", "h 1 %", "", "", ""]}),
        "methods": pd.DataFrame([{"measurand": "iodine", "groups": "ICP-MS | titration", "test": "Welch t",
                                  "statistic": 2.7182, "df": 27.3, "p_value": 0.0111, "difference": 61.0,
                                  "ci_low": 15.0, "ci_high": 107.0, "significant": True}]),
    }


def _iodine_only(ev, **changes):
    """The demo evaluation cut to one measurand (fewer figures to draw)."""
    return dataclasses.replace(ev, measurands={"iodine": ev.measurands["iodine"]},
                               scores=ev.scores[ev.scores["measurand"] == "iodine"], **changes)


def test_stage_tables_rendered_when_present(demo):
    ev, _ = demo
    ev2 = _iodine_only(ev, extras=_stage_tables(ev))
    parts = R.report_parts(ev2)
    page = R.report_html(ev2, parts)
    for text in ("Cochran C", "0.3141", "277.5", "ICP-MS | titration", "0.0111", "Welch t"):
        assert text in page
    # Mandel lines from stats.precision for p = 6, n = 2 (no critical columns in this table)
    assert "fig-mandel-h-iodine" in page and "fig-mandel-k-iodine" in page
    lab_page = R.lab_page_html(ev2, parts, ev.labs[2])
    assert "Your Mandel h and k" in lab_page and "h 1 %" in lab_page


def test_report_without_stage_tables(demo):
    ev, parts = demo
    ev2 = dataclasses.replace(ev, extras={}, stage_notes={}, details={})
    page = R.report_html(ev2, R.report_parts(ev2, dataclasses.replace(parts.figures, mandel={})))
    assert "No precision or screening results" in page and "No method-group comparison" in page


def test_items_section_shows_each_stability_figure_beside_its_homogeneity_figure(demo):
    ev, parts = demo
    page = R.report_html(ev, parts)
    items = page[page.index('<section id="items">'):page.index('<section id="measurands">')]
    with_study = [n for n, m in ev.measurands.items() if m.item_checks is not None
                  and m.item_checks.stability is not None and m.item_checks.stability_table is not None]
    assert with_study == ["iodine", "mercury"]  # the invented demo round's stability.csv
    for name in with_study:
        fig = parts.figures.stability[name]
        assert f'<figure id="fig-stability-{name}">' in items and fig.svg in items
        sets = ev.measurands[name].item_checks.stability_sets
        assert all(f">{s}<" in fig.svg for s in sets)  # the study's own set names
        passed = ev.measurands[name].item_checks.stability.passed
        assert ("within the allowance" if passed else "exceeds the allowance") in fig.caption
    # the homogeneity figure first, its measurand's stability figure right after it
    assert items.index('id="fig-items-iodine"') < items.index('id="fig-stability-iodine"') \
        < items.index('id="fig-items-cadmium"')
    assert set(parts.figures.stability) == set(with_study)
    assert "fig-stability" not in page[page.index('<section id="measurands">'):]  # only in the items section
    lab_page = R.lab_page_html(ev, parts, "K07")
    assert "fig-stability" not in lab_page and "fig-items" not in lab_page  # lab pages carry no item figures


def test_round_without_stability_table_has_no_stability_figure(demo, tmp_path):
    ev, _ = demo
    m = ev.measurands["iodine"]
    no_stab = dataclasses.replace(m.item_checks, stability=None, stability_table=None, stability_sets=None)
    ev2 = _iodine_only(ev)
    ev2 = dataclasses.replace(ev2, measurands={"iodine": dataclasses.replace(m, item_checks=no_stab)})
    figs = round_figures(ev2)
    assert "iodine" in figs.items and figs.stability == {}
    page = R.report_html(ev2, R.report_parts(ev2, figs))
    assert 'id="fig-items-iodine"' in page and "fig-stability" not in page
    # a round with no item tables at all: the items section says so
    plain = load_and_evaluate(_large_round(tmp_path / "plain", 6, 1))
    page = R.report_html(plain, R.report_parts(plain))
    assert "fig-stability" not in page and "No homogeneity or stability data in this round." in page


def test_round_figures_same_with_workers(demo):
    ev, parts = demo
    small = _iodine_only(ev)
    one, two = round_figures(small, jobs=1), round_figures(small, jobs=2)
    assert [f.svg for f in two.density.values()] == [f.svg for f in one.density.values()]
    assert two.scores["iodine"].svg == parts.figures.scores["iodine"].svg
    assert len(parts.figures.youden) == 1 and not two.youden  # the pair needs both measurands


# ------------------------------------------------------------------------------------ a large invented round

#: (assigned, score) cycled over the measurands of the large invented round.
_KINDS = [("algorithm-a", "z"), ("reference", "zeta"), ("reference", "en"), ("algorithm-a", "z-prime")]


def _large_round(root, labs: int, measurands: int, seed: int = 11):
    """A long-layout CSV round of invented results (seeded numpy): lab biases ~ N(0, σ_pt), 2 % far off."""
    import numpy as np

    rng = np.random.default_rng(seed)
    root.mkdir(parents=True)
    toml = ['[round]', 'id = "INV-300"', 'title = "Invented large round"', 'scheme = "INV"',
            'date = "2027-02-01"', 'provider = "Invented Provider"', 'material = "invented material"',
            'results = "results.csv"', 'participants = "participants.csv"', 'replicates = 2', '']
    rows = ["lab,measurand,replicate,value,unit,u,U,k,method"]
    codes = [f"L{i:04d}" for i in range(labs)]
    for j in range(measurands):
        assigned, score = _KINDS[j % len(_KINDS)]
        name, centre, sd = f"m{j:02d}", 10.0 + j, 0.5
        toml += [f"[measurand.{name}]", 'unit = "mg/kg"',
                 f"assigned = {centre}\nu_assigned = 0.02" if assigned == "reference" else 'assigned = "algorithm-a"',
                 f"sigma_pt = {sd}", f'score = "{score}"', "decimals = 2", ""]
        bias = rng.normal(0, sd, labs)
        far = rng.random(labs) < 0.02
        bias[far] += rng.choice([-1, 1], far.sum()) * rng.uniform(3, 12, far.sum()) * sd
        unc = ",0.80,2" if score == "en" else "0.3,,"
        for rep in (1, 2):
            vals = centre + bias + rng.normal(0, 0.1 * sd, labs)
            rows += [f"{c},{name},{rep},{v:.4f},mg/kg,{unc},ICP-MS" for c, v in zip(codes, vals)]
    (root / "round.toml").write_text("\n".join(toml) + "\n")
    (root / "results.csv").write_text("\n".join(rows) + "\n")
    (root / "participants.csv").write_text("lab,name,contact\n" + "".join(
        f"{c},Invented Laboratory {c},lab-{c.lower()}@invented.example\n" for c in codes))
    return root


#: Size bound of one lab page at 40 measurands (the issue's target, about 250 KB; measured about 125 KB).
PAGE_BYTES = 250_000


@pytest.fixture(scope="module")
def large(tmp_path_factory):
    """300 labs × 40 measurands, evaluated; no matplotlib figures (a large round's lab pages need none)."""
    from roundscore.outputs.figures import RoundFigures

    ev = load_and_evaluate(_large_round(tmp_path_factory.mktemp("large") / "round", 300, 40))
    none = RoundFigures(scores={}, density={}, youden=(), mandel={}, items={})
    return ev, R.report_parts(ev, none), none


def test_large_round_lab_pages_are_small_own_name_only_and_reproducible(large, tmp_path):
    ev, parts, none = large
    assert not parts.full_figures and len(ev.labs) == 300 and len(ev.measurands) == 40
    labs = [ev.labs[0], ev.labs[150], ev.labs[-1]]
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir(), b.mkdir()
    R.write_report(ev, a, labs=labs, parts=parts, round_report=False)
    R.write_report(ev, b, labs=labs, parts=R.report_parts(ev, none), round_report=False)  # parts built again
    names = {code: p.name for code, p in ev.participants.items()}
    for lab in labs:
        page = (a / "labs" / R.lab_file_name(lab)).read_bytes()
        assert page == (b / "labs" / R.lab_file_name(lab)).read_bytes()  # byte-identical reruns
        assert len(page) < PAGE_BYTES
        text = page.decode("utf-8")
        assert names[lab] in text
        assert [n for code, n in names.items() if code != lab and n in text] == []
        other = [code for code in ev.labs if code != lab and (f">{code}<" in text or f"({code})" in text)]
        assert other == []  # no other lab's code either: the distribution is anonymous
        marks = re.findall(r'<g class="lab-mark" aria-label="([^"]+)"', text)
        assert len(marks) == 40 and all(m.endswith(f"your lab ({lab})") for m in marks)


def test_large_round_lab_pages_are_composed_without_drawing(large, monkeypatch):
    ev, parts, _ = large
    _no_drawing(monkeypatch)
    for lab in ev.labs[:40]:
        page = R.lab_page_html(ev, parts, lab)
        assert len(re.findall(r'<g class="lab-mark"', page)) == 40  # a mark in each measurand's strip


def test_long_mandel_table_lists_flagged_rows_only():
    rows = R.MANDEL_TABLE_MAX_ROWS + 200
    frame = pd.DataFrame({"lab": [f"L{i:04d}" for i in range(rows)], "measurand": "m00",
                          "h": 0.1, "k": 0.9, "flag": ""})  # invented
    frame.loc[[5, 700], "flag"] = "h beyond 1 % indicator"
    from types import SimpleNamespace

    from roundscore.outputs.document import Document

    ev = SimpleNamespace(round=SimpleNamespace(words="signals", measurands={}))  # what the table reads

    def drawn(f: pd.DataFrame) -> str:
        return R.render_html(Document(title="t", blocks=tuple(R._mandel_table(ev, f))))

    html_ = drawn(frame)
    assert f"2 of {rows} rows" in html_ and "mandel.csv" in html_
    assert ">L0005<" in html_ and ">L0700<" in html_ and ">L0006<" not in html_
    assert ">L0006<" in drawn(frame.iloc[:R.MANDEL_TABLE_MAX_ROWS])  # short: every row


def test_settings_table_says_the_assigned_value_in_words(demo):
    # People read the settings: the method in words, not round.toml's names; a stated value to its decimals.
    ev, parts = demo
    doc = R.report_document(ev, parts)
    settings = next(b for sec in doc.blocks if isinstance(sec, R.Section) and sec.heading.anchor == "round"
                    for b in sec.blocks if isinstance(b, R.Table) and b.columns[0].title == "Measurand")
    col = [c.title for c in settings.columns].index("Assigned value")
    shown = {row[0].text: row[col].text for row in settings.rows}
    for name, m in ev.round.measurands.items():
        if m.assigned == "algorithm-a":
            assert shown[name] == "Algorithm A robust mean (ISO 13528 C.3)"
        elif m.assigned == "median":
            assert shown[name] == "median of the lab means"
        else:
            assert shown[name] == f"stated value {m.assigned:.{m.decimals}f}"
    assert not any("algorithm-a" in v for v in shown.values())
    assert "stated value 0.512" in "".join(shown.values())  # the demo's lead (its decimals: 3)
