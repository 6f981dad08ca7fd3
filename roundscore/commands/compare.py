"""``roundscore compare``: compare the means of two sets of results, or one set with a reference.

Forms
-----
``roundscore compare 1.2 1.3 1.25 --vs 1.4 1.5 1.45``
    Two sets given on the command line.
``roundscore compare --csv FILE --a COL --b COL``
    Two columns of a CSV file (blank cells are skipped; the columns may differ in length).
``roundscore compare 1.2 1.3 --reference 1.1`` / ``--csv FILE --a COL --reference 1.1``
    One set against a reference value.

``--confidence 0.99`` changes the level (default 0.95), ``--method`` forces the
pooled-SD or Welch test, ``--json`` prints JSON instead of text.  Numbers are
read as in result files (decimal point or comma, see :mod:`roundscore.intake.cells`); a
number whose reading depends on the decimal mark (``1,234``) is refused unless
``--decimal comma`` or ``--decimal point`` says which is meant.
Bad input raises :class:`~roundscore.errors.InputError` naming the file,
column, row and value; the command-line entry point prints it.
"""

from __future__ import annotations

import argparse
import csv
import json
import sys
from pathlib import Path
from typing import Any

from roundscore.intake.cells import DECIMAL_MARKS, AmbiguousNumber, CellError, DecimalMark, parse_cell
from roundscore.errors import InputError, Problem
from roundscore.ranges import confidence_problem, magnitude_problem
from roundscore.stats.compare import (DEFAULT_CONFIDENCE, MIN_GROUP_SIZE, OneSampleComparison, TwoSampleComparison,
                                      compare_one, compare_two)
from roundscore.text import json_text, terminal_text

__all__ = ["register", "run", "read_numbers", "read_csv_columns"]


def register(subparsers: Any) -> argparse.ArgumentParser:
    """Add the ``compare`` subcommand to an argparse subparsers object."""
    parser = subparsers.add_parser(
        "compare",
        help="compare the means of two sets of results (F test, then pooled or Welch t) or one set "
             "with a reference value",
        description="Compare two sets of lab means: a two-sided F test of the variances decides between "
                    "the pooled-SD t test and Welch's t test (or use --method). With --reference, a "
                    "one-sample t test. The result supports, and does not replace, the provider's "
                    "documented procedures, ISO/IEC 17043 and the accreditation body's rules.",
    )
    parser.add_argument("values", nargs="*", metavar="X", help="the first set of values")
    parser.add_argument("--vs", nargs="+", metavar="Y", help="the second set of values")
    parser.add_argument("--csv", metavar="FILE", help="read the sets from columns of a CSV file")
    parser.add_argument("--a", metavar="COL", help="column of the first set (with --csv)")
    parser.add_argument("--b", metavar="COL", help="column of the second set (with --csv)")
    parser.add_argument("--reference", metavar="VALUE", help="compare the first set with this reference value")
    parser.add_argument("--confidence", metavar="LEVEL", default=str(DEFAULT_CONFIDENCE),
                        help="confidence level, e.g. 0.95 (default) or 0.99")
    parser.add_argument("--method", choices=("auto", "pooled", "welch"), default="auto",
                        help="t test for two sets: auto (F test decides, default), pooled or welch")
    parser.add_argument("--label-a", default=None, help="name of the first set in the output")
    parser.add_argument("--label-b", default=None, help="name of the second set in the output")
    parser.add_argument("--decimal", choices=DECIMAL_MARKS, default=None,
                        help="the decimal mark of the values, when a value such as 1,234 could be read two ways")
    parser.add_argument("--json", action="store_true", help="print JSON instead of text")
    parser.set_defaults(func=run)
    return parser


def _number(text: str, *, file: str | None = None, column: str | None = None, row: int | None = None,
            decimal: DecimalMark | None = None) -> float | None:
    """One number as a lab would type it; None for a blank; InputError otherwise."""
    try:
        cell = parse_cell(text, decimal=decimal)
    except CellError as exc:
        hint = None
        if isinstance(exc, AmbiguousNumber):
            hint = "say which decimal mark the values use: --decimal comma or --decimal point"
        raise InputError([Problem(message=str(exc), file=file, column=column, row=row, value=text, hint=hint)],
                         summary=str(exc)) from None
    if cell.kind == "blank":
        return None
    if cell.kind == "censored":
        raise InputError.single("a censored result cannot be compared", file=file, column=column, row=row,
                                value=text)
    why = magnitude_problem(cell.value)  # type: ignore[arg-type]  # a number cell: blank and censored returned above
    if why is not None:
        raise InputError.single(why, file=file, column=column, row=row, value=text)
    return float(cell.value)  # type: ignore[arg-type]  # a number cell, as above


def read_numbers(texts: list[str], *, column: str, decimal: DecimalMark | None = None) -> list[float]:
    """Numbers given on the command line; ``row`` in errors is the 1-based position."""
    out = []
    for i, text in enumerate(texts, start=1):
        value = _number(text, column=column, row=i, decimal=decimal)
        if value is None:
            raise InputError.single("empty value", column=column, row=i, value=text)
        out.append(value)
    return out


