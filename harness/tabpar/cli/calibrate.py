"""tabpar calibrate: a score on your own table against the baseline on your split."""
from __future__ import annotations

import json
import sys

from tabpar.cli import options
from tabpar.data.suites import DEFAULT_HOLDOUT_FRACTION, TASK_TYPES


def add_parser(subparsers) -> None:
    cal = subparsers.add_parser(
        "calibrate", help="place a score on your own table against the baseline on your split",
        description="Run the baseline procedure and model zoo on your own CSV/Parquet table and "
                    "split, place your score against it, place the dataset's difficulty among "
                    "the suite's tasks, and run diagnostics (leakage, shift, split-optimism, "
                    "learning-curve, conflicting-duplicates) that tell a pipeline mistake from "
                    "a hard dataset. Options left out are inferred and the output says what "
                    "was inferred. A provisional answer comes first, once the naive floor "
                    "and the histogram boosters (hgb, xgb, lgbm) have run: labelled with the "
                    "models it rests on and what is still running; the final answer follows "
                    "when the whole zoo and the diagnostics have finished, and only it sets "
                    "the exit code.",
        epilog="First time: --export-split DIR writes train.csv (with the target) and "
               "holdout.csv (without), both with row_id (the row's 0-based position in DATA); "
               "predict holdout.csv and pass the file with --predictions.")
    cal.add_argument("data", metavar="DATA", help="your table (.csv or .parquet)")
    cal.add_argument("--target", required=True, metavar="COL", help="the column to predict")
    _add_task_options(cal)
    given = cal.add_mutually_exclusive_group(required=True)
    given.add_argument("--score", type=float, help="your holdout score in the metric")
    given.add_argument("--predictions", metavar="FILE",
                       help="CSV/Parquet with row_id and prediction for every holdout row "
                            "(binary: the positive class's probability)")
    given.add_argument("--export-split", metavar="DIR",
                       help="write the split (train.csv, holdout.csv, task.json) and exit")
    options.add_seeds(cal, options.CALIBRATE_SEEDS)
    options.add_models(cal, "comma-separated models (default: the whole zoo; naive always "
                            "runs)")
    cal.add_argument("--budget", type=float, default=None, metavar="SECONDS",
                     help="wall-time bound: models run cheapest first and one that would not "
                          "fit is skipped (default: none)")
    cal.add_argument("--out", default=None,
                     help="output folder (default: runs/calibrate-NAME-DATE-TIME)")
    options.add_reference(cal, "suite reference whose tasks the difficulty is placed among")
    options.add_json(cal, "print one JSON object per line per answer (JSON Lines): the "
                          "provisional one with \"final\": false, the last with \"final\": "
                          "true; each lists the models it \"rests_on\" and those still "
                          "\"pending\"")
    options.add_executor_options(cal)
    cal.set_defaults(func=calibrate_command)


def _add_task_options(cal) -> None:
    """What the table is and how it is split (inferred when left out)."""
    cal.add_argument("--type", default=None,
                     help=f"{options.or_list(TASK_TYPES)} (default: binary/multiclass for a "
                          f"non-numeric target or one with at most 2 distinct values, else "
                          f"regression)")
    cal.add_argument("--metric", default=None,
                     help=f"{options.metric_names()} (default: {options.default_metrics()})")
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
                      help=f"share of rows held out (default: {DEFAULT_HOLDOUT_FRACTION})")
    size.add_argument("--holdout-rows", type=int, default=None, metavar="N",
                      help="number of rows held out")
    size.add_argument("--cutoff", default=None, metavar="DATE",
                      help="time holdout: every row at or after DATE")
    cal.add_argument("--drop", action="extend", nargs="+", default=[], metavar="COL",
                     help="columns to leave out (row ids, columns known only after the target)")


def calibrate_command(args) -> int:
    from tabpar.cli.render import render_split
    from tabpar.evaluation.reference import reference_for
    from tabpar.owndata.calibration import calibrate
    from tabpar.owndata.inference import export_split, inferred_text
    from tabpar.report.learning_curve import save_calibration_plots

    table = dict(type=args.type, metric=args.metric, positive=args.positive, dates=args.date,
                 holdout=args.holdout, holdout_fraction=args.holdout_fraction,
                 holdout_rows=args.holdout_rows, cutoff=args.cutoff, drop=args.drop)
    if args.export_split:
        info = export_split(args.data, args.target, args.export_split, **table)
        if args.json:
            print(json.dumps(info, indent=2, default=str))
        else:
            print(render_split(info, args.data, args.export_split,
                               inferred_text(info["inferred"])))
        return 0
    progress = not args.json and sys.stderr.isatty()
    say = (lambda m: print(f"  {m}", file=sys.stderr)) if progress else None
    shown = []

    def show(update) -> None:
        """Print a provisional answer at once; the final one waits for its plots."""
        if not update.final:
            shown.append(update)
            print(json.dumps(update.to_dict()) if args.json else f"{update}\n", flush=True)

    result = calibrate(args.data, args.target, score=args.score, predictions=args.predictions,
                       seeds=args.seeds, models=args.models, budget=args.budget, out=args.out,
                       reference=args.reference or reference_for(), on_event=say,
                       on_update=show, executor=args.executor, scheduler=args.scheduler,
                       **table)
    save_calibration_plots(result, result.out)
    if args.json:
        print(json.dumps(result.to_dict()))
    else:
        print(f"Final (rests on {', '.join(result.rests_on)}):\n{result}" if shown else result)
    return 0  # the final answer's: a provisional one never ends the command
