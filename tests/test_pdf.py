"""outputs/pdf.py: every block drawn, fonts embedded, figures as vectors, paper sizes, determinism, nothing past
the margins, hostile text; and the PDF writer.

Text is read back with pypdf (pure Python, in the test extra): each text-showing operator's position and string,
its width measured with fpdf2's own font metrics at the size the operator used.
"""

from __future__ import annotations

import math
import re
import subprocess
import sys
from pathlib import Path

import pytest

pypdf = pytest.importorskip("pypdf")

from roundscore.outputs.document import (Bullets, Cell, Column, Document, Facts, Figure, Heading,  # noqa: E402
                                         Paragraph, Section, Table)
from roundscore.outputs.look import SIGNAL_COLOUR, tint  # noqa: E402
from roundscore.outputs.pdf import (MARGIN_MM, PAPER_MM, TABLE_MIN_FONT_PT, _add_fonts, printable_text,  # noqa: E402
                                    render_pdf)

PT = 72 / 25.4  # PDF points per millimetre


# ------------------------------------------------------------------------------------------ reading a PDF back

def _reader(data: bytes):
    import io

    return pypdf.PdfReader(io.BytesIO(data))


def _text(data: bytes) -> str:
    return "\n".join(p.extract_text() for p in _reader(data).pages)


def _runs(data: bytes) -> list[tuple[int, float, float, str, str]]:
    """(page, x mm, font size pt, text, font style "" or "B") of every text-showing operator."""
    out = []
    for i, page in enumerate(_reader(data).pages):
        def visit(text, cm, tm, font, size, i=i):
            if text.strip():
                x = (tm[4] * cm[0] + cm[4]) / PT
                style = "B" if font is not None and "Bold" in str(font.get("/BaseFont", "")) else ""
                out.append((i, x, size * math.hypot(tm[0], tm[1]) * math.hypot(cm[0], cm[1]), text, style))
        page.extract_text(visitor_text=visit)
    return out


def _widest_right_edge(data: bytes) -> float:
    """The largest right end (mm) of any text run, measured with fpdf2's widths of the embedded font."""
    from fpdf import FPDF

    pdf = FPDF(unit="mm")
    _add_fonts(pdf)
    widest = 0.0
    for _, x, size, text, style in _runs(data):
        pdf.set_font("DejaVu Sans", style, size)
        widest = max(widest, x + pdf.get_string_width(text.strip()))  # pypdf may add a separating space
    return widest


def _page_sizes(data: bytes) -> list[tuple[float, float]]:
    return [(round(float(p.mediabox.width) / PT, 1), round(float(p.mediabox.height) / PT, 1))
            for p in _reader(data).pages]


def _fonts(data: bytes) -> set[str]:
    names = set()
    for obj in re.findall(rb"/BaseFont /([^\s/>]+)", data):
        names.add(obj.decode())
    return names


# ------------------------------------------------------------------------------------------ documents

