"""Command line: a thin layer over the Python API (every command has a function behind it)."""
from __future__ import annotations

import argparse
import json
import sys
import traceback
from pathlib import Path

from tabpar.common.errors import UserError


def _csv_list(text: str) -> list[str]:
    return [part.strip() for part in text.split(",") if part.strip()]


def _decimals(value: float) -> int:
    """Decimals that show a score to about four significant digits."""
    magnitude = abs(value)
    return 0 if magnitude >= 1000 else 2 if magnitude >= 10 else 4


def _format_score(value, decimals: int | None = None) -> str:
    if value is None:
        return "-"
    decimals = _decimals(value) if decimals is None else decimals
    return f"{value:,.{decimals}f}"


def render_run(result) -> str:
    """Plain-text tables, one per task: model, mean holdout score ± spread over seeds."""
    from tabpar.common.metrics import get_metric
    from tabpar.models.zoo import DEFAULT_ENSEMBLES

    lines = []
    for name, info in result.tasks.items():
        metric = get_metric(info["metric"])
        direction = "lower is better" if metric.lower_is_better else "higher is better"
        lines.append("")
        lines.append(f"{name} — {info['metric']} ({direction}); {info['split']}")
        for note in info["notes"]:
            lines.append(f"  note: {note}")
        lines.append(f"  {'model':<8} {'holdout':>22} {'train':>10} {'fit s':>8}  seeds")
        ranked = sorted(info["models"].items(),
                        key=lambda kv: kv[1]["mean"] * (1 if metric.lower_is_better else -1))
        for model, s in ranked:
            places = _decimals(s["mean"])
            spread = f" ± {_format_score(s['std'], places)}" if s["n"] > 1 else ""
            score = _format_score(s["mean"], places) + spread
            tag = "" if model in DEFAULT_ENSEMBLES else "  (" + ("floor" if model == "naive"
                                                                else "linear") + ")"
            lines.append(f"  {model:<8} {score:>22} {_format_score(s['train_mean']):>10} "
                         f"{s['fit_seconds']:>8.2f}  {s['n']}{tag}")
    lines.append("")
    lines.append(f"{result.jobs} jobs: {result.ok} ok, {result.failed} failed, "
                 f"{result.reused} reused from an earlier run; results in {result.out}")
    lines.append("± is the standard deviation over seeds (0 for models the seed does not "
                 "change); the holdout band from finite rows comes with 'tabpar place'.")
    if result.failed:
        lines.append(f"{result.failed} jobs did not finish (a rerun with the same --out "
                     f"retries them; details in {result.out}/jobs.jsonl):")
        for row in result.failures[:8]:
            lines.append(f"  {row['task']}/{row['model']} seed {row['seed']}: {row['status']} — "
                         f"{row['error']}")
        if len(result.failures) > 8:
            lines.append(f"  ... and {len(result.failures) - 8} more")
    if result.interrupted:
        lines.append("Interrupted: every finished job is saved; run the same command again "
                     "(same --out) to resume.")
    return "\n".join(lines)


def cmd_run(args) -> int:
    from tabpar.execution.runner import run_suite

    progress = (not args.quiet and not args.json and sys.stderr.isatty())
    say = (lambda m: print(m, file=sys.stderr)) if progress else None
    result = run_suite(suite=args.suite, tasks=args.tasks, models=args.models,
                       seeds=args.seeds, out=args.out, workers=args.workers,
                       progress=progress, on_event=say, job_timeout=args.job_timeout,
                       executor=args.executor, scheduler=args.scheduler)
    if args.json:
        print(json.dumps(result.to_dict(), indent=2))
    elif not args.quiet:
        print(render_run(result))
    if result.interrupted:
        if args.quiet or args.json:  # the one line a quiet run still owes its user
            print(f"tabpar: interrupted; every finished job is saved in {result.out}; run the "
                  f"same command again to resume.", file=sys.stderr)
        return 130
    return 1 if result.failed else 0


