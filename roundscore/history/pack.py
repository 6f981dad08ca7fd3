"""A lab's audit pack (``history report``): the history an assessor asks for, as a workbook, an HTML page and a PDF.

The content is built once as a :class:`~roundscore.outputs.document.Document` (:func:`pack_document`) and drawn
by :func:`roundscore.outputs.html.render_html` and :func:`roundscore.outputs.pdf.render_pdf`; the workbook
(``pack.xlsx``) writes the same tables' cells and the native charts of ``history show`` (so the same numbers
appear in the three files). The pack holds:

* a head: the laboratory's name and its code in each scheme, the period, the date produced, the archive, and
  the cautions (the pack supports, and does not replace, the lab's quality system, the provider's procedures
  and the accreditation body's rules; combined scores with the IUPAC caution);
* per scheme × measurand a chart: the round ids on the axis, the ±2/±3 lines (En ±1), each point's signal by
  marker shape and word, each point where a trend rule fired ringed and labelled;
* the findings (every warning and action signal and rule finding) with the lab's investigation record;
* per round: the counts by signal and the percent acceptable (of the scored results);
* per scheme × measurand over the period: mean and SD of the scores, RSZ and SSZ, and the bias check
  (:mod:`roundscore.stats.trends`), for z-like scores.
"""

from __future__ import annotations

import datetime as _dt
import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from roundscore.errors import InputError, StatisticsError
from roundscore.history.investigations import DISCLAIMER, FindingPoint, LabIdentity, finding_points, investigations
from roundscore.history.investigations import lab_frame, with_rules
from roundscore.history.store import archive_path, archived_labs, open_store
from roundscore.model.scores import family_of
from roundscore.model.signals import SIGNALS
from roundscore.outputs.document import Cell, Column, Document, Facts, Figure, Heading, Paragraph, Section, Table
from roundscore.outputs.history_chart import series_figure
from roundscore.outputs.history_workbook import family_for, rules_of, series_groups, shown_decimals
from roundscore.stats import trends
from roundscore.text import quote, shown_list

__all__ = ["LabPack", "RoundCount", "MeasurandSummary", "lab_pack", "pack_document", "write_pack", "PACK_FILES"]

#: The files of a pack, in the order written.
PACK_FILES = ("pack.xlsx", "pack.html", "pack.pdf")


@dataclass(frozen=True, slots=True, kw_only=True)
class RoundCount:
    """One round's scores of the lab: the count of each signal and the percent acceptable of those scored."""

    scheme: str
    round_id: str
    round_date: str
    counts: dict[str, int]
    scored: int
    percent_acceptable: float  # NaN when nothing was scored


@dataclass(frozen=True, slots=True, kw_only=True)
class MeasurandSummary:
    """One scheme × measurand over the period: mean and SD of the scores, combined scores, bias check."""

    scheme: str
    measurand: str
    scores: str
    n: int
    mean: float
    sd: float
    combined: trends.CombinedScores | None
    bias: trends.BiasCheck | None
    note: str


@dataclass(frozen=True, slots=True, kw_only=True)
class LabPack:
    """What a lab's pack shows, computed from the archive."""

    lab: str
    identity: LabIdentity
    frame: pd.DataFrame
    points: tuple[FindingPoint, ...]
    rounds: tuple[RoundCount, ...]
    measurands: tuple[MeasurandSummary, ...]
    since: str | None
    produced: str
    archive: str
    paper: str


def _round_counts(frame: pd.DataFrame) -> tuple[RoundCount, ...]:
    out = []
    for (date, round_id, scheme), part in frame.groupby(["round_date", "round", "scheme"], sort=True):
        counts = {s: int((part["signal"] == s).sum()) for s in SIGNALS}
        scored = sum(v for s, v in counts.items() if SIGNALS[s].scored)
        out.append(RoundCount(scheme=str(scheme), round_id=str(round_id), round_date=str(date), counts=counts,
                              scored=scored, percent_acceptable=100.0 * counts["acceptable"] / scored if scored
                              else math.nan))
    return tuple(out)


def _measurands(frame: pd.DataFrame) -> tuple[MeasurandSummary, ...]:
    out = []
    for (scheme, measurand), part in frame.groupby(["scheme", "measurand"], sort=True):
        scored = part[(part["signal"] != "not-scored") & np.isfinite(part["score_value"].to_numpy(float))]
        names = sorted(set(scored["score"].astype(str)))
        z_like = [n for n in names if family_of(n).trend_rules]
        values = scored[scored["score"].isin(z_like)]["score_value"].to_numpy(float)
        combined = bias = None
        note = ""
        if len(values):
            combined = trends.combined_scores(values)
            try:
                bias = trends.bias_check(values)
            except StatisticsError as exc:
                note = f"bias check not computed: {exc}"
        elif names:
            note = "En numbers: no combined scores or bias check (they assume a standard-normal score)"
        sd = float(np.std(values, ddof=1)) if len(values) > 1 else math.nan
        out.append(MeasurandSummary(scheme=str(scheme), measurand=str(measurand), scores=", ".join(names),
                                    n=len(values), mean=float(np.mean(values)) if len(values) else math.nan,
                                    sd=sd, combined=combined, bias=bias, note=note))
    return tuple(out)


