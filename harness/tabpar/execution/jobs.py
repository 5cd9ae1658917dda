"""Jobs: one (task, model, seed) each, planned from prepared tasks and executed in any process
(the calling one, a local worker, a Dask worker). A job is a plain dict so it crosses process
boundaries; its result is the row the store records plus the holdout predictions."""
from __future__ import annotations

import contextlib
import time
from datetime import datetime, timezone
from functools import lru_cache

import numpy as np

from tabpar.common.metrics import get_metric
from tabpar.common.system import release_freed_memory
from tabpar.data.log_scale import to_log_scale
from tabpar.execution.cache import PreparedTask, load_arrays
from tabpar.execution.estimates import predict_seconds
from tabpar.execution.provenance import preparation_code_digest
from tabpar.models.predict import predict
from tabpar.models.zoo import MODELS, build_model


@lru_cache(maxsize=None)
def _thread_pools(library: str):
    """One threadpoolctl controller per process and model library: finding the loaded
    BLAS/OpenMP libraries takes milliseconds, which every job would otherwise pay again. The
    model's library is imported first, as its OpenMP runtime must be loaded to be found; a
    process never imports a library none of its models uses (memory)."""
    import importlib

    from threadpoolctl import ThreadpoolController

    importlib.import_module(library)
    return ThreadpoolController()


def warm_imports(models=None) -> None:
    """Import the libraries of ``models`` (default: every model) once, in a fresh worker,
    before its first job, so a job's time limit measures the job alone."""
    for name in models or MODELS:
        _thread_pools(MODELS[name].library)
    import sklearn.dummy  # noqa: F401
    import sklearn.linear_model  # noqa: F401


def execute_job(job: dict) -> dict:
    """Fit one (task, model, seed) and score it. Returns the result row plus predictions.

    Never raises for a model's own failure: the row then has status 'failed' and the error.
    """
    result = _fit_and_score(job)
    release_freed_memory()  # the model and its arrays are gone: the next job starts lower
    return result


def _fit_and_score(job: dict) -> dict:
    """execute_job's work; its locals (model, arrays) are freed when it returns."""
    from joblib import parallel_config
    started = datetime.now(timezone.utc).isoformat(timespec="seconds")
    row = {"task": job["task"], "model": job["model"], "seed": job["seed"],
           "metric": job["metric"], "lower_is_better": job["lower_is_better"],
           "fingerprint": job["fingerprint"], "procedure": job["procedure"],
           "code": job["code"], "threads": job["threads"], "started_at": started, "score": None,
           "train_score": None, "fit_seconds": None, "predict_seconds": None, "error": None}
    prediction = None
    try:
        # a distributed job carries its arrays; a local one reads them from the cache
        arrays = job.get("arrays") or load_arrays(job["folder"])
        metric = get_metric(job["metric"])
        task_type, k = job["type"], max(len(job["classes"]), 2)
        X_train, y_train = np.asarray(arrays["X_train"]), np.asarray(arrays["y_train"])
        X_hold, y_hold = np.asarray(arrays["X_holdout"]), np.asarray(arrays["y_holdout"])
        y_fit = to_log_scale(y_train) if job["log_target"] else y_train
        model = build_model(job["model"], task_type, job["seed"], job["threads"])
        # the naive floor (a mean or class shares) runs no thread pool: finding the pools
        # (and importing the ensembles' library to do so) would cost more than its fit
        limit = (contextlib.nullcontext() if job["model"] == "naive"
                 else _thread_pools(MODELS[job["model"]].library).limit(limits=job["threads"]))
        # threads, not loky processes: a worker is a daemon process, where joblib's default
        # backend silently runs a forest's n_jobs=2 with 1 while the row records 2
        with limit, parallel_config(backend="threading"):
            t0 = time.perf_counter()
            model.fit(X_train, y_fit)
            t1 = time.perf_counter()
            prediction = predict(model, X_hold, task_type, k, job["log_target"])
            t2 = time.perf_counter()
            train_prediction = predict(model, X_train, task_type, k, job["log_target"])
        score, train_score = metric(y_hold, prediction), metric(y_train, train_prediction)
        row.update(fit_seconds=round(t1 - t0, 4), predict_seconds=round(t2 - t1, 4))
        if not (np.isfinite(score) and np.isfinite(train_score)):
            # e.g. RMSE of targets near 1e300 overflows: a number no placement can use
            raise FloatingPointError(
                f"the {job['metric']} score is not a finite number (holdout {score}, training "
                f"{train_score}); the target's values are too large for the metric, so rescale "
                f"the target")
        row.update(score=float(score), train_score=float(train_score), status="ok")
    except Exception as exc:  # a model's failure is a result, not a crash of the run
        row.update(status="failed", error=f"{exc.__class__.__name__}: {exc}"[:2000])
        prediction = None
    row["finished_at"] = datetime.now(timezone.utc).isoformat(timespec="seconds")
    return {"row": row, "prediction": prediction}


def plan_jobs(prepared: list[PreparedTask], models: list[str], seeds: list[int],
              threads: int) -> list[dict]:
    """One job per (task, model, seed); ``seeds`` are the seeds themselves."""
    jobs = []
    for p in prepared:
        t = p.task
        for model in models:
            for seed in seeds:
                jobs.append({"task": t.name, "model": model, "seed": seed, "metric": t.metric,
                             "lower_is_better": t.lower_is_better, "type": t.type,
                             "classes": [str(c) for c in p.classes],
                             "log_target": t.log_target, "fingerprint": p.fingerprint,
                             "procedure": p.procedure, "threads": threads,
                             "code": preparation_code_digest(),
                             "folder": str(p.folder), "n_train": p.n_train,
                             "n_features": len(p.feature_names),
                             # predicted seconds on the references' machine: longest first
                             "cost": predict_seconds(model, t.type, p.n_train,
                                                     len(p.feature_names), threads, "job")})
    return jobs


def still_to_run(jobs: list[dict], rows) -> list[dict]:
    """The jobs without a finished row of the same data and the same preparing code: a row
    counts only when its status is ok and its data fingerprint and preparing-code digest are
    the job's (a folder whose run.json is gone cannot vouch for old rows, so each row vouches
    for itself; a rerun after a change to loading, splitting or preparing runs every job again,
    and the new rows win over the old ones).

    >>> job = {"task": "t", "model": "rf", "seed": 0, "fingerprint": "new", "code": "c1"}
    >>> len(still_to_run([job], [{**job, "status": "ok", "fingerprint": "old"}]))
    1
    >>> len(still_to_run([job], [{**job, "status": "ok", "code": "c0"}]))
    1
    >>> len(still_to_run([job], [{**job, "status": "ok"}]))
    0
    """
    def key(item: dict) -> tuple:
        return item["task"], item["model"], item["seed"], item.get("fingerprint"), item.get("code")

    done = {key(r) for r in rows if r.get("status") == "ok"}
    return [j for j in jobs if key(j) not in done]


def lost_row(job: dict, reason: str, status: str) -> dict:
    now = datetime.now(timezone.utc).isoformat(timespec="seconds")
    row = {k: job[k] for k in ("task", "model", "seed", "metric", "lower_is_better",
                               "fingerprint", "procedure", "code", "threads")}
    row.update(status=status, error=reason, score=None, train_score=None, fit_seconds=None,
               predict_seconds=None, started_at=now, finished_at=now)
    return {"row": row, "prediction": None}


def in_memory(job: dict) -> dict:
    """A job's arrays read into memory, to send them to a remote worker once per task."""
    return {k: np.asarray(v) for k, v in load_arrays(job["folder"]).items()}
