"""Command line: a thin layer over the Python API, one module per command (see add_parser)."""
from __future__ import annotations

import argparse
import sys
import traceback

from tabpar.cli import (
    cache,
    calibrate,
    compare,
    export,
    leaderboard,
    options,
    place,
    plot,
    reference,
    run,
    suites,
)
from tabpar.common.errors import UserError

# in the order 'tabpar --help' lists them
COMMANDS = (run, place, export, plot, reference, compare, leaderboard, cache, calibrate, suites)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tabpar",
        description="Run a standard, reproducible baseline over open tabular tasks and place "
                    "scores against it.")
    parser.add_argument("--debug", action="store_true",
                        help="show a traceback for errors in your input (for bug reports)")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for command in COMMANDS:
        command.add_parser(subparsers)
    _accept_debug_anywhere(parser)
    return parser


def _accept_debug_anywhere(parser: argparse.ArgumentParser) -> None:
    """Let ``--debug`` follow any sub-command too (``tabpar place ... --debug``): users add it
    at the end of the line that failed. SUPPRESS keeps an absent flag from resetting the top
    level's value."""
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for sub in action.choices.values():
                sub.add_argument("--debug", action="store_true", default=argparse.SUPPRESS,
                                 help="show a traceback for errors in your input")
                _accept_debug_anywhere(sub)


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        options.check_options(args)
        return args.func(args)
    except UserError as exc:
        if args.debug:
            traceback.print_exc()
        print(f"tabpar: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("tabpar: interrupted.", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into a reader that stopped (e.g. head)
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
