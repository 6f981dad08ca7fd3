"""``roundscore history``: add rounds to the archive, show a lab's history, check it for trends.

Subcommands
-----------
``history add FILE... [--lab L] [--replace] [--reason TEXT] [--archive FILE]``
    Add ``scores.csv`` files or per-lab workbooks; one line per file and round:
    added, unchanged (nothing changed), replaced, or refused with the reason.
``history show --lab L [--measurand M] [--since DATE] [--scheme S] [--out DIR] [--archive FILE]``
    A table in the terminal; with ``--out`` also ``history.xlsx`` (with a native
    line chart of the scores) and ``history.png`` / ``history.svg``.
``history check [--lab L] [--window N] [--json] [--open] [--archive FILE]``
    Trend rules over every lab x measurand series (see :mod:`roundscore.history.rules`);
    exit code 0 when nothing fired, 1 when a rule fired. ``--open``: the warning and action
    signals and rule findings no closed investigation record answers; 1 when any remain.
``history note --lab L --round R --measurand M --status open|closed --by NAME [--cause T] [--action T]
[--date D] [--scheme S]``
    Record (or change) the lab's investigation of one point (:mod:`roundscore.history.investigations`).
``history alias --lab L --scheme S --name NAME``
    Give a lab code of a scheme its laboratory's name; codes sharing a name are one laboratory.

Errors are raised as :class:`roundscore.errors.RoundscoreError` subclasses; the
command-line entry point maps them to exit code 2.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import sys
from pathlib import Path
from collections.abc import Sequence

import numpy as np
import pandas as pd

from roundscore.history import store as archive
from roundscore.history import investigations as records
from roundscore.history import rules as history
from roundscore.history import qualitative as qualitative_rule
from roundscore.stats import trends
from roundscore.choices import options
from roundscore.errors import ArchiveError, InputError, RoundscoreError
from roundscore.model.round import Paper
from roundscore.model.scores import SCORES, score_symbol
from roundscore.outputs.history_workbook import (HISTORY_TABLE_COLUMNS, head_lines as _head_lines,
                                                write_history_outputs as _write_outputs)
from roundscore.outputs.look import (SIGNAL_CHART_MARKER, SIGNAL_COLOUR, SIGNAL_MARKER, SIGNAL_SYMBOL,
                                     signal_label, signal_legend_text)
from roundscore.text import json_text, terminal_text

__all__ = ["register", "run", "run_add", "run_show", "run_check", "run_note", "run_alias", "write_history_outputs",
           "format_open", "SIGNAL_STYLE"]

#: Each signal's colour, marker codes and text symbol: the tool's one look (roundscore.outputs.look), the same
#: in the terminal table, the history workbook and charts as in every other output.
SIGNAL_STYLE: dict[str, dict[str, str]] = {
    s: {"color": SIGNAL_COLOUR[s], "marker": SIGNAL_MARKER[s], "xlsx": SIGNAL_CHART_MARKER[s],
        "symbol": SIGNAL_SYMBOL[s]} for s in SIGNAL_COLOUR
}
_TABLE_COLUMNS = HISTORY_TABLE_COLUMNS


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected at least 1, got {value}")
    return value


def _iso_date(text: str) -> str:
    try:
        return _dt.date.fromisoformat(text).isoformat()
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a date YYYY-MM-DD, got {text!r}") from None


def register(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Add the ``history`` command and its ``add``, ``show`` and ``check`` subcommands."""
    parser = subparsers.add_parser(
        "history", help="a lab's scores across rounds: archive, show, check for trends",
        description="Keep scores of past rounds in an archive (SQLite) and look at a lab's "
                    "history. " + history.DISCLAIMER)
    sub = parser.add_subparsers(dest="history_command", metavar="{add,show,check,note,alias,report}", required=True)
    archive_help = (f"archive file (default ${archive.ARCHIVE_ENV} or "
                    "the user data folder's roundscore/archive.sqlite)")

    add = sub.add_parser("add", help="add scores.csv files or per-lab workbooks to the archive")
    add.add_argument("files", nargs="+", metavar="FILE", help="scores.csv or labs/LAB.xlsx")
    add.add_argument("--lab", help="your lab code (needed when a scores.csv holds several labs)")
    add.add_argument("--replace", action="store_true",
                     help="replace rows archived with different content (kept in the audit table)")
    add.add_argument("--reason", default="replaced on request (--replace)",
                     help="reason recorded in the audit table when replacing")
    add.add_argument("--archive", metavar="FILE", help=archive_help)
    add.set_defaults(func=run_add)

    show = sub.add_parser("show", help="a lab's scores across rounds, as a table and charts")
    show.add_argument("--lab", required=True, help="lab code")
    show.add_argument("--measurand", help="only this measurand")
    show.add_argument("--since", type=_iso_date, metavar="DATE", help="rounds on or after DATE")
    show.add_argument("--scheme", help="only this scheme")
    show.add_argument("--out", metavar="DIR",
                      help="also write history.xlsx, history.png and history.svg into DIR")
    show.add_argument("--paper", choices=options(Paper), default="a4",
                      help="the paper history.xlsx prints on (default: a4)")
    show.add_argument("--archive", metavar="FILE", help=archive_help)
    show.set_defaults(func=run_show)

    check = sub.add_parser("check", help="run the trend rules; exit 1 when one fired")
    check.add_argument("--lab", help="only this lab (default: every lab in the archive)")
    check.add_argument("--window", type=_positive_int, default=history.DEFAULT_WINDOW,
                       metavar="N", help="report rules firing in the last N scored rounds of "
                       f"each series (default {history.DEFAULT_WINDOW})")
    check.add_argument("--json", action="store_true", help="print the results as JSON")
    check.add_argument("--open", action="store_true",
                       help="list the warning and action signals and rule findings that no closed "
                            "investigation record answers; exit 1 when any remain")
    check.add_argument("--archive", metavar="FILE", help=archive_help)
    check.set_defaults(func=run_check)

    note = sub.add_parser("note", help="record the lab's investigation of a signal or rule finding")
    note.add_argument("--lab", required=True, help="lab code")
    note.add_argument("--round", required=True, dest="round_id", metavar="ID", help="round identifier")
    note.add_argument("--measurand", required=True, help="measurand")
    note.add_argument("--scheme", help="the scheme (needed when the round id is archived in several)")
    note.add_argument("--status", required=True, choices=records.STATUSES, help="open or closed")
    note.add_argument("--cause", default="", help="the cause found (needed to close)")
    note.add_argument("--action", default="", help="the corrective action taken (needed to close)")
    note.add_argument("--by", required=True, metavar="NAME", help="who records it")
    note.add_argument("--date", type=_iso_date, metavar="YYYY-MM-DD", help="the day (default: today)")
    note.add_argument("--reason", default="investigation record changed",
                      help="reason recorded in the audit table when a record is changed")
    note.add_argument("--archive", metavar="FILE", help=archive_help)
    note.set_defaults(func=run_note)

    alias = sub.add_parser("alias", help="give a lab code of a scheme its laboratory's name")
    alias.add_argument("--lab", required=True, help="lab code in the scheme")
    alias.add_argument("--scheme", required=True, help="the scheme")
    alias.add_argument("--name", required=True, help="the laboratory's name (codes sharing it are one laboratory)")
    alias.add_argument("--archive", metavar="FILE", help=archive_help)
    alias.set_defaults(func=run_alias)

    report = sub.add_parser("report", help="a lab's audit pack: workbook, HTML page and PDF")
    report.add_argument("--lab", required=True, help="lab code, or a laboratory's name given with history alias")
    report.add_argument("--since", type=_iso_date, metavar="DATE", help="rounds on or after DATE")
    report.add_argument("--scheme", help="only this scheme")
    report.add_argument("--out", required=True, metavar="DIR", help="the pack's output folder")
    report.add_argument("--paper", choices=options(Paper),
                        help="the paper (default: the rounds' [round] paper when they agree, else a4)")
    report.add_argument("--formats", default="xlsx,html,pdf", metavar="LIST",
                        help="the files to write: xlsx, html, pdf (default: all three)")
    report.add_argument("--archive", metavar="FILE", help=archive_help)
    report.set_defaults(func=run_report)
    return parser


