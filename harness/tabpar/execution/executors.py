"""Local worker processes that run jobs, with a per-job time limit.

Each worker is a ``spawn``-started process that runs one job at a time. A job over its time
limit is stopped by killing its worker, which is then replaced, so the pool survives; a worker
that dies on its own (a crash in a native library, the out-of-memory killer) is replaced too and
its job reported as failed. The job function is passed in, so this module knows nothing of what
a job is.
"""
from __future__ import annotations

import os
import signal
import sys
import time
from multiprocessing import get_context
from multiprocessing.connection import wait
from pathlib import Path

from tabpar.common.errors import UserError

# spawn, not a forkserver: a forkserver that had imported the libraries started workers far
# faster (bench/parallel.py --start-methods), but it lives as long as this process and keeps
# the environment of its first start, so a later run's environment would not reach its workers
_CONTEXT = get_context("spawn")


def missing_guard_error(what: str) -> UserError:
    """The UserError for a script whose worker processes would re-run it: ``what`` says what
    went wrong, the rest how to fix it."""
    return UserError(f"{what}: a script that calls tabpar must do so under "
                     f"'if __name__ == \"__main__\":', as each worker process imports the "
                     f"script again; add that guard or pass workers=1.")


def unguarded_main_call() -> bool:
    """True when the caller runs in a script's top-level code outside an
    ``if __name__ == "__main__":`` block: a spawned worker imports the main script again, so
    it would run that code (and start workers of its own) instead of a job.

    Examples
    --------
    >>> unguarded_main_call()  # called from a function of a module, not a script's top level
    False
    """
    main = sys.modules.get("__main__")
    main_globals = getattr(main, "__dict__", None)
    frame = sys._getframe(1)
    while frame is not None:
        if frame.f_globals is main_globals and frame.f_code.co_name == "<module>":
            return not _inside_name_guard(frame.f_code.co_filename, frame.f_lineno)
        frame = frame.f_back
    return False


def _inside_name_guard(path: str, line: int) -> bool:
    """Whether ``line`` of the script at ``path`` lies in a top-level ``if`` on ``__name__``
    (an unreadable script counts as guarded: workers could not re-run it either)."""
    import ast

    try:
        tree = ast.parse(Path(path).read_text(encoding="utf-8"))
    except (OSError, SyntaxError, UnicodeDecodeError, ValueError):
        return True
    for node in tree.body:
        if isinstance(node, ast.If) and node.body and any(
                isinstance(n, ast.Name) and n.id == "__name__" for n in ast.walk(node.test)):
            if node.body[0].lineno <= line <= (node.end_lineno or line):
                return True
    return False


def _die_with_parent() -> None:
    """Ask Linux to kill this worker when its parent dies (even by SIGKILL)."""
    if not sys.platform.startswith("linux"):
        return
    try:
        import ctypes

        libc = ctypes.CDLL("libc.so.6", use_errno=True)
        libc.prctl(1, signal.SIGKILL)  # 1 = PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass


def _worker_main(conn, function, initializer, parent_pid):
    # the parent handles Ctrl-C and SIGTERM and stops its workers itself
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _die_with_parent()
    if parent_pid is not None and os.getppid() != parent_pid:  # the parent died first
        return
    if initializer is not None:
        initializer()  # imports up front, so a job's time limit measures the job alone
    try:
        conn.send(("ready", None))  # a worker that dies before this died while starting
        while True:
            job = conn.recv()
            if job is None:
                return
            conn.send(("started", None))
            conn.send(("done", function(job)))
    except (EOFError, BrokenPipeError, ConnectionResetError):
        return  # the parent is gone: nothing to report to


class _Worker:
    def __init__(self, function, initializer):
        self.conn, child = _CONTEXT.Pipe()
        # a forkserver's worker is the forkserver's child, not this process's
        parent = os.getpid() if _CONTEXT.get_start_method() == "spawn" else None
        self.process = _CONTEXT.Process(target=_worker_main,
                                        args=(child, function, initializer, parent),
                                        daemon=True)
        self.process.start()
        child.close()
        self.job = None
        self.deadline = None  # set when the worker reports the job started
        self.ready = False

    def give(self, job):
        self.job = job
        self.deadline = None
        self.conn.send(job)

    def stop(self, kill=False):
        try:
            if kill:
                self.process.kill()
            else:
                self.conn.send(None)
        except (OSError, BrokenPipeError):
            pass
        self.process.join(timeout=5)
        if self.process.is_alive():
            self.process.kill()
            self.process.join(timeout=5)  # bounded: a stop must never hang the run's exit
        self.conn.close()


