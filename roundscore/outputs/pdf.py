"""A :class:`~roundscore.outputs.document.Document` drawn as a PDF (fpdf2): the same blocks as the HTML page.

:func:`render_pdf` lays out every block of ``outputs/document.py`` on A4 or US
Letter and returns the file's bytes. It decides nothing about content (the
builder formatted every number and chose every word); it decides only where
things go:

- text is wrapped to the printable width by this module (measured with fpdf2's
  own string widths), and a word longer than the width (a hostile lab name, a
  URL) is broken between characters, so no line passes the margin;
- a table gets column widths from its text; when it cannot fit the width at
  :data:`TABLE_FONT_PT` its font shrinks down to :data:`TABLE_MIN_FONT_PT`, and when
  it still cannot, it is split into column groups printed one after another,
  each repeating the table's ``key_columns`` (the row's identity). Its header row
  is repeated on every page it runs onto, and a cell showing a signal is
  tinted with that signal's colour of the one look (:mod:`roundscore.outputs.look`);
- a heading (and a :class:`~roundscore.outputs.document.Section`'s heading) moves
  to the next page with the first part of what follows it, rather than stand
  alone at the foot of a page; a figure is never split;
- figures are the builder's SVG drawn as vector paths and text by fpdf2, scaled
  to their ``width`` share of the text width;
- every page carries the document's footer and "page i of n".

Fonts are DejaVu Sans (regular and bold) from matplotlib's own data
folder, embedded as subsets, so σ, ζ, ′, µ, ≤, ± and the signal symbols print
and no base-14 font is used. A font is parsed once per process
(:func:`_font_templates`) and each document gets a fresh copy of the font
program to subset: parsing is what fpdf2's ``add_font`` spends its half
second on. Text the fonts cannot show (control characters, a character with no
glyph) is printed as U+FFFD; right-to-left runs are put in visual order with
fpdf2's implementation of the Unicode bidirectional algorithm.

The output is byte-identical for the same document: a fixed creation date
(:data:`PDF_DATE`, not the time of writing) and no random identifiers.
"""

from __future__ import annotations

import copy
import functools
import io
import re
import unicodedata
from dataclasses import dataclass
from datetime import datetime, UTC
from pathlib import Path
from typing import Any
from collections.abc import Callable, Sequence

from roundscore.model.round import Paper
from roundscore.outputs.document import (Block, Bullets, Cell, Document, Facts, Figure, Heading,
                                         Paragraph, Section, Table, TextStyle)
from roundscore.outputs.look import PAGE_COLOUR, SIGNAL_COLOUR, tint

__all__ = ["render_pdf", "PAPER_MM", "PDF_DATE", "MARGIN_MM", "TABLE_FONT_PT", "TABLE_MIN_FONT_PT", "FONT_FAMILY",
           "page_width_mm", "printable_text"]

#: Paper sizes (width, height) in millimetres: ISO 216 A4 and US Letter (8.5 × 11 in).
PAPER_MM: dict[str, tuple[float, float]] = {"a4": (210.0, 297.0), "letter": (215.9, 279.4)}
#: Page margins (common practice for office printers, which cannot print the outer 5 mm or so).
MARGIN_MM = 15.0
#: The creation date written into every PDF: fixed, so the same inputs give the same bytes.
PDF_DATE = datetime(2000, 1, 1, tzinfo=UTC)
#: The embedded font family (registered under this name so the SVG figures' "DejaVu Sans" text finds it).
FONT_FAMILY = "DejaVu Sans"
_FONT_FILES = {"": "DejaVuSans.ttf", "B": "DejaVuSans-Bold.ttf"}
#: Font sizes in points.
BODY_PT = 9.0
SMALL_PT = 7.5
HEADING_PT = {1: 15.0, 2: 12.0, 3: 10.0}
TABLE_FONT_PT = 8.0
#: A table too wide at TABLE_FONT_PT may shrink to this size before it is split into column groups
#: (common practice: about 6.5 pt is the smallest size read comfortably on paper).
TABLE_MIN_FONT_PT = 6.5
#: Line height as a multiple of the font size.
LEADING = 1.3
_PT = 25.4 / 72  # millimetres per point
_PAD = 1.2  # horizontal cell padding, mm
_VPAD = 0.6  # vertical cell padding, mm
_FOOTER_MM = 10.0  # room kept at the foot of each page for the footer
_REPLACEMENT = "\ufffd"
_EPS = 1e-6  # mm: widths summed in a different order differ in the last bits
#: Colours of the page (text, muted text, rules, table heads, boxes): the one look's.
_STYLE_COLOUR = {"body": PAGE_COLOUR["ink"], "note": PAGE_COLOUR["muted"], "caution": PAGE_COLOUR["ink"],
                 "confidential": PAGE_COLOUR["ink"], "small": PAGE_COLOUR["muted"], "alert": PAGE_COLOUR["ink"]}