def run(args: argparse.Namespace) -> int:
    """Run the chosen ``history`` subcommand; returns its exit code."""
    handlers = {"add": run_add, "show": run_show, "check": run_check, "note": run_note, "alias": run_alias,
                "report": run_report}
    return handlers[args.history_command](args)


# --------------------------------------------------------------------------- add

def run_add(args: argparse.Namespace) -> int:
    """Add each file in turn; a refused file does not stop the others.

    Returns 0 when every file was added, unchanged or replaced, 2 when any was refused.
    """
    refused = 0
    for name in args.files:
        try:
            outcomes = archive.add_files(args.archive, [name], lab=args.lab, replace=args.replace,
                                         reason=args.reason)
        except (InputError, ArchiveError) as exc:
            refused += 1
            text = str(exc)
            if text.startswith(f"{name}: "):
                text = text[len(name) + 2:]
            text = terminal_text(text, newlines=True).replace("\n", "\n    ")
            print(f"{terminal_text(name)}: refused: {text}")
            continue
        for outcome in outcomes:
            print(f"{terminal_text(name)}: {outcome.status}: {terminal_text(outcome.message)}")
        for note in dict.fromkeys(w for o in outcomes for w in o.warnings):
            print(f"{terminal_text(name)}: warning: {terminal_text(note)}")
    if refused:
        print(refused_summary(refused, len(args.files)))
    return 2 if refused else 0