class LocalPool:
    """Run ``function(job)`` for every job in up to ``workers`` processes.

    ``on_result(job, result)`` is called in this process for each finished job;
    ``on_lost(job, reason, status)`` for a job whose worker was stopped (status ``timeout``) or
    died (status ``failed``).
    """

    def __init__(self, function, workers: int, job_timeout: float | None = None,
                 initializer=None):
        self.function = function
        self.workers = workers
        self.job_timeout = job_timeout
        self.initializer = initializer

    def run(self, jobs, on_result, on_lost) -> None:
        queue = list(jobs)
        pool = [_Worker(self.function, self.initializer)
                for _ in range(min(self.workers, len(queue)))]
        any_ready, died_starting = False, 0
        try:
            for worker in pool:
                if queue:
                    worker.give(queue.pop(0))
            while any(w.job is not None for w in pool):
                busy = [w for w in pool if w.job is not None]
                deadlines = [w.deadline for w in busy if w.deadline is not None]
                wait_for = (max(0.0, min(deadlines) - time.monotonic()) if deadlines else None)
                ready = wait([w.conn for w in busy] + [w.process.sentinel for w in busy],
                             timeout=wait_for)
                for i, worker in enumerate(pool):
                    if worker.job is None:
                        continue
                    job = worker.job
                    died = worker.process.sentinel in ready
                    if worker.conn in ready:
                        try:
                            kind, result = worker.conn.recv()
                        except (EOFError, OSError):
                            kind, result = "lost", None
                        if kind == "ready":
                            worker.ready = any_ready = True
                            continue
                        if kind == "started":
                            if self.job_timeout is not None:
                                worker.deadline = time.monotonic() + self.job_timeout
                            continue
                        died = kind != "done"
                        if not died:
                            worker.job = None
                            on_result(job, result)
                    if died:
                        worker.process.join(timeout=5)
                        died_starting += not worker.ready
                        if not any_ready and died_starting >= len(pool):
                            raise missing_guard_error(
                                f"Every worker process died while starting (exit code "
                                f"{worker.process.exitcode}), before running a job")
                        pool[i] = self._replace(worker, kill=True)
                        on_lost(job, f"the worker process died (exit code "
                                     f"{worker.process.exitcode})", "failed")
                    elif worker.job is None:
                        pass  # its job just finished
                    elif worker.deadline is not None and time.monotonic() >= worker.deadline:
                        pool[i] = self._replace(worker, kill=True)
                        on_lost(job, f"stopped after {self.job_timeout:g} s (--job-timeout)",
                                "timeout")
                    else:
                        continue
                    if pool[i].job is None and queue:
                        pool[i].give(queue.pop(0))
        finally:
            for worker in pool:
                worker.stop(kill=worker.job is not None)

    def _replace(self, worker, kill):
        worker.stop(kill=kill)
        return _Worker(self.function, self.initializer)


class DaskPool:
    """Run jobs on an existing Dask cluster (``distributed``), results back in this process.

    Workers need tabpar installed (the same version) but no data and no cache: each task's
    prepared arrays are sent to the cluster once (``Client.scatter``) and every job of the task
    refers to them. ``payload(job)`` returns those arrays for a job; jobs sharing a payload key
    share one scattered copy.
    """

    def __init__(self, function, scheduler: str, payload, payload_key, connect_timeout=10):
        self.function = function
        self.scheduler = scheduler
        self.payload = payload
        self.payload_key = payload_key
        self.connect_timeout = connect_timeout

    def run(self, jobs, on_result, on_lost) -> None:
        from distributed import Client, as_completed

        client = Client(self.scheduler, timeout=self.connect_timeout,
                        set_as_default=False)
        try:
            scattered, futures = {}, {}
            for job in jobs:
                key = self.payload_key(job)
                if key not in scattered:
                    # one remote copy per task, shared by its jobs; hash=False: no content hashing
                    scattered[key] = client.scatter([self.payload(job)], hash=False)[0]
                remote_job = dict(job, arrays=scattered[key])
                futures[client.submit(self.function, remote_job, pure=False)] = job
            for future in as_completed(futures, loop=client.loop):
                job = futures[future]
                try:
                    result = future.result()
                except Exception as exc:  # the worker died or the task was lost
                    on_lost(job, f"the Dask cluster lost the job: {exc.__class__.__name__}: "
                                 f"{exc}", "failed")
                    continue
                on_result(job, result)
        except BaseException:
            for future in futures:
                future.cancel()
            raise
        finally:
            client.close()


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
