"""Parallel speed-up: the quick suite with two worker processes against one (target >= 1.7x on
2 cores), with the thread count per model shown.

Three runs from a warm cache of prepared arrays, into new result folders: one worker with one
thread per model (the process-level scaling the target is about), one worker with the default
thread count (cores per model: the models' own threads already use both cores), two workers
with one thread each (the default).

``--start-methods``: how long a pool of two workers takes to run four small LightGBM jobs
(quick attrition) when its workers are started by ``spawn`` (each imports the libraries) or
forked from a forkserver that has imported them, three pools in a row in one new process each
(the first forkserver pool pays for starting the forkserver).

    python bench/parallel.py [--seeds 3]
    python bench/parallel.py --start-methods
"""
import argparse
import json
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402


def pool_timing(method: str) -> None:
    import functools
    import multiprocessing

    import tabpar.execution.executors as executors
    from tabpar.data.suites import load_suite
    from tabpar.execution.cache import prepare_task
    from tabpar.execution.jobs import execute_job, plan_jobs, warm_imports

    prepared = prepare_task(load_suite("quick").task("attrition"))
    jobs = plan_jobs([prepared], ["lgbm"], [0, 1, 2, 3], 1)
    context = multiprocessing.get_context(method)
    if method == "forkserver":
        context.set_forkserver_preload(["tabpar.execution.jobs", "sklearn.ensemble", "lightgbm"])
    executors._CONTEXT = context
    for _ in range(3):
        start = time.perf_counter()
        executors.LocalPool(execute_job, 2, None,
                            initializer=functools.partial(warm_imports, ["lgbm"])).run(
            jobs, lambda job, result: None, lambda job, reason, status: None)
        print(f"{time.perf_counter() - start:.2f}", end=" ", flush=True)


def start_methods() -> None:
    import subprocess

    for _ in range(2):
        for method in ("spawn", "forkserver"):
            done = subprocess.run([sys.executable, __file__, "--pool-timing", method],
                                  capture_output=True, text=True, check=True)
            print(f"{method:10s} three pools in a row: {done.stdout.strip()} s")
    print(f"machine: {machine()}")


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--seeds", type=int, default=3)
    parser.add_argument("--start-methods", action="store_true")
    parser.add_argument("--pool-timing", default=None)
    args = parser.parse_args()
    if args.pool_timing:
        return pool_timing(args.pool_timing)
    if args.start_methods:
        return start_methods()
    from tabpar.common.system import available_cores
    from tabpar.data.suites import load_suite
    from tabpar.execution.cache import prepare_task
    from tabpar.execution.runner import run_suite

    for task in load_suite("quick").tasks:
        prepare_task(task)  # warm the cache so both runs do the same work
    cores = available_cores()
    times = {}
    for label, workers, threads in (("1 worker, 1 thread", 1, 1),
                                    ("1 worker, default threads", 1, None),
                                    ("2 workers, default threads", 2, None)):
        out = Path(tempfile.mkdtemp(prefix="tabpar-bench-par-"))
        start = time.perf_counter()
        result = run_suite("quick", seeds=args.seeds, out=out, workers=workers,
                           threads_per_model=threads)
        times[label] = time.perf_counter() - start
        meta = json.loads((out / "run.json").read_text())
        print(f"{label:28s} {times[label]:7.1f} s, {result.ok}/{result.jobs} ok, "
              f"{meta['threads_per_model']} thread(s) per model on {cores} cores")
    base = times["1 worker, 1 thread"]
    print(f"speed-up 2 workers vs 1 (1 thread per model): {base / times['2 workers, default threads']:.2f}x"
          f"  (target >= 1.7)")
    print(f"speed-up 2 workers vs 1 worker with {cores} threads per model: "
          f"{times['1 worker, default threads'] / times['2 workers, default threads']:.2f}x")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