def refused_summary(refused: int, total: int) -> str:
    """What happened to the files, in plain words: "the file was refused", "2 of 5 files were refused; ..."."""
    if total == 1:
        return "The file was refused; nothing was stored from it."
    if refused == total:
        return f"All {total} files were refused; nothing was stored from them."
    left = total - refused
    was = "was" if refused == 1 else "were"
    rest = "the other file is in the archive" if left == 1 else f"the other {left} are in the archive"
    return f"{refused} of {total} files {was} refused; {rest} (see each file's line above)."


# --------------------------------------------------------------------------- show

def _fmt(value: object) -> str:
    if isinstance(value, float):
        return "" if not np.isfinite(value) else f"{value:.4g}"
    return "" if value is None else terminal_text(value)  # archived text came from participants' files


def format_table(frame: pd.DataFrame) -> str:
    """The history as a fixed-width text table; the signal column carries a symbol and a word."""
    shown = frame.loc[:, list(_TABLE_COLUMNS)].copy()
    shown["score_value"] = [("" if not np.isfinite(v) else f"{v:+.2f}")
                            for v in shown["score_value"]]
    shown["signal"] = [signal_label(s) for s in shown["signal"]]
    if "score" in shown.columns:  # the score's symbol (z, z′, ζ, En), as every other output shows it
        shown["score"] = [score_symbol(s) if isinstance(s, str) and s in SCORES else s for s in shown["score"]]
    if "rules" not in shown.columns:
        shown["rules"] = ""
    header = ["date", "scheme", "round", "measurand", "unit", "result", "assigned", "σ_pt",
              "score", "value", "signal", "rules", "note"]
    cells = [header] + [[_fmt(v) for v in row] for row in shown.itertuples(index=False)]
    widths = [max(len(r[i]) for r in cells) for i in range(len(header))]
    numeric = {5, 6, 7, 9}
    lines = []
    for j, row in enumerate(cells):
        parts = [c.rjust(w) if (i in numeric and j) else c.ljust(w)
                 for i, (c, w) in enumerate(zip(row, widths))]
        lines.append("  ".join(parts).rstrip())
        if j == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def format_qualitative(frame: pd.DataFrame, findings: Sequence[qualitative_rule.QualitativeFinding]) -> str:
    """A lab's qualitative results as a fixed-width text table; column ``rule`` marks the rounds where the run of
    wrong results fired (:func:`roundscore.history.qualitative.check_qualitative`)."""
    fired = {(f.scheme, f.lab, f.measurand, f.round) for f in findings}
    header = ["date", "scheme", "round", "measurand", "item", "reported", "assigned", "agreement", "deviation",
              "signal", "rule", "note"]
    cells = [header]
    for rec in frame.to_dict(orient="records"):
        dev = rec["deviation"]
        deviation = "" if dev is None or pd.isna(dev) else f"{int(dev):+d}"
        rule = "Q" if (rec["scheme"], rec["lab"], rec["measurand"], rec["round"]) in fired else ""
        cells.append([_fmt(rec[c]) for c in ("round_date", "scheme", "round", "measurand", "item", "reported",
                                             "assigned", "agreement")]
                     + [deviation, signal_label(str(rec["signal"])), rule, _fmt(rec["note"])])
    widths = [max(len(row[i]) for row in cells) for i in range(len(header))]
    lines = []
    for j, row in enumerate(cells):
        lines.append("  ".join(c.rjust(w) if (i == 8 and j) else c.ljust(w)
                               for i, (c, w) in enumerate(zip(row, widths))).rstrip())
        if j == 0:
            lines.append("  ".join("-" * w for w in widths))
    lines.append(f"rule Q: {qualitative_rule.RULE_NAME} of a measurand ({qualitative_rule.RULE_SOURCE})")
    return "\n".join(lines)


