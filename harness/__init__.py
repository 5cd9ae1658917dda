"""tabpar: a standard baseline over open tabular tasks, and placement of any score against it.

The Python API mirrors the command line; see README.md.
"""
from .errors import UserError
from .metrics import METRICS, get_metric
from .prep import BaselinePrep, calendar_fields
from .runner import RunResult, prepare_task, run_suite
from .store import load_results
from .suite import Task, load_suite
from .zoo import DEFAULT_ENSEMBLES, MODELS

__all__ = ["UserError", "METRICS", "get_metric", "BaselinePrep", "calendar_fields",
           "RunResult", "prepare_task", "run_suite", "load_results", "Task", "load_suite",
           "DEFAULT_ENSEMBLES", "MODELS"]
