"""The runner: a suite's tasks → prepared arrays (cached) → jobs (task × model × seed) →
the append-only results store.

Each task is loaded, split and prepared once, in the parent process, and its arrays are written
to the on-disk cache; worker processes memory-map them, so no job repeats that work and no large
array crosses a pipe. Jobs run in ``spawn``-started worker processes, each model limited to
``cores // workers`` threads so the machine is never oversubscribed; a single job, one worker,
or a script whose workers would re-run it (no ``__main__`` guard) runs them in this process with
every core. Jobs start longest first by predicted time (``estimates``).
"""
from __future__ import annotations

import functools
import signal
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.system import available_cores
from tabpar.common.text import html_table
from tabpar.data.suite_values import check_seconds, check_seed_count
from tabpar.data.suites import Suite, load_suite
from tabpar.execution.cache import PreparedTask, prepare_task
from tabpar.execution.executors import (
    DaskPool,
    LocalPool,
    connect_check,
    missing_guard_error,
    unguarded_main_call,
)
from tabpar.execution.jobs import (
    execute_job,
    in_memory,
    lost_row,
    plan_jobs,
    still_to_run,
    warm_imports,
)
from tabpar.execution.progress import Progress
from tabpar.execution.provenance import library_versions
from tabpar.execution.run_text import run_text
from tabpar.execution.store import STORE_FORMAT, ResultsStore
from tabpar.models.zoo import check_models
from tabpar.procedure.variants import Procedure, builtin


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

    def to_frame(self) -> pd.DataFrame:
        """One row per task and model: mean and spread of the holdout score over seeds (the
        task metric's units; ``lower_is_better`` gives the direction), train score, fit time."""
        import pandas as pd
        return pd.DataFrame([{"task": name, "model": model, "metric": t["metric"],
                              "lower_is_better": t["lower_is_better"], **stats}
                             for name, t in self.tasks.items()
                             for model, stats in t["models"].items()])

    def __str__(self) -> str:
        return run_text(self)

    def _repr_html_(self) -> str:
        summary = {k: v for k, v in self.to_dict().items() if k not in ("tasks", "failures")}
        return (html_table(summary, caption=f"run of suite {self.suite}")
                + self.to_frame().to_html(index=False, escape=True))