_BOXED: dict[str, tuple[str, str | None]] = {  # style: (rule colour, fill colour)
    "caution": (PAGE_COLOUR["caution"], PAGE_COLOUR["caution_fill"]),
    "confidential": (PAGE_COLOUR["ink"], None),
    "alert": (PAGE_COLOUR["alert"], PAGE_COLOUR["alert_fill"]),
}


def page_width_mm(paper: Paper = "a4") -> float:
    """The printable width of a page of ``paper`` in millimetres (the page less both margins).

    >>> page_width_mm("a4")
    180.0
    """
    return PAPER_MM[paper][0] - 2 * MARGIN_MM


def _rgb(hex_colour: str) -> tuple[int, int, int]:
    return int(hex_colour[1:3], 16), int(hex_colour[3:5], 16), int(hex_colour[5:7], 16)


# ------------------------------------------------------------------------------------------ fonts

@dataclass(frozen=True, slots=True)
class _Template:
    font: Any  # fpdf.fonts.TTFFont, parsed once; never written to a document itself
    data: bytes  # the font program without the tables fpdf2 drops from every subset, copied per document


#: Tables fpdf2 2.8 drops from every embedded subset (``fpdf/output.py``, ``_add_fonts``), and ``kern``, which
#: it never uses (its text widths take no kerning) and which its subsets of DejaVu Sans lose anyway: removed
#: once from the font program kept in memory, so a document's subsetting does not read and prune them again.
_DROPPED_TABLES = ("FFTM", "GDEF", "GPOS", "GSUB", "MATH", "hdmx", "meta", "sbix", "CBDT", "CBLC", "EBDT",
                   "EBLC", "EBSC", "SVG ", "CPAL", "COLR", "kern")


@functools.cache
def _font_templates() -> dict[str, _Template]:
    """The parsed fonts of this process, by style (parsed once: see the module docstring)."""
    import matplotlib
    from fontTools import ttLib
    from fpdf import FPDF

    folder = Path(matplotlib.get_data_path()) / "fonts" / "ttf"
    scratch = FPDF()
    out = {}
    for style, name in _FONT_FILES.items():
        scratch.add_font(FONT_FAMILY, style, str(folder / name))
        program = ttLib.TTFont(str(folder / name), recalcTimestamp=False)
        for tag in _DROPPED_TABLES:
            if tag in program:
                del program[tag]
        buf = io.BytesIO()
        program.save(buf)
        out[style] = _Template(font=scratch.fonts[f"{FONT_FAMILY.lower()}{style}"], data=buf.getvalue())
    return out


def _add_fonts(pdf: Any) -> None:
    """Register the font's styles in ``pdf`` from the parsed templates, each with its own font program.

    fpdf2 subsets a font in place when it writes the file, so each document gets
    a fresh, lazily read ``TTFont`` of the program's bytes; the measured metrics
    (widths, character map, descriptor) are shared. The file is the same as
    with ``add_font`` (tested).
    """
    from fontTools import ttLib
    from fpdf.fonts import SubsetMap

    for tpl in _font_templates().values():
        font = copy.copy(tpl.font)
        font.i = len(pdf.fonts) + 1
        font.ttfont = ttLib.TTFont(io.BytesIO(tpl.data), recalcTimestamp=False, lazy=True)
        font.missing_glyphs = []
        font.biggest_size_pt = 0
        font._hbfont = None
        font.subset = SubsetMap(font)
        pdf.fonts[font.fontkey] = font


@functools.cache
def _glyphs() -> frozenset[int]:
    """Code points every style of the font can draw."""
    maps = [set(t.font.cmap) for t in _font_templates().values()]
    return frozenset(set.intersection(*maps))


@functools.lru_cache(maxsize=8192)
def printable_text(text: str, lines: bool = False) -> str:
    """``text`` as the embedded fonts can print it, in visual order.

    Control and format characters (a bidi override, a zero-width joiner) and
    characters no style of the font has are shown as U+FFFD, so nothing is
    silently dropped; tabs (and line breaks, unless ``lines``) become spaces; a
    right-to-left run is reversed into the order it is read on the page.

    >>> printable_text("L\\x0701\\tx")
    'L\\ufffd01 x'
    """
    glyphs = _glyphs()
    out = []
    for ch in text:
        if ch == "\n" and lines:
            out.append(ch)
        elif ch in "\t\n\r":
            out.append(" ")
        elif ord(ch) in glyphs and unicodedata.category(ch) not in ("Cc", "Cf", "Cs", "Co", "Cn"):
            out.append(ch)
        else:
            out.append(_REPLACEMENT)
    s = "".join(out)
    if any(unicodedata.bidirectional(ch) in ("R", "AL") for ch in s):
        s = "\n".join(_visual(part) for part in s.split("\n"))
    return s


