"""Facts about the machine a process runs on, and handing freed memory back to it."""
from __future__ import annotations

import ctypes
import os
import sys


def available_cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


def release_freed_memory() -> None:
    """Hand memory that has been freed back to the operating system, where glibc allows it.

    glibc keeps freed heap pages mapped, so without this a process's resident memory would
    still count the source frame it dropped; ``malloc_trim`` returns them. A no-op elsewhere.
    """
    if not sys.platform.startswith("linux"):
        return
    try:
        ctypes.CDLL("libc.so.6").malloc_trim(0)
    except (OSError, AttributeError):  # not glibc (e.g. musl): nothing to do
        pass
