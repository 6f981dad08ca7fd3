"""The HTML round report and one HTML page per lab: self-contained files (SVG inline, no network, no script).

``report.html`` holds the round and its settings, the item checks, each
measurand's statistics and figures, the Youden plots, precision and
screens, method groups, every lab's scores with signals, the audit trail
and the cautions. Labs appear only by code in it. ``labs/LAB.html`` holds
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

import html
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterable, Sequence

import numpy as np
import pandas as pd

from roundscore.model.scores import SCORE_FIELD
from roundscore.model.signals import SIGNAL_NAMES
from roundscore.outputs.look import CAUTION, SIGNAL_COLOUR, SIGNAL_SYMBOL, SIGNAL_WORD, tint as _tint
from roundscore.outputs.figures import (FIGURES_MAX_MEASURANDS, RoundFigures, SvgFigure, figures_per_measurand,
                                        round_figures)
from roundscore.outputs.strips import ScoreStrip, score_strip, strip_legend

__all__ = ["write_report", "report_html", "lab_page_html", "ReportParts", "report_parts", "lab_file_name",
           "REPORT_NAME", "FULL_FIGURES_MAX_LABS", "FULL_FIGURES_MAX_MEASURANDS", "full_lab_figures"]

REPORT_NAME = "report.html"
#: A lab page carries the full figures (besides its strips) only in a round of at most this many labs and
#: measurands: there the page stays under about 1 MB (measured: 360 KB at 31 labs × 6 measurands); a
#: 2000-lab figure is 80-180 KB, so 40 of them would make each page megabytes (common practice: keep an
#: e-mailed page well under a few MB).
FULL_FIGURES_MAX_LABS = 100
FULL_FIGURES_MAX_MEASURANDS = 10
_SIGNALS = SIGNAL_NAMES


_CSS = """
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
table { border-collapse: collapse; margin: .5rem 0 1rem; font-size: .85rem; }
th, td { border: 1px solid var(--rule); padding: .2rem .45rem; vertical-align: top; text-align: left; }
th { background: var(--head); } td[class^="s-"] { white-space: nowrap; } td.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.wide { display: block; overflow-x: auto; max-width: 100%; }
dl.kv { display: grid; grid-template-columns: max-content 1fr; gap: .1rem 1rem; margin: .4rem 0; }
dl.kv dt { font-weight: bold; } dl.kv dd { margin: 0; }
figure { margin: .8rem 0 1.2rem; } figure svg { width: 100%; height: auto; max-width: 46rem; display: block; }
figure.square svg { max-width: 40rem; }
figure.strip { margin: 0; } figure.strip svg { max-width: none; border-bottom: 1px solid var(--rule); }
figcaption { font-size: .85rem; color: var(--muted); max-width: 46rem; }
.legend span { margin-right: 1.2rem; white-space: nowrap; } .muted { color: var(--muted); }
""" + "".join(
    f".s-{s} {{ background: {_tint(c)}; }}\n" for s, c in SIGNAL_COLOUR.items()
) + """
@media print {
  @page { size: A4 landscape; margin: 14mm 12mm; }
  body { max-width: none; padding: 0; font-size: 10pt; }
  nav { display: none; }
  h2 { break-before: page; } h2:first-of-type { break-before: auto; }
  figure, tr, dl.kv, .caution, .alert { break-inside: avoid; }
  thead { display: table-header-group; }
  .wide { overflow: visible; }
  a { color: inherit; text-decoration: none; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
"""


def _e(v: Any) -> str:
    return html.escape("" if v is None else str(v), quote=True)


def _num(v: Any, decimals: int | None = None) -> str:
    if v is None or isinstance(v, str):
        return _e(v)
    try:
        x = float(v)
    except (TypeError, ValueError):
        return _e(v)
    if not math.isfinite(x):
        return ""
    if decimals is None:
        return f"{x:.6g}"
    return f"{x:.{decimals}f}"


def _more(d: int | None) -> int | None:
    return None if d is None else d + 1


def _signal_cell(signal: str, words: str, text: str = "") -> str:
    word = SIGNAL_WORD[words].get(signal, signal)
    sym = SIGNAL_SYMBOL.get(signal, "")
    body = f"{sym} {text}".strip() if text else f"{sym} {_e(word)}".strip()
    return f'<td class="s-{_e(signal)}" title="{_e(word)}">{body}</td>'


def _cell(v: Any, decimals: int | None, numeric: bool = False) -> str:
    """One table cell: yes/no for booleans, numbers right-aligned with ``decimals``, the rest escaped text."""
    if isinstance(v, (bool, np.bool_)):
        return f"<td>{'yes' if v else 'no'}</td>"
    if numeric or isinstance(v, (int, float, np.integer, np.floating)):
        return f'<td class="n">{_num(v, decimals)}</td>'
    return f"<td>{_e('' if v is None else v)}</td>"


def _table(frame: pd.DataFrame | None, columns: Sequence[str] | None = None, headers: Sequence[str] | None = None,
           decimals: dict[str, int | None] | None = None, signal: str | None = None, words: str = "signals",
           wide: bool = True) -> str:
    """An HTML table of a frame's columns; numbers right-aligned with the given decimals."""
    if frame is None or not len(frame.columns):
        return '<p class="muted">Not available.</p>'
    cols = [c for c in (columns or list(frame.columns)) if c in frame.columns]
    heads = headers or cols
    if headers is not None and columns is not None:
        heads = [h for c, h in zip(columns, headers) if c in frame.columns]
    decimals = decimals or {}
    data = [frame[c].tolist() for c in cols]
    numeric = [pd.api.types.is_numeric_dtype(frame[c]) and not pd.api.types.is_bool_dtype(frame[c]) for c in cols]
    out = [f'<table class="{"wide" if wide else ""}"><thead><tr>',
           "".join(f"<th>{_e(h)}</th>" for h in heads), "</tr></thead><tbody>"]
    for i in range(len(frame)):
        cells = []
        for j, c in enumerate(cols):
            v = data[j][i]
            if c == signal and isinstance(v, str):
                cells.append(_signal_cell(v, words))
            else:
                cells.append(_cell(v, decimals.get(c), numeric[j]))
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</tbody></table>")
    return "".join(out)


def _records_table(rows: Sequence[dict[str, Any]], decimals: dict[str, int | None] | None = None) -> str:
    """An HTML table of records (the keys of the first as columns): :func:`_table` without building a frame.

    For the few rows of one lab, where a DataFrame would cost more than the HTML.
    """
    if not rows:
        return '<p class="muted">Not available.</p>'
    decimals = decimals or {}
    cols = list(rows[0])
    out = ['<table class="wide"><thead><tr>', "".join(f"<th>{_e(c)}</th>" for c in cols), "</tr></thead><tbody>"]
    for rec in rows:
        cells = []
        for c in cols:
            cells.append(_cell(rec.get(c), decimals.get(c)))
        out.append("<tr>" + "".join(cells) + "</tr>")
    out.append("</tbody></table>")
    return "".join(out)


def _figure(svg: str, fig: SvgFigure, square: bool = False) -> str:
    cls = ' class="square"' if square else ""
    return (f'<figure{cls} id="fig-{_e(fig.key)}">{svg}<figcaption><strong>{_e(fig.title)}.</strong> '
            f"{_e(fig.caption)}</figcaption></figure>")


def _kv(pairs: Iterable[tuple[str, Any]]) -> str:
    rows = "".join(f"<dt>{_e(k)}</dt><dd>{v if isinstance(v, _Html) else _e(v)}</dd>"
                   for k, v in pairs if v not in (None, ""))
    return f'<dl class="kv">{rows}</dl>'


class _Html(str):
    """Text that is already HTML (not escaped again)."""


def _page(title: str, body: str) -> str:
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
            "<meta name=\"generator\" content=\"roundscore\">"
            f"<title>{_e(title)}</title><style>{_CSS}</style></head><body>{body}</body></html>\n")


def _legend(words: str) -> str:
    return ('<p class="legend">' + "".join(
        f'<span class="s-{s}">{SIGNAL_SYMBOL[s]} {_e(SIGNAL_WORD[words][s])}</span>' for s in _SIGNALS) + "</p>")


def lab_file_name(lab: str) -> str:
    """The file name of a lab's page: the same stem as its workbook's
    (:func:`roundscore.support.filenames.file_stem`)."""
    from roundscore.support.filenames import lab_file_name as named

    return named(lab, ".html")


# ------------------------------------------------------------------------------------------ shared parts

@dataclass(frozen=True, slots=True, kw_only=True)
class ReportParts:
    """HTML fragments shared by the round report and every lab page, built once.

    Attributes
    ----------
    figures : RoundFigures
    heading : str
        Round facts, failed checks and the caution.
    statistics : str
        The round's statistics table.
    strips : dict of str to ScoreStrip
        By measurand (every measurand, in the round's order): the shared score strip.
    full_figures : bool
        Whether lab pages also carry the full figures (:func:`full_lab_figures`).
    figures_note : str
        What a lab page says when it leaves the full figures out ("" when it carries them).
    """

    figures: RoundFigures
    heading: str
    statistics: str
    strips: dict[str, ScoreStrip]
    full_figures: bool
    figures_note: str


def full_lab_figures(n_labs: int, n_measurands: int) -> bool:
    """Whether a round is small enough for its lab pages to carry the full figures as well as the strips."""
    return n_labs <= FULL_FIGURES_MAX_LABS and n_measurands <= FULL_FIGURES_MAX_MEASURANDS


def _strips(ev) -> dict[str, ScoreStrip]:
    """One shared strip per measurand from the evaluation's official scores (not recomputed)."""
    sc = ev.scores
    groups = {name: g for name, g in sc.groupby("measurand", sort=False)} if len(sc) else {}
    out = {}
    for name, m in ev.measurands.items():
        score = m.settings.score
        g = groups.get(name)
        values = g[SCORE_FIELD.get(score, "z")].to_numpy(float) if g is not None and m.scored else []
        title = m.settings.label or name
        out[name] = score_strip(values, measurand=name, score=score, title=title, key=f"strip-{name}")
    return out


def _round_facts(ev) -> list[tuple[str, Any]]:
    r = ev.round
    return [("Round", r.id), ("Title", r.title), ("Scheme", r.scheme), ("Date", r.date), ("Provider", r.provider),
            ("Material", r.material)]


def report_parts(ev, figures: RoundFigures | None = None) -> ReportParts:
    """Build the shared fragments (and the figures, unless given)."""
    figures = figures if figures is not None else round_figures(ev)
    alerts = "".join(f'<div class="alert">Check failed: {_e(x)}</div>' for x in ev.failed_checks)
    heading = _kv(_round_facts(ev)) + alerts + f'<div class="caution">{_e(CAUTION)}</div>'
    stats = _table(ev.statistics, decimals={})
    n_labs, n_meas = len(ev.labs), len(ev.measurands)
    full = full_lab_figures(n_labs, n_meas)
    note = ""
    if not full and (figures.scores or figures.youden):
        note = ('<p class="muted">The ranked score charts, the distributions of results'
                + (" and the Youden plots" if figures.youden else "")
                + f" of this round are in the round report (laboratories by code only); with {n_labs} "
                f"laboratories and {n_meas} measurands they are left out of this page to keep it small.</p>")
    return ReportParts(figures=figures, heading=heading, statistics=stats, strips=_strips(ev), full_figures=full,
                       figures_note=note)


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

def _settings(ev) -> str:
    r = ev.round
    rows = []
    for m in r.measurands.values():
        rows.append({"measurand": m.name, "label": m.label, "unit": m.unit,
                     "assigned": m.assigned if isinstance(m.assigned, str) else _num(m.assigned, m.decimals),
                     "u_assigned": "" if m.u_assigned is None else _num(m.u_assigned, _more(m.decimals)),
                     "sigma_pt": m.sigma_pt.describe(), "score": m.score,
                     "decimals": "" if m.decimals is None else str(m.decimals),
                     "items": ", ".join(x for x in ("homogeneity" if m.homogeneity else "",
                                                    "stability" if m.stability else "") if x)})
    cols = ["measurand", "label", "unit", "assigned", "u_assigned", "sigma_pt", "score", "decimals", "items"]
    heads = ["Measurand", "Label", "Unit", "Assigned value", "u(x_pt) given", "σ_pt", "Score", "Decimals",
             "Item checks"]
    general = _kv([("Replicates per lab", r.replicates), ("Confidence", r.confidence),
                   ("Outliers (ISO 5725-2 screens)", r.outliers), ("Stragglers", r.stragglers),
                   ("Signal words", r.words),
                   ("Youden pairs", "; ".join(f"{a} and {b}" for a, b in r.youden)),
                   ("Laboratories", len(ev.labs))])
    excl = ""
    if r.exclusions:
        excl = "<h3>Exclusions set by the coordinator</h3>" + _table(pd.DataFrame(
            [{"lab": e.lab, "measurand": e.measurand or "all", "reason": e.reason,
              "scored": "yes" if e.scored else "withheld"} for e in r.exclusions]))
    return general + _table(pd.DataFrame(rows, columns=cols), cols, heads) + excl


def _items(ev, figs: RoundFigures) -> str:
    items = ev.extras.get("items")
    if (items is None or not len(items)) and not figs.items and not figs.stability:
        return '<p class="muted">No homogeneity or stability data in this round.</p>'
    out = ""
    if items is not None and len(items):
        # The notes are long sentences: below the table, one list per check, so the numbers stay readable.
        out += _table(items, [c for c in items.columns if c != "note"], decimals={"criterion": 4, "allowed": 4})
        if "note" in items.columns:
            out += '<div class="item-notes">'
            for _, r in items.iterrows():
                parts = [t for t in str(r["note"] or "").split("; ") if t]
                if parts:
                    out += (f"<p><strong>{_e(r['measurand'])}, {_e(r['check'])}:</strong></p><ul>"
                            + "".join(f"<li>{_e(t)}</li>" for t in parts) + "</ul>")
            out += "</div>"
    # each measurand's homogeneity figure, then its stability figure beside it (the round's measurand order)
    for name in dict.fromkeys([*ev.measurands, *figs.items, *figs.stability]):
        for f in (figs.items.get(name), figs.stability.get(name)):
            if f is not None:
                out += _figure(f.svg, f)
    return out


def _measurand_section(ev, name: str, m, figs: RoundFigures, strip: ScoreStrip | None = None) -> str:
    d = m.settings.decimals
    e = m.robust
    counts = ev.measurand_rows("scores", name)["signal"].value_counts()
    signals = ", ".join(f"{SIGNAL_SYMBOL[s]} {SIGNAL_WORD[ev.round.words][s]}: {int(counts.get(s, 0))}"
                        for s in _SIGNALS)
    u_check = {None: "not computable", True: "yes", False: "NO: u(x_pt) is not negligible"}[m.u_check_passed]
    unit = m.settings.unit
    kv = _kv([
        ("Unit", unit), ("Labs used (p)", m.p), ("Assigned value x_pt", f"{_num(m.assigned, d)} {unit}"),
        ("Assigned value from", m.assigned_source), ("u(x_pt)", _num(m.u_assigned, _more(d))),
        ("σ_pt", _num(m.sigma_pt, _more(d))), ("σ_pt from", m.sigma_source), ("u(x_pt) ≤ 0.3 σ_pt", u_check),
        ("Robust mean, robust SD", f"{_num(e.mean, _more(d))}, {_num(e.sd, _more(d))} "
                                   f"({e.iterations} iterations)" if e else "not computed (fewer than 3 results)"),
        ("Median, MADe, nIQR", f"{_num(m.median, _more(d))}, {_num(m.made, _more(d))}, {_num(m.niqr, _more(d))}"),
        ("Score", m.settings.score), ("Signals", signals),
    ])
    notes = list(m.notes) + list(ev.stage_notes.get(name, ()))
    note_html = ("<ul>" + "".join(f"<li>{_e(n)}</li>" for n in notes) + "</ul>") if notes else ""
    body = kv + note_html
    for f in (figs.scores.get(name), figs.density.get(name)):
        if f is not None:
            body += _figure(f.svg, f)
    if strip is not None:  # a round too large for the figures: the measurand's score strip instead
        body += f'<figure class="strip" id="strip-{_e(name)}">{strip.svg}</figure>'
    if name not in figs.scores and (strip is None or not strip.n):
        body += '<p class="muted">No scores for this measurand (see the notes).</p>'
    title = m.settings.label if m.settings.label and m.settings.label != name else ""
    return f'<h3 id="m-{_e(name)}">{_e(name)}{" (" + _e(title) + ")" if title else ""}</h3>{body}'


def _measurands(ev, parts: ReportParts) -> str:
    figs = parts.figures
    if figures_per_measurand(len(ev.measurands)):
        return "".join(_measurand_section(ev, n, m, figs) for n, m in ev.measurands.items())
    note = (f'<p class="muted">This round has {len(ev.measurands)} measurands: the figures of each measurand '
            f"(ranked scores, distribution, Mandel's h and k, item checks) are drawn for rounds of at most "
            f"{FIGURES_MAX_MEASURANDS} measurands. Each measurand shows its score strip (every lab's score, "
            f'unnamed); the ranked scores are charted in round-summary.xlsx.</p><p class="muted">'
            f"{_e(strip_legend(ev.round.words, own=False))}</p>")
    return note + "".join(_measurand_section(ev, n, m, figs, parts.strips.get(n))
                          for n, m in ev.measurands.items())


def _score_matrix(ev) -> str:
    """Labs × measurands: the official score with its signal symbol (the word in the cell's title)."""
    words = ev.round.words
    names = list(ev.measurands)
    sc = ev.scores
    if not len(sc):
        return '<p class="muted">No scores.</p>'
    cell: dict[tuple[str, str], str] = {}
    columns = {c: sc[c].tolist() for c in dict.fromkeys(SCORE_FIELD.values())}
    for i, (lab, meas, score, sig) in enumerate(zip(sc["lab"], sc["measurand"], sc["score"], sc["signal"])):
        v = columns[SCORE_FIELD.get(score, "z")][i]
        text = _num(v, 2) if isinstance(v, float) and math.isfinite(v) else ""
        cell[(lab, meas)] = _signal_cell(sig, words, text)
    head = "".join(f"<th>{_e(n)}<br><span class='muted'>{_e(ev.measurands[n].settings.score)}</span></th>"
                   for n in names)
    rows = [f"<tr><th>{_e(lab)}</th>" + "".join(cell.get((lab, n), "<td></td>") for n in names) + "</tr>"
            for lab in ev.labs]
    return (_legend(words) + f'<table class="wide"><thead><tr><th>Lab</th>{head}</tr></thead><tbody>'
            + "".join(rows) + "</tbody></table>")


def _score_detail(ev) -> str:
    cols = ["lab", "measurand", "result", "assigned", "sigma_pt", "score", "signal", "note"]
    sc = ev.scores
    noted = sc[sc["note"].fillna("").astype(str) != ""] if len(sc) else sc
    if not len(noted):
        return ""
    return ("<h3>Notes on individual results</h3>"
            + _table(noted, cols, ["Lab", "Measurand", "Result", "Assigned value", "σ_pt", "Score", "Signal", "Note"],
                     signal="signal", words=ev.round.words))


#: Above this many Mandel rows (labs × measurands) the report lists only the rows beyond an indicator line;
#: every row is in mandel.csv (common practice: a table of thousands of rows is read in a spreadsheet).
MANDEL_TABLE_MAX_ROWS = 1000


def _mandel_table(mandel: pd.DataFrame) -> str:
    if len(mandel) <= MANDEL_TABLE_MAX_ROWS or "flag" not in mandel.columns:
        return _table(mandel, decimals={"h": 2, "k": 2})
    flagged = mandel[mandel["flag"].fillna("").astype(str) != ""]
    return (f'<p class="muted">{len(flagged)} of {len(mandel)} rows are beyond an indicator line and listed '
            "here; every row is in mandel.csv.</p>" + _table(flagged, decimals={"h": 2, "k": 2}))


def report_html(ev, parts: ReportParts | None = None) -> str:
    """The whole round report as one HTML document (labs by code only)."""
    parts = parts if parts is not None else report_parts(ev)
    figs = parts.figures
    r = ev.round
    sections: list[tuple[str, str, str]] = [
        ("round", "The round and its settings", parts.heading + _settings(ev)),
        ("items", "Test items: homogeneity and stability", _items(ev, figs)),
        ("measurands", "Measurands: statistics and figures", _measurands(ev, parts)),
    ]
    if figs.youden:
        sections.append(("youden", "Youden plots", "".join(_figure(f.svg, f, square=True) for f in figs.youden)))
    prec = ""
    for key, title in (("precision", "Repeatability and reproducibility (ISO 5725-2)"),
                       ("screens", "Outlier screens")):
        if ev.extras.get(key) is not None:
            prec += f"<h3>{title}</h3>" + _table(ev.extras[key], decimals={})
    if ev.extras.get("mandel") is not None:
        prec += "<h3>Mandel's h and k</h3>"
        for name, fs in figs.mandel.items():
            prec += "".join(_figure(f.svg, f) for f in fs)
        prec += _mandel_table(ev.extras["mandel"])
    sections.append(("precision", "Precision and screens",
                     prec or '<p class="muted">No precision or screening results in this evaluation.</p>'))
    methods = ev.extras.get("methods")
    sections.append(("methods", "Method groups", _table(methods, decimals={"p_value": 4}) if methods is not None
                     else '<p class="muted">No method-group comparison in this evaluation.</p>'))
    sections.append(("scores", "Every laboratory's scores", _score_matrix(ev) + _score_detail(ev)))
    sections.append(("audit", "Audit trail: exclusions and decisions",
                     _table(ev.audit) if len(ev.audit) else '<p class="muted">Nothing was left out.</p>'))
    cautions = [CAUTION, *ev.failed_checks, *ev.warnings,
                "Laboratories are shown by code only; each laboratory's own page and workbook carry its name."]
    sections.append(("cautions", "Cautions", "<ul>" + "".join(f"<li>{_e(c)}</li>" for c in cautions) + "</ul>"))
    nav = "<nav><ol>" + "".join(f'<li><a href="#{k}">{_e(t)}</a></li>' for k, t, _ in sections) + "</ol></nav>"
    body = (f"<header><h1>Proficiency test round {_e(r.id)}</h1><p>{_e(r.title)}</p></header>{nav}"
            + "".join(f'<section id="{k}"><h2>{_e(t)}</h2>{b}</section>' for k, t, b in sections)
            + f'<footer class="muted"><p>Written by roundscore from the round file {_e(r.path.name)}.</p></footer>')
    return _page(f"Round {r.id}: report", body)


# ------------------------------------------------------------------------------------------ lab page

def lab_page_html(ev, parts: ReportParts, lab: str, *, scores: list[dict[str, Any]] | None = None,
                  mandel: list[dict[str, Any]] | None = None) -> str:
    """One lab's confidential page: its name, its scores, a strip per measurand with its score marked.

    In a small round (``parts.full_figures``) the round report's figures
    follow, with the lab's bar or result marked. ``scores`` and ``mandel``
    are the lab's rows as records (:func:`lab_records`; looked up when not given).
    """
    r = ev.round
    words = r.words
    p = ev.participants.get(lab)
    rows = scores if scores is not None else lab_records(ev, "scores", [lab]).get(lab, [])
    if mandel is None:
        mandel = lab_records(ev, "mandel", [lab]).get(lab)
    ident = _kv([("Laboratory code", lab), ("Laboratory", p.name if p else ""), ("Contact", p.contact if p else "")])
    table = ['<table class="wide"><thead><tr>', "".join(f"<th>{h}</th>" for h in (
        "Measurand", "Unit", "Your result", "Assigned value", "u(x_pt)", "σ_pt", "Score", "Your score", "Signal",
        "Rank by |score| (1 = closest)", "Note")), "</tr></thead><tbody>"]
    for rec in rows:
        meas = rec["measurand"]
        d = r.measurands[meas].decimals if meas in r.measurands else None
        v = rec.get(SCORE_FIELD.get(rec["score"], "z"))
        rank, n = rec.get("rank"), rec.get("n_scored")
        standing = f"{int(rank)} of {int(n)}" if isinstance(rank, float) and math.isfinite(rank) else ""
        res = rec["result"]
        table.append(
            f'<tr><td><a href="#strip-{_e(meas)}">{_e(meas)}</a></td><td>{_e(rec["unit"])}</td>'
            f'<td class="n">{_num(res, d) if not isinstance(res, str) else _e(res)}</td>'
            f'<td class="n">{_num(rec["assigned"], d)}</td><td class="n">{_num(rec["u_assigned"], _more(d))}</td>'
            f'<td class="n">{_num(rec["sigma_pt"], _more(d))}</td><td>{_e(rec["score"])}</td>'
            f'<td class="n">{_num(v, 2)}</td>{_signal_cell(rec["signal"], words)}<td>{standing}</td>'
            f'<td>{_e(rec["note"])}</td></tr>')
    table.append("</tbody></table>")
    own = {rec["measurand"]: rec for rec in rows}
    strips = []
    for meas, strip in parts.strips.items():
        rec = own.get(meas)
        v = rec.get(SCORE_FIELD.get(rec["score"], "z")) if rec else None
        strips.append(f'<figure class="strip" id="strip-{_e(meas)}">'
                      f'{strip.for_lab(lab, v, rec["signal"] if rec else None, words)}</figure>')
    stand = ("<h2>Where you stand</h2><p>Every laboratory's score on each measurand, yours marked; other "
             f'laboratories are not named.</p><p class="muted">{_e(strip_legend(words))}</p>' + "".join(strips))
    figs = parts.figures
    per, you = [], ""
    if parts.full_figures:
        for meas in r.measurands:
            body = ""
            for f in (figs.scores.get(meas), figs.density.get(meas)):
                if f is not None:
                    body += _figure(f.for_lab(lab), f)
            if body:
                per.append(f'<h3 id="m-{_e(meas)}">{_e(meas)}</h3>{body}')
        you = "".join(_figure(f.for_lab(lab), f, square=True) for f in figs.youden)
    else:
        stand += parts.figures_note
    m_html = ""
    if mandel:
        m_html = "<h2>Your Mandel h and k</h2>" + _records_table(mandel, decimals={"h": 2, "k": 2})
    body = (f"<header><h1>Round {_e(r.id)}: results of laboratory {_e(lab)}</h1><p>{_e(r.title)}</p></header>"
            f'<div class="confidential"><strong>Confidential to the laboratory named here.</strong>{ident}</div>'
            + parts.heading + "<h2>Your scores</h2>" + _legend(words) + "".join(table)
            + stand
            + ("<h2>In detail</h2><p>The round report's figures with your laboratory marked; other "
               "laboratories appear by code only.</p>" + "".join(per) if per else "")
            + (f"<h2>Youden plots</h2>{you}" if you else "") + m_html
            + "<h2>Round statistics</h2>" + parts.statistics
            + f'<h2>Cautions</h2><div class="caution">{_e(CAUTION)}</div>')
    return _page(f"Round {r.id}: laboratory {lab}", body)


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
    out = []
    for lab in labs:
        path = folder / "labs" / lab_file_name(lab)
        path.write_text(lab_page_html(ev, parts, lab, scores=scores.get(lab, []), mandel=mandel.get(lab, [])),
                        encoding="utf-8")
        out.append(path)
    return out
