"""tabpar place: a score on a suite task against the published reference."""
from __future__ import annotations

import json
import sys

from tabpar.cli import options
from tabpar.common.paths import LEADERBOARDS_ENV
from tabpar.evaluation.placement import DEFAULT_TOLERANCE, VERDICTS


def add_parser(subparsers) -> None:
    place = subparsers.add_parser(
        "place", help="place a score on a suite task against the published reference",
        description=f"Place a holdout score (or a predictions file, scored here) against the "
                    f"baseline reference: percentile, rank, gain share, noise band and a verdict "
                    f"({', '.join(VERDICTS)}).")
    place.add_argument("task", help="task name, e.g. ames")
    given = place.add_mutually_exclusive_group(required=True)
    given.add_argument("--score", type=float, help="your holdout score in the task's metric")
    given.add_argument("--predictions",
                       help="CSV/Parquet with one row per holdout row of 'tabpar export': "
                            "row_id and prediction (binary: the positive class's probability), "
                            "or for multiclass row_id and one probability column per class, "
                            "named as task.json lists them")
    place.add_argument("--suite", default=None,
                       help="suite the task comes from (default: the reference's suite)")
    options.add_reference(place, f"published reference name ({options.reference_names()}) or "
                                 f"a results folder",
                          rule="the published reference whose holdout the predictions' row "
                               "ids are, else the one named like --suite, else the widest "
                               "published one")
    place.add_argument("--tolerance", type=float, default=DEFAULT_TOLERANCE,
                       help=f"gain share units under par still called at-baseline (default: "
                            f"{DEFAULT_TOLERANCE})")
    place.add_argument("--force", action="store_true",
                       help="place even when the task's data no longer matches the reference")
    place.add_argument("--plot", default=None, help="also draw the placement to FILE (.png/.svg)")
    place.add_argument("--leaderboard", default=None, metavar="NAME",
                       help=f"also place the score on a stored leaderboard of this task "
                            f"(looked up in ${LEADERBOARDS_ENV} or the default store, then "
                            f"results/leaderboards; see 'tabpar leaderboard list')")
    options.add_json(place)
    place.set_defaults(func=place_command)


def place_command(args) -> int:
    from tabpar.leaderboards.placing import place

    board = None
    if args.leaderboard:
        from tabpar.leaderboards.store import load_leaderboard

        board = load_leaderboard(args.leaderboard)
    if sys.stderr.isatty():  # the first placement of a task loads and splits its data
        print(f"  placing on {args.task}: reading the task's holdout rows for the noise band "
              f"(cached after the first time)…", file=sys.stderr, flush=True)
    placement = place(args.task, score=args.score, predictions=args.predictions,
                      suite=args.suite, reference=args.reference, tolerance=args.tolerance,
                      force=args.force, leaderboard=board)
    if args.plot:
        from tabpar.report.plots import placement_plot, save_figure

        save_figure(placement_plot(placement, leaderboard=board), args.plot)
    if args.json:
        print(json.dumps(placement.to_dict(), indent=2))
    else:
        print(placement)
        if args.plot:
            print(f"  plot: {args.plot}")
    return 0
