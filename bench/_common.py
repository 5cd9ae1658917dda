"""Shared bits of the bench scripts: timing and the machine description for RESULTS.md."""
import os
import platform
import time


def best_of(function, repeats=3):
    """(best wall seconds over ``repeats`` calls, last result)."""
    best, result = float("inf"), None
    for _ in range(repeats):
        start = time.perf_counter()
        result = function()
        best = min(best, time.perf_counter() - start)
    return best, result


def machine() -> str:
    from tabpar.common.system import available_cores
    from tabpar.execution.provenance import library_versions

    try:
        with open("/proc/meminfo") as handle:
            kib = int(handle.readline().split()[1])
        memory = f"{kib / 2**20:.0f} GiB"
    except OSError:
        memory = "unknown memory"
    versions = ", ".join(f"{k} {v}" for k, v in library_versions().items())
    return (f"{available_cores()} cores, {memory}, {platform.machine()}, "
            f"load average {os.getloadavg()[0]:.2f}; {versions}")
