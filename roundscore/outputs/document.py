"""A page's content, built once and drawn by every rendering (HTML page, PDF).

A writer that makes a page a person reads builds a :class:`Document`: headings, paragraphs, lists of facts,
tables of already formatted text, figures as SVG. The renderings (``outputs/report.py`` for HTML,
``outputs/pdf.py`` for PDF) draw the same blocks in their own medium and decide nothing about content: they
never format a number, choose a word or leave a row out. So the lab's page and the lab's PDF say the same
thing by construction.

Numbers are formatted by the builder (to the measurand's ``decimals``), so a cell is text; a cell may name
the signal it shows (a key of :data:`roundscore.model.signals.SIGNALS`) so that each rendering colours it in
the one look (``outputs/look.py``).

>>> doc = Document(title="Round R1: results of laboratory L01", blocks=(
...     Heading(text="Your scores"),
...     Table(columns=(Column(title="Measurand"), Column(title="z", numeric=True)),
...           rows=((Cell(text="lead"), Cell(text="0.42", signal="acceptable")),)),
... ))
>>> [type(b).__name__ for b in doc.blocks]
['Heading', 'Table']
>>> doc.blocks[1].rows[0][1].signal
'acceptable'
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal, TypeAlias

__all__ = ["Document", "Block", "Heading", "Paragraph", "Bullets", "Facts", "Column", "Cell", "Table",
           "Figure", "Section", "TextStyle"]

#: How a paragraph reads: ordinary text, a muted note, a caution box, the confidential box, small print, an
#: alert (a failed check heading a page).
TextStyle = Literal["body", "note", "caution", "confidential", "small", "alert"]


@dataclass(frozen=True, slots=True, kw_only=True)
class Heading:
    """A heading; ``level`` 1 is the page title's level, 2 a section, 3 a subsection."""

    text: str
    level: int = 2
    #: A stable anchor for links within the page ("" for none); made of lab-safe characters by the builder.
    anchor: str = ""


@dataclass(frozen=True, slots=True, kw_only=True)
class Paragraph:
    """A paragraph of plain text (never markup: each rendering escapes it)."""

    text: str
    style: TextStyle = "body"


@dataclass(frozen=True, slots=True, kw_only=True)
class Bullets:
    """A bulleted list of plain-text items."""

    items: tuple[str, ...]
    style: TextStyle = "body"


@dataclass(frozen=True, slots=True, kw_only=True)
class Facts:
    """Label–value pairs (a lab's identity, a round's settings); pairs with an empty value are not drawn."""

    pairs: tuple[tuple[str, str], ...]
    style: TextStyle = "body"


@dataclass(frozen=True, slots=True, kw_only=True)
class Column:
    """A table column: its heading and whether its cells are numbers (aligned right)."""

    title: str
    numeric: bool = False


@dataclass(frozen=True, slots=True, kw_only=True)
class Cell:
    """One table cell: formatted text, and optionally the signal it shows (coloured by each rendering)."""

    text: str
    #: A signal name of the registry (``acceptable``, ``warning``, ``action``, ``not-scored``) or None.
    signal: str | None = None
    #: An anchor of this page the cell links to ("" for none).
    link: str = ""


@dataclass(frozen=True, slots=True, kw_only=True)
class Table:
    """A table of formatted cells; every row has one cell per column.

    A rendering repeats the header row on each printed page and may split a table too wide for the page into
    column groups, each repeating the ``key_columns`` first columns (the row's identity, e.g. lab and
    measurand).
    """

    columns: tuple[Column, ...]
    rows: tuple[tuple[Cell, ...], ...]
    caption: str = ""
    key_columns: int = 1

    def __post_init__(self) -> None:
        width = len(self.columns)
        for i, row in enumerate(self.rows):
            if len(row) != width:
                raise ValueError(f"table row {i} has {len(row)} cells for {width} columns")


@dataclass(frozen=True, slots=True, kw_only=True)
class Figure:
    """A figure as a self-contained SVG document (vector in every rendering), with its title and caption."""

    svg: str
    title: str = ""
    caption: str = ""
    #: The share of the text width it takes (1.0 full width; a square plot less).
    width: float = 1.0
    anchor: str = ""
    #: "plot" (a figure with its title and caption) or "strip" (a lab page's score strip: a row of a list of
    #: strips, drawn at its own size with no caption).
    kind: Literal["plot", "strip"] = "plot"


@dataclass(frozen=True, slots=True, kw_only=True)
class Section:
    """A titled group of blocks; a rendering keeps the heading with the first block that follows it."""

    heading: Heading
    blocks: tuple[Block, ...]


#: Any block a document holds.
Block: TypeAlias = Heading | Paragraph | Bullets | Facts | Table | Figure | Section


@dataclass(frozen=True, slots=True, kw_only=True)
class Document:
    """One page's (or one report's) content, in reading order."""

    title: str
    blocks: tuple[Block, ...]
    subtitle: str = ""
    #: Text of the running footer on every printed page (e.g. "Confidential to laboratory L01"); "" for none.
    footer: str = ""
    #: The paper it prints on (``[round] paper``: "a4" or "letter").
    paper: str = "a4"
    #: Whether a rendering lists the top-level sections first (a table of contents; the round report).
    contents: bool = False
    #: The round's signal vocabulary (``[round] words``): the word a rendering gives a signal cell's tooltip.
    words: str = "signals"
