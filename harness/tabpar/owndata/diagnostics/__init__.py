"""Diagnostics that tell a pipeline mistake from a hard dataset, on one task's own split."""
from __future__ import annotations

from tabpar.owndata.diagnostics.base import Diagnostic, TaskData, task_data
from tabpar.owndata.diagnostics.duplicates import conflicting_duplicates
from tabpar.owndata.diagnostics.leakage import leakage
from tabpar.owndata.diagnostics.learning_curve import learning_curve
from tabpar.owndata.diagnostics.shift import shift
from tabpar.owndata.diagnostics.split_optimism import split_optimism

ALL = (leakage, shift, split_optimism, learning_curve, conflicting_duplicates)
# the names their answers carry (``Diagnostic.name``), in the order of ``ALL``
NAMES = ("leakage", "shift", "split-optimism", "learning-curve", "conflicting-duplicates")

__all__ = ["ALL", "NAMES", "Diagnostic", "TaskData", "conflicting_duplicates", "leakage",
           "learning_curve", "run_diagnostics", "shift", "split_optimism", "task_data"]


def run_diagnostics(data: TaskData, on_event=None) -> list[Diagnostic]:
    """Every diagnostic on ``data``, in a fixed order.

    Parameters
    ----------
    data : TaskData
        The task's rows (``task_data``).
    on_event : callable, optional
        Takes one progress message per diagnostic (its name, flag and seconds).

    Returns
    -------
    list of Diagnostic
        In the order of ``ALL``.
    """
    say = on_event or (lambda message: None)
    out = []
    for function in ALL:
        result = function(data)
        say(f"diagnostic {result.name}: {'FLAG' if result.flag else 'ok'} ({result.seconds:.1f} s)")
        out.append(result)
    return out
