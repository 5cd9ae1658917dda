"""The runner: tasks → prepared arrays → jobs (task × model × seed) → results store.

Each task is loaded, split and prepared once, in the parent process, and its arrays are written
to the on-disk cache; worker processes memory-map them, so no job repeats that work and no large
array crosses a pipe. Jobs run in ``spawn``-started worker processes, each model limited to
``cores // workers`` threads so the machine is never oversubscribed.
"""
from __future__ import annotations

import ctypes
import functools
import hashlib
import json
import os
import platform
import signal
import sys
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from functools import lru_cache
from pathlib import Path

import numpy as np
import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.files import atomic_folder
from tabpar.common.paths import cache_root
from tabpar.common.metrics import get_metric
from tabpar.procedure.variants import Procedure, builtin
from tabpar.data.sources import load_task
from tabpar.data.split import encode_target, split_rows
from tabpar.execution.store import STORE_FORMAT, ResultsStore, atomic_write_text
from tabpar.data.suites import Suite, Task, load_suite
from tabpar.execution.executors import DaskPool, LocalPool
from tabpar.models.zoo import MODELS, build_model, check_models

def tabpar_version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("tabpar")
    except PackageNotFoundError:  # running from a checkout without install
        return "0+unknown"


def library_versions() -> dict:
    """Versions of everything that can change a score (read from the installed packages'
    metadata, so no model library is imported for it)."""
    from importlib.metadata import PackageNotFoundError, version

    def installed(name):
        try:
            return version(name)
        except PackageNotFoundError:
            return None

    return {"python": platform.python_version(), "numpy": installed("numpy"),
            "pandas": installed("pandas"), "scikit-learn": installed("scikit-learn"),
            "xgboost": installed("xgboost"), "lightgbm": installed("lightgbm"),
            "tabpar": tabpar_version()}


def available_cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


@lru_cache(maxsize=1)
def preparation_code_digest() -> str:
    """Hash of the code that shapes prepared arrays (every module of the data and procedure
    stages), so a change to loading, splitting or preparing invalidates the cache and marks
    reference jobs as not reusable."""
    import tabpar.data
    import tabpar.procedure

    digest = hashlib.sha256()
    for package in (tabpar.data, tabpar.procedure):
        root = Path(package.__file__).parent
        for path in sorted(root.rglob("*.py")):
            digest.update(path.relative_to(root.parent).as_posix().encode())
            digest.update(path.read_bytes())
    return digest.hexdigest()[:16]


@dataclass
class PreparedTask:
    """A task after load → split → baseline procedure, with its arrays on disk."""

    task: Task
    folder: Path  # holds X_train.npy, y_train.npy, X_holdout.npy, y_holdout.npy, row_id.npy
    fingerprint: str
    classes: list
    feature_names: list
    n_train: int
    n_holdout: int
    split_description: str
    notes: list = field(default_factory=list)
    procedure: str = "builtin"
    leakage: str | None = None  # why the procedure learns from holdout rows (None: it does not)

    def summary(self) -> dict:
        return {"fingerprint": self.fingerprint, "task_key": self.task.key(),
                "metric": self.task.metric, "type": self.task.type,
                "lower_is_better": self.task.lower_is_better, "n_train": self.n_train,
                "n_holdout": self.n_holdout, "n_features": len(self.feature_names),
                "split": self.split_description, "notes": self.notes,
                "classes": [str(c) for c in self.classes], "procedure": self.procedure,
                "leakage": self.leakage, "definition": self.task.definition()}


