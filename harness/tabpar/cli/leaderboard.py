"""tabpar leaderboard: import, pull-openml, list and place on stored leaderboards."""
from __future__ import annotations

import json

from tabpar.cli import options
from tabpar.common.paths import LEADERBOARDS_ENV, OPENML_CACHE_ENV
from tabpar.leaderboards.openml_runs import OPENML_MEASURES


def add_parser(subparsers) -> None:
    board = subparsers.add_parser(
        "leaderboard", help="store leaderboards (OpenML run evaluations or your own file)",
        description=f"Stored leaderboards live in --store DIR, else ${LEADERBOARDS_ENV}, else "
                    f"$XDG_DATA_HOME/tabpar/leaderboards (~/.local/share/tabpar/leaderboards). "
                    f"Place a score on one with 'tabpar place TASK --score S --leaderboard "
                    f"NAME'.")
    actions = board.add_subparsers(dest="leaderboard_action", metavar="ACTION", required=True)
    _add_import(actions)
    _add_pull_openml(actions)
    listing = _with_store(actions.add_parser("list", help="show the stored and published "
                                                          "leaderboards"))
    options.add_json(listing, "print one JSON list")
    listing.set_defaults(func=list_command)
    _add_place(actions)


def _with_store(parser):
    parser.add_argument("--store", default=None, metavar="DIR",
                        help=f"leaderboard store folder (default: ${LEADERBOARDS_ENV} or "
                             f"~/.local/share/tabpar/leaderboards)")
    return parser


def _add_import(actions) -> None:
    imp = _with_store(actions.add_parser(
        "import", help="store a CSV/Parquet file of entries as a leaderboard",
        description="Read a CSV or Parquet file with one row per entry; the scores must be "
                    "finite numbers and there must be at least 2. Other columns are kept as "
                    "they are."))
    imp.add_argument("file", help="the entries (.csv or .parquet)")
    imp.add_argument("--task", required=True, help="the task the scores are for, e.g. ames")
    imp.add_argument("--score-column", required=True, help="the column holding the scores")
    direction = imp.add_mutually_exclusive_group()
    direction.add_argument("--higher-is-better", action="store_true",
                           help="larger scores are better")
    direction.add_argument("--lower-is-better", action="store_true",
                           help="smaller scores are better (default for neither: the metric "
                                "of TASK in a known suite, else an error)")
    imp.add_argument("--name", default=None,
                     help="name to store it under (default: the file name without extension)")
    imp.add_argument("--suite", default=None,
                     help="suite to look TASK up in for its metric (default: the built-in "
                          "suites)")
    imp.add_argument("--replace", action="store_true",
                     help="overwrite a stored leaderboard of the same name")
    imp.set_defaults(func=import_command)


def _add_pull_openml(actions) -> None:
    pull = _with_store(actions.add_parser(
        "pull-openml", help="store an OpenML task's run evaluations as leaderboards",
        description=f"Fetch every run evaluation of an OpenML task (needs the openml package "
                    f"and the network once; cached under ${OPENML_CACHE_ENV}) and store two "
                    f"leaderboards: NAME (best run per flow) and NAME-all-runs."))
    pull.add_argument("task_id", help="OpenML task id, e.g. 31")
    pull.add_argument("--metric", default=None,
                      help=f"{options.or_list(OPENML_MEASURES)} (default: the task's own "
                           f"measure when it is one of these, else by task type)")
    pull.add_argument("--name", default=None, help="default: openml-ID-METRIC")
    pull.add_argument("--replace", action="store_true",
                      help="overwrite stored leaderboards of the same names")
    pull.set_defaults(func=pull_openml_command)


def _add_place(actions) -> None:
    place = _with_store(actions.add_parser(
        "place", help="place a score on a leaderboard alone (no reference)",
        description="Rank, top percent and percentile of a score among a leaderboard's "
                    "entries, without the baseline reference 'tabpar place' adds."))
    place.add_argument("name", help="a stored leaderboard's name")
    place.add_argument("--score", type=float, required=True,
                       help="your score, in the leaderboard's units")
    options.add_json(place)
    place.set_defaults(func=place_command)


def import_command(args) -> int:
    from tabpar.cli.render import render_import
    from tabpar.leaderboards.store import import_leaderboard

    lower = True if args.lower_is_better else False if args.higher_is_better else None
    board = import_leaderboard(args.file, task=args.task, score_column=args.score_column,
                               lower_is_better=lower, name=args.name, store=args.store,
                               suite=args.suite, replace=args.replace)
    print(render_import(board, args.name))
    return 0


def pull_openml_command(args) -> int:
    from tabpar.cli.render import render_pull
    from tabpar.leaderboards.openml_runs import pull_openml

    best, every = pull_openml(args.task_id, metric=args.metric, name=args.name,
                              store=args.store, replace=args.replace)
    print(render_pull(best, every))
    return 0


def list_command(args) -> int:
    from tabpar.cli.render import render_leaderboard_list
    from tabpar.leaderboards.store import list_leaderboards, published_dir, store_dir

    rows = list_leaderboards(args.store)
    if args.json:
        print(json.dumps(rows, indent=2))
    elif not rows:
        print(f"No leaderboards in {store_dir(args.store)} or {published_dir()}; add one with "
              f"'tabpar leaderboard import' or 'tabpar leaderboard pull-openml'.")
    else:
        print(render_leaderboard_list(rows))
    return 0


def place_command(args) -> int:
    from tabpar.leaderboards.placing import leaderboard_lines, place_on_leaderboard
    from tabpar.leaderboards.store import load_leaderboard

    numbers = place_on_leaderboard(args.score, load_leaderboard(args.name, args.store))
    if args.json:
        print(json.dumps(numbers, indent=2))
    else:
        print(f"score {args.score:.4g} on task {numbers['leaderboard_task']}")
        print("\n".join(leaderboard_lines(numbers)))
    return 0
