"""tabpar compare: regression-test a preprocessing change across a suite."""
from __future__ import annotations

import json
import sys
from pathlib import Path

from tabpar.cli import options
from tabpar.evaluation.comparison_result import ALPHA, DEFAULT_MODELS
from tabpar.procedure.variants import BUILTIN, VARIANT_KEYS


def add_parser(subparsers) -> None:
    compare = subparsers.add_parser(
        "compare", help="regression-test a preprocessing change across a suite",
        description=f"Run a candidate preprocessing procedure and a baseline with the same "
                    f"models and seeds on every task, and report per-task deltas with "
                    f"{1 - ALPHA:.0%} bands, Holm-corrected calls and a Wilcoxon signed-rank "
                    f"test. Exit code 0: no regression; 1: a regression or a failed leakage "
                    f"guard; 2: bad input.",
        epilog=f"SPEC is '{BUILTIN}', a variant .toml file ([variant] with "
               f"{', '.join(VARIANT_KEYS)}), or module:function. A module:function is the only "
               f"way tabpar runs your code: it is imported from the working folder or an "
               f"installed package, runs in a worker process under --job-timeout (its prints "
               f"go to stderr) and must return an unfitted scikit-learn transformer.")
    compare.add_argument("--candidate", required=True, metavar="SPEC",
                         help=f"the changed procedure ({BUILTIN}, variant.toml or "
                              f"module:function)")
    compare.add_argument("--baseline", default=BUILTIN, metavar="SPEC|RESULTS_DIR",
                         help=f"what to compare against (default: {BUILTIN}; its jobs are "
                              f"reused from the published reference when they match)")
    options.add_suite(compare, options.QUICK_SUITE, "suite name or path")
    options.add_tasks(compare, "comma-separated tasks")
    options.add_models(compare, f"comma-separated models (default: {','.join(DEFAULT_MODELS)})")
    options.add_seeds(compare, options.SEEDS)
    compare.add_argument("--tolerance", type=float, default=options.COMPARE_TOLERANCE,
                         help=f"ignore deltas smaller than this (default: "
                              f"{options.COMPARE_TOLERANCE:g})")
    compare.add_argument("--out", default=None,
                         help="folder for both runs and the reports (default: "
                              "runs/compare-SUITE-DATE-TIME)")
    options.add_workers(compare)
    options.add_executor_options(compare)
    options.add_job_timeout(compare, "stop a job, or a module:function candidate preparing a "
                                     "task, that runs longer (default: no limit)")
    compare.add_argument("--plot", default=None, help="also write the forest plot to FILE")
    compare.add_argument("--force", action="store_true",
                         help="compare even when a task's data changed since the baseline ran")
    options.add_quiet(compare)
    options.add_json(compare)
    compare.set_defaults(func=compare_command)


def compare_command(args) -> int:
    from tabpar.evaluation.comparison import compare
    from tabpar.report.plots import forest_plot, save_figure

    progress = not args.quiet and not args.json and sys.stderr.isatty()
    result = compare(args.candidate, baseline=args.baseline, suite=args.suite,
                     tasks=args.tasks, models=args.models, seeds=args.seeds,
                     tolerance=args.tolerance, out=args.out, workers=args.workers,
                     progress=progress, executor=args.executor, scheduler=args.scheduler,
                     force=args.force, job_timeout=args.job_timeout)
    figure = forest_plot(result)
    save_figure(figure, Path(result.out) / "forest.png")
    if args.plot:
        save_figure(figure, args.plot)
    if args.json:
        print(json.dumps(result.to_dict(), indent=2))
    elif not args.quiet:
        print(result)
    return 0 if result.passed else 1