def cmd_suites(args) -> int:
    from tabpar.data.suites import list_builtin_suites, load_suite

    for path in list_builtin_suites():
        suite = load_suite(path)
        print(f"{suite.name}: {suite.description}  ({path})")
        for t in suite.tasks:
            cap = f", at most {t.max_rows:,} rows" if t.max_rows else ""
            print(f"  {t.name:<12} {t.type:<10} {t.metric:<8} {t.source}; "
                  f"{t.holdout.describe()}{cap}")
        print()
    return 0


def cmd_place(args) -> int:
    from tabpar.evaluation.placement import place

    board = None
    if args.leaderboard:
        from tabpar.leaderboards.store import load_leaderboard

        board = load_leaderboard(args.leaderboard)
    placement = place(args.task, score=args.score, predictions=args.predictions,
                      suite=args.suite, reference=args.reference, tolerance=args.tolerance,
                      force=args.force, leaderboard=board)
    if args.plot:
        from tabpar.report.plots import placement_plot

        placement_plot(placement, args.plot, leaderboard=board)
    if args.json:
        print(json.dumps(placement.to_dict(), indent=2))
    else:
        print(placement)
        if args.plot:
            print(f"  plot: {args.plot}")
    return 0


def cmd_export(args) -> int:
    from tabpar.data.export import export_task
    from tabpar.data.suites import load_suite

    task = load_suite(args.suite).task(args.task)
    info = export_task(task, args.dir, args.format)
    print(f"wrote {args.dir}/{info['files']['train']} ({info['n_train']:,} rows with target), "
          f"{args.dir}/{info['files']['holdout']} ({info['n_holdout']:,} rows without) and "
          f"task.json")
    print(f"{info['metric']} ({'lower' if info['lower_is_better'] else 'higher'} is better); "
          f"{info['how_to_submit']}")
    return 0


def cmd_plot_suite(args) -> int:
    from tabpar.report.plots import suite_plot
    from tabpar.evaluation.reference import Reference

    overlay = Reference(args.overlay) if args.overlay else None
    path = suite_plot(Reference(args.reference), args.out, overlay=overlay)
    print(f"wrote {path}")
    return 0


def cmd_reference_build(args) -> int:
    from tabpar.evaluation.reference import build_reference

    progress = not args.quiet and sys.stderr.isatty()
    result = build_reference(suite=args.suite, out=args.out, seeds=args.seeds,
                             workers=args.workers, progress=progress)
    if not args.quiet:
        print(render_run(result))
    return 1 if result.failed else 0


def cmd_compare(args) -> int:
    from tabpar.evaluation.comparison import compare
    from tabpar.report.plots import forest_plot

    progress = not args.quiet and not args.json and sys.stderr.isatty()
    result = compare(args.candidate, baseline=args.baseline, suite=args.suite,
                     tasks=args.tasks, models=args.models, seeds=args.seeds,
                     tolerance=args.tolerance, out=args.out, workers=args.workers,
                     progress=progress, executor=args.executor, scheduler=args.scheduler,
                     force=args.force)
    forest_plot(result, Path(result.out) / "forest.png")
    if args.plot:
        forest_plot(result, args.plot)
    if args.json:
        print(json.dumps(result.to_dict(), indent=2))
    elif not args.quiet:
        print(result)
    return 0 if result.passed else 1


def _board_line(board) -> str:
    metric = f" ({board.metric})" if board.metric else ""
    return (f"leaderboard '{board.name}' for task {board.task}: {len(board.entries):,} "
            f"entries, {'lower' if board.lower_is_better else 'higher'} is better{metric}, "
            f"best {board.best:.4g}")