def _lab_document_fallback(ev, lab: str, strips: bool = True) -> Document:
    """A minimal lab document from the evaluation, to exercise the renderer and the writer until the real
    builder (``outputs.report.lab_document``) lands: the lab's identity, its scores table with signals, the
    round statistics (wide), one strip figure per measurand."""
    from roundscore.outputs.strips import score_strip

    p = ev.participants.get(lab)
    rows = ev.scores[ev.scores["lab"] == lab]
    cols = ("Measurand", "Unit", "Your result", "Assigned value", "u(x_pt)", "σ_pt", "Score", "Your score",
            "Signal", "Rank", "Note")
    body = []
    for r in rows.itertuples():
        d = ev.round.measurands[r.measurand].decimals or 3
        v = getattr(r, {"z": "z", "z'": "z_prime", "zeta": "zeta", "En": "en"}.get(r.score, "z"), float("nan"))
        body.append(tuple(Cell(text=t, signal=s) for t, s in (
            (r.measurand, None), (r.unit, None), (f"{r.result:.{d}f}" if isinstance(r.result, float) else
                                                  str(r.result), None),
            (f"{r.assigned:.{d}f}", None), (f"{r.u_assigned:.{d + 1}f}", None), (f"{r.sigma_pt:.{d + 1}f}", None),
            (r.score, None), (f"{v:.2f}", None), (r.signal, r.signal), (f"{r.rank:.0f} of {r.n_scored}", None),
            (r.note, None))))
    numeric = {"Your result", "Assigned value", "u(x_pt)", "σ_pt", "Your score"}
    scores = Table(columns=tuple(Column(title=c, numeric=c in numeric) for c in cols), rows=tuple(body),
                   key_columns=1)
    st = ev.statistics
    stats = Table(columns=tuple(Column(title=str(c), numeric=st[c].dtype.kind == "f") for c in st.columns),
                  rows=tuple(tuple(Cell(text=f"{v:.4g}" if isinstance(v, float) else str(v)) for v in row)
                             for row in st.itertuples(index=False)), key_columns=1, caption="Round statistics")
    figures = []
    for name in ev.measurands if strips else ():
        own = rows[rows["measurand"] == name]
        z = ev.scores[ev.scores["measurand"] == name]["z"].to_numpy(float)
        strip = score_strip(z, measurand=name, score="z", title=name, key=f"strip-{name}")
        v = float(own["z"].iloc[0]) if len(own) else None
        figures.append(Figure(svg=strip.for_lab(lab, v, own["signal"].iloc[0] if len(own) else None, "signals"),
                             anchor=f"strip-{name}"))
    return Document(title=f"Round {ev.round.id}: results of laboratory {lab}", subtitle=ev.round.title or "",
                    footer=f"Confidential to laboratory {lab}", blocks=(
        Paragraph(text="Confidential to the laboratory named here.", style="confidential"),
        Facts(pairs=(("Laboratory code", lab), ("Laboratory", p.name if p else ""),
                     ("Contact", p.contact if p else ""))),
        Section(heading=Heading(text="Your scores"), blocks=(scores,)),
        Section(heading=Heading(text="Where you stand"), blocks=tuple(figures)),
        Section(heading=Heading(text="Round statistics"), blocks=(stats,)),
        Paragraph(text="This evaluation supports, and does not replace, the provider's procedures.",
                  style="caution")))


def _svg_from_report(report: Path) -> str:
    """The first matplotlib figure of the demo's HTML report (an SVG with paths, text and markers)."""
    html = report.read_text(encoding="utf-8")
    m = re.search(r"<svg\b.*?</svg>", html[html.index("<figure"):], re.S)
    assert m, "the demo report has no inline SVG figure"
    return m.group(0)


def _every_block(svg: str) -> Document:
    return Document(title="Round R1: results of laboratory L01", subtitle="An invented round", footer="Footer L01",
                    blocks=(
        Paragraph(text="Confidential to the laboratory named here.", style="confidential"),
        Facts(pairs=(("Laboratory code", "L01"), ("Laboratory", "Alpha Lab"), ("Empty", ""))),
        Heading(text="Your scores", anchor="scores"),
        Table(columns=(Column(title="Measurand"), Column(title="z", numeric=True), Column(title="Signal")),
              rows=((Cell(text="lead", link="fig"), Cell(text="0.42"), Cell(text="● acceptable", signal="acceptable")),
                    (Cell(text="cadmium"), Cell(text="−3.10"), Cell(text="■ action signal", signal="action"))),
              caption="Scores of L01"),
        Bullets(items=("σ_pt ≤ 0.3 u(x_pt)", "ζ and En ± µ", "z′ × ▲")),
        Paragraph(text="A muted note.", style="note"),
        Paragraph(text="Small print.", style="small"),
        Section(heading=Heading(text="A figure", level=3), blocks=(
            Figure(svg=svg, title="Ranked scores", caption="Figure caption", width=0.8, anchor="fig"),)),
        Paragraph(text="This evaluation supports, and does not replace, the provider's procedures.",
                  style="caution"),
    ))


@pytest.fixture(scope="module")
def figure_svg(scored_demo) -> str:
    return _svg_from_report(scored_demo.out / "report.html")


