"""How often `tabpar compare` raises a false alarm: repeated A/A runs (the built-in procedure
against itself with other seeds) on the quick suite with random forests, where seeds matter.

Prints the share of trials that end with regression = true (target: about 5% or less) with its
exact 95% binomial interval, and the per-task rate of 'worse' calls, with the number of trials.

Two schemes:
- default: every trial is a whole `compare` (its own baseline run and candidate run), the
  baseline seeds 0..K-1 and the candidate seeds shifted by another offset each trial;
- ``--shared-baseline``: one baseline run, and every trial compares fresh candidate seeds (and a
  fresh bootstrap stream) against that same baseline folder. This is the loop the test suite
  used to run (3 tasks, rf, 2 seeds, 300 resamples, 6 trials); it is cheaper per trial, but
  its trials share the baseline's seed draw, so they are not independent of each other.

    python bench/compare_aa.py [--trials 20] [--seeds 3] [--models rf] [--tasks a,b]
                               [--n-boot N] [--shared-baseline] [--workers N]

e.g. the old test's loop, with more trials:
    python bench/compare_aa.py --shared-baseline --tasks txhousing,attrition,credit_data \\
        --seeds 2 --n-boot 300 --trials 30
"""
import argparse
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--trials", type=int, default=20)
    parser.add_argument("--seeds", type=int, default=3)
    parser.add_argument("--models", default="rf")
    parser.add_argument("--tasks", default=None,
                        help="comma-separated quick-suite tasks (default: all ten)")
    parser.add_argument("--n-boot", type=int, default=None,
                        help="bootstrap resamples per task (default: compare's own)")
    parser.add_argument("--shared-baseline", action="store_true",
                        help="run the baseline once; every trial compares new candidate "
                             "seeds against it")
    parser.add_argument("--workers", type=int, default=None)
    args = parser.parse_args()
    from scipy import stats
    from tabpar.evaluation.comparison import compare

    tasks = args.tasks.split(",") if args.tasks else None
    root = Path(tempfile.mkdtemp(prefix="tabpar-bench-aa-"))
    shared = None
    regressions, worse, calls, uncorrected = 0, 0, 0, 0
    for trial in range(args.trials):
        options = dict(suite="quick", tasks=tasks, models=args.models.split(","),
                       seeds=args.seeds, out=root / f"trial{trial}", n_boot=args.n_boot,
                       aa_seed_offset=1000 + 100 * trial, seed=trial, workers=args.workers)
        if shared is not None:
            options["baseline"] = str(shared)
        result = compare("builtin", **options)
        if args.shared_baseline and shared is None:
            shared = root / f"trial{trial}" / "baseline"
        assert result.aa
        regressions += result.regression
        for t in result.tasks:
            if t.delta is None:
                continue
            calls += 1
            worse += t.call == "worse"
            uncorrected += t.high < 0  # a plain 95% band entirely below zero
        print(f"trial {trial + 1:2d}: regression={result.regression} "
              f"worse={[t.task for t in result.tasks if t.call == 'worse']}", flush=True)
    low, high = stats.binomtest(regressions, args.trials).proportion_ci(0.95, "exact")
    scheme = "one shared baseline" if args.shared_baseline else "a baseline run per trial"
    print(f"{args.trials} A/A trials ({scheme}), models {args.models}, {args.seeds} seeds, "
          f"tasks {args.tasks or 'all'}, resamples {args.n_boot or 'default'}")
    print(f"runs with regression = true: {regressions}/{args.trials} "
          f"= {regressions / args.trials:.1%}, exact 95% interval {low:.1%} to {high:.1%}  "
          f"(target: about 5% or less)")
    print(f"per-task 'worse' calls (Holm): {worse}/{calls} = {worse / max(calls, 1):.1%}")
    print(f"per-task plain 95% band below zero (no correction): {uncorrected}/{calls} = "
          f"{uncorrected / max(calls, 1):.1%}  (nominal 2.5% one-sided)")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
