"""A one-line progress bar for runs on a terminal."""
from __future__ import annotations

import sys
import time


class Progress:
    """A one-line progress bar with job count and ETA on a terminal; silent otherwise."""

    def __init__(self, total: int, enabled: bool, stream=None):
        self.total, self.done, self.enabled = total, 0, enabled and total > 0
        self.stream = stream or sys.stderr
        self.start = time.monotonic()

    def step(self, label: str = "") -> None:
        self.done += 1
        if not self.enabled:
            return
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