def _as_features(output, n_rows: int, procedure: Procedure, task: Task, side: str):
    """A procedure's output as a float32 array; UserError when it is not numeric features."""
    if hasattr(output, "toarray"):  # scipy sparse
        output = output.toarray()
    if hasattr(output, "to_numpy"):
        output = output.to_numpy()
    try:
        array = np.asarray(output, dtype=np.float32)
    except (TypeError, ValueError):
        raise UserError(f"Procedure '{procedure.name}' returned non-numeric features for the "
                        f"{side} rows of task '{task.name}'; return numbers only.") from None
    if array.ndim != 2 or array.shape[0] != n_rows:
        raise UserError(f"Procedure '{procedure.name}' returned shape {array.shape} for the "
                        f"{n_rows} {side} rows of task '{task.name}'; return one row per input "
                        f"row.")
    if np.isinf(array).any():
        raise UserError(f"Procedure '{procedure.name}' returned infinite values for task "
                        f"'{task.name}'; return finite numbers (NaN is allowed).")
    return array


def _leakage_check(transformer, train, holdout, X_train, X_hold) -> str | None:
    """Why the fitted transformer learns from the rows it transforms, or None.

    A sound transformer maps each row by what it learned in fit alone: transforming the
    holdout in reverse order gives the same rows, and transforming training rows again after
    the holdout gives what it gave before.
    """
    reverse = np.asarray(transformer.transform(holdout.iloc[::-1]), dtype=np.float32)[::-1]
    if reverse.shape != X_hold.shape or not np.array_equal(reverse, X_hold, equal_nan=True):
        return ("its output for a holdout row depends on the other rows transformed with it, "
                "so it learns from the holdout rows")
    head = train.iloc[: min(len(train), 500)]
    again = np.asarray(transformer.transform(head), dtype=np.float32)
    if again.shape != X_train[: len(head)].shape or not np.array_equal(
            again, X_train[: len(head)], equal_nan=True):
        return ("transforming the holdout rows changed its output for training rows, so it "
                "learned from the holdout rows")
    return None


def prepare_task(task: Task, cache_dir: Path | None = None,
                 procedure: Procedure | None = None) -> PreparedTask:
    """Load, split and prepare one task with ``procedure`` (default: the built-in baseline),
    or reuse its cached arrays."""
    procedure = procedure or builtin()
    loaded = load_task(task)
    key_text = json.dumps({"task": task.key(), "fingerprint": loaded.fingerprint,
                           "procedure": procedure.key, "tabpar": tabpar_version(),
                           "code": preparation_code_digest()},
                          sort_keys=True)
    key = hashlib.sha256(key_text.encode()).hexdigest()[:16]
    folder = (cache_dir or cache_root()) / "prepared" / f"{task.name}-{key}"
    meta_path = folder / "meta.json"
    if meta_path.exists():
        meta = json.loads(meta_path.read_text())
        del loaded
        release_freed_memory()  # the source and task frames are gone: hand their pages back
        return PreparedTask(task=task, folder=folder, **meta)

    target = encode_target(loaded)
    split = split_rows(loaded, target)
    features = loaded.features
    if features.shape[1] == 0:
        raise UserError(f"Task '{task.name}' has no feature columns left after its drops and "
                        f"its target; keep at least one column to predict from.")
    _check_finite(features, task, loaded.row_ids)
    train, holdout = features.iloc[split.train], features.iloc[split.holdout]
    row_ids, notes, fingerprint = loaded.row_ids, loaded.notes, loaded.fingerprint
    del features, loaded  # the task's rows now live in train and holdout only (memory)
    release_freed_memory()  # the source frame and the task's frame are gone: hand them back
    transformer = procedure.build(task)
    check_leakage = procedure.key != builtin().key  # the built-in one is tested, not checked
    try:
        X_train = _as_features(transformer.fit_transform(train), len(train), procedure, task,
                               "training")
        if not check_leakage:
            train = None  # not needed again: free its rows before the holdout is prepared
        X_hold = _as_features(transformer.transform(holdout), len(holdout), procedure, task,
                              "holdout")
    except UserError:
        raise
    except Exception as exc:
        if not procedure.user_code:
            raise
        raise UserError(f"Procedure '{procedure.name}' failed on task '{task.name}': "
                        f"{exc.__class__.__name__}: {exc}") from None
    if X_train.shape[1] != X_hold.shape[1]:
        raise UserError(f"Procedure '{procedure.name}' made {X_train.shape[1]} features for the "
                        f"training rows but {X_hold.shape[1]} for the holdout rows of task "
                        f"'{task.name}'; it must learn its columns in fit.")
    leakage = (_leakage_check(transformer, train, holdout, X_train, X_hold) if check_leakage
               else None)
    if hasattr(transformer, "get_feature_names_out"):
        try:
            names = [str(n) for n in transformer.get_feature_names_out()]
        except Exception:  # a user transformer may not support it after all
            names = [f"f{i}" for i in range(X_train.shape[1])]
    else:
        names = [f"f{i}" for i in range(X_train.shape[1])]
    arrays = {"X_train": X_train, "X_holdout": X_hold,
              "y_train": target.values[split.train], "y_holdout": target.values[split.holdout],
              "row_id": row_ids[split.holdout]}
    meta = {"fingerprint": fingerprint, "classes": [_plain(c) for c in target.classes],
            "feature_names": names, "n_train": len(split.train),
            "n_holdout": len(split.holdout), "split_description": split.description,
            "notes": notes + split.notes, "procedure": procedure.name,
            "leakage": leakage}
    # never a half-written entry; another process's entry with the same key is identical
    with atomic_folder(folder, replace=False) as tmp:
        for name, array in arrays.items():
            np.save(tmp / f"{name}.npy", array)
        atomic_write_text(tmp / "meta.json", json.dumps(meta))
    return PreparedTask(task=task, folder=folder, **meta)


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