def _paper(path, frame: pd.DataFrame) -> str:
    """The rounds' paper (``[round] paper`` kept in the archived settings) when they agree, else A4."""
    import json

    papers = set()
    with open_store(path).reading() as reader:
        if reader is not None:
            for scheme, round_id in set(zip(frame["scheme"], frame["round"])):
                rec = reader.find_round(str(scheme), str(round_id))
                if rec is not None:
                    papers.add(str(json.loads(rec.settings or "{}").get("paper", "a4")))
    return papers.pop() if len(papers) == 1 and papers <= {"a4", "letter"} else "a4"


def lab_pack(path: str | os.PathLike[str] | None, lab: str, *, since: str | None = None, scheme: str | None = None,
             paper: str | None = None, produced: str | None = None) -> LabPack:
    """The pack of laboratory ``lab`` (a code, or a name given with ``history alias``)."""
    identity, frame = lab_frame(path, lab, scheme=scheme, since=since)
    if frame.empty:
        raise InputError.single(f"no archived scores match lab {quote(lab)}"
                                + (f", scheme {quote(scheme)}" if scheme else "")
                                + (f", since {since}" if since else "")
                                + f" (labs in the archive: {shown_list(archived_labs(path)) or 'none'})")
    frame = with_rules(frame)
    records = investigations(path, sorted(set(frame["lab"].astype(str))))
    return LabPack(lab=lab, identity=identity, frame=frame, points=tuple(finding_points(frame, records)),
                   rounds=_round_counts(frame), measurands=_measurands(frame), since=since,
                   produced=produced or _dt.date.today().isoformat(), archive=open_store(path).name,
                   paper=paper or _paper(path, frame))


# --------------------------------------------------------------------------- the document

def _num(v: float, d: int = 2, sign: bool = False) -> str:
    if v is None or not np.isfinite(v):
        return ""
    return f"{v:+.{d}f}" if sign else f"{v:.{d}f}"


def _value(v: object, d: int | None) -> str:
    if isinstance(v, str):
        return v
    return _num(float(v), d if d is not None else 4) if v is not None else ""  # type: ignore[arg-type]  # a number here


def findings_table(pack: LabPack) -> Table:
    """Every warning and action signal and rule finding, in round-date order, with its investigation record."""
    dec = shown_decimals(pack.frame)
    rows = []
    for p in pack.points:
        rec = p.record
        d = dec.get(p.measurand)
        what = ("; ".join(x for x in (f"Cause: {rec.cause}" if rec.cause else "",
                                      f"Action: {rec.action}" if rec.action else "") if x) if rec else "")
        rows.append((Cell(text=p.round_id), Cell(text=p.round_date), Cell(text=f"{p.scheme} / {p.measurand}"),
                     Cell(text=_value(p.result, d)), Cell(text=_value(p.assigned, d)),
                     Cell(text=f"{p.score} {_num(p.value, sign=True)}"),
                     Cell(text=SIGNALS[p.signal].label() if p.signal in SIGNALS else p.signal,
                          signal=p.signal if p.signal in SIGNALS else None),
                     Cell(text="; ".join(h.label() for h in p.rules)),
                     Cell(text=rec.status if rec else "no record", signal=None if rec and rec.status == "closed"
                          else "action"),
                     Cell(text=what), Cell(text=f"{rec.by}, {rec.recorded_on}" if rec else "")))
    cols = (Column(title="Round"), Column(title="Date"), Column(title="Scheme / measurand"),
            Column(title="Result", numeric=True), Column(title="Assigned value", numeric=True),
            Column(title="Score", numeric=True), Column(title="Signal"), Column(title="Trend rule"),
            Column(title="Investigation"), Column(title="Cause and action"), Column(title="By, date"))
    return Table(columns=cols, rows=tuple(rows), key_columns=3,
                 caption="Signals and trend-rule findings with the laboratory's investigation records")


def rounds_table(pack: LabPack) -> Table:
    cols = (Column(title="Scheme"), Column(title="Round"), Column(title="Date"),
            *(Column(title=SIGNALS[s].label(), numeric=True) for s in SIGNALS),
            Column(title="Scored", numeric=True), Column(title="% acceptable", numeric=True))
    rows = tuple((Cell(text=r.scheme), Cell(text=r.round_id), Cell(text=r.round_date),
                  *(Cell(text=str(r.counts[s])) for s in SIGNALS), Cell(text=str(r.scored)),
                  Cell(text=_num(r.percent_acceptable, 1))) for r in pack.rounds)
    return Table(columns=cols, rows=rows, key_columns=2, caption="Scores per round by signal")


