"""Harness overhead: a full `tabpar run` against the same model fits done directly.

Both sides: one worker in this process (threads per model = all cores), the same tasks, models
and seeds; the direct side fits and predicts (holdout and training rows, as a job does) on the
same prepared arrays. The tabpar side starts from an empty cache, so its time includes loading,
splitting, preparing, writing predictions and results. Prints the wall-time ratio
(targets: <= 1.10 for the quick suite, <= 1.05 for the default suite).

    python bench/overhead.py [--suite quick|default] [--seeds 3]
"""
import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--suite", default="quick")
    parser.add_argument("--seeds", type=int, default=3)
    args = parser.parse_args()
    os.environ["TABPAR_CACHE"] = tempfile.mkdtemp(prefix="tabpar-bench-cache-")
    from threadpoolctl import threadpool_limits

    from tabpar.common.system import available_cores
    from tabpar.execution.cache import load_arrays, prepare_task
    from tabpar.execution.runner import run_suite
    from tabpar.data.suites import load_suite
    from tabpar.models.zoo import MODELS, build_model

    out = Path(tempfile.mkdtemp(prefix="tabpar-bench-run-"))
    start = time.perf_counter()
    result = run_suite(args.suite, seeds=args.seeds, out=out, workers=1)
    harness_s = time.perf_counter() - start

    threads = available_cores()
    direct_s = 0.0
    for task in load_suite(args.suite).tasks:
        arrays = {k: np.asarray(v) for k, v in load_arrays(prepare_task(task).folder).items()}
        y_fit = np.log1p(arrays["y_train"]) if task.log_target else arrays["y_train"]
        for model in MODELS:
            for seed in range(args.seeds):
                start = time.perf_counter()
                estimator = build_model(model, task.type, seed, threads)
                with threadpool_limits(limits=threads):
                    estimator.fit(arrays["X_train"], y_fit)
                    for X in (arrays["X_holdout"], arrays["X_train"]):
                        (estimator.predict if task.type == "regression"
                         else estimator.predict_proba)(X)
                direct_s += time.perf_counter() - start
    print(f"suite {args.suite}: {result.jobs} jobs, {result.ok} ok")
    print(f"tabpar run (cold cache)   {harness_s:8.1f} s")
    print(f"direct fits               {direct_s:8.1f} s")
    target = 1.10 if args.suite == "quick" else 1.05
    print(f"ratio                     {harness_s / direct_s:8.3f}  (target <= {target})")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
