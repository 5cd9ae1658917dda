"""Warm rerun: a completed run folder rerun with the same arguments (target: under 1.5 s).

Runs `tabpar run --suite quick --seeds 1` to a new folder, then the same command again, each as
a new process (Python start-up and imports included), and prints the second one's wall time.

    python bench/warm_rerun.py
"""
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402


def main():
    out = Path(tempfile.mkdtemp(prefix="tabpar-bench-warm-")) / "run"
    command = [sys.executable, "-m", "tabpar.cli.main", "run", "--suite", "quick", "--seeds", "1",
               "--out", str(out), "--quiet"]
    start = time.perf_counter()
    subprocess.run(command, check=True)
    first = time.perf_counter() - start
    start = time.perf_counter()
    subprocess.run(command, check=True)
    second = time.perf_counter() - start
    print(f"first run   {first:6.1f} s")
    print(f"warm rerun  {second:6.2f} s  (target < 1.5 s)")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
