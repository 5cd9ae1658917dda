"""tabpar: one standard, reproducible baseline over open tabular tasks, and placement of any
score against it.

One entry point per job (each returns a result object that prints itself, converts itself with
``to_dict`` / ``to_frame`` and shows as a table in a notebook):

- ``run``: run the baseline procedure and the model zoo over a suite → ``RunResult``;
- ``load_results``: a results folder as a DataFrame, one row per job;
- ``export``: a suite task's exact split as files → ``ExportedSplit``;
- ``place``: place a score or predictions on a suite task (and a leaderboard) → ``Placement``;
- ``calibrate``: the same procedure on your own table and split → ``Calibration``;
- ``compare``: a candidate procedure against the built-in one across a suite → ``Comparison``;
- ``leaderboards``: import, pull, list and place on published leaderboards.

The command line (``tabpar --help``) is a thin layer over these.
"""
from tabpar import leaderboards
from tabpar.common.errors import UserError
from tabpar.common.metrics import METRICS, get_metric
from tabpar.data.export import ExportedSplit, export
from tabpar.data.suites import Task, load_suite
from tabpar.evaluation.comparison import Comparison, compare
from tabpar.evaluation.placement import Placement
from tabpar.execution.cache import prepare_task
from tabpar.execution.runner import RunResult
from tabpar.execution.runner import run_suite as run
from tabpar.execution.store import load_results
from tabpar.leaderboards.placing import place
from tabpar.models.zoo import DEFAULT_ENSEMBLES, MODELS
from tabpar.owndata.answer import Calibration
from tabpar.owndata.calibration import calibrate
from tabpar.procedure.baseline import BaselinePrep
from tabpar.procedure.calendar import calendar_fields

run_suite = run  # the name earlier versions documented

__all__ = ["run", "run_suite", "load_results", "export", "place", "calibrate", "compare",
           "leaderboards", "RunResult", "ExportedSplit", "Placement", "Calibration",
           "Comparison", "BaselinePrep", "calendar_fields", "prepare_task", "Task",
           "load_suite", "METRICS", "get_metric", "MODELS", "DEFAULT_ENSEMBLES", "UserError"]
