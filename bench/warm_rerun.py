"""Warm rerun: a completed run folder rerun with the same arguments (target: under 1.5 s).

Runs `tabpar run --suite quick --seeds 1` to a new folder, then the same command again, each as
a new process (Python start-up and imports included), and prints the second one's wall time
(three reruns: each and the median), beside the time a new process takes to import tabpar
alone, which every command pays.

    python bench/warm_rerun.py [--out FINISHED_RUN]   # --out: reuse a finished run's folder
"""
import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402


def _timed(command) -> float:
    start = time.perf_counter()
    subprocess.run(command, check=True)
    return time.perf_counter() - start


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--out", default=None)
    args = parser.parse_args()
    out = Path(args.out or Path(tempfile.mkdtemp(prefix="tabpar-bench-warm-")) / "run")
    command = [sys.executable, "-m", "tabpar.cli.main", "run", "--suite", "quick", "--seeds", "1",
               "--out", str(out), "--quiet"]
    if not (out / "jobs.jsonl").is_file():
        print(f"first run   {_timed(command):6.1f} s")
    reruns = [_timed(command) for _ in range(3)]
    imports = [_timed([sys.executable, "-c", "import tabpar"]) for _ in range(3)]
    print(f"warm rerun  {statistics.median(reruns):6.2f} s median "
          f"({', '.join(f'{t:.2f}' for t in reruns)})  (target < 1.5 s)")
    print(f"import tabpar alone  {statistics.median(imports):6.2f} s median")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
