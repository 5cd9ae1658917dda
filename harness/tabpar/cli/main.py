"""Command line: a thin layer over the Python API, one module per command (see add_parser)."""
from __future__ import annotations

import argparse
import errno
import sys
import traceback
import warnings

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
from tabpar.common.files import StateWarning, write_error

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


def _tolerant_streams() -> None:
    """Print what the terminal cannot encode as escapes (e.g. "—" under PYTHONIOENCODING=ascii)
    instead of failing on it."""
    for stream in (sys.stdout, sys.stderr):
        reconfigure = getattr(stream, "reconfigure", None)
        if reconfigure is not None and getattr(stream, "errors", None) == "strict":
            reconfigure(errors="backslashreplace")


def _show_warning(message, category, filename, lineno, file=None, line=None):
    """tabpar's own warnings as one line; others as Python prints them."""
    if issubclass(category, StateWarning):
        print(f"tabpar: warning: {message}", file=file or sys.stderr)
    else:
        _python_show_warning(message, category, filename, lineno, file, line)


_python_show_warning = warnings.showwarning
# file-system faults no input can cause; shown as a sentence wherever they escape from
_ENVIRONMENT_ERRNOS = {errno.ENOSPC, errno.EDQUOT, errno.EROFS, errno.EACCES, errno.EPERM}


def main(argv=None) -> int:
    _tolerant_streams()
    warnings.showwarning = _show_warning
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
    except BrokenPipeError:  # output piped into a reader that stopped (e.g. head)
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except OSError as exc:
        if exc.errno not in _ENVIRONMENT_ERRNOS:
            raise
        if args.debug:
            traceback.print_exc()
        print(f"tabpar: error: {write_error(exc.filename or 'a file', exc)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("tabpar: interrupted.", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