def run_show(args: argparse.Namespace) -> int:
    """Print a lab's history (scores, then qualitative results); with ``--out`` write the workbook and charts."""
    frame = archive.lab_history(args.archive, lab=args.lab, scheme=args.scheme,
                                measurand=args.measurand, since=args.since)
    qual = archive.lab_qualitative_history(args.archive, lab=args.lab, scheme=args.scheme,
                                           measurand=args.measurand, since=args.since)
    if frame.empty and qual.empty:
        labs = archive.archived_labs(args.archive)
        shown = ", ".join(labs[:20]) + (" ..." if len(labs) > 20 else "")
        raise InputError.single(f"no archived scores match lab {args.lab!r}"
                                + (f", measurand {args.measurand!r}" if args.measurand else "")
                                + (f", scheme {args.scheme!r}" if args.scheme else "")
                                + (f", since {args.since}" if args.since else "")
                                + f" (labs in the archive: {shown or 'none'})")
    if not frame.empty:
        frame = records.with_rules(frame)
        print(f"History of lab {terminal_text(args.lab)}: {frame['round'].nunique()} rounds, "
              f"{frame['measurand'].nunique()} measurands")
        print(format_table(frame))
    if not qual.empty:
        print(f"{'Q' if frame.empty else chr(10) + 'Q'}ualitative results of lab {terminal_text(args.lab)}: "
              f"{qual['round'].nunique()} rounds, {qual['measurand'].nunique()} measurands")
        print(format_qualitative(qual, qualitative_rule.check_qualitative(qual)))
    print(f"signals: {signal_legend_text(sep=', ')}")
    print(history.DISCLAIMER)
    if args.out and frame.empty:
        print("no scores to chart: the workbook and charts of --out are written for scored measurands only")
    elif args.out:
        who = records.laboratory_codes(args.archive, args.lab)
        head = _head_lines(frame, lab=args.lab, name=who.name, produced=_dt.date.today().isoformat(),
                           archive=archive.open_store(args.archive).name)
        written = write_history_outputs(frame, Path(args.out), lab=args.lab, paper=args.paper, head=head,
                                        protect=((archive.archive_path(args.archive), "the archive"),))
        for path in written:
            print(f"wrote {path}")
    return 0