def default_out(suite_name: str) -> Path:
    """``runs/SUITE-YYYYmmdd-HHMMSS`` under the current folder (never inside results/)."""
    stamp = datetime.now().strftime("%Y%m%d-%H%M%S")
    return Path("runs") / f"{suite_name}-{stamp}"


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
    """Run a suite's tasks × models × seeds and append every finished job to ``out``.

    Parameters
    ----------
    suite : str, path or Suite
        A built-in suite name (``quick``, ``default``), a suite file or a loaded Suite.
    tasks, models : list of str, optional
        Subsets of the suite's tasks and of the zoo (default: all of each).
    seeds : int
        How many seeds per model: ``seed_offset`` .. ``seed_offset + seeds - 1``.
    out : path, optional
        The results folder (default ``runs/SUITE-DATE-TIME``); a rerun with the same folder
        skips the jobs already finished.
    workers : int, optional
        Local worker processes (default: one per core), never more than there are jobs; 1,
        a single job, or a call from a script's top level outside
        ``if __name__ == "__main__":`` runs the jobs in this process.
    job_timeout : float, optional
        Seconds after which a local job is stopped and recorded as timed out.
    procedure : Procedure, optional
        The preprocessing (default: the built-in baseline). A user procedure that fails on a
        task is recorded for that task (``RunResult.task_errors``) and the rest go on.
    executor, scheduler : str
        ``"dask"`` with ``scheduler="tcp://HOST:PORT"`` sends the jobs to a Dask cluster; each
        model then uses one thread.
    threads_per_model : int, optional
        Overrides the threads each model gets (default: cores // workers).

    Returns
    -------
    RunResult
        Per task and model the mean and spread over seeds of the holdout score, in the task
        metric's own units and direction (``lower_is_better`` says which).

    Examples
    --------
    >>> import tempfile, tabpar
    >>> result = tabpar.run("quick", tasks=["attrition"], models=["naive"], seeds=1,
    ...                     out=tempfile.mkdtemp(), workers=1)
    >>> result.ok, round(result.tasks["attrition"]["models"]["naive"]["mean"], 3)  # ROC AUC
    (1, 0.5)
    """
    procedure = procedure or builtin()
    connect_check(scheduler, executor, job_timeout)
    suite = suite if isinstance(suite, Suite) else load_suite(suite)
    selected = suite.select(tasks)
    model_names = check_models(models)
    check_seed_count(seeds, seed_offset)
    cores = available_cores()
    if workers is None:
        workers = cores
    if workers < 1:
        raise UserError(f"--workers must be at least 1, not {workers}.")
    check_seconds(job_timeout, "--job-timeout")
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
        todo = still_to_run(jobs, store.rows())
        todo.sort(key=lambda j: -j["cost"])  # longest first balances the workers
        reused = len(jobs) - len(todo)
        in_process = _in_process(todo, workers, job_timeout, executor)
        if executor == "local" and threads_per_model is None and todo and (
                in_process or len(todo) < workers):
            # jobs one after another, or fewer jobs than workers: give each job the cores the
            # idle workers would have had
            threads = cores if in_process else max(1, cores // len(todo))
            for job in todo:
                job["threads"] = threads
        if todo or meta != old_meta:
            # (skipped on a no-op rerun, which then writes nothing)
            meta["versions"] = library_versions()
            meta["cores"], meta["workers"], meta["threads_per_model"] = cores, workers, threads
            meta["executor"] = executor if executor == "local" else f"dask {scheduler}"
            store.write_meta(meta)
        versions = meta.get("versions")
        bar = Progress(len(todo), progress, jobs=todo, workers=1 if in_process else workers)
        interrupted = _execute(todo, workers, store, versions, prepared, bar, job_timeout,
                               executor, scheduler, in_process)
        bar.close()
    finally:
        store.close()
    result = _summarise(out, suite.name, jobs, reused, prepared, store, interrupted)
    result.task_errors = task_errors
    return result


def _record(result: dict, store: ResultsStore, versions: dict, by_name: dict,
            row_ids: dict) -> None:
    row = result["row"]
    p = by_name[row["task"]]
    row.update(n_train=p.n_train, n_holdout=p.n_holdout, n_features=len(p.feature_names),
               versions=versions, predictions=None)
    if result["prediction"] is not None:
        row["predictions"] = store.write_predictions(row["task"], row["model"], row["seed"],
                                                     row_ids[row["task"]],
                                                     result["prediction"])
    store.append(row)


def _in_process(todo, workers, job_timeout, executor) -> bool:
    """Whether the jobs run in this process: one job or one worker (no process is worth
    starting), or a script without a ``__main__`` guard (a worker would run it again)."""
    if executor != "local":
        return False
    unguarded = unguarded_main_call()
    if unguarded and job_timeout is not None:
        raise missing_guard_error("A per-job time limit (--job-timeout) needs worker "
                                  "processes, and each would run the calling script again")
    return job_timeout is None and (min(workers, len(todo)) <= 1 or unguarded)


def _execute(todo, workers, store, versions, prepared, bar, job_timeout=None,
             executor: str = "local", scheduler: str | None = None,
             in_process: bool = False) -> bool:
    """Run the jobs, recording each as it finishes; True when interrupted (Ctrl-C/SIGTERM)."""
    by_name = {p.task.name: p for p in prepared}
    # held in memory (n_holdout integers per task), so a cache entry removed during the run
    # (tabpar cache clear) cannot lose a job that finished
    row_ids = {p.task.name: np.array(np.load(p.folder / "row_id.npy"))
               for p in prepared if any(job["task"] == p.task.name for job in todo)}

    def on_term(signum, frame):
        raise KeyboardInterrupt

    def on_result(job, result):
        _record(result, store, versions, by_name, row_ids)
        bar.step(f"{job['task']}/{job['model']}", job, result["row"].get("fit_seconds"))

    def on_lost(job, reason, status):
        on_result(job, lost_row(job, reason, status))

    previous = signal.signal(signal.SIGTERM, on_term)
    try:
        if executor == "dask":
            DaskPool(execute_job, scheduler, payload=in_memory,
                     payload_key=lambda job: job["folder"]).run(todo, on_result, on_lost)
        elif in_process:  # no start-up cost (a worker imports the libraries again), easy to debug
            for job in todo:
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
