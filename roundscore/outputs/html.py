"""A :class:`~roundscore.outputs.document.Document` drawn as one self-contained HTML page (no script, no network).

The rendering decides nothing about content: it escapes every text, colours a cell by its signal (the one
look, :mod:`roundscore.outputs.look`), draws figures as inline SVG and lists the top-level sections first
when the document asks for contents. The print stylesheet sets the page to the document's paper
(``[round] paper``), keeps headings with what follows, lets wide tables wrap (cells break long words, the
header row repeats) and gives figures the printable width, so nothing is cut off on A4 or US Letter.
"""

from __future__ import annotations

import html
import re
from collections import OrderedDict

from roundscore.outputs.document import (Block, Bullets, Cell, Document, Facts, Figure, Heading,
                                         Paragraph, Section, Table)
from roundscore.outputs.look import SIGNAL_COLOUR, SIGNAL_WORD, tint as _tint

__all__ = ["render_html", "column_groups", "PAPER_SIZES", "CSS", "MAX_COLUMNS"]

#: CSS ``@page size`` of each ``[round] paper``, portrait.
PAPER_SIZES = {"a4": "A4", "letter": "letter"}


CSS = """
:root { --ink: #1a1a1a; --muted: #555; --rule: #c8c8c8; --head: #dde6f0; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif; color: var(--ink);
       margin: 0 auto; max-width: 64rem; padding: 1rem 1.5rem 3rem; line-height: 1.4; font-size: 15px; }
h1 { font-size: 1.55rem; margin: .2rem 0 .4rem; } h2 { font-size: 1.25rem; border-bottom: 2px solid var(--ink);
       margin-top: 2.2rem; } h3 { font-size: 1.05rem; margin: 1.6rem 0 .4rem; }
nav ol { columns: 2; font-size: .9rem; } a { color: #0b4f8a; }
.caution { border-left: 5px solid #0072B2; background: #eef5fb; padding: .6rem .9rem; margin: .8rem 0; }
.alert { border-left: 5px solid #D55E00; background: #fbeee6; padding: .6rem .9rem; margin: .8rem 0;
         font-weight: bold; }
.confidential { border: 2px solid var(--ink); padding: .5rem .9rem; margin: .8rem 0; }
.small { font-size: .8rem; }
table { border-collapse: collapse; margin: .5rem 0 1rem; font-size: .85rem; }
caption { text-align: left; font-size: .85rem; color: var(--muted); caption-side: bottom; }
th, td { border: 1px solid var(--rule); padding: .2rem .45rem; vertical-align: top; text-align: left; }
th { background: var(--head); } td[class^="s-"] { white-space: nowrap; }
td.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.wide { display: block; overflow-x: auto; max-width: 100%; }
dl.kv { display: grid; grid-template-columns: max-content 1fr; gap: .1rem 1rem; margin: .4rem 0; }
dl.kv dt { font-weight: bold; } dl.kv dd { margin: 0; }
figure { margin: .8rem 0 1.2rem; } figure svg { width: 100%; height: auto; max-width: 46rem; display: block; }
figure.square svg { max-width: 40rem; }
figure.strip { margin: 0; } figure.strip svg { max-width: 100%; border-bottom: 1px solid var(--rule); }
figcaption { font-size: .85rem; color: var(--muted); max-width: 46rem; }
.muted, .note { color: var(--muted); }
""" + "".join(f".s-{s} {{ background: {_tint(c)}; }}\n" for s, c in SIGNAL_COLOUR.items()) + """
@media print {
  body { max-width: none; padding: 0; font-size: 9pt; }
  nav { display: none; }
  h2 { break-before: page; } h2:first-of-type, section:first-of-type h2 { break-before: auto; }
  h1, h2, h3 { break-after: avoid; }
  figure, tr, dl.kv, .caution, .alert, .confidential { break-inside: avoid; }
  thead { display: table-header-group; }
  table { font-size: 7.5pt; }
  .wide { display: table; overflow: visible; width: 100%; table-layout: auto; }
  th, td { overflow-wrap: break-word; hyphens: auto; padding: .1rem .2rem; }
  figure svg, figure.square svg, figcaption { max-width: 100%; }
  a { color: inherit; text-decoration: none; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
"""


_SPECIAL = re.compile(r"[&<>\"']")


