"""The HTML round report and one HTML page per lab: self-contained files (SVG inline, no network, no script).

``report.html`` holds the round and its settings, the item checks, each
measurand's statistics and figures, the sensitivity of the assigned value to
the estimator, the Youden plots, precision and screens, method groups, every
lab's scores with signals and the reported uncertainties found implausible
(:mod:`roundscore.outputs.consensus_report`), the audit trail and the
cautions. Labs appear only by code in it. ``labs/LAB.html`` holds
one lab's own results and, at the top, its name: names appear only in the
lab's own page.

A lab page shows where the lab stands on every measurand as a compact score
strip (:mod:`roundscore.outputs.strips`: hand-written SVG, about 3 KB, the shared
part built once per measurand and the lab's marker appended). In a small
round (at most :data:`FULL_FIGURES_MAX_LABS` labs and
:data:`FULL_FIGURES_MAX_MEASURANDS` measurands) the page also carries the
round report's full figures with the lab marked; in a larger one these would
make every page megabytes (40 figures of 80-180 KB), so the page has the
strips only and says that the full figures are in the round report.

A print stylesheet makes a browser print either page to PDF cleanly
(sections start on a new page, figures and table rows are not split,
table heads repeat).

Everything shown comes from the :class:`~roundscore.model.evaluation.RoundEvaluation`
and the figures of :func:`~roundscore.outputs.figures.round_figures`; nothing is
recomputed. The shared parts are built once, so a lab page costs a few
milliseconds (string joins) and, past the small-round limits, its size does
not grow with the number of labs (measured: about 120 KB and 2 ms per page at
2000 labs × 40 measurands).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from collections.abc import Callable, Iterable, Sequence

import pandas as pd

from roundscore.model.scores import SCORE_FIELD, score_label, score_symbol
from roundscore.model.signals import SIGNAL_NAMES
from roundscore.outputs.document import (Block, Bullets, Cell, Column, Document, Facts, Figure, Heading, Paragraph,
                                         Section, Table)
from roundscore.outputs.frames import (frame_table as _frame_table, more_places as _more, number_text as _num,
                                       records_table as _records_table, signal_text as _signal_text)
from roundscore.outputs.guidance import GUIDANCE_TITLE, how_to_read
from roundscore.outputs.headings import audit_for_people, heading
from roundscore.outputs.html import render_html
from roundscore.outputs.look import CAUTION, SIGNAL_SYMBOL, SIGNAL_WORD, signal_legend_text
from roundscore.outputs.figures import (FIGURES_MAX_MEASURANDS, RoundFigures, SvgFigure, figures_per_measurand,
                                        round_figures)
from roundscore.outputs.strips import ScoreStrip, score_strip, strip_legend
from roundscore.outputs import consensus_report, qualitative_report

__all__ = ["write_report", "report_html", "lab_page_html", "report_document", "lab_document", "render_html",
           "guidance_section", "ReportParts", "report_parts", "lab_file_name",
           "REPORT_NAME", "FULL_FIGURES_MAX_LABS", "FULL_FIGURES_MAX_MEASURANDS", "full_lab_figures"]

REPORT_NAME = "report.html"
#: A lab page carries the full figures (besides its strips) only in a round of at most this many labs and
#: measurands: there the page stays under about 1 MB (measured: 360 KB at 31 labs × 6 measurands); a
#: 2000-lab figure is 80-180 KB, so 40 of them would make each page megabytes (common practice: keep an
#: e-mailed page well under a few MB).
FULL_FIGURES_MAX_LABS = 100
FULL_FIGURES_MAX_MEASURANDS = 10
_SIGNALS = SIGNAL_NAMES


def _figure(fig: SvgFigure, svg: str | None = None, square: bool = False) -> Figure:
    return Figure(svg=fig.svg if svg is None else svg, title=fig.title, caption=fig.caption,
                  width=0.85 if square else 1.0, anchor=f"fig-{fig.key}")


def _legend(words: str) -> Paragraph:
    return Paragraph(text=signal_legend_text(words), style="note")


def lab_file_name(lab: str) -> str:
    """The file name of a lab's page: the same stem as its workbook's
    (:func:`roundscore.support.filenames.file_stem`)."""
    from roundscore.support.filenames import lab_file_name as named

    return named(lab, ".html")


def _section(anchor: str, title: str, blocks: Iterable[Block], level: int = 2) -> Section:
    return Section(heading=Heading(text=title, level=level, anchor=anchor), blocks=tuple(blocks))


# ------------------------------------------------------------------------------------------ shared parts

@dataclass(frozen=True, slots=True, kw_only=True)
class ReportParts:
    """Blocks shared by the round report and every lab page, built once.

    Attributes
    ----------
    figures : RoundFigures
    heading : tuple of Block
        The report's head: round facts, failed checks (the coordinator's words) and the caution.
    lab_heading : tuple of Block
        A lab page's head: round facts, what the failed checks mean for its scores, the caution.
    statistics : Table
        The round's statistics table.
    strips : dict of str to ScoreStrip
        By measurand (every measurand, in the round's order): the shared score strip.
    full_figures : bool
        Whether lab pages also carry the full figures (:func:`full_lab_figures`).
    figures_note : str
        What a lab page says when it leaves the full figures out ("" when it carries them).
    guidance : Section
        "How to read your scores" (:mod:`roundscore.outputs.guidance`).
    """

    figures: RoundFigures
    heading: tuple[Block, ...]
    lab_heading: tuple[Block, ...]
    statistics: Table | Paragraph
    strips: dict[str, ScoreStrip]
    full_figures: bool
    figures_note: str
    guidance: Section
    #: The qualitative measurands' figures (roundscore.outputs.qualitative_report), drawn once.
    qualitative: qualitative_report.QualitativeParts | None = None


def full_lab_figures(n_labs: int, n_measurands: int) -> bool:
    """Whether a round is small enough for its lab pages to carry the full figures as well as the strips."""
    return n_labs <= FULL_FIGURES_MAX_LABS and n_measurands <= FULL_FIGURES_MAX_MEASURANDS


def _strips(ev) -> dict[str, ScoreStrip]:
    """One shared strip per measurand from the evaluation's official scores (not recomputed)."""
    out = {}
    for name, m in ev.measurands.items():
        score = m.settings.score
        g = ev.measurand_rows("scores", name)
        values = g[SCORE_FIELD.get(score, "z")].to_numpy(float) if len(g) and m.scored else []
        title = m.settings.label or name
        out[name] = score_strip(values, measurand=name, score=score, title=title, key=f"strip-{name}")
    return out


def _round_facts(ev) -> Facts:
    r = ev.round
    return Facts(pairs=(("Round", r.id), ("Title", r.title), ("Scheme", r.scheme), ("Date", r.date),
                        ("Provider", r.provider), ("Material", r.material)))


def guidance_section(words: str) -> Section:
    """"How to read your scores" as a section of blocks (the text of :mod:`roundscore.outputs.guidance`)."""
    blocks: list[Block] = []
    for part in how_to_read(words):
        blocks += [Heading(text=part.title, level=3), Paragraph(text=part.text)]
        if part.bullets:
            blocks.append(Bullets(items=part.bullets))
    return _section("how-to-read", GUIDANCE_TITLE, blocks)


def report_parts(ev, figures: RoundFigures | None = None) -> ReportParts:
    """Build the shared blocks (and the figures, unless given)."""
    figures = figures if figures is not None else round_figures(ev)
    caution = Paragraph(text=CAUTION, style="caution")
    heading_: tuple[Block, ...] = (_round_facts(ev), *(Paragraph(text=f"Check failed: {x}", style="alert")
                                                       for x in ev.failed_checks),
                caution)
    lab_heading: tuple[Block, ...] = (_round_facts(ev),
                                      *(Paragraph(text=x, style="alert") for x in ev.lab_notices), caution)
    stats = _frame_table(ev, ev.statistics, decimals={"iterations": 0, "p": 0})
    n_labs, n_meas = len(ev.labs), len(ev.measurands)
    full = full_lab_figures(n_labs, n_meas)
    note = ""
    if not full and (figures.scores or figures.youden):
        note = ("The ranked score charts, the distributions of results"
                + (" and the Youden plots" if figures.youden else "")
                + f" of this round are in the round report (laboratories by code only); with {n_labs} "
                f"laboratories and {n_meas} measurands they are left out of this page to keep it small.")
    return ReportParts(figures=figures, heading=heading_, lab_heading=lab_heading, statistics=stats,
                       strips=_strips(ev), full_figures=full, figures_note=note,
                       guidance=guidance_section(ev.round.words),
                       qualitative=qualitative_report.qualitative_parts(ev))


def lab_records(ev, table: str, labs: Sequence[str]) -> dict[str, list[dict[str, Any]]]:
    """The rows of ``scores`` (or of an extras table with a lab column) of ``labs``, as records by lab.

    Built for a batch of labs at a time from the evaluation's per-lab split
    (one conversion per batch), not kept for every lab of the round: at 2000
    labs the records of all labs took about 130 MB in each process.
    """
    if table not in ev.lab_tables:
        return {}
    frames = [f for f in (ev.lab_rows(table, lab) for lab in labs) if len(f)]
    out: dict[str, list[dict[str, Any]]] = {}
    if frames:
        for rec in (pd.concat(frames) if len(frames) > 1 else frames[0]).to_dict("records"):
            out.setdefault(rec["lab"], []).append(rec)
    return out


# ------------------------------------------------------------------------------------------ round report

def _settings(ev) -> list[Block]:
    r = ev.round
    rows = []
    for m in r.measurands.values():
        rows.append({"measurand": m.name, "label": m.label, "unit": m.unit,
                     "assigned": m.describe_assigned(m.decimals),
                     "u_assigned": "" if m.u_assigned is None else _num(m.u_assigned, _more(m.decimals)),
                     "sigma_pt": m.sigma_pt.describe(), "score": score_label(m.score),
                     "decimals": "" if m.decimals is None else str(m.decimals),
                     "items": ", ".join(x for x in ("homogeneity" if m.homogeneity else "",
                                                    "stability" if m.stability else "") if x)})
    heads = ["Measurand", "Label", "Unit", "Assigned value", "u(x_pt) given", "σ_pt", "Score", "Decimals",
             "Item checks"]
    table = Table(columns=tuple(Column(title=h) for h in heads),
                  rows=tuple(tuple(Cell(text=str(v)) for v in row.values()) for row in rows))
    general = Facts(pairs=(("Replicates per lab", str(r.replicates)), ("Confidence", f"{r.confidence:g}"),
                           ("Outliers (ISO 5725-2 screens)", r.outliers), ("Stragglers", r.stragglers),
                           ("Signal words", r.words),
                           ("Youden pairs", "; ".join(f"{a} and {b}" for a, b in r.youden)),
                           ("Laboratories", str(len(ev.labs)))))
    out: list[Block] = [general, table]
    if r.exclusions:
        out.append(Heading(text="Exclusions set by the coordinator", level=3))
        out.append(Table(columns=(Column(title="Lab"), Column(title="Measurand"), Column(title="Reason"),
                                  Column(title="Scored")),
                         rows=tuple((Cell(text=e.lab), Cell(text=e.measurand or "all"), Cell(text=e.reason),
                                     Cell(text="yes" if e.scored else "withheld: no score shown"))
                                    for e in r.exclusions)))
    return out


def _items(ev, figs: RoundFigures) -> list[Block]:
    items = ev.extras.get("items")
    if (items is None or not len(items)) and not figs.items and not figs.stability:
        return [Paragraph(text="No homogeneity or stability data in this round.", style="note")]
    out: list[Block] = []
    if items is not None and len(items):
        # The notes are long sentences: below the table, one list per check, so the numbers stay readable.
        out.append(_frame_table(ev, items, [c for c in items.columns if c != "note"],
                                decimals={"criterion": 4, "allowed": 4, "g": 0, "m": 0}, key_columns=2))
        if "note" in items.columns:
            for _, r in items.iterrows():
                parts = [t for t in str(r["note"] or "").split("; ") if t]
                if parts:
                    out += [Paragraph(text=f"{r['measurand']}, {r['check']}:"), Bullets(items=tuple(parts))]
    # each measurand's homogeneity figure, then its stability figure beside it (the round's measurand order)
    for name in dict.fromkeys([*ev.measurands, *figs.items, *figs.stability]):
        for f in (figs.items.get(name), figs.stability.get(name)):
            if f is not None:
                out.append(_figure(f))
    return out


def _measurand_section(ev, name: str, m, figs: RoundFigures, strip: ScoreStrip | None = None) -> Section:
    d = m.settings.decimals
    e = m.robust
    counts = ev.measurand_rows("scores", name)["signal"].value_counts()
    signals = ", ".join(f"{SIGNAL_SYMBOL[s]} {SIGNAL_WORD[ev.round.words][s]}: {int(counts.get(s, 0))}"
                        for s in _SIGNALS)
    u_check = {None: "not computable", True: "yes", False: "NO: u(x_pt) is not negligible"}[m.u_check_passed]
    unit = m.settings.unit
    facts = Facts(pairs=(
        ("Unit", unit), ("Labs used (p)", str(m.p)), ("Assigned value x_pt", f"{_num(m.assigned, d)} {unit}"),
        ("Assigned value from", m.assigned_source), ("u(x_pt)", _num(m.u_assigned, _more(d))),
        ("σ_pt", _num(m.sigma_pt, _more(d))), ("σ_pt from", m.sigma_source), ("u(x_pt) ≤ 0.3 σ_pt", u_check),
        ("Robust mean, robust SD", f"{_num(e.mean, _more(d))}, {_num(e.sd, _more(d))} "
                                   f"({e.iterations} iterations)" if e else "not computed (fewer than 3 results)"),
        ("Median, MADe, nIQR", f"{_num(m.median, _more(d))}, {_num(m.made, _more(d))}, {_num(m.niqr, _more(d))}"),
        ("Score", score_label(m.settings.score)), ("Signals", signals),
    ))
    blocks: list[Block] = [facts]
    notes = list(m.notes) + list(ev.stage_notes.get(name, ()))
    if notes:
        blocks.append(Bullets(items=tuple(notes)))
    for f in (figs.scores.get(name), figs.density.get(name)):
        if f is not None:
            blocks.append(_figure(f))
    if strip is not None:  # a round too large for the figures: the measurand's score strip instead
        blocks.append(Figure(svg=strip.svg, anchor=f"strip-{name}", kind="strip"))
    if name not in figs.scores and (strip is None or not strip.n):
        blocks.append(Paragraph(text="No scores for this measurand (see the notes).", style="note"))
    title = m.settings.label if m.settings.label and m.settings.label != name else ""
    return _section(f"m-{name}", f"{name} ({title})" if title else name, blocks, level=3)


def _measurands(ev, parts: ReportParts) -> list[Block]:
    figs = parts.figures
    if figures_per_measurand(len(ev.measurands)):
        return [_measurand_section(ev, n, m, figs) for n, m in ev.measurands.items()]
    note = Paragraph(text=f"This round has {len(ev.measurands)} measurands: the figures of each measurand "
                          f"(ranked scores, distribution, Mandel's h and k, item checks) are drawn for rounds of "
                          f"at most {FIGURES_MAX_MEASURANDS} measurands. Each measurand shows its score strip "
                          "(every lab's score, unnamed); the ranked scores are charted in round-summary.xlsx.",
                     style="note")
    return [note, Paragraph(text=strip_legend(ev.round.words, own=False), style="note"),
            *(_measurand_section(ev, n, m, figs, parts.strips.get(n)) for n, m in ev.measurands.items())]


def _score_matrix(ev) -> list[Block]:
    """Labs × measurands: the official score with its signal symbol (the word in the cell's title)."""
    words = ev.round.words
    names = list(ev.measurands)
    sc = ev.scores
    if not len(sc):
        return [Paragraph(text="No scores.", style="note")]
    cell: dict[tuple[str, str], Cell] = {}
    columns = {c: sc[c].tolist() for c in dict.fromkeys(SCORE_FIELD.values())}
    for i, (lab, meas, score, sig) in enumerate(zip(sc["lab"], sc["measurand"], sc["score"], sc["signal"])):
        v = columns[SCORE_FIELD.get(score, "z")][i]
        text = _num(v, 2) if isinstance(v, float) and math.isfinite(v) else ""
        cell[(lab, meas)] = Cell(text=_signal_text(sig, words, text), signal=sig)
    blank = Cell(text="")
    cols = (Column(title="Lab"), *(Column(title=f"{n} ({score_symbol(ev.measurands[n].settings.score)})",
                                          numeric=True) for n in names))
    rows = tuple((Cell(text=lab), *(cell.get((lab, n), blank) for n in names)) for lab in ev.labs)
    return [_legend(words), Table(columns=cols, rows=rows, key_columns=1)]


def _score_detail(ev) -> list[Block]:
    cols = ["lab", "measurand", "result", "assigned", "sigma_pt", "score", "signal", "note"]
    sc = ev.scores
    noted = sc[sc["note"].fillna("").astype(str) != ""] if len(sc) else sc
    if not len(noted):
        return []
    return [Heading(text="Notes on individual results", level=3),
            _frame_table(ev, noted, cols, signal="signal", key_columns=2)]


#: Above this many Mandel rows (labs × measurands) the report lists only the rows beyond an indicator line;
#: every row is in mandel.csv (common practice: a table of thousands of rows is read in a spreadsheet).
MANDEL_TABLE_MAX_ROWS = 1000
_MANDEL_DECIMALS: dict[str, int | None] = {"h": 2, "k": 2, "h_crit_5": 2, "h_crit_1": 2, "k_crit_5": 2,
                                           "k_crit_1": 2, "n": 0}


def _mandel_table(ev, mandel: pd.DataFrame) -> list[Block]:
    if len(mandel) <= MANDEL_TABLE_MAX_ROWS or "flag" not in mandel.columns:
        return [_frame_table(ev, mandel, decimals=_MANDEL_DECIMALS, key_columns=2)]
    flagged = mandel[mandel["flag"].fillna("").astype(str) != ""]
    return [Paragraph(text=f"{len(flagged)} of {len(mandel)} rows are beyond an indicator line and listed "
                           "here; every row is in mandel.csv.", style="note"),
            _frame_table(ev, flagged, decimals=_MANDEL_DECIMALS, key_columns=2)]


def report_document(ev, parts: ReportParts | None = None) -> Document:
    """The round report's content (labs by code only), for every rendering."""
    parts = parts if parts is not None else report_parts(ev)
    figs = parts.figures
    r = ev.round
    sections = [
        _section("round", "The round and its settings", [*parts.heading, *_settings(ev)]),
        _section("items", "Test items: homogeneity and stability", _items(ev, figs)),
        _section("measurands", "Measurands: statistics and figures", _measurands(ev, parts)),
    ]
    sensitivity = consensus_report.sensitivity_section(ev)  # consensus.csv: the estimates side by side
    if sensitivity is not None:
        sections.append(sensitivity)
    if figs.youden:
        sections.append(_section("youden", "Youden plots", [_figure(f, square=True) for f in figs.youden]))
    prec: list[Block] = []
    for key, title in (("precision", "Repeatability and reproducibility (ISO 5725-2)"),
                       ("screens", "Outlier screens")):
        if ev.extras.get(key) is not None:
            prec += [Heading(text=title, level=3), _frame_table(ev, ev.extras[key])]
    if ev.extras.get("mandel") is not None:
        prec.append(Heading(text="Mandel's h and k", level=3))
        for fs in figs.mandel.values():
            prec += [_figure(f) for f in fs]
        prec += _mandel_table(ev, ev.extras["mandel"])
    sections.append(_section("precision", "Precision and screens", prec or [
        Paragraph(text="No precision or screening results in this evaluation.", style="note")]))
    methods = ev.extras.get("methods")
    sections.append(_section("methods", "Method groups", [
        _frame_table(ev, methods, decimals={"p_value": 4, "p_adjusted": 4, "f_p_value": 4})
        if methods is not None else
        Paragraph(text="No method-group comparison in this evaluation.", style="note")]))
    qual = qualitative_report.report_section(ev, parts.qualitative)  # nominal and ordinal measurands
    if qual is not None:
        sections.append(qual)
    sections.append(_section("scores", "Every laboratory's scores", [*_score_matrix(ev), *_score_detail(ev),
                                                                     *consensus_report.uncertainty_blocks(ev)]))
    sections.append(_section("audit", "Audit trail: exclusions and decisions",
                             [_frame_table(ev, audit_for_people(ev.audit), key_columns=2)] if len(ev.audit) else
                             [Paragraph(text="Nothing was left out.", style="note")]))
    cautions = [CAUTION, *ev.failed_checks, *ev.warnings,
                "Laboratories are shown by code only; each laboratory's own page and workbook carry its name."]
    sections.append(_section("cautions", "Cautions", [Bullets(items=tuple(cautions))]))
    return Document(title=f"Proficiency test round {r.id}", subtitle=r.title, blocks=tuple(sections),
                    footer=f"Written by roundscore from the round file {r.path.name}.", paper=r.paper,
                    contents=True, words=r.words)


def report_html(ev, parts: ReportParts | None = None) -> str:
    """The whole round report as one HTML document (labs by code only)."""
    return render_html(report_document(ev, parts))


# ------------------------------------------------------------------------------------------ lab page

_LAB_COLUMNS = (Column(title="Measurand"), Column(title="Unit"), Column(title="Your result", numeric=True),
                Column(title=heading("assigned"), numeric=True), Column(title=heading("u_assigned"), numeric=True),
                Column(title=heading("sigma_pt"), numeric=True), Column(title="Score"),
                Column(title="Your score", numeric=True), Column(title="Signal"),
                Column(title="Rank by |score| (1 = closest)"), Column(title="Note"))


def lab_document(ev, parts: ReportParts, lab: str, *, scores: list[dict[str, Any]] | None = None,
                 mandel: list[dict[str, Any]] | None = None,
                 uncertainties: list[dict[str, Any]] | None = None) -> Document:
    """One lab's confidential page content: its name, its scores, a strip per measurand with its score marked.

    In a small round (``parts.full_figures``) the round report's figures
    follow, with the lab's bar or result marked. ``scores``, ``mandel`` and
    ``uncertainties`` are the lab's rows as records (:func:`lab_records`; looked up when not given).
    """
    r = ev.round
    words = r.words
    p = ev.participants.get(lab)
    rows = scores if scores is not None else lab_records(ev, "scores", [lab]).get(lab, [])
    if mandel is None:
        mandel = lab_records(ev, "mandel", [lab]).get(lab)
    if uncertainties is None:
        uncertainties = lab_records(ev, "uncertainties", [lab]).get(lab, [])
    receipt = ev.table.receipts.get(lab)  # what the lab said of its sample (form fields or results columns)
    ident = Facts(pairs=(("Laboratory code", lab), ("Laboratory", p.name if p else ""),
                         ("Contact", p.contact if p else ""), *(receipt.lines() if receipt is not None else ())),
                  style="confidential")
    table_rows = []
    for rec in rows:
        meas = rec["measurand"]
        d = r.measurands[meas].decimals if meas in r.measurands else None
        v = rec.get(SCORE_FIELD.get(rec["score"], "z"))
        rank, n = rec.get("rank"), rec.get("n_scored")
        standing = f"{int(rank)} of {int(n)}" if isinstance(rank, float) and math.isfinite(rank) and n else ""
        sig = rec["signal"]
        table_rows.append((
            Cell(text=meas, link=f"strip-{meas}"), Cell(text=str(rec["unit"])), Cell(text=_num(rec["result"], d)),
            Cell(text=_num(rec["assigned"], d)), Cell(text=_num(rec["u_assigned"], _more(d))),
            Cell(text=_num(rec["sigma_pt"], _more(d))), Cell(text=score_symbol(rec["score"])),
            Cell(text=_num(v, 2)), Cell(text=_signal_text(sig, words), signal=sig), Cell(text=standing),
            Cell(text=str(rec["note"] or ""))))
    own = {rec["measurand"]: rec for rec in rows}
    strips: list[Block] = []
    for meas, strip in parts.strips.items():
        mine = own.get(meas)
        v = mine.get(SCORE_FIELD.get(mine["score"], "z")) if mine else None
        svg = strip.for_lab(lab, v, mine["signal"] if mine else None, words, mine.get("state") if mine else None)
        strips.append(Figure(svg=svg, anchor=f"strip-{meas}", kind="strip"))
    stand = [Paragraph(text="Every laboratory's score on each measurand, yours marked; other laboratories are "
                            "not named."), Paragraph(text=strip_legend(words), style="note"), *strips]
    figs = parts.figures
    per: list[Block] = []
    you: list[Block] = []
    if parts.full_figures:
        for meas in r.measurands:
            body = [_figure(f, f.for_lab(lab)) for f in (figs.scores.get(meas), figs.density.get(meas))
                    if f is not None]
            if body:
                per.append(_section(f"m-{meas}", meas, body, level=3))
        you = [_figure(f, f.for_lab(lab), square=True) for f in figs.youden]
    elif parts.figures_note:
        stand.append(Paragraph(text=parts.figures_note, style="note"))
    blocks: list[Block] = [
        Paragraph(text="Confidential to the laboratory named here.", style="confidential"), ident,
        *parts.lab_heading,
        _section("your-scores", "Your scores", [_legend(words), Table(columns=_LAB_COLUMNS, rows=tuple(table_rows),
                                                                        key_columns=1)]),
        parts.guidance,
        _section("where-you-stand", "Where you stand", stand),
    ]
    unc = consensus_report.lab_uncertainty_section(ev, lab, uncertainties, rows)  # its u beside ζ and En
    if unc is not None:
        blocks.insert(-2, unc)
    qual = qualitative_report.lab_section(ev, parts.qualitative, lab)  # nominal and ordinal measurands
    if qual is not None:
        blocks.insert(-2, qual)
    if per:
        blocks.append(_section("in-detail", "In detail", [
            Paragraph(text="The round report's figures with your laboratory marked; other laboratories appear "
                           "by code only."), *per]))
    if you:
        blocks.append(_section("youden", "Youden plots", you))
    table = _records_table(mandel or [], decimals=_MANDEL_DECIMALS)
    if table is not None:
        blocks.append(_section("mandel", "Your Mandel h and k", [table]))
    blocks.append(_section("statistics", "Round statistics", [parts.statistics]))
    blocks.append(_section("cautions", "Cautions", [Paragraph(text=CAUTION, style="caution")]))
    return Document(title=f"Round {r.id}: results of laboratory {lab}", subtitle=r.title, blocks=tuple(blocks),
                    footer=f"Confidential to laboratory {lab}.", paper=r.paper, words=words)


def lab_page_html(ev, parts: ReportParts, lab: str, *, scores: list[dict[str, Any]] | None = None,
                  mandel: list[dict[str, Any]] | None = None,
                  uncertainties: list[dict[str, Any]] | None = None) -> str:
    """One lab's confidential page as HTML (:func:`lab_document` drawn by :func:`render_html`)."""
    return render_html(lab_document(ev, parts, lab, scores=scores, mandel=mandel, uncertainties=uncertainties))


# ------------------------------------------------------------------------------------------ writing

def write_report(ev, folder: Path, *, labs: Sequence[str] | None = None, parts: ReportParts | None = None,
                 jobs: int | None = 1, progress: Callable[[str, int, int], None] | None = None,
                 round_report: bool = True) -> list[Path]:
    """Write ``report.html`` and ``labs/LAB.html`` for each lab into ``folder``; return the paths written.

    Parameters
    ----------
    labs : sequence of str, optional
        The labs to write pages for (default: all).
    parts : ReportParts, optional
        Shared fragments already built (:func:`report_parts`).
    jobs : int or None
        Worker processes for the figures and the lab pages (1 = here; None =
        all cores); the files do not depend on it.
    progress : callable, optional
        ``progress(stage, done, total)`` for the stages "figures" and "lab pages".
    round_report : bool
        Also write ``report.html`` (default True).
    """
    from roundscore.support.parallel import run_batches

    folder = Path(folder)
    if parts is None:
        parts = report_parts(ev, round_figures(ev, jobs=jobs, progress=progress))
    written = []
    if round_report:
        path = folder / REPORT_NAME
        path.write_text(report_html(ev, parts), encoding="utf-8")
        written.append(path)
    todo = list(ev.labs if labs is None else labs)
    if todo:
        (folder / "labs").mkdir(exist_ok=True)
    written += run_batches(_lab_batch, todo, jobs=jobs, shared=(ev, parts, folder), progress=progress,
                           stage="lab pages", batch_size=LAB_PAGES_PER_TASK)
    return written


#: Lab pages per worker task (each costs a few ms; common practice: amortise the pickling of results).
LAB_PAGES_PER_TASK = 64


def _lab_batch(labs: Sequence[str]) -> list[Path]:
    from roundscore.support.parallel import shared

    ev, parts, folder = shared()
    scores, mandel = lab_records(ev, "scores", labs), lab_records(ev, "mandel", labs)
    unc = lab_records(ev, "uncertainties", labs)
    out = []
    for lab in labs:
        path = folder / "labs" / lab_file_name(lab)
        path.write_text(lab_page_html(ev, parts, lab, scores=scores.get(lab, []), mandel=mandel.get(lab, []),
                                      uncertainties=unc.get(lab, [])), encoding="utf-8")
        out.append(path)
    return out
