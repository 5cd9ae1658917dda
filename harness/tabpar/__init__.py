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
import importlib

# name → (module, attribute); imported on first use, so that a command line which needs neither
# pandas nor scikit-learn (a warm rerun, ``tabpar suites``) does not pay their imports (about 2 s)
_EXPORTS = {
    "run": ("tabpar.execution.runner", "run_suite"),
    "run_suite": ("tabpar.execution.runner", "run_suite"),  # the name earlier versions documented
    "RunResult": ("tabpar.execution.runner", "RunResult"),
    "load_results": ("tabpar.execution.store", "load_results"),
    "export": ("tabpar.data.export", "export"),
    "ExportedSplit": ("tabpar.data.export", "ExportedSplit"),
    "place": ("tabpar.leaderboards.placing", "place"),
    "Placement": ("tabpar.evaluation.placement", "Placement"),
    "calibrate": ("tabpar.owndata.calibration", "calibrate"),
    "Calibration": ("tabpar.owndata.answer", "Calibration"),
    "compare": ("tabpar.evaluation.comparison", "compare"),
    "Comparison": ("tabpar.evaluation.comparison", "Comparison"),
    "leaderboards": ("tabpar.leaderboards", None),
    "BaselinePrep": ("tabpar.procedure.baseline", "BaselinePrep"),
    "calendar_fields": ("tabpar.procedure.calendar", "calendar_fields"),
    "prepare_task": ("tabpar.execution.cache", "prepare_task"),
    "Task": ("tabpar.data.suites", "Task"),
    "load_suite": ("tabpar.data.suites", "load_suite"),
    "METRICS": ("tabpar.common.metrics", "METRICS"),
    "get_metric": ("tabpar.common.metrics", "get_metric"),
    "MODELS": ("tabpar.models.zoo", "MODELS"),
    "DEFAULT_ENSEMBLES": ("tabpar.models.zoo", "DEFAULT_ENSEMBLES"),
    "UserError": ("tabpar.common.errors", "UserError"),
}

__all__ = ["run", "run_suite", "load_results", "export", "place", "calibrate", "compare",
           "leaderboards", "RunResult", "ExportedSplit", "Placement", "Calibration",
           "Comparison", "BaselinePrep", "calendar_fields", "prepare_task", "Task",
           "load_suite", "METRICS", "get_metric", "MODELS", "DEFAULT_ENSEMBLES", "UserError"]


def __getattr__(name: str):
    try:
        module_name, attribute = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module 'tabpar' has no attribute {name!r}") from None
    module = importlib.import_module(module_name)
    value = module if attribute is None else getattr(module, attribute)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__():
    return sorted(set(globals()) | set(__all__))
