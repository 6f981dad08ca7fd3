"""The PDF floor of benchmarks/scale.py: fpdf2 alone writing the same documents, and the documents themselves.

:func:`bare_pdf` draws a :class:`~roundscore.outputs.document.Document` the
plain way fpdf2 documents it, with none of roundscore's layout logic: the same
two DejaVu Sans fonts (parsed once per process and registered in each document,
as roundscore does: see :func:`_fonts_once`), headings and
text with ``multi_cell``, tables with ``FPDF.table()`` (header row repeated),
figures with ``FPDF.image()`` of the same SVG, a footer with the page number.
It does not split wide tables, shrink fonts, keep headings with what follows
or check glyphs; it is what writing the same pages costs the bare library.

:func:`documents` gives the documents roundscore writes: the builders of
``outputs/report.py`` (``lab_document``, ``report_document``) when they exist,
else a stand-in lab document of the same shape as a lab page (identity, the
scores table of every measurand, a score strip per measurand), so the renderer
can be measured before the builders land.
"""

from __future__ import annotations

import io
from typing import Any


def bare_pdf(doc: Any, paper: str) -> bytes:
    from fpdf import FPDF
    from fpdf.fonts import FontFace

    from roundscore.outputs.document import Bullets, Facts, Figure, Heading, Paragraph, Section, Table
    from roundscore.outputs.pdf import PDF_DATE, _svg_for_fpdf

    class Bare(FPDF):
        def footer(self) -> None:
            self.set_y(-12)
            self.set_font("DejaVu Sans", "", 7.5)
            self.cell(0, 4, f"{doc.footer}  page {self.page_no()} of {{nb}}")

    pdf = Bare(format="A4" if paper == "a4" else "Letter")
    pdf.set_creation_date(PDF_DATE)
    _fonts_once(pdf)
    pdf.add_page()

    def text(s: str, size: float = 9, style: str = "") -> None:
        pdf.set_font("DejaVu Sans", style, size)
        pdf.multi_cell(0, size * 0.45, s, new_x="LMARGIN", new_y="NEXT")

    def draw(block: Any) -> None:
        if isinstance(block, Section):
            draw(block.heading)
            for b in block.blocks:
                draw(b)
        elif isinstance(block, Heading):
            text(block.text, 12, "B")
        elif isinstance(block, Paragraph):
            text(block.text)
        elif isinstance(block, Bullets):
            for item in block.items:
                text("• " + item)
        elif isinstance(block, Facts):
            for k, v in block.pairs:
                if v:
                    text(f"{k}: {v}")
        elif isinstance(block, Table):
            pdf.set_font("DejaVu Sans", "", 7)
            with pdf.table(repeat_headings=1, headings_style=FontFace(emphasis="BOLD")) as t:
                t.row([c.title for c in block.columns])
                for row in block.rows:
                    r = t.row()
                    for c in row:
                        r.cell(c.text)
        elif isinstance(block, Figure):
            # fpdf2 2.8 cannot follow matplotlib's clip-path ids (they hold "-"): the floor needs the same
            # renaming roundscore does before drawing, or the bare library fails on every figure.
            pdf.image(io.BytesIO(_svg_for_fpdf(block.svg)), w=pdf.epw * block.width)

    text(doc.title, 15, "B")
    for block in doc.blocks:
        draw(block)
    return bytes(pdf.output())


def _fonts_once(pdf: Any) -> None:
    """The two DejaVu Sans styles registered in ``pdf`` from fonts parsed once per process.

    fpdf2's ``add_font`` parses the whole font file for every document (about
    0.3 s a file for the two styles); roundscore parses each style once per
    worker process and gives every document a fresh copy to subset
    (``roundscore.outputs.pdf._add_fonts``, tested to write the same file as
    ``add_font``). A floor paying ``add_font`` per file would charge the bare
    library a cost any program writing thousands of files avoids, so the floor
    registers its fonts the same way; with ``ROUNDSCORE_FLOOR_ADD_FONT=1`` it
    calls ``add_font`` per document as before (to measure what that costs).
    """
    import os

    if os.environ.get("ROUNDSCORE_FLOOR_ADD_FONT") == "1":
        import matplotlib

        folder = matplotlib.get_data_path() + "/fonts/ttf/"
        pdf.add_font("DejaVu Sans", "", folder + "DejaVuSans.ttf")
        pdf.add_font("DejaVu Sans", "B", folder + "DejaVuSans-Bold.ttf")
        return
    from roundscore.outputs.pdf import _add_fonts

    _add_fonts(pdf)


def documents(ev: Any, labs: list[str]) -> tuple[dict[str, Any], bool]:
    """{file name relative to the output folder: document} for ``report.pdf`` and the labs' files; and whether
    they are the stand-in documents (no builders in outputs/report.py)."""
    from roundscore.outputs import report
    from roundscore.support.filenames import lab_file_name

    if hasattr(report, "lab_document") and hasattr(report, "report_document"):
        from roundscore.outputs.figures import round_figures

        parts = report.report_parts(ev, round_figures(ev))
        out = {"report.pdf": report.report_document(ev, parts)}
        out.update({f"labs/{lab_file_name(lab, '.pdf')}": report.lab_document(ev, parts, lab) for lab in labs})
        return out, False
    return {f"labs/{lab_file_name(lab, '.pdf')}": _stand_in(ev, lab) for lab in labs}, True


def _stand_in(ev: Any, lab: str) -> Any:
    from roundscore.outputs.document import Cell, Column, Document, Facts, Figure, Heading, Section, Table
    from roundscore.outputs.strips import score_strip

    strips = _STRIPS.get(id(ev))
    if strips is None:
        strips = {m: score_strip(g["z"].to_numpy(float), measurand=m, score="z", title=m, key=f"strip-{m}")
                  for m, g in ev.scores.groupby("measurand", sort=False)}
        _STRIPS.clear()
        _STRIPS[id(ev)] = strips
    own = ev.scores[ev.scores["lab"] == lab]
    heads = ("Measurand", "Unit", "Your result", "Assigned value", "u(x_pt)", "σ_pt", "Score", "Your score",
             "Signal", "Rank", "Note")
    rows = tuple(tuple(Cell(text=t) for t in (
        r.measurand, r.unit, str(r.result), f"{r.assigned:.4g}", f"{r.u_assigned:.3g}", f"{r.sigma_pt:.3g}", r.score,
        f"{r.z:.2f}", r.signal, f"{r.rank:.0f} of {r.n_scored}", r.note)) for r in own.itertuples())
    figures = tuple(Figure(svg=strips[r.measurand].for_lab(lab, r.z, r.signal, "signals")) for r in own.itertuples()
                    if r.measurand in strips)
    p = ev.participants.get(lab)
    return Document(title=f"Round {ev.round.id}: results of laboratory {lab}", footer=f"Confidential to {lab}",
                    blocks=(Facts(pairs=(("Laboratory code", lab), ("Laboratory", p.name if p else ""))),
                            Section(heading=Heading(text="Your scores"), blocks=(Table(
                                columns=tuple(Column(title=h) for h in heads), rows=rows),)),
                            Section(heading=Heading(text="Where you stand"), blocks=figures)))


_STRIPS: dict[int, Any] = {}  # the shared strips of the last evaluation (it is frozen: no attribute of its own)