@pytest.fixture(scope="module")
def every_pdf(figure_svg) -> bytes:
    return render_pdf(_every_block(figure_svg))


def _long_table(rows: int = 150, cols: int = 4) -> Table:
    return Table(columns=tuple(Column(title=f"Head{j}", numeric=j > 0) for j in range(cols)),
                 rows=tuple(tuple(Cell(text=f"r{i}c{j}") for j in range(cols)) for i in range(rows)))


# ------------------------------------------------------------------------------------------ content

def test_every_heading_and_cell_text_is_in_the_pdf(every_pdf):
    text = _text(every_pdf)
    for s in ("Round R1: results of laboratory L01", "An invented round", "Confidential to the laboratory",
              "Laboratory code", "Alpha Lab", "Your scores", "Measurand", "lead", "0.42", "● acceptable",
              "−3.10", "■ action signal", "Scores of L01", "σ_pt ≤ 0.3 u(x_pt)", "ζ and En ± µ", "z′ × ▲",
              "A muted note.", "Small print.", "A figure", "Ranked scores", "Figure caption",
              "does not replace", "Footer L01", "page 1 of"):
        assert s in text, s
    assert "Empty" not in text  # a pair with an empty value is not drawn


def test_demo_lab_document_carries_its_lab_and_measurands_and_no_other_lab(scored_demo):
    ev = scored_demo.evaluation
    lab, other = ev.labs[0], ev.labs[1]
    text = _text(render_pdf(_lab_document_fallback(ev, lab)))
    assert ev.participants[lab].name in text and lab in text
    for name in ev.measurands:
        assert name in text
    assert ev.participants[other].name not in text


def test_fonts_are_embedded_subsets_and_no_base_14_font_is_used(every_pdf):
    fonts = _fonts(every_pdf)
    assert fonts and all(re.fullmatch(r"[A-Z]{6}\+DejaVuSans\w*", f) for f in fonts), fonts
    assert every_pdf.count(b"/FontFile2") == len(fonts)
    for base in (b"Helvetica", b"Times", b"Courier", b"ZapfDingbats", b"/Symbol"):
        assert base not in every_pdf


def test_figures_are_vectors_not_images(every_pdf, figure_svg):
    assert b"/Subtype /Image" not in every_pdf
    ops = b"".join(p.get_contents().get_data() for p in _reader(every_pdf).pages)
    assert len(re.findall(rb"[-\d.]+ [-\d.]+ [lm]\b", ops)) > 50  # the figure's paths, as path operators
    assert figure_svg.count("<path") > 5


def test_signal_cells_are_tinted_with_the_signal_colour(every_pdf):
    ops = b"".join(p.get_contents().get_data() for p in _reader(every_pdf).pages)
    fills = {tuple(round(float(v) * 255) for v in m) for m in re.findall(rb"([\d.]+) ([\d.]+) ([\d.]+) rg", ops)}

    def rgb(signal):
        return tuple(int(tint(SIGNAL_COLOUR[signal])[i:i + 2], 16) for i in (1, 3, 5))

    assert rgb("acceptable") in fills and rgb("action") in fills
    assert rgb("warning") not in fills  # no warning cell in this table


# ------------------------------------------------------------------------------------------ paper and pages

@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_every_page_has_the_paper_size(paper):
    data = render_pdf(Document(title="T", blocks=(_long_table(),)), paper)
    sizes = _page_sizes(data)
    assert len(sizes) >= 3 and set(sizes) == {PAPER_MM[paper]}


def test_letter_and_a4_lay_out_differently():
    doc = Document(title="T", blocks=(_long_table(300),))
    a4, letter = render_pdf(doc, "a4"), render_pdf(doc, "letter")
    assert len(_reader(letter).pages) > len(_reader(a4).pages)  # Letter is 18 mm shorter


