"""tabpar reference build: the published reference of a suite."""
from __future__ import annotations

import sys

from tabpar.cli import options


def add_parser(subparsers) -> None:
    reference = subparsers.add_parser("reference", help="build a published reference")
    actions = reference.add_subparsers(dest="reference_kind", metavar="ACTION", required=True)
    build = actions.add_parser("build", help="run every model × seeds on a suite and write "
                                             "provenance.json (resumes an interrupted build)")
    options.add_suite(build, options.DEFAULT_SUITE, "suite")
    build.add_argument("--out", default=None, required=True,
                       help="folder to write (results/reference/SUITE in a checkout rebuilds "
                            "a published one)")
    build.add_argument("--replace", action="store_true",
                       help="rebuild a finished reference in --out (default: refuse; an "
                            "interrupted build always resumes)")
    options.add_seeds(build, options.SEEDS)
    options.add_workers(build)
    options.add_quiet(build)
    build.set_defaults(func=reference_build_command)


def reference_build_command(args) -> int:
    from tabpar.cli.render import render_run
    from tabpar.evaluation.reference import build_reference

    progress = not args.quiet and sys.stderr.isatty()
    result = build_reference(suite=args.suite, out=args.out, seeds=args.seeds,
                             workers=args.workers, progress=progress, replace=args.replace)
    if not args.quiet:
        print(render_run(result))
    if result.interrupted:  # no provenance.json written: the folder is not a reference yet
        print(f"tabpar: interrupted; every finished job is saved in {result.out}; run the same "
              f"command again (without --replace) to resume the build.", file=sys.stderr)
        return 130
    return 1 if result.failed else 0