def read_csv_columns(path: str, columns: list[str], *, decimal: DecimalMark | None = None) -> dict[str, list[float]]:
    """Numbers from named columns of a CSV file (comma, semicolon or tab separated).

    Blank cells are skipped.  Rows are numbered as in a spreadsheet (header = row 1).
    """
    file = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise InputError.single("file not found", file=file) from None
    except UnicodeDecodeError:
        raise InputError.single("not a UTF-8 text file", file=file) from None
    lines = text.splitlines()
    if not lines:
        raise InputError.single("the file is empty", file=file)
    try:
        dialect = csv.Sniffer().sniff(lines[0], delimiters=",;\t")
        delimiter = dialect.delimiter
    except csv.Error:
        delimiter = ","
    rows = list(csv.reader(lines, delimiter=delimiter))
    header = [h.strip() for h in rows[0]]
    problems = []
    for col in columns:
        if col not in header:
            problems.append(Problem(message=f"no such column; columns are {', '.join(map(repr, header))}",
                                    file=file, column=col))
    if problems:
        raise InputError(problems, summary=f"{file}: missing column")
    out: dict[str, list[float]] = {c: [] for c in columns}
    for row_no, row in enumerate(rows[1:], start=2):
        for col in columns:
            j = header.index(col)
            cell = row[j] if j < len(row) else ""
            try:
                value = _number(cell, file=file, column=col, row=row_no, decimal=decimal)
            except InputError as exc:
                problems.extend(exc.problems)
                continue
            if value is not None:
                out[col].append(value)
    if problems:
        raise InputError(problems, summary=f"{file}: values that are not numbers")
    return out


def _confidence(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise InputError.single("the confidence level must be a number such as 0.95", column="--confidence",
                                value=text) from None
    why = confidence_problem(value)
    if why is not None:
        raise InputError.single(f"the confidence level must be {why}", column="--confidence", value=text)
    return value


def _enough(values: list[float], *, label: str, file: str | None) -> None:
    if len(values) < MIN_GROUP_SIZE:
        raise InputError.single(f"need at least {MIN_GROUP_SIZE} values, got {len(values)}", file=file,
                                column=label, value=values[0] if values else None)


def run(args: argparse.Namespace) -> int:
    """Run ``roundscore compare``; returns the exit code (0)."""
    confidence = _confidence(args.confidence)
    decimal = getattr(args, "decimal", None)
    reference = None
    if args.reference is not None:
        reference = _number(args.reference, column="--reference", decimal=decimal)
        if reference is None:
            raise InputError.single("the reference value is empty", column="--reference", value=args.reference)
    file = None
    if args.csv:
        if args.values or args.vs:
            raise InputError.single("give values either on the command line or with --csv, not both",
                                    file=args.csv)
        if not args.a:
            raise InputError.single("--csv needs --a COL (and --b COL or --reference)", file=args.csv)
        if reference is None and not args.b:
            raise InputError.single("--csv needs --b COL or --reference VALUE", file=args.csv)
        if reference is not None and args.b:
            raise InputError.single("give either --b or --reference, not both", file=args.csv)
        file = args.csv
        cols = [args.a] + ([args.b] if args.b else [])
        data = read_csv_columns(args.csv, cols, decimal=decimal)
        first, label_a = data[args.a], args.label_a or args.a
        second, label_b = (data[args.b], args.label_b or args.b) if args.b else (None, "")
    else:
        if args.a or args.b:
            raise InputError.single("--a and --b name CSV columns; use them with --csv", column="--a/--b")
        if not args.values:
            raise InputError.single("give the values to compare (e.g. 1.2 1.3 1.25 --vs 1.4 1.5 1.45) or --csv",
                                    column="values")
        first, label_a = read_numbers(args.values, column="values", decimal=decimal), args.label_a or "A"
        if args.vs:
            if reference is not None:
                raise InputError.single("give either --vs or --reference, not both", column="--vs")
            second, label_b = read_numbers(args.vs, column="--vs", decimal=decimal), args.label_b or "B"
        elif reference is None:
            raise InputError.single("give the second set with --vs, or a --reference value", column="--vs")
        else:
            second, label_b = None, ""
    _enough(first, label=args.a if file else "values", file=file)
    result: TwoSampleComparison | OneSampleComparison
    if second is not None:
        _enough(second, label=args.b if file else "--vs", file=file)
        result = compare_two(first, second, confidence=confidence, method=args.method,
                             labels=(label_a, label_b))
    else:
        assert reference is not None, "without a second set, a --reference value (checked above)"
        result = compare_one(first, reference, confidence=confidence, label=label_a)
    # Labels come from the CSV's column names: shown with control characters escaped.
    if args.json:
        sys.stdout.write(json_text(json.dumps(result.to_dict(), indent=2, ensure_ascii=False)) + "\n")
    else:
        sys.stdout.write("\n".join(terminal_text(line) for line in result.to_text()) + "\n")
    return 0