def measurands_table(pack: LabPack) -> Table:
    cols = (Column(title="Scheme / measurand"), Column(title="Scores"), Column(title="n", numeric=True),
            Column(title="Mean score", numeric=True), Column(title="SD", numeric=True),
            Column(title="RSZ", numeric=True), Column(title="SSZ (p)", numeric=True),
            Column(title="Bias t (df, p)", numeric=True), Column(title="Bias check"))
    rows = []
    for m in pack.measurands:
        c, b = m.combined, m.bias
        rows.append((Cell(text=f"{m.scheme} / {m.measurand}"), Cell(text=m.scores), Cell(text=str(m.n)),
                     Cell(text=_num(m.mean, sign=True)), Cell(text=_num(m.sd)),
                     Cell(text=_num(c.rsz, sign=True) if c else ""),
                     Cell(text=f"{c.ssz:.2f} ({c.ssz_p_value:.3g})" if c else ""),
                     Cell(text=f"{b.t:+.2f} ({b.df}, {b.p_value:.3g})" if b else ""),
                     Cell(text=b.conclusion if b else m.note)))
    return Table(columns=cols, rows=tuple(rows), key_columns=1,
                 caption="Each scheme × measurand over the period (z-like scores)")


def _figures(pack: LabPack) -> list[Figure]:
    out = []
    for k, (label, part) in enumerate(series_groups(pack.frame)):
        fam = family_for(part)
        lims = " and ".join(f"{s} ±{lim:g}" for lim, s in fam.limits())
        fig = series_figure(key=f"series-{k}", title=label, rounds=part["round"].astype(str).tolist(),
                            values=part["score_value"].to_numpy(float), signals=part["signal"].astype(str).tolist(),
                            family=fam, rules=[rules_of(r) for r in part["rules"]],
                            caption=f"Scores of {', '.join(sorted(set(part['lab'].astype(str))))} by round; lines at "
                                    f"{lims}. Marker shape, colour and word give each signal; a ring marks a "
                                    "point where a trend rule fired (R1 action signal, R2 two of three beyond 2, "
                                    "R3 nine on one side, R4 CUSUM).")
        out.append(Figure(svg=fig.svg, title=fig.title, caption=fig.caption))
    return out


def pack_document(pack: LabPack) -> Document:
    """The pack's content, once, for every rendering."""
    who = pack.identity.name or pack.lab
    codes = "; ".join(f"{s}: {c}" for s, c in pack.identity.codes)
    open_n = sum(p.is_open for p in pack.points)
    dates = pack.frame["round_date"].astype(str)
    period = f"{dates.min()} to {dates.max()}" + (f" (rounds since {pack.since})" if pack.since else "")
    head = Facts(pairs=(("Laboratory", who), ("Codes by scheme", codes), ("Period", period),
                        ("Rounds", str(len(pack.rounds))), ("Produced", pack.produced),
                        ("Archive", Path(pack.archive).name),
                        ("Findings", f"{len(pack.points)} ({open_n} open: no closed investigation record)")))
    blocks: list = [head, Paragraph(text=DISCLAIMER, style="caution")]
    blocks.append(Section(heading=Heading(text="Signals and trend-rule findings", anchor="findings"),
                          blocks=(findings_table(pack),) if pack.points else
                          (Paragraph(text="No warning or action signal and no trend rule fired in the period."),)))
    blocks.append(Section(heading=Heading(text="Series by scheme and measurand", anchor="series"),
                          blocks=tuple(_figures(pack))))
    blocks.append(Section(heading=Heading(text="Per round", anchor="rounds"), blocks=(rounds_table(pack),)))
    blocks.append(Section(heading=Heading(text="Per measurand over the period", anchor="measurands"), blocks=(
        measurands_table(pack),
        Paragraph(text="RSZ = Σz/√n; SSZ = Σz² against chi-squared on n degrees of freedom; bias check: one-sample "
                       "t test of the z-scores against 0 (α = 0.05)."),
        Paragraph(text="Caution: " + trends.COMBINED_CAUTION, style="caution"))))
    return Document(title=f"PT history of {who}", subtitle=f"Audit pack produced {pack.produced}",
                    blocks=tuple(blocks), footer=f"{who}: PT history, produced {pack.produced}", paper=pack.paper)


def write_pack(pack: LabPack, out: Path, *, formats: tuple[str, ...] = ("xlsx", "html", "pdf"),
               protect: tuple[tuple[Path, str], ...] = ()) -> list[Path]:
    """Write the pack's files (of ``formats``) as the output folder ``out`` (atomic; never a user's folder)."""
    from roundscore.history.pack_workbook import write_pack_workbook
    from roundscore.outputs.html import render_html
    from roundscore.outputs.outfolder import atomic_folder
    from roundscore.outputs.pdf import render_pdf

    doc = pack_document(pack)
    written = []
    with atomic_folder(out, kind="history-report", protect=protect) as temp:
        for name in PACK_FILES:
            fmt = name.rsplit(".", 1)[1]
            if fmt not in formats:
                continue
            if fmt == "xlsx":
                write_pack_workbook(pack, doc, temp / name)
            elif fmt == "html":
                (temp / name).write_text(render_html(doc), encoding="utf-8")
            else:
                (temp / name).write_bytes(render_pdf(doc, "letter" if pack.paper == "letter" else "a4"))
            written.append(out / name)
    return written


def default_protect(path) -> tuple[tuple[Path, str], ...]:
    """The archive, which no pack folder may contain."""
    return ((archive_path(path), "the archive"),) if "://" not in str(path or "") else ()