def _plain(value):
    return value.item() if isinstance(value, np.generic) else value


def _check_finite(features, task: Task, row_ids) -> None:
    """UserError for an infinite value (``row_ids``: each row's position in the source)."""
    for name in features.columns:  # one column at a time: no copy of the whole table
        column = features[name]
        if not pd.api.types.is_float_dtype(column):  # only floats can hold infinity
            continue
        bad = np.isinf(column.to_numpy(dtype=np.float64, na_value=np.nan))
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise UserError(f"Column '{name}' of task '{task.name}' has an infinite value at "
                            f"row {int(row_ids[row])}; replace it with a finite number or leave "
                            f"it blank.")


def cache_info(cache_dir: Path | None = None) -> dict:
    """What the prepared-array cache holds: folder, entries (task, MB), total MB."""
    root = (cache_dir or cache_root()) / "prepared"
    entries = []
    for folder in sorted(root.glob("*")) if root.is_dir() else []:
        if not (folder / "meta.json").exists():
            continue
        size = sum(f.stat().st_size for f in folder.iterdir() if f.is_file())
        meta = json.loads((folder / "meta.json").read_text())
        entries.append({"entry": folder.name, "task": folder.name.rsplit("-", 1)[0],
                        "procedure": meta.get("procedure", "builtin"),
                        "rows": meta["n_train"] + meta["n_holdout"], "mb": size / 1e6})
    return {"folder": str(root), "entries": entries,
            "total_mb": sum(e["mb"] for e in entries)}


def cache_clear(cache_dir: Path | None = None) -> int:
    """Delete every prepared-array entry; returns how many were removed."""
    import shutil

    root = (cache_dir or cache_root()) / "prepared"
    removed = 0
    for folder in sorted(root.glob("*")) if root.is_dir() else []:
        shutil.rmtree(folder, ignore_errors=True)
        removed += 1
    return removed


# --- jobs ------------------------------------------------------------------------------

def load_arrays(folder: Path) -> dict:
    return {name: np.load(Path(folder) / f"{name}.npy", mmap_mode="r")
            for name in ("X_train", "y_train", "X_holdout", "y_holdout", "row_id")}


