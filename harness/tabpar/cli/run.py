"""tabpar run: the baseline procedure and model zoo over a suite."""
from __future__ import annotations

import json
import sys

from tabpar.cli import options


def add_parser(subparsers) -> None:
    run = subparsers.add_parser(
        "run", help="run the baseline procedure and model zoo over a suite",
        description="Run tasks × models × seeds; every finished job is appended to "
                    "OUT/jobs.jsonl at once, and a rerun with the same --out skips finished jobs.")
    options.add_suite(run, options.QUICK_SUITE,
                      f"built-in suite name ({options.suite_names()}) or a suite .toml path")
    options.add_tasks(run, "comma-separated task names (default: every task of the suite)")
    options.add_models(run, f"comma-separated models: {options.model_names()} (default: all)")
    options.add_seeds(run, options.SEEDS, "number of seeds per model; seeds 0..K-1")
    run.add_argument("--out", default=None,
                     help="results folder (default: runs/SUITE-DATE-TIME under the current "
                          "folder)")
    run.add_argument("--workers", type=int, default=None,
                     help="parallel worker processes (default: all cores); each model gets "
                          "cores / workers threads")
    options.add_executor_options(run)
    options.add_job_timeout(run, "stop a job that runs longer and record it as 'timeout' "
                                 "(default: no limit)")
    options.add_quiet(run)
    options.add_json(run, "print one JSON object (out, jobs, ok, failed, tasks) instead of tables")
    run.set_defaults(func=run_command)


def run_command(args) -> int:
    from tabpar.cli.render import render_run
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