def _visual(line: str) -> str:
    """A line with right-to-left runs in visual order (fpdf2's Unicode bidirectional algorithm, UAX #9)."""
    from fpdf.bidi import BidiParagraph, auto_detect_base_direction

    frags = BidiParagraph(text=line, base_direction=auto_detect_base_direction(line)).get_bidi_fragments()
    return "".join(t[::-1] if getattr(d, "value", d) == "RTL" else t for t, d in frags)


# ------------------------------------------------------------------------------------------ the page

def _new_pdf(paper: Paper, footer: str, created: datetime) -> Any:
    from fpdf import FPDF

    class _Pdf(FPDF):
        def footer(self) -> None:
            self.set_y(-MARGIN_MM + 2)
            self.set_font(FONT_FAMILY, "", SMALL_PT)
            self.set_text_color(*_rgb(PAGE_COLOUR["muted"]))
            right = f"page {self.page_no()} of {{nb}}"
            room = self.epw - self.get_string_width(f"page {self.page_no()} of 9999") - 4
            left = _clip(self, footer, room) if footer else ""
            self.cell(self.epw / 2, 4, left, align="L")
            self.set_x(self.l_margin + self.epw / 2)
            self.cell(self.epw / 2, 4, right, align="R")

    w, h = PAPER_MM[paper]
    pdf = _Pdf(unit="mm", format=(w, h))
    pdf.set_margins(MARGIN_MM, MARGIN_MM, MARGIN_MM)
    pdf.c_margin = 0  # text starts where this module puts it (cells pad themselves)
    pdf.set_auto_page_break(False)
    pdf.set_creation_date(created)
    pdf.set_creator("roundscore")
    pdf.alias_nb_pages()
    _add_fonts(pdf)
    pdf.set_font(FONT_FAMILY, "", BODY_PT)
    return pdf


def _clip(pdf: Any, text: str, width: float) -> str:
    """``text`` cut with "…" to fit ``width`` in the current font."""
    if pdf.get_string_width(text) <= width:
        return text
    lo, hi = 0, len(text)
    while lo < hi:
        mid = (lo + hi + 1) // 2
        if pdf.get_string_width(text[:mid] + "…") <= width:
            lo = mid
        else:
            hi = mid - 1
    return text[:lo] + "…"


def _wrap(measure: Callable[[str], float], text: str, width: float) -> list[str]:
    """Lines of ``text`` (already printable) no wider than ``width``; over-long words broken between characters."""
    lines: list[str] = []
    for para in text.split("\n"):
        line = ""
        for word in para.split(" "):
            if not word:
                continue
            cand = f"{line} {word}" if line else word
            if measure(cand) <= width + _EPS:
                line = cand
                continue
            if line:
                lines.append(line)
            while len(word) > 1 and measure(word) > width + _EPS:
                lo, hi = 1, len(word) - 1  # the longest prefix that fits (at least one character)
                while lo < hi:
                    mid = (lo + hi + 1) // 2
                    if measure(word[:mid]) <= width + _EPS:
                        lo = mid
                    else:
                        hi = mid - 1
                lines.append(word[:lo])
                word = word[lo:]
            line = word
        lines.append(line)
    return lines