def _predict(model, X, task_type: str, n_classes: int, log_target: bool):
    if task_type == "regression":
        out = np.asarray(model.predict(X), dtype=np.float64)
        return np.clip(np.expm1(out), 0.0, None) if log_target else out
    proba = np.asarray(model.predict_proba(X), dtype=np.float64)
    full = np.zeros((len(X), n_classes))
    full[:, np.asarray(model.classes_, dtype=int)] = proba  # classes unseen in training → 0
    return full[:, 1] if task_type == "binary" else full


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
    import sklearn.linear_model  # noqa: F401
    import sklearn.dummy  # noqa: F401


def execute_job(job: dict) -> dict:
    """Fit one (task, model, seed) and score it. Returns the result row plus predictions.

    Never raises for a model's own failure: the row then has status 'failed' and the error.
    """
    result = _fit_and_score(job)
    release_freed_memory()  # the model and its arrays are gone: the next job starts lower
    return result


def _fit_and_score(job: dict) -> dict:
    """execute_job's work; its locals (model, arrays) are freed when it returns."""
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
        y_fit = np.log1p(y_train) if job["log_target"] else y_train
        model = build_model(job["model"], task_type, job["seed"], job["threads"])
        with _thread_pools(MODELS[job["model"]].library).limit(limits=job["threads"]):
            t0 = time.perf_counter()
            model.fit(X_train, y_fit)
            t1 = time.perf_counter()
            prediction = _predict(model, X_hold, task_type, k, job["log_target"])
            t2 = time.perf_counter()
            train_prediction = _predict(model, X_train, task_type, k, job["log_target"])
        row.update(score=metric(y_hold, prediction), train_score=metric(y_train, train_prediction),
                   fit_seconds=round(t1 - t0, 4), predict_seconds=round(t2 - t1, 4),
                   status="ok")
    except Exception as exc:  # a model's failure is a result, not a crash of the run
        row.update(status="failed", error=f"{exc.__class__.__name__}: {exc}"[:2000])
        prediction = None
    row["finished_at"] = datetime.now(timezone.utc).isoformat(timespec="seconds")
    return {"row": row, "prediction": prediction}


# --- the run ---------------------------------------------------------------------------

@dataclass
class RunResult:
    """What a run did: counts, and per task the mean holdout score of each model."""

    out: Path
    suite: str
    jobs: int
    ok: int
    failed: int
    reused: int
    tasks: dict  # task name → PreparedTask.summary() plus "models": {model: stats}
    interrupted: bool = False
    failures: list = field(default_factory=list)  # rows of jobs that did not finish ok
    task_errors: dict = field(default_factory=dict)  # task → why a user procedure failed on it

    def to_dict(self) -> dict:
        return {"out": str(self.out), "suite": self.suite, "jobs": self.jobs, "ok": self.ok,
                "failed": self.failed, "reused": self.reused, "interrupted": self.interrupted,
                "failures": [{k: r.get(k) for k in ("task", "model", "seed", "status", "error")}
                             for r in self.failures],
                "tasks": {name: {"metric": t["metric"], "lower_is_better": t["lower_is_better"],
                                 "split": t["split"], "notes": t["notes"],
                                 "mean_score": {m: s["mean"] for m, s in t["models"].items()}}
                          for name, t in self.tasks.items()}}


class Progress:
    """A one-line progress bar with job count and ETA on a terminal; silent otherwise."""

    def __init__(self, total: int, enabled: bool, stream=None):
        self.total, self.done, self.enabled = total, 0, enabled and total > 0
        self.stream = stream or sys.stderr
        self.start = time.monotonic()

    def step(self, label: str = "") -> None:
        self.done += 1
        if not self.enabled:
            return
        elapsed = time.monotonic() - self.start
        eta = elapsed / self.done * (self.total - self.done)
        width = 28
        filled = int(width * self.done / self.total)
        bar = "#" * filled + "." * (width - filled)
        self.stream.write(f"\r[{bar}] {self.done}/{self.total} jobs  "
                          f"ETA {int(eta // 60)}:{int(eta % 60):02d}  {label[:30]:<30}")
        self.stream.flush()

    def close(self) -> None:
        if self.enabled:
            self.stream.write("\n")
            self.stream.flush()