def write_history_outputs(frame: pd.DataFrame, out: Path, *, lab: str,
                          protect: tuple[tuple[Path, str], ...] = (), paper: str = "a4",
                          head: Sequence[str] = ()) -> list[Path]:
    """Write ``history.xlsx``, ``history.png`` and ``history.svg`` as the output folder ``out``
    (:func:`roundscore.outputs.history_workbook.write_history_outputs`, with the history's disclaimer)."""
    return _write_outputs(frame, out, lab=lab, caution=history.DISCLAIMER, protect=protect, paper=paper, head=head)


# --------------------------------------------------------------------------- check

def format_check(report: history.HistoryCheck) -> str:
    """The check results in words: what fired, combined scores and bias of those series.

    Archived text (lab codes, measurand names, notes) is shown with control characters escaped.
    """
    t = terminal_text
    lines = []
    fired = [s for s in report.series if s.fired]
    for s in report.series:
        if not s.fired:
            continue
        lines.append(f"{t(s.lab)} / {t(s.scheme)} / {t(s.measurand)} ({len(s.values)} scored rounds, "
                     f"window {s.window}):")
        lines += [f"  {t(f.message)}" for f in s.findings]
        if s.combined is not None:
            c = s.combined
            lines.append(f"  combined over the window: RSZ = {c.rsz:+.2f}, SSZ = {c.ssz:.2f} "
                         f"(chi-squared {c.n} df: p = {c.ssz_p_value:.3g}; 5 % point "
                         f"{c.ssz_critical_5:.2f}, 1 % point {c.ssz_critical_1:.2f}), "
                         f"mean |z| = {c.mean_abs_z:.2f}")
        if s.bias is not None:
            lines.append(f"  bias check: {s.bias.conclusion}")
        lines += [f"  note: {t(n)}" for n in s.notes]
    biased = [(s, s.bias) for s in report.series if not s.fired and s.bias is not None and s.bias.biased]
    for s, bias in biased:
        lines.append(f"{t(s.lab)} / {t(s.scheme)} / {t(s.measurand)}: no rule fired; bias check: "
                     f"{bias.conclusion}")
    lines.append(f"{len(fired)} of {len(report.series)} series with a rule firing in the last "
                 f"{report.window} scored rounds.")
    if any(s.combined is not None for s in fired):
        lines.append("Caution: " + trends.COMBINED_CAUTION)
    lines.append(report.disclaimer)
    return "\n".join(lines)


def run_check(args: argparse.Namespace) -> int:
    """Run the trend rules; 0 when nothing fired, 1 when a rule fired."""
    labs = [args.lab] if args.lab else archive.archived_labs(args.archive)
    if not labs:
        raise ArchiveError(f"{archive.open_store(args.archive).name}: the archive holds no scores")
    frame = archive.lab_history(args.archive, lab=labs)
    qual = archive.lab_qualitative_history(args.archive, lab=labs)
    if frame.empty and qual.empty:
        known = archive.archived_labs(args.archive)
        raise InputError.single(f"no archived scores for lab {args.lab!r} (labs in the archive: "
                                f"{', '.join(known[:20]) or 'none'})")
    if getattr(args, "open", False):
        if args.lab:  # the laboratory under every code it has (history alias)
            _, frame = records.lab_frame(args.archive, args.lab)
        points = records.finding_points(frame, records.investigations(args.archive, sorted(set(frame["lab"]))))
        print(format_open(points))
        return 1 if any(p.is_open for p in points) else 0
    report = (history.check_history(frame, window=args.window) if not frame.empty
              else history.HistoryCheck(series=(), window=args.window))
    findings = qualitative_rule.check_qualitative(qual, window=args.window)
    if args.json:
        body = report.to_dict()
        body["fired"] = report.fired or bool(findings)
        for entry, series in zip(body["series"], report.series):
            entry["fired"] = series.fired
        body["qualitative"] = [f.to_dict() for f in findings]
        print(json_text(json.dumps(body, indent=2, ensure_ascii=False)))
    else:
        text = format_check(report)
        if not qual.empty:
            n_series = qual.groupby(["scheme", "lab", "measurand"]).ngroups
            lines = [f"{terminal_text(f.lab)} / {terminal_text(f.scheme)} / {terminal_text(f.measurand)} "
                     f"(qualitative), round {terminal_text(f.round)}:\n  {terminal_text(f.message)}" for f in findings]
            lines.append(f"{len({(f.scheme, f.lab, f.measurand) for f in findings})} of {n_series} qualitative series "
                         f"with {qualitative_rule.RULE_NAME} (rule Q: {qualitative_rule.RULE_SOURCE}).")
            text = text.replace(report.disclaimer, "\n".join(lines) + "\n" + report.disclaimer)
        print(text)
    return 1 if report.fired or findings else 0


