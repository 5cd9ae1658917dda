"""How often `tabpar compare` raises a false alarm: repeated A/A runs (the built-in procedure
against itself with other seeds) on the quick suite with random forests, where seeds matter.

Prints the share of trials that end with regression = true (target: about 5% or less) and the
per-task rate of 'worse' calls, with the number of trials.

    python bench/compare_aa.py [--trials 20] [--seeds 3] [--models rf]
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
    args = parser.parse_args()
    from tabpar.evaluation.comparison import compare

    root = Path(tempfile.mkdtemp(prefix="tabpar-bench-aa-"))
    regressions, worse, calls, uncorrected = 0, 0, 0, 0
    for trial in range(args.trials):
        result = compare("builtin", suite="quick", models=args.models.split(","),
                         seeds=args.seeds, out=root / f"trial{trial}",
                         aa_seed_offset=1000 + 100 * trial, seed=trial)
        regressions += result.regression
        for t in result.tasks:
            if t.delta is None:
                continue
            calls += 1
            worse += t.call == "worse"
            uncorrected += t.high < 0  # a plain 95% band entirely below zero
        print(f"trial {trial + 1:2d}: regression={result.regression} "
              f"worse={[t.task for t in result.tasks if t.call == 'worse']}", flush=True)
    print(f"{args.trials} A/A trials, models {args.models}, {args.seeds} seeds")
    print(f"runs with regression = true: {regressions}/{args.trials} "
          f"= {regressions / args.trials:.1%}  (target: about 5% or less)")
    print(f"per-task 'worse' calls (Holm): {worse}/{calls} = {worse / max(calls, 1):.1%}")
    print(f"per-task plain 95% band below zero (no correction): {uncorrected}/{calls} = "
          f"{uncorrected / max(calls, 1):.1%}  (nominal 2.5% one-sided)")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
