"""Command line: a thin layer over the Python API (every command has a function behind it)."""
from __future__ import annotations

import argparse
import json
import sys
import traceback

from .errors import UserError


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
    from .metrics import get_metric
    from .zoo import DEFAULT_ENSEMBLES

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
    from .runner import run_suite

    progress = (not args.quiet and not args.json and sys.stderr.isatty())
    say = (lambda m: print(m, file=sys.stderr)) if progress else None
    result = run_suite(suite=args.suite, tasks=args.tasks, models=args.models,
                       seeds=args.seeds, out=args.out, workers=args.workers,
                       progress=progress, on_event=say, job_timeout=args.job_timeout)
    if args.json:
        print(json.dumps(result.to_dict(), indent=2))
    elif not args.quiet:
        print(render_run(result))
    if result.interrupted:
        return 130
    return 1 if result.failed else 0


def cmd_suites(args) -> int:
    from .suite import list_builtin_suites, load_suite

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
    from .placement import place

    placement = place(args.task, score=args.score, predictions=args.predictions,
                      suite=args.suite, reference=args.reference, tolerance=args.tolerance,
                      force=args.force)
    if args.plot:
        from .plots import placement_plot

        placement_plot(placement, args.plot)
    if args.json:
        print(json.dumps(placement.to_dict(), indent=2))
    else:
        print(placement)
        if args.plot:
            print(f"  plot: {args.plot}")
    return 0


def cmd_export(args) -> int:
    from .export import export_task
    from .suite import load_suite

    task = load_suite(args.suite).task(args.task)
    info = export_task(task, args.dir, args.format)
    print(f"wrote {args.dir}/{info['files']['train']} ({info['n_train']:,} rows with target), "
          f"{args.dir}/{info['files']['holdout']} ({info['n_holdout']:,} rows without) and "
          f"task.json")
    print(f"{info['metric']} ({'lower' if info['lower_is_better'] else 'higher'} is better); "
          f"{info['how_to_submit']}")
    return 0


def cmd_plot_suite(args) -> int:
    from .plots import suite_plot
    from .reference import Reference

    overlay = Reference(args.overlay) if args.overlay else None
    path = suite_plot(Reference(args.reference), args.out, overlay=overlay)
    print(f"wrote {path}")
    return 0


def cmd_reference_build(args) -> int:
    from .reference import build_reference

    progress = not args.quiet and sys.stderr.isatty()
    result = build_reference(suite=args.suite, out=args.out, seeds=args.seeds,
                             workers=args.workers, progress=progress)
    if not args.quiet:
        print(render_run(result))
    return 1 if result.failed else 0


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


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
