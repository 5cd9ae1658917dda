"""tabpar suites: the built-in suites and their tasks."""
from __future__ import annotations


def add_parser(subparsers) -> None:
    suites = subparsers.add_parser("suites", help="list the built-in suites and their tasks")
    suites.set_defaults(func=suites_command)


def suites_command(args) -> int:
    from tabpar.cli.render import render_suite
    from tabpar.data.suites import list_builtin_suites, load_suite

    for path in list_builtin_suites():
        print(render_suite(load_suite(path), path))
        print()
    return 0
