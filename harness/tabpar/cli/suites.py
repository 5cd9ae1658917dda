"""tabpar suites: the built-in suites and their tasks."""
from __future__ import annotations


def add_parser(subparsers) -> None:
    suites = subparsers.add_parser("suites", help="list the built-in suites and their tasks")
    suites.set_defaults(func=suites_command)


def suites_command(args) -> int:
    from tabpar.cli.render import render_suite
    from tabpar.data.suites import list_builtin_suites, load_suite

    for path in list_builtin_suites():
        suite = load_suite(path)
        print(render_suite(suite, path, published_rows(suite.name)))
        print()
    return 0


def published_rows(suite_name: str) -> dict:
    """Task → (training rows, holdout rows) from the suite's published reference ({} if none)."""
    from tabpar.evaluation.reference import Reference, published_names

    if suite_name not in published_names():
        return {}
    tasks = Reference(suite_name).meta.get("tasks", {})
    return {name: (int(info["n_train"]), int(info["n_holdout"])) for name, info in tasks.items()
            if isinstance(info, dict) and "n_train" in info and "n_holdout" in info}
