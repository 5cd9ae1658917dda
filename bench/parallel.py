"""Parallel speed-up: the quick suite with two worker processes against one (target >= 1.7x on
2 cores), with the thread count per model set from the worker count (shown).

Both runs start from a warm cache of prepared arrays, into new result folders.

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
    from harness.runner import available_cores, prepare_task, run_suite
    from harness.suite import load_suite

    for task in load_suite("quick").tasks:
        prepare_task(task)  # warm the cache so both runs do the same work
    cores = available_cores()
    times = {}
    for workers in (1, 2):
        out = Path(tempfile.mkdtemp(prefix=f"tabpar-bench-par{workers}-"))
        start = time.perf_counter()
        result = run_suite("quick", seeds=args.seeds, out=out, workers=workers)
        times[workers] = time.perf_counter() - start
        meta = json.loads((out / "run.json").read_text())
        print(f"workers {workers}: {times[workers]:7.1f} s, {result.ok}/{result.jobs} ok, "
              f"{meta['threads_per_model']} thread(s) per model on {cores} cores")
    print(f"speed-up 2 workers vs 1: {times[1] / times[2]:.2f}x  (target >= 1.7)")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