def test_a_long_table_repeats_its_header_and_every_page_has_its_footer():
    data = render_pdf(Document(title="T", footer="Confidential to L01", blocks=(_long_table(),)))
    pages = [p.extract_text() for p in _reader(data).pages]
    assert len(pages) >= 3
    for i, text in enumerate(pages, 1):
        assert "Head0" in text and "Head3" in text, i
        assert f"page {i} of {len(pages)}" in text and "Confidential to L01" in text
    rows = [s for p in pages for s in re.findall(r"r\d+c0", p)]
    assert rows == [f"r{i}c0" for i in range(150)]  # every row once, in order


def test_a_heading_moves_to_the_next_page_with_what_follows_it():
    filler = Paragraph(text=" ".join(["word"] * 1210))  # fills the first page to its last few lines
    doc = Document(title="T", blocks=(filler, Section(heading=Heading(text="Kept heading"), blocks=(
        _long_table(5),))))
    pages = [p.extract_text() for p in _reader(render_pdf(doc)).pages]
    where = [i for i, t in enumerate(pages) if "Kept heading" in t]
    assert where and "Head0" in pages[where[0]] and "r0c0" in pages[where[0]]
    assert "word" in pages[0]


# ------------------------------------------------------------------------------------------ nothing overflows

def _baselines(data: bytes) -> list[float]:
    """The baseline of every text run, in mm from the top of its page."""
    out = []
    for page in _reader(data).pages:
        height = float(page.mediabox.height)

        def visit(text, cm, tm, font, size, height=height):
            if text.strip():
                out.append((height - (tm[5] * cm[3] + cm[5])) / PT)
        page.extract_text(visitor_text=visit)
    return out


def _check_within_margins(data: bytes, paper: str = "a4") -> None:
    right = PAPER_MM[paper][0] - MARGIN_MM
    runs = _runs(data)
    assert runs
    assert min(x for _, x, _, _, _ in runs) >= MARGIN_MM - 0.01
    assert _widest_right_edge(data) <= right + 0.01
    ys = _baselines(data)
    # the footer sits in the bottom margin, clear of the 5 mm or so a printer cannot print (common practice)
    assert min(ys) >= MARGIN_MM and max(ys) <= PAPER_MM[paper][1] - 8


HOSTILE = ("שלום עולם مختبر", "Lab 😀 ☃", "Bad\x07\x1b[31mname\u202e", "W" * 400, "<script>alert(1)</script>",
           "x" * 60 + " " + "https://example.invalid/" + "a/" * 80)


def test_hostile_text_prints_within_the_margins_and_readably():
    hostile = HOSTILE
    doc = Document(title=hostile[3], footer=hostile[3], blocks=(
        Facts(pairs=tuple(("Laboratory", h) for h in hostile)),
        Paragraph(text=" ".join(hostile)), Bullets(items=hostile),
        Table(columns=(Column(title="Lab"), Column(title="Name"), Column(title="z", numeric=True)),
              rows=tuple((Cell(text=f"L{i}"), Cell(text=h), Cell(text="1.00")) for i, h in enumerate(hostile)))))
    for paper in ("a4", "letter"):
        data = render_pdf(doc, paper)
        _check_within_margins(data, paper)
    text = _text(data)
    assert "<script>alert(1)</script>" in text  # shown as text
    assert "\x07" not in text and "\x1b" not in text and "\u202e" not in text
    assert "\ufffd" in text  # ... each shown as the replacement character
    assert text.replace("\n", "").count("W" * 50) >= 1  # the long word is broken, not lost


def test_a_table_row_taller_than_a_page_continues_on_the_next():
    note = " ".join(f"word{i}" for i in range(3000))
    doc = Document(title="T", blocks=(Table(columns=(Column(title="Lab"), Column(title="Note")),
                                            rows=((Cell(text="L1"), Cell(text=note)),
                                                  (Cell(text="L2"), Cell(text="x")))),))
    data = render_pdf(doc)
    _check_within_margins(data)
    pages = [p.extract_text() for p in _reader(data).pages]
    assert len(pages) >= 2 and all("Note" in p for p in pages)  # the header on each page
    words = re.findall(r"word\d+", "".join(pages))
    assert words == [f"word{i}" for i in range(3000)]


