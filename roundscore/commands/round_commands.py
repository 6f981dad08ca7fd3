"""``roundscore score``, ``demo``, ``forms`` and ``check``: the coordinator's commands for one round."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from roundscore.evaluation.uncertainty import counts as uncertainty_counts
from roundscore.model.evaluation import RoundEvaluation
from roundscore.model.scores import score_symbol
from roundscore.model.signals import SIGNALS
from roundscore.outputs.look import CAUTION, SIGNAL_SYMBOL, signal_legend_text
from roundscore.outputs.writers import FORMATS, FORMATS_VARIABLE, parse_formats, writers_for
from roundscore.support.progress import terminal_bar
from roundscore.text import shown_number, terminal_text

__all__ = ["register", "summary_text"]


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("score", help="evaluate a round folder and write every output",
                       description="Read the round file and results, evaluate, and write scores, statistics, "
                                   "the summary workbook and one score sheet per lab into --out.")
    p.add_argument("round", help="round folder or its round.toml")
    p.add_argument("--out", default=None, help="output folder (default: ROUND/out)")
    p.add_argument("--archive", default=None, metavar="FILE",
                   help="also store the round in this history archive "
                   "(default: [round] archive in round.toml) and show each lab's earlier rounds")
    p.add_argument("--replace-archive", action="store_true",
                   help="replace the round in the archive when its stored content differs "
                        "(the old rows are kept in the archive's audit table)")
    p.add_argument("--strict", action="store_true",
                   help="exit 1 when an item or u(x_pt) check fails (the outputs are written either way)")
    p.add_argument("--jobs", type=int, default=None, help="worker processes (default: all cores)")
    p.add_argument("--formats", type=formats_arg, default=None, metavar="LIST",
                   help=f"the output formats to write, comma-separated, from {', '.join(FORMATS)} "
                        f"(default: ${FORMATS_VARIABLE}, else all); circulation.csv lists what was written")
    p.add_argument("--quiet", action="store_true", help="print nothing but errors")
    p.add_argument("--no-cache", action="store_true",
                   help="read every returned form again, not using or writing the input cache in the output "
                        "folder (the outputs are the same either way)")
    p.set_defaults(func=run_score)

    d = sub.add_parser("demo", help="run the whole job on the bundled demo round",
                       description="Write the invented demo round into --out/round and score it into --out.")
    d.add_argument("--out", default="roundscore-demo", help="output folder (default: ./roundscore-demo)")
    d.add_argument("--jobs", type=int, default=None, help="worker processes (default: all cores)")
    d.add_argument("--formats", type=formats_arg, default=None, metavar="LIST",
                   help=f"the output formats to write, comma-separated, from {', '.join(FORMATS)} "
                        f"(default: ${FORMATS_VARIABLE}, else all)")
    d.set_defaults(func=run_demo)

    f = sub.add_parser("forms", help="write one blank submission workbook per participant",
                       description="Write a blank submission form for every lab in the round's participants "
                                   "file (or for --labs). A file that is already there is kept, never "
                                   "overwritten, unless --replace is given (it is then renamed NAME.old-N.xlsx).")
    f.add_argument("round", help="round folder or its round.toml")
    f.add_argument("--out", default=None, help="folder for the blank forms (default: ROUND/blank-forms); "
                                               "not the folder the returned forms are read from")
    f.add_argument("--labs", nargs="*", default=None, help="lab codes (default: the participants file)")
    f.add_argument("--replace", action="store_true",
                   help="write a new form where one exists; the old file is kept as NAME.old-N.xlsx")
    f.set_defaults(func=run_forms)

    c = sub.add_parser("check", help="validate a round folder without writing anything",
                       description="Read and evaluate the round as score would, print the summary and write "
                                   "nothing. Exits 1 when an item or u(x_pt) check fails, 2 on an error.")
    c.add_argument("round", help="round folder or its round.toml")
    c.add_argument("--out", default=None,
                   help="the round's output folder, where the input cache and the previous check's summary are "
                        "kept (default: ROUND/out, as for score); no outputs are written there")
    c.add_argument("--no-cache", action="store_true",
                   help="read every returned form again, not using or writing the input cache")
    c.add_argument("--changes", action="store_true",
                   help="list every lab whose signal changed since the previous check of the round")
    c.add_argument("--jobs", type=int, default=None, help="worker processes reading the forms (default: all cores)")
    c.set_defaults(func=run_check)


def formats_arg(text: str) -> tuple[str, ...]:
    """``--formats``: comma-separated output formats, each one a writer's (``outputs.writers.FORMATS``).

    >>> formats_arg("xlsx, csv")
    ('xlsx', 'csv')
    """
    try:
        return parse_formats(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def summary_text(ev: RoundEvaluation) -> str:
    """A short table of the round for the terminal.

    Every text from a file (round title, measurand names, notes and warnings
    quoting participants' text) is shown with its control characters
    escaped (:func:`roundscore.text.terminal_text`), one line each.
    """
    t = terminal_text
    lines = [f"Round {t(ev.round.id)}: {t(ev.round.title)}"]
    for line in ev.failed_checks:
        lines.append(f"  CHECK FAILED: {t(line)}")
    head = f"  {'measurand':<14}{'p':>4}  {'assigned':>12} {'u(x_pt)':>10} {'σ_pt':>10} {'score':<8}" \
           + "".join(f"{SIGNAL_SYMBOL[s]:>4}" for s in SIGNALS)
    lines.append(head)
    counts = ev.scores.groupby(["measurand", "signal"]).size()
    for name, m in ev.measurands.items():
        d = m.settings.decimals  # the measurand's decimals (uncertainties one more); else significant digits
        lines.append(
            f"  {t(name):<14}{m.p:>4}  {shown_number(m.assigned, d, '.5g'):>12} "
            f"{shown_number(m.u_assigned, d, '.3g', 1):>10} "
            f"{shown_number(m.sigma_pt, d, '.4g', 1):>10} {score_symbol(m.settings.score):<8}"
            + "".join(f"{int(counts.get((name, s), 0)):>4}" for s in SIGNALS))
    lines.append(f"  {signal_legend_text()}")
    for name, m in ev.measurands.items():
        if not m.scored:  # say why, here too: a row of "nan" and "not scored" alone does not
            lines.append(f"  {name}: not scored: "
                         + ("; ".join(m.notes) or "the assigned value or σ_pt could not be set"))
    for name, notes in ev.stage_notes.items():
        for note in notes:
            lines.append(f"  {t(name)}: {t(note)}")
    if (got := uncertainty_counts(ev.extras.get("uncertainties"))) is not None:
        lines.append(f"  {got.line()}")
    for w in ev.warnings:
        lines.append(f"  note: {t(w)}")
    return "\n".join(lines)


def _report(ev, outputs, *, quiet=False, strict=False, stored=()) -> int:
    if not quiet:
        print(summary_text(ev))
        print(f"\nWrote {len(outputs.files)} files to {outputs.folder}/ ({_kinds(outputs)}); "
              "circulation.csv lists what to send each lab")
        for outcome in stored:
            print(f"Archive: {outcome.status}: {terminal_text(outcome.message)}")
        print(f"\n{CAUTION}")
    if strict and ev.failed_checks:
        print("roundscore: --strict: checks failed: " + "; ".join(map(terminal_text, ev.failed_checks)),
              file=sys.stderr)
        return 1
    return 0


def _kinds(outputs) -> str:
    """The kinds of files written, for the closing line ("12 csv, 33 xlsx, 32 html")."""
    from collections import Counter

    counts = Counter(p.suffix.lstrip(".") for p in outputs.files)
    return ", ".join(f"{n} {kind}" for kind, n in counts.items())


def run_score(args: argparse.Namespace) -> int:
    from roundscore.pipeline import run_round

    rp = Path(args.round)
    folder = rp if rp.is_dir() else rp.parent
    out = Path(args.out) if args.out else folder / "out"
    stored: list[object] = []
    bar = terminal_bar(enabled=False if args.quiet else None)
    try:
        ev, outputs = run_round(rp, out, archive=args.archive, jobs=args.jobs, progress=bar,
                                replace_archive=args.replace_archive, on_archive=stored.append,
                                formats=args.formats, use_cache=not args.no_cache)
    finally:
        bar.close()
    return _report(ev, outputs, quiet=args.quiet, strict=args.strict, stored=stored)


def run_demo(args: argparse.Namespace) -> int:
    """The demo round is written to OUT/round and its outputs to OUT, all in one atomic step."""
    from roundscore.demo.demo_round import make_demo_round
    from roundscore.pipeline import Outputs, atomic_folder, load_and_evaluate, write_outputs

    out = Path(args.out)
    formats = tuple(w.format for w in writers_for(args.formats))  # $ROUNDSCORE_FORMATS is read before any work
    bar = terminal_bar()
    try:
        with atomic_folder(out, kind="demo") as tmp:
            make_demo_round(tmp / "round")
            ev = load_and_evaluate(tmp / "round", jobs=args.jobs, progress=bar)
            written = write_outputs(ev, tmp, jobs=args.jobs, progress=bar, formats=formats)
    finally:
        bar.close()
    outputs = Outputs(folder=out, files=tuple(out / p.relative_to(tmp) for p in written))
    print(f"Demo round (invented data) written to {out / 'round'}/\n")
    return _report(ev, outputs)


def run_forms(args: argparse.Namespace) -> int:
    from roundscore.intake.forms import write_forms
    from roundscore.intake.readers import read_participants
    from roundscore.intake.roundfile import load_round

    rnd = load_round(args.round)
    if args.labs:
        parts = read_participants(rnd)
        labs = [(lab, parts[lab].name if lab in parts else None) for lab in args.labs]
    else:
        parts = read_participants(rnd)
        if not parts:
            from roundscore.errors import InputError

            raise InputError.single("no participants: name a participants file in round.toml "
                                    "([round] participants = \"participants.csv\") or give --labs",
                                    file=str(rnd.path))
        labs = [(lab, p.name) for lab, p in parts.items()]
    for w in rnd.warnings:
        print(f"note: {w}")
    out = Path(args.out) if args.out else rnd.folder / "blank-forms"
    _check_forms_folder(rnd, out)
    done = write_forms(rnd, labs, out, replace=args.replace)
    print(f"Wrote {len(done.written)} blank submission form{'s' if len(done.written) != 1 else ''} to {out}/")
    for new, old in done.set_aside:
        print(f"  {new.name}: the file that was there is kept as {old.name}")
    if done.kept:
        print(f"Kept {len(done.kept)} existing file{'s' if len(done.kept) != 1 else ''} unchanged "
              f"(--replace writes new forms and keeps the old files under another name):")
        for p in done.kept[:20]:
            print(f"  {p.name}")
        if len(done.kept) > 20:
            print(f"  ... and {len(done.kept) - 20} more")
    return 0


def _check_forms_folder(rnd, out: Path) -> None:
    """Blank forms never go where the round reads its results, nor over a file."""
    from roundscore.outputs.outfolder import OutputFolderError
    from roundscore.pipeline import round_inputs

    protect, folders = round_inputs(rnd, for_forms=True)
    real = out.resolve()
    if out.exists() and not out.is_dir():
        raise OutputFolderError(f"forms folder {out} is a file, not a folder; nothing was written")
    for folder in folders:
        rf = folder.resolve()
        if real == rf or rf in real.parents:
            raise OutputFolderError(
                f"forms folder {out} is where the round reads its returned forms ([round] results = "
                f"{rnd.results!r}); blank forms there would be read as results. Nothing was written; "
                "give --out another folder (the default is ROUND/blank-forms)")
    for p, what in protect[1:]:  # an input file (a folder holding them is fine: forms never replace a file)
        if p.resolve() == real:
            raise OutputFolderError(f"forms folder {out} is {what}, not a folder; nothing was written")


def run_check(args: argparse.Namespace) -> int:
    from roundscore.commands.changes import changes_text, check_summary, compare, previous_summary, store_summary
    from roundscore.pipeline import check_round

    checked = check_round(args.round, out=args.out, use_cache=not args.no_cache, jobs=args.jobs)
    ev = checked.evaluation
    print(summary_text(ev))
    print()
    place = checked.cache
    if place is None:
        print("Changes: not kept (the output folder is not roundscore's, or holds the round's inputs; give --out "
              "a folder of its own)")
        folder = None
    else:
        previous = previous_summary(place.existing(), ev.round.id)
        summary = check_summary(ev)  # compared with the previous one, then stored for the next
        print(changes_text(compare(previous, ev, summary) if previous is not None else None, listed=args.changes))
        folder = place.create()
        store_summary(folder, ev, summary)
    failed = ev.failed_checks
    nothing = "no outputs were written" + (f" (the cache is kept in {folder})" if folder is not None else "")
    if failed:
        print(f"\nThe round file and results are valid, but {_checks(len(failed))} failed (listed above); "
              f"{nothing}.")
        print("roundscore: check: checks failed: " + "; ".join(failed), file=sys.stderr)
        return 1
    print(f"\nThe round file and results are valid; {nothing}.")
    return 0


def _checks(n: int) -> str:
    return "1 check" if n == 1 else f"{n} checks"