class _Layout:
    """Draws the blocks of one document onto ``pdf``, top to bottom."""

    def __init__(self, pdf: Any, anchors: set[str]) -> None:
        self.pdf = pdf
        self.bottom = pdf.h - MARGIN_MM - _FOOTER_MM
        self.anchors = sorted(anchors)
        self.links: dict[str, int] = {}

    # -- primitives
    def font(self, size: float, style: str = "", colour: str = PAGE_COLOUR["ink"]) -> None:
        self.pdf.set_font(FONT_FAMILY, style, size)
        self.pdf.set_text_color(*_rgb(colour))

    def room(self) -> float:
        return self.bottom - self.pdf.get_y()

    def need(self, height: float) -> None:
        """A new page unless ``height`` fits below (never on an empty page)."""
        if height > self.room() and self.pdf.get_y() > self.pdf.t_margin + 0.1:
            self.page()

    def page(self) -> None:
        self.pdf.add_page()
        self.pdf.set_y(self.pdf.t_margin)
        if not self.links:  # a link needs a page: each points at the first until its anchor is drawn
            self.links = {a: self.pdf.add_link(page=1) for a in self.anchors}

    def lines(self, text: str, width: float) -> list[str]:
        return _wrap(self.pdf.get_string_width, printable_text(text, lines=True), width)

    def anchor(self, name: str) -> None:
        if name in self.links:
            self.pdf.set_link(self.links[name], y=self.pdf.get_y(), page=self.pdf.page_no())

    # -- heights of the first unbreakable piece of a block (for keep-with-next)
    def start_height(self, block: Block) -> float:
        if isinstance(block, Heading):
            return self.heading_height(block, HEADING_PT.get(block.level, HEADING_PT[3]))
        if isinstance(block, Section):
            return self.start_height(block.heading) + (self.start_height(block.blocks[0]) if block.blocks else 0)
        if isinstance(block, Figure):
            return self.figure_height(block)
        if isinstance(block, Table):
            return (4 + (BODY_PT * LEADING * _PT if block.caption else 0)) * 2 + 2 * TABLE_FONT_PT * LEADING * _PT
        size = SMALL_PT if getattr(block, "style", "body") == "small" else BODY_PT
        return min(2, len(self.text_of(block))) * size * LEADING * _PT + 2

    @staticmethod
    def text_of(block: Block) -> list[str]:
        if isinstance(block, Paragraph):
            return [block.text]
        if isinstance(block, Bullets):
            return list(block.items)
        if isinstance(block, Facts):
            return [v for _, v in block.pairs if v]
        return [""]

    def heading_height(self, h: Heading, size: float) -> float:
        self.font(size, "B")
        return len(self.lines(h.text, self.pdf.epw)) * size * LEADING * _PT + (3.0 if h.level <= 2 else 2.0)

    # -- blocks
    def block(self, block: Block, following: Block | None = None) -> None:
        if isinstance(block, Section):
            self.heading(block.heading, block.blocks[0] if block.blocks else None)
            for i, b in enumerate(block.blocks):
                self.block(b, block.blocks[i + 1] if i + 1 < len(block.blocks) else None)
        elif isinstance(block, Heading):
            self.heading(block, following)
        elif isinstance(block, Paragraph):
            self.paragraph(block.text, block.style)
        elif isinstance(block, Bullets):
            self.bullets(block)
        elif isinstance(block, Facts):
            self.facts(block)
        elif isinstance(block, Table):
            self.table(block)
        elif isinstance(block, Figure):
            self.figure(block)
        else:  # pragma: no cover - a new block type must be drawn here
            raise TypeError(f"no PDF drawing for block {type(block).__name__}")

    def heading(self, h: Heading, following: Block | None) -> None:
        size = HEADING_PT.get(h.level, HEADING_PT[3])
        height = self.heading_height(h, size)
        self.need(height + (self.start_height(following) if following is not None else 0))
        pdf = self.pdf
        pdf.set_y(pdf.get_y() + (2.5 if h.level <= 2 else 1.5))
        self.anchor(h.anchor)
        self.font(size, "B")
        for line in self.lines(h.text, pdf.epw):
            pdf.set_x(pdf.l_margin)
            pdf.cell(pdf.epw, size * LEADING * _PT, line, new_x="LMARGIN", new_y="NEXT")
        if h.level <= 2:
            pdf.set_draw_color(*_rgb(PAGE_COLOUR["ink"]))
            pdf.set_line_width(0.4 if h.level == 1 else 0.3)
            pdf.line(pdf.l_margin, pdf.get_y() + 0.3, pdf.l_margin + pdf.epw, pdf.get_y() + 0.3)
        pdf.set_y(pdf.get_y() + 1.5)

    def text_lines(self, lines: Sequence[str], size: float, x: float, width: float) -> None:
        """Lines at ``x``, each on a new page when the page is full."""
        pdf = self.pdf
        h = size * LEADING * _PT
        for line in lines:
            self.need(h)
            pdf.set_x(x)
            pdf.cell(width, h, line, new_x="LMARGIN", new_y="NEXT")

    def paragraph(self, text: str, style: TextStyle) -> None:
        pdf = self.pdf
        size = SMALL_PT if style == "small" else (BODY_PT - 0.5 if style == "note" else BODY_PT)
        boxed = _BOXED.get(style)
        inset = 3.0 if boxed else 0.0
        self.font(size, "B" if style in ("confidential", "alert") else "", _STYLE_COLOUR[style])
        lines = self.lines(text, pdf.epw - 2 * inset)
        h = size * LEADING * _PT
        if boxed:
            # a box is drawn page by page around the lines that fall on each page
            rule, fill = boxed
            i = 0
            pdf.set_y(pdf.get_y() + 1)
            while i < len(lines):
                self.need(h + 2 * _VPAD + 2)
                fit = max(1, int((self.room() - 2 * _VPAD - 2) // h))
                part = lines[i:i + fit]
                top = pdf.get_y()
                box_h = len(part) * h + 2 * _VPAD + 2
                if fill:
                    pdf.set_fill_color(*_rgb(fill))
                    pdf.rect(pdf.l_margin, top, pdf.epw, box_h, style="F")
                pdf.set_draw_color(*_rgb(rule))
                if style in ("caution", "alert"):
                    pdf.set_line_width(1.2)
                    pdf.line(pdf.l_margin + 0.6, top, pdf.l_margin + 0.6, top + box_h)
                else:
                    pdf.set_line_width(0.5)
                    pdf.rect(pdf.l_margin, top, pdf.epw, box_h)
                pdf.set_y(top + _VPAD + 1)
                self.font(size, "B" if style in ("confidential", "alert") else "", _STYLE_COLOUR[style])
                self.text_lines(part, size, pdf.l_margin + inset, pdf.epw - 2 * inset)
                pdf.set_y(top + box_h)
                i += len(part)
            pdf.set_y(pdf.get_y() + 2)
            return
        self.text_lines(lines, size, pdf.l_margin, pdf.epw)
        pdf.set_y(pdf.get_y() + 1.5)

    def bullets(self, block: Bullets) -> None:
        pdf = self.pdf
        size = SMALL_PT if block.style == "small" else BODY_PT
        indent = 5.0
        for item in block.items:
            self.font(size, "", _STYLE_COLOUR[block.style])
            lines = self.lines(item, pdf.epw - indent)
            self.need(size * LEADING * _PT)
            pdf.set_x(pdf.l_margin)
            pdf.cell(indent, size * LEADING * _PT, "•")
            pdf.set_x(pdf.l_margin + indent)
            self.text_lines(lines, size, pdf.l_margin + indent, pdf.epw - indent)
        pdf.set_y(pdf.get_y() + 1.5)

    def facts(self, block: Facts) -> None:
        pdf = self.pdf
        pairs = [(k, v) for k, v in block.pairs if v]
        if not pairs:
            return
        size = SMALL_PT if block.style == "small" else BODY_PT
        h = size * LEADING * _PT
        self.font(size, "B")
        label_w = min(pdf.epw * 0.35, max(pdf.get_string_width(printable_text(k)) for k, _ in pairs) + 3)
        for k, v in pairs:
            self.font(size, "B")
            klines = self.lines(k, label_w - 2)
            self.font(size, "")
            vlines = self.lines(v, pdf.epw - label_w)
            self.need(h * max(len(klines), len(vlines)))
            top = pdf.get_y()
            self.font(size, "B")
            self.text_lines(klines, size, pdf.l_margin, label_w - 2)
            end = pdf.get_y()
            pdf.set_y(top)
            self.font(size, "", _STYLE_COLOUR[block.style])
            self.text_lines(vlines, size, pdf.l_margin + label_w, pdf.epw - label_w)
            pdf.set_y(max(end, pdf.get_y()))
        pdf.set_y(pdf.get_y() + 1.5)

    def figure_height(self, fig: Figure) -> float:
        w, h = _svg_size(fig.svg)
        width = self.pdf.epw * max(0.1, min(1.0, fig.width))
        height = width * h / w if w > 0 else 0
        scale = min(1.0, (self.bottom - self.pdf.t_margin - 12) / height) if height > 0 else 1.0
        caption = 0.0
        if fig.title:
            caption += BODY_PT * LEADING * _PT * 2
        if fig.caption:
            caption += SMALL_PT * LEADING * _PT * 2
        return height * scale + caption + 3

    def figure(self, fig: Figure) -> None:
        pdf = self.pdf
        self.need(self.figure_height(fig))
        self.anchor(fig.anchor)
        if fig.title:
            self.font(BODY_PT, "B")
            self.text_lines(self.lines(fig.title, pdf.epw), BODY_PT, pdf.l_margin, pdf.epw)
        w, h = _svg_size(fig.svg)
        width = pdf.epw * max(0.1, min(1.0, fig.width))
        height = width * h / w if w > 0 else 0
        if height > self.room():  # taller than a whole page: shrunk to fit
            width, height = width * self.room() / height, self.room()
        if height > 0:
            pdf.image(io.BytesIO(_svg_for_fpdf(fig.svg)), x=pdf.l_margin, y=pdf.get_y(), w=width, h=height)
            pdf.set_y(pdf.get_y() + height + 1)
        if fig.caption:
            self.font(SMALL_PT, "", PAGE_COLOUR["muted"])
            self.text_lines(self.lines(fig.caption, pdf.epw), SMALL_PT, pdf.l_margin, pdf.epw)
        pdf.set_y(pdf.get_y() + 2)

    def table(self, table: Table) -> None:
        for group, size, widths in _table_groups(self.pdf, table):
            _TableDrawer(self, table, group, size, widths).draw()


_SVG_ID = re.compile(r'\bid="([^"]*)"')


def _svg_for_fpdf(svg: str) -> bytes:
    """``svg`` with its element ids renamed to word characters, as fpdf2 2.8's SVG reader needs for the
    references it follows (``url(#id)`` of a clip path, ``href="#id"``); the drawing is unchanged.

    >>> _svg_for_fpdf('<svg><clipPath id="d-lead-1"/><g clip-path="url(#d-lead-1)"/></svg>')
    b'<svg><clipPath id="r0"/><g clip-path="url(#r0)"/></svg>'
    >>> _svg_for_fpdf('<svg><path style="fill: #56b4e9"/><text style="font-size: 9px">a</text></svg>')[34:]
    b'<text style="fill: #000000; opacity: 1; font-size: 9px">a</text></svg>'
    """
    ids = {old: f"r{k}" for k, old in enumerate(dict.fromkeys(_SVG_ID.findall(svg)))}
    if ids and any(not re.fullmatch(r"\w+", old) for old in ids):
        names = "|".join(re.escape(old) for old in sorted(ids, key=len, reverse=True))
        svg = _SVG_ID.sub(lambda m: f'id="{ids[m.group(1)]}"', svg)
        svg = re.sub(rf'(url\(#|href="#)({names})(?=[)"])', lambda m: m.group(1) + ids[m.group(2)], svg)
    # fpdf2 2.8 draws a <text> without a fill in the fill and opacity of the shape drawn before it (a pale
    # band, say), not in SVG's default black: give matplotlib's text elements their colour explicitly.
    svg = _SVG_TEXT_STYLE.sub(lambda m: m.group(0) if "fill" in m.group(1) else
                              f'<text style="fill: #000000; opacity: 1; {m.group(1)}"', svg)
    # Participant text in a figure (a method name in a legend) is printed as the body text is: a character the
    # embedded font has no glyph for shows as U+FFFD (else fpdf2 drops it and warns on the terminal).
    svg = _SVG_TEXT_BODY.sub(lambda m: m.group(1) + printable_text(m.group(2)) + m.group(3), svg)
    return svg.encode("utf-8")


_SVG_TEXT_STYLE = re.compile(r'<text style="([^"]*)"')
_SVG_TEXT_BODY = re.compile(r"(<text\b[^>]*>)([^<]*)(</text>)")


_SVG_TAG = re.compile(r"<svg\b[^>]*>", re.S)
_NUMBER = r"([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)"


def _svg_size(svg: str) -> tuple[float, float]:
    """(width, height) of an SVG in its own units: its viewBox, else its width and height (0, 0 if neither).

    Read from the root element's attributes (fpdf2 parses the whole SVG again to draw it).

    >>> _svg_size('<svg xmlns="http://www.w3.org/2000/svg" width="360pt" viewBox="0 0 720 64"><g/></svg>')
    (720.0, 64.0)
    """
    m = _SVG_TAG.search(svg)
    tag = m.group(0) if m else ""
    box = re.search(r'viewBox="\s*' + r"[\s,]+".join([_NUMBER] * 4) + r'\s*"', tag)
    if box:
        return float(box.group(3)), float(box.group(4))
    w = re.search(r'\bwidth="' + _NUMBER, tag)
    h = re.search(r'\bheight="' + _NUMBER, tag)
    return (float(w.group(1)), float(h.group(1))) if w and h else (0.0, 0.0)


# ------------------------------------------------------------------------------------------ tables

def _table_groups(pdf: Any, table: Table) -> list[tuple[list[int], float, list[float]]]:
    """How ``table`` is printed: a list of (column indices, font size, column widths in mm).

    One group when the columns fit the width (at a smaller font if need be);
    otherwise groups of the key columns plus as many others as fit.
    """
    epw = pdf.epw
    n = len(table.columns)
    keys = list(range(min(max(table.key_columns, 0), n)))
    # widths measured at 1 pt: string widths scale with the font size
    # per column: the longest word (a number whole), the widest cell (the heading by its longest word) and
    # the widest cell or heading on one line
    natural, body, least = [], [], []
    for j, col in enumerate(table.columns):
        nat, cells, low = 0.0, 0.0, 0.0
        for k, text in enumerate([col.title] + [row[j].text for row in table.rows]):
            pdf.set_font(FONT_FAMILY, "B" if k == 0 else "", 1.0)
            s = printable_text(text)
            whole = pdf.get_string_width(s)
            word = max((pdf.get_string_width(w) for w in s.split(" ")), default=0.0)
            nat = max(nat, whole)
            cells = max(cells, word if k == 0 else whole)
            # a number is never broken; a heading and a text need at least their longest word
            low = max(low, whole if col.numeric and k > 0 else word)
        natural.append(nat)
        body.append(cells)
        least.append(low)

    def need(cols: Sequence[int], size: float) -> float:
        return sum(least[j] * size + 2 * _PAD for j in cols)

    every = list(range(n))
    size = TABLE_FONT_PT
    while need(every, size) > epw and size > TABLE_MIN_FONT_PT:
        size = max(TABLE_MIN_FONT_PT, size - 0.5)
    if need(every, size) <= epw:
        groups = [every]
    else:
        groups, current = [], list(keys)
        for j in every:
            if j in keys:
                continue
            if len(current) > len(keys) and need(current + [j], size) > epw:
                groups.append(current)
                current = list(keys)
            current.append(j)
        groups.append(current)

    def widths(g: list[int]) -> list[float]:
        # the cells on one line first (headings wrap), then what room is left for the headings on one line
        nat, cells, low = ([v[j] * size + 2 * _PAD for j in g] for v in (natural, body, least))
        return _widths(nat, cells, epw) if sum(cells) <= epw else _widths(cells, low, epw)

    return [(g, size, widths(g)) for g in groups]


def _widths(natural: list[float], least: list[float], total: float) -> list[float]:
    """Column widths within ``total``: natural when they fit, else each at least its longest word (when that
    fits), the room left shared out evenly, a column wanting less than its share getting all it wants (so short
    texts, a signal word, stay on one line and the long ones, a note, wrap).

    >>> _widths([10, 20], [5, 5], 100)
    [10, 20]
    >>> [round(w, 1) for w in _widths([50, 100], [10, 20], 90)]
    [40.0, 50.0]
    >>> [round(float(w), 1) for w in _widths([12, 100, 100], [4, 10, 10], 72)]
    [12.0, 30.0, 30.0]
    """
    if sum(natural) <= total:
        return natural
    if sum(least) > total:  # even the longest words do not fit: shared in proportion (words are broken)
        return [total * w / sum(least) for w in least]
    spare = total - sum(least)
    wants = [max(0.0, a - b) for a, b in zip(natural, least)]
    give = [0.0] * len(wants)
    open_ = sorted((i for i, w in enumerate(wants) if w > 0), key=lambda i: wants[i])
    while open_:
        share = spare / len(open_)
        i = open_[0]
        if wants[i] <= share:  # satisfied whole: the rest is shared by the others
            give[i] = wants[i]
            spare -= wants[i]
            open_.pop(0)
        else:
            for i in open_:
                give[i] = share
            break
    return [b + g for b, g in zip(least, give)]


class _TableDrawer:
    """One column group of a table: the header row, then the rows, the header repeated on each new page."""

    def __init__(self, layout: _Layout, table: Table, group: list[int], size: float, widths: list[float]) -> None:
        self.layout, self.pdf, self.table = layout, layout.pdf, table
        self.group, self.size, self.widths = group, size, widths
        self.line_h = size * LEADING * _PT

    def cell_lines(self, text: str, j: int, bold: bool = False) -> list[str]:
        self.pdf.set_font(FONT_FAMILY, "B" if bold else "", self.size)
        return _wrap(self.pdf.get_string_width, printable_text(text), self.widths[j] - 2 * _PAD)

    def row_height(self, lines: list[list[str]]) -> float:
        return max(len(x) for x in lines) * self.line_h + 2 * _VPAD

    def draw_row(self, cells: Sequence[Cell | None], lines: list[list[str]], header: bool) -> None:
        pdf = self.pdf
        top, h = pdf.get_y(), self.row_height(lines)
        x = pdf.l_margin
        pdf.set_draw_color(*_rgb(PAGE_COLOUR["rule"]))
        pdf.set_line_width(0.2)
        for k, j in enumerate(self.group):
            w = self.widths[k]
            cell = cells[k]
            fill = PAGE_COLOUR["head"] if header else (
                tint(SIGNAL_COLOUR[cell.signal]) if cell is not None and cell.signal in SIGNAL_COLOUR else None)
            if fill:
                pdf.set_fill_color(*_rgb(fill))
            pdf.rect(x, top, w, h, style="DF" if fill else "D")
            pdf.set_font(FONT_FAMILY, "B" if header else "", self.size)
            pdf.set_text_color(*_rgb(PAGE_COLOUR["ink"]))
            align = "R" if self.table.columns[j].numeric and not header else "L"
            link = self.layout.links.get(cell.link) if cell is not None and cell.link else None
            for i, line in enumerate(lines[k]):
                pdf.set_xy(x + _PAD, top + _VPAD + i * self.line_h)
                pdf.cell(w - 2 * _PAD, self.line_h, line, align=align, link=link or "")
            x += w
        pdf.set_y(top + h)

    def draw(self) -> None:
        pdf, layout, table = self.pdf, self.layout, self.table
        head = [self.cell_lines(table.columns[j].title, k, bold=True) for k, j in enumerate(self.group)]
        head_h = self.row_height(head)
        caption: list[str] = []
        if table.caption:
            layout.font(BODY_PT - 0.5, "", PAGE_COLOUR["muted"])
            caption = layout.lines(table.caption, pdf.epw)
        rows = [[self.cell_lines(row[j].text, k) for k, j in enumerate(self.group)] for row in table.rows]
        first = min(self.row_height(rows[0]), 3 * self.line_h + 2 * _VPAD) if rows else 0.0  # a tall row splits
        layout.need(len(caption[:2]) * (BODY_PT - 0.5) * LEADING * _PT + head_h + first + 1)
        if caption:
            layout.font(BODY_PT - 0.5, "", PAGE_COLOUR["muted"])
            layout.text_lines(caption, BODY_PT - 0.5, pdf.l_margin, pdf.epw)
        self.draw_row([None] * len(self.group), head, header=True)
        fresh = layout.bottom - pdf.t_margin - head_h  # the room for rows on a new page
        for row, lines in zip(table.rows, rows):
            cells = [row[j] for j in self.group]
            while self.row_height(lines) > layout.room():
                fit = int((layout.room() - 2 * _VPAD) // self.line_h)
                if self.row_height(lines) > fresh and fit >= 1:  # taller than a page: split between lines
                    self.draw_row(cells, [x[:fit] for x in lines], header=False)
                    lines = [x[fit:] for x in lines]
                layout.page()
                self.draw_row([None] * len(self.group), head, header=True)
            self.draw_row(cells, lines, header=False)
        pdf.set_y(pdf.get_y() + 3)


# ------------------------------------------------------------------------------------------ the document

def _anchors(blocks: Sequence[Block]) -> set[str]:
    out: set[str] = set()
    for b in blocks:
        if isinstance(b, Section):
            out |= _anchors((b.heading,) + b.blocks)
        elif isinstance(b, (Heading, Figure)) and b.anchor:
            out.add(b.anchor)
    return out


def render_pdf(doc: Document, paper: Paper = "a4", *, created: datetime = PDF_DATE) -> bytes:
    """The PDF of ``doc`` on ``paper`` ("a4" or "letter"): its bytes, the same for the same document.

    Parameters
    ----------
    doc : Document
        The page's content (headings, paragraphs, facts, tables, figures...).
    paper : {"a4", "letter"}
        ISO 216 A4 or US Letter, portrait.
    created : datetime
        The creation date written in the file's metadata (default :data:`PDF_DATE`, fixed).

    Examples
    --------
    >>> pdf = render_pdf(Document(title="Round R1", blocks=(Paragraph(text="σ_pt ≤ 0.3"),)))
    >>> pdf[:5], b"/MediaBox [0 0 595.28 841.89]" in pdf
    (b'%PDF-', True)
    """
    if paper not in PAPER_MM:
        raise ValueError(f"paper: found {paper!r}; allowed: {', '.join(map(repr, PAPER_MM))}")
    pdf = _new_pdf(paper, printable_text(doc.footer), created)
    pdf.set_title(printable_text(doc.title))
    pdf.set_compression(True)
    layout = _Layout(pdf, _anchors(doc.blocks))
    layout.page()
    layout.heading(Heading(text=doc.title, level=1), doc.blocks[0] if doc.blocks else None)
    if doc.subtitle:
        layout.paragraph(doc.subtitle, "note")
    for i, block in enumerate(doc.blocks):
        layout.block(block, doc.blocks[i + 1] if i + 1 < len(doc.blocks) else None)
    return bytes(pdf.output())

