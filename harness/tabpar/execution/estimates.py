"""Fit-time estimates: how long a job will take, predicted from the published references' own
recorded fits and rescaled to this machine by the jobs already finished.

Each published reference records, per job, the model, the training rows and features, the
thread count and the seconds its fit and holdout prediction took. Per model and kind of task
(regression or classification) a power law ``seconds = a · rows^b · features^c`` is fitted to
those records by least squares on logarithms, its exponents pulled gently towards 1 so that two
or three tasks of similar size cannot tilt them. A ``FitClock`` then scales these reference-machine
predictions by the median ratio of actual to predicted time over the jobs finished so far.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from tabpar.common.metrics import METRICS
from tabpar.common.paths import builtin_folder
from tabpar.models.zoo import DEFAULT_ENSEMBLES, MODELS

REFERENCES = ("wide", "default", "quick")  # the wide one repeats the default tasks: deduplicated
# the strength of the pull of each exponent towards its prior (in squared log-seconds):
# enough to steady a fit on a handful of tasks, small next to what ten tasks say
RIDGE = 0.5
# seconds a job takes besides its fit and predictions: loading arrays, writing the row
JOB_OVERHEAD = 0.01
# how much faster a fit gets per extra thread, as an exponent of the thread count (the
# references are all single-threaded, so this is a prior: tree ensembles split their trees
# across threads well, boosters less so on small tables)
THREAD_EXPONENT = 0.7


def _kind(task_type: str) -> str:
    return "regression" if task_type == "regression" else "classification"


def _rows_of(path) -> list[dict]:
    """The usable rows of one reference's jobs.jsonl: finished jobs with positive sizes and
    times; anything torn or mistyped is left out rather than trusted."""
    rows = []
    try:
        lines = path.read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError):
        return rows
    for line in lines:
        try:
            row = json.loads(line)
            model, metric = row["model"], METRICS[row["metric"]]
            n, p, threads = int(row["n_train"]), int(row["n_features"]), int(row["threads"])
            fit = float(row["fit_seconds"])
            predict = float(row["predict_seconds"]) * (n + int(row["n_holdout"])) \
                / max(int(row["n_holdout"]), 1)
        except (ValueError, TypeError, KeyError, AttributeError):
            continue
        if (row.get("status") != "ok" or model not in MODELS or min(n, p, threads) < 1
                or not (math.isfinite(fit) and math.isfinite(predict))
                or fit < 0 or predict < 0):
            continue
        kind = _kind(metric.task_types[0])
        rows.append({"model": model, "kind": kind, "n": n, "p": p, "threads": threads,
                     "seed": row.get("seed"), "fit": fit, "job": fit + predict + JOB_OVERHEAD})
    return rows


@lru_cache(maxsize=1)
def _reference_rows() -> tuple:
    """Every published reference's usable rows, one per (model, kind, rows, features, seed):
    a task two references share (the wide suite repeats the default tasks) counts once."""
    seen = {}
    for name in REFERENCES:
        for row in _rows_of(builtin_folder("results") / "reference" / name / "jobs.jsonl"):
            seen.setdefault((row["model"], row["kind"], row["n"], row["p"], row["seed"]), row)
    return tuple(seen.values())


@lru_cache(maxsize=1)
def recorded_seconds() -> dict:
    """``{(model, kind, rows, features, target): single-threaded seconds}``, the median over
    seeds of the fits the references recorded: a job on a published task (same rows and
    features) is predicted from its own record, which no power law matches on the tasks whose
    trees grow unusually deep (a forest on births_by_state took five times the law's figure)."""
    groups = {}
    for r in _reference_rows():
        for target in ("fit", "job"):
            key = (r["model"], r["kind"], r["n"], r["p"], target)
            groups.setdefault(key, []).append(r[target] * r["threads"] ** THREAD_EXPONENT)
    return {key: float(np.median(values)) for key, values in groups.items()}


def _power_law(rows: list[dict], target: str, prior_p: float) -> tuple:
    """(log a, b, c) of ``target ≈ a · n^b · p^c`` (single-threaded seconds) by ridge
    regression on logarithms, the exponents pulled towards (1, prior_p)."""
    X = np.array([[1.0, math.log(r["n"]), math.log(r["p"])] for r in rows])
    y = np.array([math.log(max(r[target], 1e-4)) + THREAD_EXPONENT * math.log(r["threads"])
                  for r in rows])
    prior = np.array([0.0, 1.0, prior_p])
    # minimise |X w - y|² + RIDGE · |w[1:] - prior[1:]|²: the intercept is left free
    penalty = np.diag([0.0, RIDGE, RIDGE])
    shift = y - X @ prior
    w = np.linalg.solve(X.T @ X + penalty * len(rows) / 10, X.T @ shift) + prior
    return float(w[0]), float(w[1]), float(w[2])


@lru_cache(maxsize=1)
def reference_laws() -> dict:
    """``{(model, kind, target): (log a, b, c)}`` fitted to the published references' jobs
    (``target`` is ``fit`` or ``job``; ``kind`` is ``regression`` or ``classification``)."""
    rows = list(_reference_rows())
    laws = {}
    for model in MODELS:
        for kind in ("regression", "classification"):
            mine = [r for r in rows if r["model"] == model and r["kind"] == kind]
            if len(mine) < 3:
                continue
            # a tree considers every feature per split in regression, about √p in
            # classification (scikit-learn's defaults for random forests and extra trees)
            prior_p = 1.0 if kind == "regression" else 0.5
            for target in ("fit", "job"):
                laws[model, kind, target] = _power_law(mine, target, prior_p)
    return laws


def predict_seconds(model: str, task_type: str, n_train: int, n_features: int,
                    threads: int = 1, target: str = "fit", records: bool = True) -> float:
    """Seconds a model's fit (``target="fit"``) or whole job (``"job"``: fit, predictions of
    the holdout and training rows, bookkeeping) takes on the references' machine.

    Parameters
    ----------
    model : str
        A name from the zoo.
    task_type : str
        ``regression``, ``binary`` or ``multiclass``.
    n_train, n_features : int
        Training rows and prepared features.
    threads : int
        Threads the model may use.
    target : str
        ``fit`` or ``job``.
    records : bool
        Use the references' record of a table of exactly this size (False: the law alone).

    Returns
    -------
    float
        Predicted wall seconds (higher = slower): the references' own record when they hold
        this model on a table of exactly these rows and features (a published task), else
        their power law, else the zoo's rough cost figure when they hold too few fits.

    Examples
    --------
    >>> small = predict_seconds("rf", "regression", 2_000, 20)
    >>> large = predict_seconds("rf", "regression", 20_000, 20)
    >>> 0 < small < large
    True
    """
    n, p = max(int(n_train), 1), max(int(n_features), 1)
    law = reference_laws().get((model, _kind(task_type), target))
    recorded = (recorded_seconds().get((model, _kind(task_type), n, p, target)) if records
                else None)
    if recorded is not None:
        seconds = recorded
    elif law is None:
        seconds = MODELS[model].cost(task_type) * n * p / 1e6
    else:
        log_a, b, c = law
        seconds = math.exp(log_a + b * math.log(n) + c * math.log(p))
    if model in DEFAULT_ENSEMBLES and threads > 1:  # the ensembles use their threads
        seconds /= threads ** THREAD_EXPONENT
    return seconds


@dataclass
class FitClock:
    """Predictions rescaled to this machine by the jobs already finished in the same run.

    ``scale`` is the median ratio of actual to reference-predicted seconds over the jobs
    observed (1 before any): a slower or busier machine than the references' raises it.

    Examples
    --------
    >>> clock = FitClock()
    >>> job = {"model": "lgbm", "type": "binary", "n_train": 5000, "n_features": 20,
    ...        "threads": 1}
    >>> first = clock.fit_seconds(job)
    >>> clock.observe(job, fit_seconds=2 * first)
    >>> round(clock.fit_seconds(job) / first, 6)
    2.0
    """

    ratios: list = field(default_factory=list)

    @property
    def scale(self) -> float:
        return float(np.median(self.ratios)) if self.ratios else 1.0

    def _base(self, job: dict, target: str) -> float:
        return predict_seconds(job["model"], job["type"], job["n_train"], job["n_features"],
                               job.get("threads", 1), target)

    def fit_seconds(self, job: dict) -> float:
        """Predicted fit seconds of ``job`` on this machine."""
        return self._base(job, "fit") * self.scale

    def job_seconds(self, job: dict) -> float:
        """Predicted wall seconds of the whole ``job`` on this machine."""
        return self._base(job, "job") * self.scale

    def observe(self, job: dict, fit_seconds: float | None) -> None:
        """Learn from a finished job's fit time (jobs under 20 ms are timer noise: skipped)."""
        if fit_seconds is None or not fit_seconds >= 0.02:
            return
        self.ratios.append(fit_seconds / max(self._base(job, "fit"), 1e-4))
