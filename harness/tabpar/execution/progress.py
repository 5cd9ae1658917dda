"""A one-line progress bar for runs on a terminal, with an ETA from predicted job times."""
from __future__ import annotations

import sys
import time

from tabpar.execution.estimates import FitClock


def _key(job: dict) -> tuple:
    return job["task"], job["model"], job["seed"]


class Progress:
    """A one-line progress bar with job count and ETA on a terminal; silent otherwise.

    The ETA weighs the jobs left by their predicted seconds (``tabpar.execution.estimates``)
    and divides by the rate at which this run has got through predicted seconds so far, so a
    run that starts with its longest jobs does not promise too little, and a machine slower
    than the references' is taken into account once the first jobs finish.

    Examples
    --------
    >>> import io
    >>> jobs = [{"task": "t", "model": "rf", "seed": s, "type": "regression",
    ...          "n_train": 2000, "n_features": 20, "threads": 1} for s in range(4)]
    >>> bar = Progress(len(jobs), True, stream=io.StringIO(), jobs=jobs)
    >>> bar.step("t/rf", jobs[0], fit_seconds=1.0)
    >>> bar.done, bar.eta_seconds() > 0
    (1, True)
    """

    def __init__(self, total: int, enabled: bool, stream=None, jobs=None, workers: int = 1):
        self.total, self.done, self.enabled = total, 0, enabled and total > 0
        self.stream = stream or sys.stderr
        self.start = time.monotonic()
        self.workers = max(1, workers)
        self.clock = FitClock()
        self.left = {_key(j): j for j in jobs or []}
        self.done_cost = 0.0

    def eta_seconds(self) -> float | None:
        """Predicted seconds until the last job finishes (None without predictions)."""
        if not self.left:
            return None if self.done < self.total else 0.0
        left_cost = sum(self.clock.job_seconds(j) for j in self.left.values())
        elapsed = time.monotonic() - self.start
        if self.done_cost > 0 and elapsed > 0:
            # predicted seconds got through per wall second, parallel workers included
            scaled_done = self.done_cost * self.clock.scale
            return left_cost * elapsed / scaled_done
        return left_cost / min(self.workers, len(self.left))

    def step(self, label: str = "", job: dict | None = None,
             fit_seconds: float | None = None) -> None:
        self.done += 1
        if job is not None and _key(job) in self.left:
            del self.left[_key(job)]
            self.done_cost += self.clock.job_seconds(job) / self.clock.scale
            self.clock.observe(job, fit_seconds)
        if not self.enabled:
            return
        eta = self.eta_seconds()
        if eta is None:  # no predictions: the average job so far
            elapsed = time.monotonic() - self.start
            eta = elapsed / self.done * (self.total - self.done)
        width = 28
        filled = int(width * self.done / self.total)
        bar = "#" * filled + "." * (width - filled)
        self.stream.write(f"\r[{bar}] {self.done}/{self.total} jobs  "
                          f"ETA {int(eta // 60)}:{int(eta % 60):02d}  {label[:30]:<30}")
        self.stream.flush()

    def close(self) -> None:
        if self.enabled:
            self.stream.write("\n")
            self.stream.flush()
