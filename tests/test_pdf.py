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


def _runs(data: bytes) -> list[tuple[int, float, float, str]]:
    """(page, x mm, font size pt, text) of every text-showing operator, outside form XObjects (figures)."""
    out = []
    for i, page in enumerate(_reader(data).pages):
        def visit(text, cm, tm, font, size, i=i):
            if text.strip():
                x = (tm[4] * cm[0] + cm[4]) / PT
                out.append((i, x, size * math.hypot(tm[0], tm[1]) * math.hypot(cm[0], cm[1]), text))
        page.extract_text(visitor_text=visit)
    return out


def _widest_right_edge(data: bytes) -> float:
    """The largest right end (mm) of any text run, measured with fpdf2's widths of the embedded font."""
    from fpdf import FPDF

    pdf = FPDF(unit="mm")
    _add_fonts(pdf)
    widest = 0.0
    for _, x, size, text in _runs(data):
        w = max(pdf.get_string_width(text) for _ in [pdf.set_font("DejaVu Sans", s, size) for s in ("", "B")])
        widest = max(widest, x + w)
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

def _lab_document_fallback(ev, lab: str) -> Document:
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
    strips = []
    for name in ev.measurands:
        own = rows[rows["measurand"] == name]
        z = ev.scores[ev.scores["measurand"] == name]["z"].to_numpy(float)
        strip = score_strip(z, measurand=name, score="z", title=name, key=f"strip-{name}")
        v = float(own["z"].iloc[0]) if len(own) else None
        strips.append(Figure(svg=strip.for_lab(lab, v, own["signal"].iloc[0] if len(own) else None, "signals"),
                             anchor=f"strip-{name}"))
    return Document(title=f"Round {ev.round.id}: results of laboratory {lab}", subtitle=ev.round.title or "",
                    footer=f"Confidential to laboratory {lab}", blocks=(
        Paragraph(text="Confidential to the laboratory named here.", style="confidential"),
        Facts(pairs=(("Laboratory code", lab), ("Laboratory", p.name if p else ""),
                     ("Contact", p.contact if p else ""))),
        Section(heading=Heading(text="Your scores"), blocks=(scores,)),
        Section(heading=Heading(text="Where you stand"), blocks=tuple(strips)),
        Section(heading=Heading(text="Round statistics"), blocks=(stats,)),
        Paragraph(text="This evaluation supports, and does not replace, the provider's procedures.",
                  style="caution")))