def cmd_leaderboard_import(args) -> int:
    from tabpar.leaderboards.store import import_leaderboard

    lower = True if args.lower_is_better else False if args.higher_is_better else None
    board = import_leaderboard(args.file, task=args.task, score_column=args.score_column,
                               lower_is_better=lower, name=args.name, store=args.store,
                               suite=args.suite, replace=args.replace)
    print(f"stored {_board_line(board)}")
    print(f"  direction from {board.meta['direction_from']}; score column "
          f"'{board.score_column}'; other columns kept as they are")
    if args.name is not None and args.name != board.name:
        print(f"  the name '{args.name}' became '{board.name}' (letters, digits, _ - . only)")
    print(f"  files: {board.path.with_suffix('.parquet')} and {board.path}")
    return 0


def cmd_leaderboard_pull_openml(args) -> int:
    from tabpar.leaderboards.store import pull_openml

    best, every = pull_openml(args.task_id, metric=args.metric, name=args.name,
                              store=args.store, replace=args.replace)
    meta, source = best.meta, best.meta["source"]
    dataset = meta["openml_task"].get("dataset_name")
    when = (f"the server could not be reached, so these are the evaluations cached on "
            f"{source['fetched_at']}" if source.get("from_cache")
            else f"fetched {source['fetched_at']}")
    print(f"OpenML task {source['openml_task']}{f' ({dataset})' if dataset else ''}: "
          f"{meta['n_runs']:,} runs of {meta['n_flows']:,} flows on {source['measure']}; "
          f"{when}")
    if meta["n_runs_without_value"]:
        print(f"  {meta['n_runs_without_value']:,} runs without a value were left out")
    print(f"  stored {_board_line(best)} (best run per flow)")
    print(f"  stored {_board_line(every)} (all runs)")
    print(f"  in {best.path.parent}")
    return 0


def cmd_leaderboard_list(args) -> int:
    from tabpar.leaderboards.store import list_leaderboards, published_dir, store_dir

    rows = list_leaderboards(args.store)
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    if not rows:
        print(f"No leaderboards in {store_dir(args.store)} or {published_dir()}; add one with "
              f"'tabpar leaderboard import' or 'tabpar leaderboard pull-openml'.")
        return 0
    width = max(len(r["name"]) for r in rows)
    print(f"{'name':<{width}}  {'task':<14} {'entries':>8}  direction (metric)            "
          f"kind")
    for r in rows:
        metric = f" ({r['metric']})" if r["metric"] else ""
        kind = r["kind"] + (f", {r['view']}" if r["view"] else "")
        print(f"{r['name']:<{width}}  {r['task']:<14} {r['entries']:>8,}  "
              f"{r['direction'] + metric:<29} {kind}")
    for where in dict.fromkeys(r["where"] for r in rows):
        print(f"in {where}")
    return 0


def cmd_leaderboard_place(args) -> int:
    from tabpar.leaderboards.store import load_leaderboard
    from tabpar.evaluation.placement import leaderboard_lines, place_on_leaderboard

    numbers = place_on_leaderboard(args.score, load_leaderboard(args.name, args.store))
    if args.json:
        print(json.dumps(numbers, indent=2))
    else:
        print(f"score {args.score:.4g} on task {numbers['leaderboard_task']}")
        print("\n".join(leaderboard_lines(numbers)))
    return 0


def cmd_cache(args) -> int:
    from tabpar.execution.runner import cache_clear, cache_info

    if args.action == "clear":
        print(f"removed {cache_clear()} cached entries from {cache_info()['folder']}")
        return 0
    info = cache_info()
    print(f"prepared-array cache: {info['folder']} (set TABPAR_CACHE to move it)")
    for e in info["entries"]:
        print(f"  {e['entry']:<34} {e['procedure']:<20} {e['rows']:>9,} rows {e['mb']:>8.1f} MB")
    print(f"  {len(info['entries'])} entries, {info['total_mb']:.1f} MB")
    return 0


def _executor_options(parser) -> None:
    parser.add_argument("--executor", choices=["local", "dask"], default="local",
                        help="where jobs run: local worker processes (default) or an existing "
                             "Dask cluster")
    parser.add_argument("--scheduler", default=None, metavar="tcp://HOST:PORT",
                        help="the Dask scheduler's address (with --executor dask)")


