"""tabpar export: a task's exact split written for your own pipeline."""
from __future__ import annotations

from tabpar.cli import options
from tabpar.data.suite_values import EXPORT_FORMATS


def add_parser(subparsers) -> None:
    export = subparsers.add_parser(
        "export", help="write a task's exact split for your own pipeline",
        description="Write train (with target) and holdout (without) files, each with row_id, "
                    "and task.json.")
    export.add_argument("task", help="task name")
    export.add_argument("dir", help="folder to write into")
    options.add_suite(export, options.DEFAULT_SUITE, "suite name or path")
    export.add_argument("--format", default=options.EXPORT_FORMAT, choices=list(EXPORT_FORMATS),
                        help=f"file format (default: {options.EXPORT_FORMAT})")
    export.set_defaults(func=export_command)


def export_command(args) -> int:
    from tabpar.data.export import export

    print(export(args.task, args.dir, suite=args.suite, fmt=args.format))  # ExportedSplit
    return 0
