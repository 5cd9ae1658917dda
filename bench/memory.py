"""Peak resident memory of the flights task against the in-memory size of its frame
(target: <= 3x).

Each figure is the peak RSS of a new process (VmHWM in /proc/self/status, which exec resets;
getrusage's ru_maxrss would carry the parent's peak into the child): (1) load → split → prepare →
cache the flights task; (2) a full `tabpar run` of flights with the naive floor and LightGBM,
one worker in-process. Forests are left out of (2): their trees (hundreds of MB) are the
model's memory, not the harness's.

    python bench/memory.py
"""
import subprocess
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402

PREPARE = """
import os, tempfile
HWM
os.environ["TABPAR_CACHE"] = tempfile.mkdtemp()
from tabpar.execution.cache import prepare_task
from tabpar.data.suites import load_suite
prepare_task(load_suite("default").task("flights"))
print(_hwm())
"""
RUN = """
import os, tempfile
HWM
os.environ["TABPAR_CACHE"] = tempfile.mkdtemp()
from tabpar.execution.runner import run_suite
run_suite("default", tasks=["flights"], models=["naive", "lgbm"], seeds=1,
          out=tempfile.mkdtemp(), workers=1)
print(_hwm())
"""
BASE = """
HWM
import tabpar.execution.runner, tabpar.data.sources, lightgbm, sklearn.ensemble
print(_hwm())
"""


HWM_CODE = """
def _hwm():
    for line in open("/proc/self/status"):
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) * 1024
"""


def _peak(code: str) -> int:
    code = code.replace("HWM", HWM_CODE)
    return int(subprocess.run([sys.executable, "-c", code], check=True, capture_output=True,
                              text=True).stdout.split()[-1])


def main():
    from tabpar.data.sources import load_task
    from tabpar.data.suites import load_suite

    base = _peak(BASE)
    prepare = _peak(PREPARE)
    run = _peak(RUN)
    # measured last: this process's own memory must not be in the children's figures
    loaded = load_task(load_suite("default").task("flights"))
    frame_bytes = loaded.frame.memory_usage(deep=True).sum()
    mb = 1e6
    print(f"flights frame in memory           {frame_bytes / mb:8.0f} MB")
    print(f"interpreter + libraries alone     {base / mb:8.0f} MB")
    print(f"peak RSS, prepare                 {prepare / mb:8.0f} MB  "
          f"({prepare / frame_bytes:.2f}x the frame; {(prepare - base) / frame_bytes:.2f}x "
          f"above the libraries)")
    print(f"peak RSS, run naive + lgbm        {run / mb:8.0f} MB  "
          f"({run / frame_bytes:.2f}x the frame; {(run - base) / frame_bytes:.2f}x above the "
          f"libraries)  (target <= 3x)")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
