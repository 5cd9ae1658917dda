"""What every diagnostic shares: its answer (``Diagnostic``), its input (``TaskData``) and the fits.

Each diagnostic returns a ``Diagnostic``: ``name``, ``flag`` (True = something the user should
look at), ``numbers`` (in the units each key says) and one ``sentence``. They take a
``TaskData`` (the task's rows after load → target → split → the baseline procedure), built by
``task_data(task)``, so they can be used apart from ``tabpar calibrate``:

    from tabpar.owndata.diagnostics import task_data, leakage
    print(leakage(task_data(task)).sentence)

"The default model" / "the fast model" is LightGBM at the zoo's settings (``zoo.build_model``),
the cheapest default ensemble. Scores are in the task metric's own units and direction.
"""
from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field

import numpy as np
import pandas as pd

from tabpar.common.metrics import get_metric
from tabpar.common.system import available_cores
from tabpar.data.log_scale import to_log_scale
from tabpar.data.sources import LoadedTask
from tabpar.data.split import Split, load_and_split
from tabpar.data.suites import Task
from tabpar.data.target import Target
from tabpar.evaluation.stats import bootstrap_scores, half_width
from tabpar.models.predict import predict
from tabpar.models.zoo import build_model
from tabpar.procedure.baseline import BaselinePrep
from tabpar.procedure.prepare import fit_on_rows

FAST_MODEL = "lgbm"
N_BOOT = 500  # bootstrap resamples for the diagnostics' bands (placement uses 1000)
SMALL_FIT_ROWS = 25_000  # subsample fits up to this size run on one thread


@dataclass
class Diagnostic:
    """One diagnostic's answer. ``flag`` True = worth a look; ``numbers`` as the keys say."""

    name: str
    flag: bool
    numbers: dict
    sentence: str
    seconds: float = 0.0  # wall time it took

    def to_dict(self) -> dict:
        return asdict(self)

    def __str__(self) -> str:
        return f"[{'!' if self.flag else ' '}] {self.name}: {self.sentence}"


@dataclass
class TaskData:
    """A task's rows as the baseline sees them: frame, target, split and prepared arrays."""

    task: Task
    loaded: LoadedTask
    target: Target
    split: Split
    prep: BaselinePrep  # fitted on the training rows
    X_train: np.ndarray
    X_holdout: np.ndarray
    sources: list  # the source column of each prepared feature
    threads: int = 1
    extra: dict = field(default_factory=dict)  # results one diagnostic leaves for others

    @property
    def metric(self):
        return get_metric(self.task.metric)

    @property
    def y_train(self) -> np.ndarray:
        return self.target.values[self.split.train]

    @property
    def y_holdout(self) -> np.ndarray:
        return self.target.values[self.split.holdout]

    @property
    def n_classes(self) -> int:
        return max(len(self.target.classes), 2)

    def date_features(self) -> np.ndarray:
        """Boolean mask of prepared features derived from a date column (calendar fields and
        the date's missing flag)."""
        dates = {c for c, role in self.prep.roles_.items() if role == "date"}
        return np.array([s in dates for s in self.sources], dtype=bool)


def prepare_rows(task: Task, loaded: LoadedTask, fit_rows, other_rows):
    """The baseline procedure fitted on ``fit_rows`` of ``loaded``'s rows (positions);
    returns (fitted BaselinePrep, X_fit, X_other)."""
    return fit_on_rows(task, loaded.features, fit_rows, other_rows)


def task_data(task: Task, threads: int | None = None) -> TaskData:
    """Load, split and prepare ``task`` exactly as the runner does (UserError on bad input).

    Parameters
    ----------
    task : Task
        The task (its source, target, metric and holdout).
    threads : int, optional
        Threads for the larger fits (default: every available core).

    Returns
    -------
    TaskData
        The rows, the encoded target, the split and the baseline's arrays, fitted on the
        training rows.
    """
    rows = load_and_split(task)
    loaded, split = rows.loaded, rows.split
    prep, X_train, X_holdout = prepare_rows(task, loaded, split.train, split.holdout)
    return TaskData(task=task, loaded=loaded, target=rows.target, split=split, prep=prep,
                    X_train=X_train, X_holdout=X_holdout, sources=list(prep.feature_sources_),
                    threads=threads or available_cores())


def fit_predict(data: TaskData, X_fit, y_fit, X_eval, model: str = FAST_MODEL, seed: int = 0):
    """Fit ``model`` (zoo settings) and predict ``X_eval`` in the metric's prediction form."""
    from threadpoolctl import threadpool_limits

    task = data.task
    # small fits: one thread, as LightGBM's threads cost more than they save there (and much
    # more when another process holds a core)
    threads = 1 if len(X_fit) <= SMALL_FIT_ROWS else data.threads
    estimator = build_model(model, task.type, seed, threads)
    with threadpool_limits(limits=threads):
        estimator.fit(X_fit, to_log_scale(y_fit) if task.log_target else y_fit)
        prediction = predict(estimator, X_eval, task.type, data.n_classes, task.log_target)
    return prediction, estimator


def gain_of(metric, score, naive) -> float:
    """How much better ``score`` is than ``naive`` in the metric's units (positive = better)."""
    return float(metric.gain(score, naive))


def can_fit(data: TaskData, y) -> bool:
    """Whether a classifier can be fitted on labels ``y`` (needs two classes)."""
    return data.task.type == "regression" or len(np.unique(y)) >= 2


def subsample(rows: np.ndarray, n: int, seed: int) -> np.ndarray:
    """At most ``n`` of ``rows``, a seeded draw kept in row order."""
    if len(rows) <= n:
        return np.asarray(rows)
    return np.sort(np.random.default_rng(seed).choice(rows, size=n, replace=False))


def noise_of(metric, y, prediction, seed) -> float:
    """The 95% bootstrap half-width of one prediction's score (metric units)."""
    return half_width(bootstrap_scores(metric, y, [prediction], n_boot=N_BOOT, seed=seed)[:, 0])


def timed(function):
    """Decorate a diagnostic so its ``Diagnostic.seconds`` holds its wall time."""
    def wrapper(data: TaskData, *args, **kwargs) -> Diagnostic:
        t0 = time.perf_counter()
        result = function(data, *args, **kwargs)
        result.seconds = round(time.perf_counter() - t0, 3)
        return result
    wrapper.__name__ = function.__name__
    wrapper.__doc__ = function.__doc__
    return wrapper


def importance_by_column(estimator, sources) -> pd.Series:
    """LightGBM's total split gain per source column, as shares summing to 1 (descending)."""
    gains = np.asarray(estimator.booster_.feature_importance(importance_type="gain"), float)
    by_column = pd.Series(gains, index=sources).groupby(level=0).sum()
    total = by_column.sum()
    return (by_column / total if total > 0 else by_column).sort_values(ascending=False)


def column_list(names, limit=3) -> str:
    """Up to ``limit`` quoted column names, then how many more."""
    names = list(names)
    text = ", ".join(f"'{n}'" for n in names[:limit])
    return text + (f" and {len(names) - limit} more" if len(names) > limit else "")