def finding_text(p: records.FindingPoint) -> str:
    """A finding in words: "■ action signal, z = +3.40; rule 1 (action signal)"."""
    value = f"{p.score} = {p.value:+.2f}" if np.isfinite(p.value) else p.score
    return "; ".join([f"{signal_label(p.signal)}, {value}", *(h.label() for h in p.rules)])


def format_open(points: Sequence[records.FindingPoint]) -> str:
    """The findings no closed record answers, one line each, and the count."""
    t = terminal_text
    open_ = [p for p in points if p.is_open]
    lines = []
    for p in open_:
        rec = (f"record open since {p.record.recorded_on} ({t(p.record.by)})" if p.record is not None
               else "no record")
        lines.append(f"{p.round_date} {t(p.lab)} / {t(p.scheme)} / {t(p.round_id)} / {t(p.measurand)}: "
                     f"{finding_text(p)} - {rec}")
    closed = len(points) - len(open_)
    lines.append(f"{len(open_)} open of {len(points)} findings ({closed} answered by a closed record).")
    lines.append(records.DISCLAIMER)
    return "\n".join(lines)


def run_note(args: argparse.Namespace) -> int:
    """Store an investigation record; 0 when stored or unchanged (a refusal is an error: 2)."""
    outcome = records.record_investigation(args.archive, lab=args.lab, round_id=args.round_id,
                                           measurand=args.measurand, status=args.status, by=args.by,
                                           cause=args.cause, action=args.action, date=args.date,
                                           scheme=args.scheme, reason=args.reason)
    print(f"{outcome.status}: {terminal_text(outcome.message)}")
    return 0


def run_alias(args: argparse.Namespace) -> int:
    """Store a lab code's laboratory name; 0 when stored or unchanged."""
    outcome = records.name_laboratory(args.archive, scheme=args.scheme, lab=args.lab, name=args.name)
    print(f"{outcome.status}: {terminal_text(outcome.message)}")
    return 0


def run_report(args: argparse.Namespace) -> int:
    """Write the lab's pack; 0 when written, 1 when findings remain open (the pack is written either way)."""
    from roundscore.history import pack as packs

    formats = tuple(f.strip() for f in str(args.formats).split(",") if f.strip())
    unknown = sorted(set(formats) - {"xlsx", "html", "pdf"})
    if unknown or not formats:
        raise InputError.single(f"--formats: unknown {', '.join(unknown) or 'empty list'}; allowed: xlsx, html, pdf",
                                value=args.formats)
    pack = packs.lab_pack(args.archive, args.lab, since=args.since, scheme=args.scheme, paper=args.paper)
    for path in packs.write_pack(pack, Path(args.out), formats=formats, protect=packs.default_protect(args.archive)):
        print(f"wrote {path}")
    open_n = sum(p.is_open for p in pack.points)
    print(f"{len(pack.points)} findings, {open_n} open (no closed investigation record).")
    print(records.DISCLAIMER)
    return 1 if open_n else 0


def main(argv: Sequence[str] | None = None) -> int:
    """Stand-alone entry (``python -m roundscore.commands.history``), mapping errors to 2."""
    parser = argparse.ArgumentParser(prog="roundscore")
    register(parser.add_subparsers(dest="command", required=True))
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except RoundscoreError as exc:
        print(f"error: {terminal_text(exc, newlines=True)}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    raise SystemExit(main())
