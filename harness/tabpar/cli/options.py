"""Options several commands share, and the help phrases built from tabpar's registries."""
from __future__ import annotations

from tabpar.common.errors import UserError
from tabpar.common.metrics import DEFAULT_METRIC, METRICS
from tabpar.data.suite_values import check_seconds, check_seed_count, check_tolerance
from tabpar.data.suites import list_builtin_suites
from tabpar.models.zoo import MODELS

# Defaults that only the command line names (the API functions carry the same values in their
# signatures): one place here until their modules own them as constants.
SEEDS = 3  # seeds per model: run, reference build, compare
CALIBRATE_SEEDS = 1
COMPARE_TOLERANCE = 0.0
QUICK_SUITE = "quick"  # run and compare
DEFAULT_SUITE = "default"  # export and reference build
EXPORT_FORMAT = "csv"
EXECUTORS = ("local", "dask")


def csv_list(text: str) -> list[str]:
    """An option's comma-separated value as a list (empty parts dropped)."""
    return [part.strip() for part in text.split(",") if part.strip()]


def or_list(names) -> str:
    """'a, b, c or d'."""
    names = list(names)
    return names[0] if len(names) == 1 else f"{', '.join(names[:-1])} or {names[-1]}"


def model_names() -> str:
    """The zoo's models in zoo order: 'naive, linear, ...'."""
    return ", ".join(MODELS)


def suite_names() -> str:
    """The built-in suites: 'default, quick'."""
    return ", ".join(path.stem for path in list_builtin_suites())


def reference_names() -> str:
    """The published references that ship with tabpar: 'default, quick'."""
    from tabpar.evaluation.reference import published_root

    folder = published_root() / "reference"
    return ", ".join(sorted(p.name for p in folder.iterdir() if p.is_dir()))


def metric_names() -> str:
    """The metrics grouped by the task types they fit: 'rmse rmsle mae r2 | accuracy ...'."""
    groups: dict[tuple, list[str]] = {}
    for name, metric in METRICS.items():
        groups.setdefault(metric.task_types, []).append(name)
    return " | ".join(" ".join(names) for names in groups.values())


def default_metrics() -> str:
    """'rmse for regression, roc_auc for binary, log_loss for multiclass'."""
    return ", ".join(f"{metric} for {task_type}" for task_type, metric in DEFAULT_METRIC.items())


def add_executor_options(parser) -> None:
    parser.add_argument("--executor", choices=list(EXECUTORS), default=EXECUTORS[0],
                        help="where jobs run: local worker processes (default) or an existing "
                             "Dask cluster")
    parser.add_argument("--scheduler", default=None, metavar="tcp://HOST:PORT",
                        help="the Dask scheduler's address (with --executor dask)")


def add_suite(parser, default: str, text: str) -> None:
    parser.add_argument("--suite", default=default, help=f"{text} (default: {default})")


REFERENCE_RULE = ("the published reference named like --suite, else the widest published one")


def add_reference(parser, text: str, rule: str = REFERENCE_RULE) -> None:
    parser.add_argument("--reference", default=None, help=f"{text} (default: {rule})")


def add_seeds(parser, default: int, text: str = "seeds per model") -> None:
    parser.add_argument("--seeds", type=int, default=default, help=f"{text} (default: {default})")


def add_workers(parser, text: str = "worker processes") -> None:
    parser.add_argument("--workers", type=int, default=None, help=text)


def add_job_timeout(parser, text: str) -> None:
    parser.add_argument("--job-timeout", type=float, default=None, metavar="SECONDS", help=text)


def add_quiet(parser) -> None:
    parser.add_argument("--quiet", action="store_true", help="print nothing but errors")


def add_json(parser, text: str = "print one JSON object") -> None:
    parser.add_argument("--json", action="store_true", help=text)


def add_models(parser, text: str) -> None:
    parser.add_argument("--models", type=csv_list, default=None, help=text)


def add_tasks(parser, text: str) -> None:
    parser.add_argument("--tasks", type=csv_list, default=None, help=text)


def check_options(args) -> None:
    """Check the options every command shares before the command starts, so nothing is written
    for a value that would be refused later: seeds, workers, time limits, tolerances and the
    comma-separated lists (UserError naming the option and the fix).

    >>> import argparse
    >>> check_options(argparse.Namespace(seeds=3, tolerance=0.0, models=["rf"]))
    """
    if getattr(args, "seeds", None) is not None:
        check_seed_count(args.seeds)
    workers = getattr(args, "workers", None)
    if workers is not None and workers < 1:
        raise UserError(f"--workers must be at least 1, not {workers}; e.g. --workers 2.")
    check_seconds(getattr(args, "job_timeout", None), "--job-timeout")
    if getattr(args, "tolerance", None) is not None:
        check_tolerance(args.tolerance)
    for name in ("models", "tasks"):
        if getattr(args, name, None) == []:  # given, but only commas and spaces
            raise UserError(f"--{name} names no {name[:-1]}; give at least one, or leave "
                            f"--{name} out for {'the whole zoo' if name == 'models' else 'all'}.")