def cmd_calibrate(args) -> int:
    from tabpar.owndata.calibration import calibrate, export_split, inferred_text

    options = dict(type=args.type, metric=args.metric, positive=args.positive,
                   dates=args.date, holdout=args.holdout,
                   holdout_fraction=args.holdout_fraction, holdout_rows=args.holdout_rows,
                   cutoff=args.cutoff, drop=args.drop)
    if args.export_split:
        info = export_split(args.data, args.target, args.export_split, **options)
        if args.json:
            print(json.dumps(info, indent=2, default=str))
            return 0
        print(f"inferred: {inferred_text(info['inferred'])}")
        print(f"split: {info['holdout']}")
        print(f"wrote {Path(args.export_split) / 'train.csv'} ({info['n_train']:,} rows with "
              f"'{info['target']}'), {Path(args.export_split) / 'holdout.csv'} "
              f"({info['n_holdout']:,} rows without) and task.json; row_id is each row's "
              f"0-based position in {args.data}")
        print(f"{info['metric']} ({'lower' if info['lower_is_better'] else 'higher'} is "
              f"better); {info['how_to_submit']}")
        return 0
    progress = not args.json and sys.stderr.isatty()
    say = (lambda m: print(f"  {m}", file=sys.stderr)) if progress else None
    result = calibrate(args.data, args.target, score=args.score, predictions=args.predictions,
                       seeds=args.seeds, models=args.models, budget=args.budget, out=args.out,
                       reference=args.reference, on_event=say, executor=args.executor,
                       scheduler=args.scheduler, **options)
    print(json.dumps(result.to_dict(), indent=2) if args.json else result)
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tabpar",
        description="Run a standard, reproducible baseline over open tabular tasks and place "
                    "scores against it.")
    parser.add_argument("--debug", action="store_true",
                        help="show a traceback for errors in your input (for bug reports)")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    run = sub.add_parser("run", help="run the baseline procedure and model zoo over a suite",
                         description="Run tasks × models × seeds; every finished job is "
                                     "appended to OUT/jobs.jsonl at once, and a rerun with the "
                                     "same --out skips finished jobs.")
    run.add_argument("--suite", default="quick",
                     help="built-in suite name (default, quick) or a suite .toml path "
                          "(default: quick)")
    run.add_argument("--tasks", type=_csv_list, default=None,
                     help="comma-separated task names (default: every task of the suite)")
    run.add_argument("--models", type=_csv_list, default=None,
                     help="comma-separated models: naive, linear, rf, et, hgb, xgb, lgbm "
                          "(default: all)")
    run.add_argument("--seeds", type=int, default=3,
                     help="number of seeds per model; seeds 0..K-1 (default: 3)")
    run.add_argument("--out", default=None,
                     help="results folder (default: runs/SUITE-DATE-TIME under the current "
                          "folder)")
    run.add_argument("--workers", type=int, default=None,
                     help="parallel worker processes (default: all cores); each model gets "
                          "cores / workers threads")
    _executor_options(run)
    run.add_argument("--job-timeout", type=float, default=None, metavar="SECONDS",
                     help="stop a job that runs longer and record it as 'timeout' (default: "
                          "no limit)")
    run.add_argument("--quiet", action="store_true", help="print nothing but errors")
    run.add_argument("--json", action="store_true",
                     help="print one JSON object (out, jobs, ok, failed, tasks) instead of "
                          "tables")
    run.set_defaults(func=cmd_run)

    place = sub.add_parser(
        "place", help="place a score on a suite task against the published reference",
        description="Place a holdout score (or a predictions file, scored here) against the "
                    "baseline reference: percentile, rank, skill, noise band and a verdict "
                    "(worse-than-naive, below-baseline, at-baseline, above-baseline).")
    place.add_argument("task", help="task name, e.g. ames")
    given = place.add_mutually_exclusive_group(required=True)
    given.add_argument("--score", type=float, help="your holdout score in the task's metric")
    given.add_argument("--predictions",
                       help="CSV/Parquet with columns row_id and prediction (for binary tasks "
                            "the probability of the positive class), one row per holdout row "
                            "of 'tabpar export'")
    place.add_argument("--suite", default=None,
                       help="suite the task comes from (default: the reference's suite)")
    place.add_argument("--reference", default="default",
                       help="published reference name (default, quick) or a results folder "
                            "(default: default)")
    place.add_argument("--tolerance", type=float, default=0.05,
                       help="skill units under par still called at-baseline (default: 0.05)")
    place.add_argument("--force", action="store_true",
                       help="place even when the task's data no longer matches the reference")
    place.add_argument("--plot", default=None, help="also draw the placement to FILE (.png/.svg)")
    place.add_argument("--leaderboard", default=None, metavar="NAME",
                       help="also place the score on a stored leaderboard of this task "
                            "(looked up in $TABPAR_LEADERBOARDS or the default store, then "
                            "results/leaderboards; see 'tabpar leaderboard list')")
    place.add_argument("--json", action="store_true", help="print one JSON object")
    place.set_defaults(func=cmd_place)

    export = sub.add_parser("export", help="write a task's exact split for your own pipeline",
                            description="Write train (with target) and holdout (without) "
                                        "files, each with row_id, and task.json.")
    export.add_argument("task", help="task name")
    export.add_argument("dir", help="folder to write into")
    export.add_argument("--suite", default="default", help="suite name or path (default: "
                                                           "default)")
    export.add_argument("--format", default="csv", choices=["csv", "parquet"],
                        help="file format (default: csv)")
    export.set_defaults(func=cmd_export)

    plot = sub.add_parser("plot", help="draw comparison plots")
    plot_sub = plot.add_subparsers(dest="plot_kind", metavar="KIND", required=True)
    plot_suite = plot_sub.add_parser("suite", help="skill of each default ensemble per task, "
                                                   "tasks ordered by difficulty")
    plot_suite.add_argument("out", help="output file (.png or .svg)")
    plot_suite.add_argument("--reference", default="default",
                            help="reference name or results folder (default: default)")
    plot_suite.add_argument("--overlay", default=None,
                            help="a run folder to overlay (hollow markers)")
    plot_suite.set_defaults(func=cmd_plot_suite)

    ref = sub.add_parser("reference", help="build a published reference")
    ref_sub = ref.add_subparsers(dest="reference_kind", metavar="ACTION", required=True)
    build = ref_sub.add_parser("build", help="run every model × seeds on a suite and write "
                                             "provenance.json (resumes an interrupted build)")
    build.add_argument("--suite", default="default", help="suite (default: default)")
    build.add_argument("--out", default=None,
                       help="folder (default: results/reference/SUITE in the checkout)")
    build.add_argument("--seeds", type=int, default=3, help="seeds per model (default: 3)")
    build.add_argument("--workers", type=int, default=None, help="worker processes")
    build.add_argument("--quiet", action="store_true", help="print nothing but errors")
    build.set_defaults(func=cmd_reference_build)

    comp = sub.add_parser(
        "compare", help="regression-test a preprocessing change across a suite",
        description="Run a candidate preprocessing procedure and a baseline with the same "
                    "models and seeds on every task, and report per-task deltas with 95% "
                    "bands, Holm-corrected calls and a Wilcoxon signed-rank test. Exit code 0: "
                    "no regression; 1: a regression or a failed leakage guard; 2: bad input.",
        epilog="SPEC is 'builtin', a variant .toml file ([variant] with calendar, "
               "missing_flags, fill, one_hot_max_levels), or module:function. A module:function "
               "is the only way tabpar runs your code: it is imported from the working folder "
               "or an installed package and must return an unfitted scikit-learn transformer.")
    comp.add_argument("--candidate", required=True, metavar="SPEC",
                      help="the changed procedure (builtin, variant.toml or module:function)")
    comp.add_argument("--baseline", default="builtin", metavar="SPEC|RESULTS_DIR",
                      help="what to compare against (default: builtin; its jobs are reused "
                           "from the published reference when they match)")
    comp.add_argument("--suite", default="quick", help="suite name or path (default: quick)")
    comp.add_argument("--tasks", type=_csv_list, default=None, help="comma-separated tasks")
    comp.add_argument("--models", type=_csv_list, default=None,
                      help="comma-separated models (default: rf,lgbm)")
    comp.add_argument("--seeds", type=int, default=3, help="seeds per model (default: 3)")
    comp.add_argument("--tolerance", type=float, default=0.0,
                      help="ignore deltas smaller than this (default: 0)")
    comp.add_argument("--out", default=None,
                      help="folder for both runs and the reports (default: "
                           "runs/compare-SUITE-DATE-TIME)")
    comp.add_argument("--workers", type=int, default=None, help="worker processes")
    _executor_options(comp)
    comp.add_argument("--plot", default=None, help="also write the forest plot to FILE")
    comp.add_argument("--force", action="store_true",
                      help="compare even when a task's data changed since the baseline ran")
    comp.add_argument("--quiet", action="store_true", help="print nothing but errors")
    comp.add_argument("--json", action="store_true", help="print one JSON object")
    comp.set_defaults(func=cmd_compare)

    board = sub.add_parser(
        "leaderboard", help="store leaderboards (OpenML run evaluations or your own file)",
        description="Stored leaderboards live in --store DIR, else $TABPAR_LEADERBOARDS, else "
                    "$XDG_DATA_HOME/tabpar/leaderboards (~/.local/share/tabpar/leaderboards). "
                    "Place a score on one with 'tabpar place TASK --score S --leaderboard NAME'.")
    board_sub = board.add_subparsers(dest="leaderboard_action", metavar="ACTION", required=True)

    def with_store(p):
        p.add_argument("--store", default=None, metavar="DIR",
                       help="leaderboard store folder (default: $TABPAR_LEADERBOARDS or "
                            "~/.local/share/tabpar/leaderboards)")
        return p

    imp = with_store(board_sub.add_parser(
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
    imp.set_defaults(func=cmd_leaderboard_import)

    pull = with_store(board_sub.add_parser(
        "pull-openml", help="store an OpenML task's run evaluations as leaderboards",
        description="Fetch every run evaluation of an OpenML task (needs the openml package and "
                    "the network once; cached under $TABPAR_OPENML_CACHE) and store two "
                    "leaderboards: NAME (best run per flow) and NAME-all-runs."))
    pull.add_argument("task_id", help="OpenML task id, e.g. 31")
    pull.add_argument("--metric", default=None,
                      help="roc_auc, accuracy, rmse or mae (default: the task's own measure "
                           "when it is one of these, else by task type)")
    pull.add_argument("--name", default=None, help="default: openml-ID-METRIC")
    pull.add_argument("--replace", action="store_true",
                      help="overwrite stored leaderboards of the same names")
    pull.set_defaults(func=cmd_leaderboard_pull_openml)

    lst = with_store(board_sub.add_parser("list", help="show the stored and published "
                                                       "leaderboards"))
    lst.add_argument("--json", action="store_true", help="print one JSON list")
    lst.set_defaults(func=cmd_leaderboard_list)

    bplace = with_store(board_sub.add_parser(
        "place", help="place a score on a leaderboard alone (no reference)",
        description="Rank, top percent and percentile of a score among a leaderboard's "
                    "entries, without the baseline reference 'tabpar place' adds."))
    bplace.add_argument("name", help="a stored leaderboard's name")
    bplace.add_argument("--score", type=float, required=True,
                        help="your score, in the leaderboard's units")
    bplace.add_argument("--json", action="store_true", help="print one JSON object")
    bplace.set_defaults(func=cmd_leaderboard_place)

    cache = sub.add_parser("cache", help="show or clear the cache of prepared arrays",
                           description="Loaded, split and prepared arrays are cached per task, "
                                       "keyed by the task definition, the data fingerprint, "
                                       "the procedure and the preparing code; any change of "
                                       "those makes a new entry.")
    cache.add_argument("action", choices=["info", "clear"], help="info or clear")
    cache.set_defaults(func=cmd_cache)

    cal = sub.add_parser(
        "calibrate", help="place a score on your own table against the baseline on your split",
        description="Run the baseline procedure and model zoo on your own CSV/Parquet table and "
                    "split, place your score against it, place the dataset's difficulty among "
                    "the suite's tasks, and run diagnostics (leakage, shift, split-optimism, "
                    "learning-curve, conflicting-duplicates) that tell a pipeline mistake from "
                    "a hard dataset. Options left out are inferred and the output says what "
                    "was inferred.",
        epilog="First time: --export-split DIR writes train.csv (with the target) and "
               "holdout.csv (without), both with row_id (the row's 0-based position in DATA); "
               "predict holdout.csv and pass the file with --predictions.")
    cal.add_argument("data", metavar="DATA", help="your table (.csv or .parquet)")
    cal.add_argument("--target", required=True, metavar="COL", help="the column to predict")
    cal.add_argument("--type", default=None,
                     help="regression, binary or multiclass (default: binary/multiclass for a non-numeric target or one with at "
                          "most 2 distinct values, else regression)")
    cal.add_argument("--metric", default=None,
                     help="rmse rmsle mae r2 | accuracy log_loss roc_auc (default: rmse for "
                          "regression, roc_auc for binary, log_loss for multiclass)")
    cal.add_argument("--positive", default=None, metavar="CLASS",
                     help="binary: the class whose probability is scored (default: the "
                          "minority class)")
    cal.add_argument("--date", action="extend", nargs="+", default=[], metavar="COL",
                     help="date columns (calendar fields); the first one orders a time holdout")
    cal.add_argument("--holdout", default=None,
                     help="time or random (default: time when --date is given, else random, "
                          "seed 0)")
    size = cal.add_mutually_exclusive_group()
    size.add_argument("--holdout-fraction", type=float, default=None, metavar="F",
                      help="share of rows held out (default: 0.2)")
    size.add_argument("--holdout-rows", type=int, default=None, metavar="N",
                      help="number of rows held out")
    size.add_argument("--cutoff", default=None, metavar="DATE",
                      help="time holdout: every row at or after DATE")
    cal.add_argument("--drop", action="extend", nargs="+", default=[], metavar="COL",
                     help="columns to leave out (row ids, columns known only after the target)")
    given = cal.add_mutually_exclusive_group(required=True)
    given.add_argument("--score", type=float, help="your holdout score in the metric")
    given.add_argument("--predictions", metavar="FILE",
                       help="CSV/Parquet with row_id and prediction for every holdout row "
                            "(binary: the positive class's probability)")
    given.add_argument("--export-split", metavar="DIR",
                       help="write the split (train.csv, holdout.csv, task.json) and exit")
    cal.add_argument("--seeds", type=int, default=1, help="seeds per model (default: 1)")
    cal.add_argument("--models", type=_csv_list, default=None,
                     help="comma-separated models (default: the whole zoo; naive always runs)")
    cal.add_argument("--budget", type=float, default=None, metavar="SECONDS",
                     help="wall-time bound: models run cheapest first and one that would not "
                          "fit is skipped (default: none)")
    cal.add_argument("--out", default=None,
                     help="output folder (default: runs/calibrate-NAME-DATE-TIME)")
    cal.add_argument("--reference", default="default",
                     help="suite reference whose tasks the difficulty is placed among "
                          "(default: default)")
    cal.add_argument("--json", action="store_true", help="print one JSON object")
    _executor_options(cal)
    cal.set_defaults(func=cmd_calibrate)

    suites = sub.add_parser("suites", help="list the built-in suites and their tasks")
    suites.set_defaults(func=cmd_suites)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
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
