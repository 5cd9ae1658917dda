"""Time estimates against what happened: a quick-suite reference build (every model × 3 seeds,
the default workers) with its progress bar recorded.

Prints
- the median ratio of predicted to actual fit time over the run's jobs, each predicted the
  moment it finished from the jobs finished before it (the run's own calibration; target
  0.67-1.5), for all jobs and for those whose fit took at least 0.1 s;
- the ETA the bar showed when 10% of the jobs had finished against the real remaining time
  (target: within a factor of 1.5), and the ETA before the first job finished;
- whether the scores equal the published quick reference's per (task, model, seed) (the
  procedure's output must not move when only speed changes).

    python bench/estimates.py [--out DIR]
"""
import argparse
import io
import json
import math
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--out", default=None, help="results folder (default: a new temp one)")
    args = parser.parse_args()
    import tabpar.execution.runner as runner
    from tabpar.evaluation.reference import build_reference

    records, bars = [], []

    class RecordedProgress(runner.Progress):
        def __init__(self, *a, **k):
            super().__init__(*a, **k)
            bars.append(self)
            self.first_eta = self.eta_seconds()

        def step(self, label="", job=None, fit_seconds=None):
            predicted = self.clock.fit_seconds(job) if job is not None else None
            super().step(label, job, fit_seconds)
            records.append({"t": time.monotonic() - self.start, "done": self.done,
                            "eta": self.eta_seconds(), "model": job and job["model"],
                            "predicted": predicted, "actual": fit_seconds})

    runner.Progress = RecordedProgress
    out = Path(args.out or tempfile.mkdtemp(prefix="tabpar-bench-estimates-"))
    start = time.perf_counter()
    result = build_reference(suite="quick", out=out, seeds=3, progress=False,
                             command="python bench/estimates.py")
    wall = time.perf_counter() - start
    bar = bars[-1]
    bar.stream = io.StringIO()
    print(f"quick suite: {result.jobs} jobs, {result.ok} ok, {wall:.1f} s in all "
          f"({records[-1]['t']:.1f} s of jobs)")

    pairs = [(r["predicted"], r["actual"]) for r in records
             if r["predicted"] is not None and r["actual"]]
    all_ratio = np.median([p / a for p, a in pairs if a >= 0.02])
    long_ratio = np.median([p / a for p, a in pairs if a >= 0.1])
    print(f"predicted / actual fit time, median over {sum(a >= 0.02 for _, a in pairs)} jobs "
          f"with fits >= 20 ms: {all_ratio:.2f}  (target 0.67-1.5)")
    print(f"  the same over {sum(a >= 0.1 for _, a in pairs)} jobs with fits >= 0.1 s: "
          f"{long_ratio:.2f}")
    tenth = records[math.ceil(0.1 * len(records)) - 1]
    remaining = records[-1]["t"] - tenth["t"]
    print(f"ETA at {tenth['done']}/{len(records)} jobs ({tenth['t']:.1f} s in): "
          f"{tenth['eta']:.1f} s shown, {remaining:.1f} s real  "
          f"(ratio {tenth['eta'] / remaining:.2f}; target within 1.5x)")
    print(f"ETA before the first job finished: {bar.first_eta:.1f} s "
          f"(the jobs took {records[-1]['t']:.1f} s)")

    def scores(folder):
        rows = [json.loads(line) for line in (folder / "jobs.jsonl").read_text().splitlines()]
        return {(r["task"], r["model"], r["seed"]): r["score"] for r in rows}

    new, published = scores(out), scores(ROOT / "results/reference/quick")
    differ = sorted(k for k in published if new.get(k) != published[k])
    print(f"scores equal to results/reference/quick: {len(published) - len(differ)} of "
          f"{len(published)} (task, model, seed)" + (f"; differ: {differ[:10]}" if differ else ""))
    print(f"results in {out}")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