def test_printable_text_replaces_what_cannot_print_and_orders_rtl_runs_visually():
    assert printable_text("a\x00b\u200dc") == "a\ufffdb\ufffdc"
    assert printable_text("z′ ≤ ±µ") == "z′ ≤ ±µ"
    assert printable_text("ab שלום cd") == "ab םולש cd"  # Hebrew read right to left, placed in visual order
    assert printable_text("x\ny") == "x y" and printable_text("x\ny", lines=True) == "x\ny"


def test_a_wide_table_shrinks_then_splits_into_column_groups_repeating_the_key_columns():
    cols = (Column(title="Lab"), Column(title="Measurand")) + tuple(
        Column(title=f"Statistic{j}", numeric=True) for j in range(28))
    rows = tuple((Cell(text="K01"), Cell(text="lead")) + tuple(Cell(text=f"{j}.{j:03d}") for j in range(28))
                 for _ in range(3))
    data = render_pdf(Document(title="T", blocks=(Table(columns=cols, rows=rows, key_columns=2),)))
    _check_within_margins(data)
    text = _text(data)
    groups = text.count("Measurand")
    assert groups >= 2  # split, the key columns repeated in every group
    assert text.count("K01") == 3 * groups
    for j in range(28):
        assert len(re.findall(rf"\bStatistic{j}\b", text)) == 1 and text.count(f"{j}.{j:03d}") == 3
    sizes = [size for _, _, size, t, _ in _runs(data) if t.strip().startswith("Statistic")]
    assert min(sizes) >= TABLE_MIN_FONT_PT - 0.01


def test_a_slightly_wide_table_shrinks_its_font_instead_of_splitting():
    cols = tuple(Column(title=f"Column{j}") for j in range(12))
    rows = ((tuple(Cell(text=f"value{j}") for j in range(12))),)
    data = render_pdf(Document(title="T", blocks=(Table(columns=cols, rows=rows),)))
    _check_within_margins(data)
    assert _text(data).count("Column0") == 1
    sizes = {round(size, 1) for _, _, size, t, _ in _runs(data) if t.strip().startswith("value")}
    assert len(sizes) == 1 and TABLE_MIN_FONT_PT <= sizes.pop() < 8.0


def test_the_demo_lab_document_fits_the_page(scored_demo):
    ev = scored_demo.evaluation
    for paper in ("a4", "letter"):
        _check_within_margins(render_pdf(_lab_document_fallback(ev, ev.labs[0]), paper), paper)


# ------------------------------------------------------------------------------------------ determinism

def test_same_document_gives_the_same_bytes_here_and_in_a_fresh_process(every_pdf, figure_svg, tmp_path):
    assert render_pdf(_every_block(figure_svg)) == every_pdf
    import pickle

    (tmp_path / "doc.pickle").write_bytes(pickle.dumps(_every_block(figure_svg)))
    script = ("import pickle, sys; from pathlib import Path; from roundscore.outputs.pdf import render_pdf; "
              f"doc = pickle.loads(Path({str(tmp_path / 'doc.pickle')!r}).read_bytes()); "
              f"Path({str(tmp_path / 'out.pdf')!r}).write_bytes(render_pdf(doc))")
    subprocess.run([sys.executable, "-c", script], check=True, timeout=120)
    assert (tmp_path / "out.pdf").read_bytes() == every_pdf
    assert b"/CreationDate (D:20000101000000Z" in every_pdf


def test_fonts_parsed_once_give_the_same_file_as_fpdf_add_font(figure_svg, monkeypatch):
    import matplotlib

    import roundscore.outputs.pdf as module

    cached = render_pdf(_every_block(figure_svg))
    folder = Path(matplotlib.get_data_path()) / "fonts" / "ttf"

    def add_font(pdf):
        for style, name in module._FONT_FILES.items():
            pdf.add_font(module.FONT_FAMILY, style, str(folder / name))

    monkeypatch.setattr(module, "_add_fonts", add_font)
    assert render_pdf(_every_block(figure_svg)) == cached


