"""Command line: parses arguments, calls the library, maps errors to exit codes.

Exit codes: 0 success, 1 a check or rule fired (``history check``, ``score
--strict``), 2 an error in the input or the command line (a clear message,
never a traceback), 130 interrupted (^C), 128 + N stopped by signal N
(SIGTERM: 143), cleaned up like an error.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import warnings
from pathlib import Path

from roundscore import __version__
from roundscore.errors import RoundscoreError
from roundscore.text import terminal_text

__all__ = ["main", "build_parser"]

#: Subcommand modules in roundscore.commands, each with register(subparsers).
COMMAND_MODULES = ("round_commands", "compare", "history")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="roundscore",
        description="Score proficiency-testing rounds: assigned values, σ_pt, z/z′/ζ/En scores, "
                    "precision, item checks, score sheets and a lab's history.",
        epilog="The evaluation supports, and does not replace, the provider's documented procedures, "
               "ISO/IEC 17043 and the accreditation body's rules.",
    )
    parser.add_argument("--version", action="version", version=f"roundscore {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMAND_MODULES:
        try:
            module = importlib.import_module(f".commands.{name}", __package__)
        except ModuleNotFoundError as exc:  # a command still being written
            if exc.name and exc.name.endswith(name):
                continue
            raise
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    from roundscore.support.processes import Terminated, signals_as_errors

    try:
        with signals_as_errors(), warnings.catch_warnings():
            # A belt: library warnings (numpy, scipy, pandas, matplotlib) are never shown to a user; their
            # causes are fixed where they arise. ``python -W ...`` (sys.warnoptions) still shows them.
            if not sys.warnoptions:
                warnings.simplefilter("ignore")
            return int(args.func(args) or 0)
    except Terminated as exc:
        print(f"roundscore: stopped by {exc}; outputs being written were removed and no earlier output "
              "was changed", file=sys.stderr)
        return exc.exit_code
    except RoundscoreError as exc:
        for note in getattr(exc, "__notes__", ()):  # warnings found before the error (round.toml keys...)
            print(f"roundscore: warning: {terminal_text(note, newlines=True)}", file=sys.stderr)
        # A message may quote participants' text: shown with its control characters escaped.
        print(f"roundscore: error: {terminal_text(exc, newlines=True)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("roundscore: interrupted; no output was changed", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except OSError as exc:
        where = f" {terminal_text(exc.filename)}" if getattr(exc, "filename", None) else ""
        print(f"roundscore: error:{where}: {terminal_text(exc.strerror or exc)}", file=sys.stderr)
        return 2


def _path(text: str) -> Path:
    return Path(text)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
