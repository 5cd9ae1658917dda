"""Parallel speed-up: the quick suite with two worker processes against one (target >= 1.7x on
2 cores), with the thread count per model shown.

Three runs from a warm cache of prepared arrays, into new result folders: one worker with one
thread per model (the process-level scaling the target is about), one worker with the default
thread count (cores per model: the models' own threads already use both cores), two workers
with one thread each (the default).

    python bench/parallel.py [--seeds 3]
"""
import argparse
import json
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--seeds", type=int, default=3)
    args = parser.parse_args()
    from tabpar.common.system import available_cores
    from tabpar.execution.cache import prepare_task
    from tabpar.execution.runner import run_suite
    from tabpar.data.suites import load_suite

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