def test_unknown_paper_is_refused():
    with pytest.raises(ValueError, match="paper: found 'a3'"):
        render_pdf(Document(title="T", blocks=()), "a3")  # type: ignore[arg-type]


# ------------------------------------------------------------------------------------------ the writer

def _report_document_fallback(ev) -> Document:
    """A minimal round document (labs by code only) until ``outputs.report.report_document`` lands."""
    sc = ev.scores
    return Document(title=f"Round {ev.round.id}: report", footer=f"Round {ev.round.id}", blocks=(
        Heading(text="Scores"),
        Table(columns=(Column(title="Lab"), Column(title="Measurand"), Column(title="z", numeric=True)),
              rows=tuple((Cell(text=r.lab), Cell(text=r.measurand), Cell(text=f"{r.z:.2f}", signal=r.signal))
                         for r in sc.itertuples()), key_columns=2)))


def test_the_pdf_writer_writes_a_file_per_lab_and_the_report_on_the_rounds_paper(scored_demo, tmp_path,
                                                                                   monkeypatch):
    import dataclasses

    import roundscore.outputs.report as report
    import roundscore.outputs.writers as writers
    from roundscore.support.filenames import lab_file_name

    monkeypatch.setattr(report, "lab_document", lambda ev, parts, lab: _lab_document_fallback(ev, lab, False),
                        raising=False)
    monkeypatch.setattr(report, "report_document", lambda ev, parts: _report_document_fallback(ev), raising=False)
    monkeypatch.setattr(writers, "report_parts_of", lambda ev, options: None)
    ev = scored_demo.evaluation
    ev = dataclasses.replace(ev, round=dataclasses.replace(ev.round, paper="letter"))
    seen = []
    files = writers.write_with([writers.PdfFiles()], ev, tmp_path,
                               writers.WriteOptions(jobs=1, progress=lambda *a: seen.append(a)))
    labs = ev.labs
    assert files[-1].name == "circulation.csv"  # written last by write_with, listing what was written
    files = files[:-1]
    assert files == [tmp_path / "report.pdf"] + [tmp_path / "labs" / lab_file_name(lab, ".pdf") for lab in labs]
    assert seen and seen[-1] == ("lab PDFs", len(labs), len(labs))
    report_text = _text(files[0].read_bytes())
    assert all(lab in report_text for lab in labs)
    assert not any(p.name in report_text for p in ev.participants.values())  # labs by code only
    for lab, path in zip(labs[:3], files[1:4]):
        data = path.read_bytes()
        text = _text(data)
        assert lab in text and ev.participants[lab].name in text
        assert not any(p.name in text for other, p in ev.participants.items() if other != lab)
        assert set(_page_sizes(data)) == {PAPER_MM["letter"]}


# --------------------------------------------------------------------------- the demo's own PDFs

def test_every_demo_lab_pdf_names_its_lab_every_measurand_and_no_other_lab(scored_demo, demo_pdfs):
    # The pipeline writes labs/LAB.pdf from the same Document as labs/LAB.html (one source, two renderings).
    ev = scored_demo.evaluation
    names = {lab: p.name for lab, p in ev.participants.items() if p.name}
    pdfs = sorted((demo_pdfs / "labs").glob("*.pdf"))
    assert len(pdfs) == len(ev.labs)
    for lab in ev.labs:
        text = _text((demo_pdfs / "labs" / f"{lab}.pdf").read_bytes())
        assert f"laboratory {lab}" in text and names[lab] in text
        for meas in ev.round.measurands:
            assert meas in text, (lab, meas)
        others = [n for other, n in names.items() if other != lab and n in text]
        assert others == [], (lab, others)
        assert "How to read your scores" in text and "does not replace" in text


def test_the_demo_report_pdf_is_the_report_page(scored_demo, demo_pdfs):
    data = (demo_pdfs / "report.pdf").read_bytes()
    text = _text(data)
    assert f"round {scored_demo.evaluation.round.id}".lower() in text.lower()
    for meas in scored_demo.evaluation.round.measurands:
        assert meas in text
    assert not any(p.name in text for p in scored_demo.evaluation.participants.values() if p.name)  # codes only