def _e(v: object) -> str:
    """Text escaped for HTML (most cells have nothing to escape: returned as they are)."""
    s = "" if v is None else v if isinstance(v, str) else str(v)
    return html.escape(s, quote=True) if _SPECIAL.search(s) else s


def _cell(c: Cell, numeric: bool, signal_words: dict[str, str]) -> str:
    body = _e(c.text)
    if c.link:
        body = f'<a href="#{_e(c.link)}">{body}</a>'
    if c.signal is not None:
        title = signal_words.get(c.signal, c.signal)
        return f'<td class="s-{_e(c.signal)}" title="{_e(title)}">{body}</td>'
    return f'<td class="n">{body}</td>' if numeric else f"<td>{body}</td>"


#: A table with more columns than this is drawn as column groups, each repeating the table's key columns,
#: so that it fits the printed width of A4 or Letter portrait (measured by tests/test_browser.py: eleven
#: columns of short numbers and headings fit 186 mm; common practice for wide statistical tables).
MAX_COLUMNS = 11


def column_groups(t: Table, most: int = MAX_COLUMNS) -> list[list[int]]:
    """The column indices of each group: the key columns, then at most ``most`` − keys others.

    >>> from roundscore.outputs.document import Column
    >>> t = Table(columns=tuple(Column(title=str(i)) for i in range(12)), rows=(), key_columns=2)
    >>> column_groups(t, 6)
    [[0, 1, 2, 3, 4, 5], [0, 1, 6, 7, 8, 9], [0, 1, 10, 11]]
    >>> column_groups(Table(columns=tuple(Column(title=str(i)) for i in range(12)), rows=()), 11)
    [[0, 1, 2, 3, 4, 5, 6], [0, 7, 8, 9, 10, 11]]
    """
    n = len(t.columns)
    if n <= most:
        return [list(range(n))]
    keys = list(range(min(max(t.key_columns, 0), most - 1)))
    rest = list(range(len(keys), n))
    groups = -(-len(rest) // (most - len(keys)))
    step = -(-len(rest) // groups)  # balanced: no group left with a single column
    return [keys + rest[i:i + step] for i in range(0, len(rest), step)]


def _table(t: Table, words: dict[str, str]) -> str:
    numeric = [c.numeric for c in t.columns]
    groups = column_groups(t)
    out = []
    for g, cols in enumerate(groups):
        out.append('<table class="wide">')
        caption = t.caption
        if len(groups) > 1:
            part = f"Columns {cols[0] + 1 if g == 0 else cols[t.key_columns] + 1}–{cols[-1] + 1} of {len(numeric)}"
            caption = f"{caption} ({part})" if caption else part
        if caption:
            out.append(f"<caption>{_e(caption)}</caption>")
        out.append("<thead><tr>" + "".join(f"<th>{_e(t.columns[j].title)}</th>" for j in cols)
                   + "</tr></thead><tbody>")
        for row in t.rows:  # the loop every lab page runs: kept flat (no call per plain cell)
            out.append("<tr>")
            for j in cols:
                c = row[j]
                if c.signal is None and not c.link:
                    text = c.text
                    if _SPECIAL.search(text):
                        text = html.escape(text, quote=True)
                    out.append(f'<td class="n">{text}</td>' if numeric[j] else f"<td>{text}</td>")
                else:
                    out.append(_cell(c, numeric[j], words))
            out.append("</tr>")
        out.append("</tbody></table>")
    return "".join(out)


def _figure(f: Figure) -> str:
    ident = f' id="{_e(f.anchor)}"' if f.anchor else ""
    if f.kind == "strip":
        return f'<figure class="strip"{ident}>{f.svg}</figure>'
    cls = ' class="square"' if f.width < 1.0 else ""
    cap = ""
    if f.title or f.caption:
        cap = f"<figcaption><strong>{_e(f.title)}.</strong> {_e(f.caption)}</figcaption>"
    return f"<figure{cls}{ident}>{f.svg}{cap}</figure>"


def _facts(f: Facts) -> str:
    rows = "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in f.pairs if v not in (None, ""))
    return f'<dl class="kv">{rows}</dl>'


def _text_class(style: str) -> str:
    return {"body": "", "note": "muted", "small": "small"}.get(style, style)


def _block(b: Block, w: dict[str, str]) -> str:
    if isinstance(b, Heading):
        ident = f' id="{_e(b.anchor)}"' if b.anchor else ""
        level = min(max(b.level, 1), 6)
        return f"<h{level}{ident}>{_e(b.text)}</h{level}>"
    if isinstance(b, Paragraph):
        if b.style in ("caution", "alert", "confidential"):
            return f'<div class="{b.style}">{_e(b.text)}</div>'
        cls = _text_class(b.style)
        return f'<p class="{cls}">{_e(b.text)}</p>' if cls else f"<p>{_e(b.text)}</p>"
    if isinstance(b, Bullets):
        cls = _text_class(b.style)
        items = "".join(f"<li>{_e(t)}</li>" for t in b.items)
        return f'<ul class="{cls}">{items}</ul>' if cls else f"<ul>{items}</ul>"
    if isinstance(b, Facts):
        return _facts(b)
    if isinstance(b, Table):
        return _table(b, w)
    if isinstance(b, Figure):
        return _figure(b)
    if isinstance(b, Section):
        inner = _block(b.heading, w) + _blocks(b.blocks, w)
        if b.heading.level <= 2 and b.heading.anchor:
            # the section's anchor names the section (the contents link to it); the heading has none
            head = Heading(text=b.heading.text, level=b.heading.level)
            return f'<section id="{_e(b.heading.anchor)}">{_block(head, w)}{_blocks(b.blocks, w)}</section>'
        return inner
    raise TypeError(f"not a document block: {type(b).__name__}")


#: Rendered tables and sections by identity, most recently used last: the blocks every lab page shares (the
#: round statistics, "How to read your scores") are drawn once per process, not once per page. The block is
#: kept beside its HTML, so its id cannot be reused while it is cached.
_DRAWN: OrderedDict[int, tuple[Block, str, int]] = OrderedDict()
_DRAWN_MAX = 64


def _drawn(b: Block, w: dict[str, str]) -> str:
    if not isinstance(b, (Table, Section)):
        return _block(b, w)
    key = id(b)
    hit = _DRAWN.get(key)
    if hit is not None and hit[0] is b and hit[2] == id(w):
        _DRAWN.move_to_end(key)
        return hit[1]
    out = _block(b, w)
    _DRAWN[key] = (b, out, id(w))
    if len(_DRAWN) > _DRAWN_MAX:
        _DRAWN.popitem(last=False)
    return out


def _blocks(blocks, w: dict[str, str]) -> str:
    """The blocks in order; consecutive confidential blocks share one box."""
    out: list[str] = []
    box: list[str] = []
    for b in blocks:
        if getattr(b, "style", None) == "confidential" and not isinstance(b, Section):
            box.append(f"<strong>{_e(b.text)}</strong>" if isinstance(b, Paragraph) else _block(b, w))
            continue
        if box:
            out.append('<div class="confidential">' + "".join(box) + "</div>")
            box = []
        out.append(_drawn(b, w))
    if box:
        out.append('<div class="confidential">' + "".join(box) + "</div>")
    return "".join(out)


def render_html(doc: Document) -> str:
    """The document as one self-contained HTML page, printing on ``doc.paper`` (portrait)."""
    size = PAPER_SIZES.get(doc.paper, "A4")
    css = CSS.replace("@media print {", f"@page {{ size: {size}; margin: 14mm 12mm; }}\n@media print {{", 1)
    nav = ""
    if doc.contents:
        items = [(b.heading.anchor, b.heading.text) for b in doc.blocks
                 if isinstance(b, Section) and b.heading.anchor]
        nav = "<nav><ol>" + "".join(f'<li><a href="#{_e(a)}">{_e(t)}</a></li>' for a, t in items) + "</ol></nav>"
    sub = f"<p>{_e(doc.subtitle)}</p>" if doc.subtitle else ""
    foot = f'<footer class="muted"><p>{_e(doc.footer)}</p></footer>' if doc.footer else ""
    content = _blocks(doc.blocks, SIGNAL_WORD.get(doc.words, SIGNAL_WORD["signals"]))
    body = f"<header><h1>{_e(doc.title)}</h1>{sub}</header>{nav}{content}{foot}"
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            "<meta name=\"generator\" content=\"roundscore\">"
            f"<title>{_e(doc.title)}</title><style>{css}</style></head><body>{body}</body></html>\n")
