"""User procedures (``module:function``) prepared in a worker process, like a job.

A user's code may hang, print, call ``sys.exit`` or crash its interpreter; none of that may
reach tabpar's own process. So the code is imported and run only in a ``LocalPool`` worker,
under the job time limit, with the worker's stdout pointed at stderr (prints must not break
``--json``). The worker leaves each task's prepared arrays in the cache, where the run then
finds them: the parent never imports the user's module.
"""
from __future__ import annotations

import os
import sys

from tabpar.common.errors import UserError
from tabpar.data.suites import Task
from tabpar.execution.cache import prepare_task
from tabpar.execution.executors import LocalPool
from tabpar.procedure.variants import (
    BUILTIN,
    Procedure,
    describe_failure,
    resolve_procedure,
)


def runs_user_code(spec: str) -> bool:
    """Whether a procedure SPEC names user code (``module:function``), not the built-in
    procedure or a variant file.

    >>> runs_user_code("builtin"), runs_user_code("my_prep:make")
    (False, True)
    """
    spec = str(spec)
    return spec != BUILTIN and not spec.endswith(".toml")


def _prepare_in_worker(job: dict) -> dict:
    """In a worker: prepare ``job["task"]`` with procedure ``job["spec"]`` into the cache.

    Returns the procedure's name and key, or ``error``: the sentence to show for the task.
    """
    os.dup2(sys.stderr.fileno(), sys.stdout.fileno())  # prints of C code too
    sys.stdout = sys.stderr
    spec, task = job["spec"], job["task"]
    try:
        procedure = resolve_procedure(spec)
        prepare_task(task, procedure=procedure)
    except UserError as exc:
        return {"error": str(exc)}
    except (Exception, SystemExit) as exc:
        return {"error": f"Procedure '{spec}' failed on task '{task.name}' "
                         f"({describe_failure(exc)}); fix it so that it returns numeric "
                         f"features."}
    return {"name": procedure.name, "key": procedure.key, "error": None}


def _warm_up() -> None:
    """Import what preparing needs before the first task, so the time limit measures the
    user's code and the preparation alone (as a job's measures the job)."""
    import sklearn.base  # noqa: F401

    import tabpar.procedure.baseline  # noqa: F401


def _gone(spec: str):
    def build(task: Task):
        raise UserError(f"The prepared arrays of procedure '{spec}' for task '{task.name}' "
                        f"were removed while tabpar ran; run the command again.")
    return build


def isolated_procedure(spec: str, tasks: list[Task], job_timeout: float | None = None):
    """(Procedure, {task name: why it failed}) for ``spec`` on ``tasks``.

    The built-in procedure and variant files are resolved here; user code is prepared task by
    task in a worker process (see the module docstring), each task within ``job_timeout``
    seconds (None: no limit). UserError when it fails on every task.

    >>> isolated_procedure("builtin", [])[0].name
    'builtin'
    """
    if not runs_user_code(spec):
        return resolve_procedure(spec), {}
    results: dict = {}

    def on_result(job, result):
        results[job["task"].name] = result

    def on_lost(job, reason, status):
        what = ("did not finish" if status == "timeout" else "crashed its worker process")
        results[job["task"].name] = {
            "error": f"Procedure '{spec}' {what} while preparing task '{job['task'].name}' "
                     f"({reason}); fix it, or give it more time with --job-timeout."}

    LocalPool(_prepare_in_worker, 1, job_timeout, initializer=_warm_up).run(
        [{"spec": str(spec), "task": task} for task in tasks], on_result, on_lost)
    errors = {name: r["error"] for name, r in results.items() if r["error"] is not None}
    done = [r for r in results.values() if r["error"] is None]
    if not done:
        first = next(iter(errors.values()))
        raise UserError(first if len(tasks) == 1 else
                        f"{first} (it failed on every task compared).")
    procedure = Procedure(name=done[0]["name"], key=done[0]["key"], build=_gone(spec),
                          user_code=True)
    return procedure, errors
