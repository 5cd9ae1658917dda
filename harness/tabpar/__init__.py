"""tabpar: a standard baseline over open tabular tasks, and placement of any score against it.

The Python API mirrors the command line; see README.md.
"""
from tabpar.common.errors import UserError
from tabpar.common.metrics import METRICS, get_metric
from tabpar.procedure.baseline import BaselinePrep, calendar_fields
from tabpar.execution.runner import RunResult, prepare_task, run_suite
from tabpar.execution.store import load_results
from tabpar.data.suites import Task, load_suite
from tabpar.models.zoo import DEFAULT_ENSEMBLES, MODELS

__all__ = ["UserError", "METRICS", "get_metric", "BaselinePrep", "calendar_fields",
           "RunResult", "prepare_task", "run_suite", "load_results", "Task", "load_suite",
           "DEFAULT_ENSEMBLES", "MODELS"]