def default_out(suite_name: str) -> Path:
    """``runs/SUITE-YYYYmmdd-HHMMSS`` under the current folder (never inside results/)."""
    stamp = datetime.now().strftime("%Y%m%d-%H%M%S")
    return Path("runs") / f"{suite_name}-{stamp}"


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
                             "folder": str(p.folder),
                             "cost": MODELS[model].cost(t.type) * p.n_train
                             * len(p.feature_names) / 1e6})
    return jobs


def _check_compatible(meta: dict | None, suite: Suite, prepared: list[PreparedTask],
                      out: Path, procedure: str) -> dict:
    new = {"format": STORE_FORMAT, "suite": suite.name, "suite_path": str(suite.path),
           "procedure": procedure, "tasks": {p.task.name: p.summary() for p in prepared}}
    if meta is None:
        return new
    if meta.get("procedure", "builtin") != procedure:
        raise UserError(f"{out} holds results of procedure '{meta.get('procedure')}', not "
                        f"'{procedure}'; use another --out.")
    if meta.get("format") != STORE_FORMAT:
        raise UserError(f"{out} was written by an incompatible tabpar version (results format "
                        f"{meta.get('format')}, this one reads {STORE_FORMAT}); use another "
                        f"--out.")
    if meta.get("suite") != suite.name:
        raise UserError(f"{out} holds a run of suite '{meta.get('suite')}', not "
                        f"'{suite.name}'; use another --out to keep runs apart.")
    for p in prepared:
        old = meta.get("tasks", {}).get(p.task.name)
        if old and old.get("fingerprint") != p.fingerprint:
            raise UserError(f"The data of task '{p.task.name}' changed since {out} was written "
                            f"(fingerprint {old.get('fingerprint')} then, {p.fingerprint} now); "
                            f"use another --out.")
        if old and old.get("task_key") != p.task.key():
            raise UserError(f"The definition of task '{p.task.name}' changed since {out} was "
                            f"written; use another --out.")
    merged = dict(meta)
    merged["tasks"] = {**meta.get("tasks", {}), **new["tasks"]}
    return merged


def run_suite(suite: str | Path | Suite = "quick", tasks=None, models=None, seeds: int = 3,
              out: str | Path | None = None, workers: int | None = None,
              progress: bool = False, on_event=None,
              job_timeout: float | None = None, procedure: Procedure | None = None,
              seed_offset: int = 0, executor: str = "local",
              scheduler: str | None = None,
              threads_per_model: int | None = None) -> RunResult:
    """Run tasks × models × seeds (seeds ``seed_offset`` .. ``seed_offset + K - 1``) and
    append every finished job to OUT.

    ``procedure``: the preprocessing (default: the built-in baseline). A user procedure that
    fails on a task is recorded for that task (``RunResult.task_errors``) and the rest go on.
    Returns a RunResult; per task and model the mean/std of the holdout score over seeds, in
    the task metric's own units and direction (``lower_is_better`` says which).
    ``threads_per_model`` overrides the thread count each model gets (default: cores //
    workers, one on a Dask worker). ``executor="dask"`` sends the jobs to the Dask scheduler
    at ``scheduler`` (``tcp://HOST:PORT``); each model then uses one thread (start workers
    with as many threads as they have cores to fill them).
    """
    procedure = procedure or builtin()
    connect_check(scheduler, executor, job_timeout)
    suite = suite if isinstance(suite, Suite) else load_suite(suite)
    selected = suite.select(tasks)
    model_names = check_models(models)
    if not isinstance(seeds, int) or seeds < 1:
        raise UserError(f"--seeds must be a positive whole number, not {seeds!r}.")
    cores = available_cores()
    if workers is None:
        workers = cores
    if workers < 1:
        raise UserError(f"--workers must be at least 1, not {workers}.")
    if job_timeout is not None and not job_timeout > 0:
        raise UserError(f"--job-timeout must be a positive number of seconds, not "
                        f"{job_timeout!r}.")
    threads = 1 if executor == "dask" else max(1, cores // workers)
    if threads_per_model is not None:  # an explicit choice, e.g. on a machine shared with others
        if threads_per_model < 1:
            raise UserError(f"threads_per_model must be at least 1, not {threads_per_model}.")
        threads = threads_per_model
    out = Path(out) if out is not None else default_out(suite.name)
    store = ResultsStore(out)
    say = on_event or (lambda message: None)

    prepared, task_errors = [], {}
    for task in selected:
        say(f"preparing {task.name}")
        try:
            prepared.append(prepare_task(task, procedure=procedure))
        except UserError as exc:
            if not procedure.user_code:
                raise
            task_errors[task.name] = str(exc)
    store.open_for_writing()
    try:
        old_meta = store.read_meta()
        meta = _check_compatible(old_meta, suite, prepared, out, procedure.name)
        jobs = plan_jobs(prepared, model_names, list(range(seed_offset, seed_offset + seeds)),
                         threads)
        done = {(r["task"], r["model"], r["seed"]) for r in store.rows()
                if r.get("status") == "ok"}
        todo = [j for j in jobs if (j["task"], j["model"], j["seed"]) not in done]
        todo.sort(key=lambda j: -j["cost"])  # longest first balances the workers
        reused = len(jobs) - len(todo)
        if executor == "local" and threads_per_model is None and 0 < len(todo) < workers:
            # fewer jobs than workers: give each job the cores the idle workers would have had
            threads = max(1, cores // len(todo))
            for job in todo:
                job["threads"] = threads
        if todo or meta != old_meta:
            # (skipped on a no-op rerun, which then writes nothing)
            meta["versions"] = library_versions()
            meta["cores"], meta["workers"], meta["threads_per_model"] = cores, workers, threads
            meta["executor"] = executor if executor == "local" else f"dask {scheduler}"
            store.write_meta(meta)
        versions = meta.get("versions")
        bar = Progress(len(todo), progress)
        interrupted = _execute(todo, workers, store, versions, prepared, bar, job_timeout,
                               executor, scheduler)
        bar.close()
    finally:
        store.close()
    result = _summarise(out, suite.name, jobs, reused, prepared, store, interrupted)
    result.task_errors = task_errors
    return result


def _record(result: dict, store: ResultsStore, versions: dict, by_name: dict) -> None:
    row = result["row"]
    p = by_name[row["task"]]
    row.update(n_train=p.n_train, n_holdout=p.n_holdout, n_features=len(p.feature_names),
               versions=versions, predictions=None)
    if result["prediction"] is not None:
        row_id = np.load(p.folder / "row_id.npy")
        row["predictions"] = store.write_predictions(row["task"], row["model"], row["seed"],
                                                     row_id, result["prediction"])
    store.append(row)


def _lost_row(job: dict, reason: str, status: str) -> dict:
    now = datetime.now(timezone.utc).isoformat(timespec="seconds")
    row = {k: job[k] for k in ("task", "model", "seed", "metric", "lower_is_better",
                               "fingerprint", "procedure", "code", "threads")}
    row.update(status=status, error=reason, score=None, train_score=None, fit_seconds=None,
               predict_seconds=None, started_at=now, finished_at=now)
    return {"row": row, "prediction": None}


def _in_memory(job: dict) -> dict:
    return {k: np.asarray(v) for k, v in load_arrays(job["folder"]).items()}


def connect_check(scheduler: str | None, executor: str, job_timeout) -> None:
    """UserError for a dask executor that cannot work as asked, before any job starts."""
    if executor not in ("local", "dask"):
        raise UserError(f"Unknown executor '{executor}'; use local or dask.")
    if executor == "local":
        if scheduler:
            raise UserError("--scheduler needs --executor dask.")
        return
    if not scheduler:
        raise UserError("--executor dask needs --scheduler tcp://HOST:PORT, the address of a "
                        "running Dask scheduler.")
    if job_timeout is not None:
        raise UserError("--job-timeout works with the local executor only (a Dask worker "
                        "cannot stop one running job); leave it out with --executor dask.")
    try:
        import distributed  # noqa: F401
    except ImportError:
        raise UserError("--executor dask needs the 'distributed' package: pip install "
                        "'tabpar[dask]'.") from None
    from distributed import Client

    try:
        Client(scheduler, timeout=10, set_as_default=False).close()
    except (OSError, TimeoutError, ValueError) as exc:
        raise UserError(f"Cannot reach the Dask scheduler at {scheduler} ({exc.__class__.__name__}); "
                        f"start one with 'dask scheduler' or check the address.") from None


def _execute(todo, workers, store, versions, prepared, bar, job_timeout=None,
             executor: str = "local", scheduler: str | None = None) -> bool:
    """Run the jobs, recording each as it finishes; True when interrupted (Ctrl-C/SIGTERM)."""
    by_name = {p.task.name: p for p in prepared}

    def on_term(signum, frame):
        raise KeyboardInterrupt

    def on_result(job, result):
        _record(result, store, versions, by_name)
        bar.step(f"{job['task']}/{job['model']}")

    def on_lost(job, reason, status):
        on_result(job, _lost_row(job, reason, status))

    previous = signal.signal(signal.SIGTERM, on_term)
    try:
        if executor == "dask":
            DaskPool(execute_job, scheduler, payload=_in_memory,
                     payload_key=lambda job: job["folder"]).run(todo, on_result, on_lost)
        elif workers == 1 and job_timeout is None:
            for job in todo:  # in this process: no start-up cost, easy to debug
                on_result(job, execute_job(job))
        else:
            warm = functools.partial(warm_imports, sorted({job["model"] for job in todo}))
            LocalPool(execute_job, workers, job_timeout, initializer=warm).run(
                todo, on_result, on_lost)
        return False
    except KeyboardInterrupt:
        return True
    finally:
        signal.signal(signal.SIGTERM, previous)


def _summarise(out, suite_name, jobs, reused, prepared, store, interrupted) -> RunResult:
    rows = {(r["task"], r["model"], r["seed"]): r for r in store.rows()}
    planned = {(j["task"], j["model"], j["seed"]) for j in jobs}
    mine = [rows[k] for k in planned if k in rows]
    ok = sum(r["status"] == "ok" for r in mine)
    failed = sum(r["status"] != "ok" for r in mine)
    tasks = {}
    for p in prepared:
        info = p.summary()
        models = {}
        for model in dict.fromkeys(j["model"] for j in jobs):
            scores = [r for r in mine if r["task"] == p.task.name and r["model"] == model
                      and r["status"] == "ok"]
            if not scores:
                continue
            values = np.array([r["score"] for r in scores], dtype=float)
            models[model] = {
                "mean": float(values.mean()),
                "std": float(values.std(ddof=1)) if len(values) > 1 else 0.0,
                "n": len(values),
                "train_mean": float(np.mean([r["train_score"] for r in scores])),
                "fit_seconds": float(np.mean([r["fit_seconds"] for r in scores])),
            }
        info["models"] = models
        tasks[p.task.name] = info
    failures = sorted((r for r in mine if r["status"] != "ok"),
                      key=lambda r: (r["task"], r["model"], r["seed"]))
    return RunResult(out=Path(out), suite=suite_name, jobs=len(jobs), ok=ok, failed=failed,
                     reused=reused, tasks=tasks, interrupted=interrupted, failures=failures)


