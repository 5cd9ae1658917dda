"""Faults lose nothing and runs are reproducible (issue 8).

- A model that raises, a job over ``--job-timeout``, a worker that dies: recorded, the rest go on.
- SIGINT / SIGTERM / SIGKILL of a real ``tabpar run`` process: every finished job is kept as a
  complete line, no worker process outlives it, and a rerun resumes without repeating jobs.
- A second ``tabpar run`` on a folder in use is refused (a lock).
- Writes are atomic (``tabpar.execution.store.atomic_write_bytes``; leaderboards; the prepared cache).
- The same jobs run twice (the session's quick run, and two of its tasks again through the
  console script with a fresh cache) give identical rows and predictions files.
- Suite paths resolve against the suite file; names from suite files or the command line never
  escape the folder they belong in.

Moved elsewhere, each checked once: provenance of every row (tests/test_run_end_to_end.py);
``place`` / ``compare`` refusing changed data, user files never unpickled and task names that
could escape a folder (cases of the bad-input matrix, tests/test_bad_input.py).

Models that fail on purpose are test-only stand-ins (``STAND_IN_MODELS`` below), added to
``tabpar.models.zoo.MODELS`` in this process with monkeypatch and, for worker processes and ``tabpar``
subprocesses, by a ``sitecustomize`` module on ``PYTHONPATH`` (active only when
``TABPAR_TEST_MODELS=1``). Every data file is a SYNTHETIC stand-in generated here.
"""
from __future__ import annotations

import collections
import errno
import json
import os
import re
import signal
import stat
import subprocess
import sys
import time
from contextlib import contextmanager
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import tabpar
import tabpar.execution.store
import tabpar.models.zoo
from tabpar.cli.main import main
from tabpar.common.errors import UserError
from tabpar.common.files import StateWarning
from tabpar.execution.store import atomic_write_bytes, read_job_rows

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"),
                                reason="signals, /proc and PR_SET_PDEATHSIG are Linux's")

TIMING_FIELDS = ("fit_seconds", "predict_seconds", "started_at", "finished_at")
SEEDED_ZOO = ["naive", "linear", "rf", "et", "hgb", "xgb", "lgbm"]
DEADLINE = 180  # seconds: a generous bound so a broken run cannot hang the tests (not a check)

STAND_IN_MODELS = '''
"""Test-only stand-in models for tabpar's reliability tests (synthetic failures)."""
import os
import time

import numpy as np


class _Floor:
    def __init__(self, task_type="regression"):
        self.task_type = task_type

    def fit(self, X, y):
        y = np.asarray(y)
        if self.task_type == "regression":
            self.mean_ = float(np.mean(y))
        else:
            self.classes_ = np.unique(y)
            self.prior_ = np.array([np.mean(y == c) for c in self.classes_])
        return self

    def predict(self, X):
        return np.full(len(X), self.mean_)

    def predict_proba(self, X):
        return np.tile(self.prior_, (len(X), 1))


class RaisesInFit(_Floor):
    def fit(self, X, y):
        raise RuntimeError("synthetic failure in fit (stand-in model boom_fit)")


class RaisesInPredict(_Floor):
    def predict(self, X):
        raise ValueError("synthetic failure in predict (stand-in model boom_predict)")

    predict_proba = predict


class Sleeps(_Floor):
    def fit(self, X, y):
        time.sleep(float(os.environ.get("TABPAR_TEST_SLEEP", "0")))
        return super().fit(X, y)


class KillsItsProcess(_Floor):
    def fit(self, X, y):
        os._exit(3)  # like a crash in a native library


def specs():
    import dataclasses

    from tabpar.models.zoo import ModelSpec

    def builder(cls):
        return lambda task_type, seed, threads: cls(task_type)

    # the cost orders the jobs (highest first): the failing ones before naive (cost ~0.01);
    # ModelSpec takes one cost, or (regression, classification) costs
    per_type = "costs" in {f.name for f in dataclasses.fields(ModelSpec)}

    def spec(name, description, cls, cost):
        return ModelSpec(name, description, builder(cls), False,
                         (cost, cost) if per_type else cost)

    return [
        spec("boom_fit", "raises in fit", RaisesInFit, 100.0),
        spec("boom_predict", "raises in predict", RaisesInPredict, 90.0),
        spec("sleepy", "sleeps in fit, runs first", Sleeps, 1000.0),
        spec("crash", "kills its worker process", KillsItsProcess, 500.0),
        spec("sleepy_last", "sleeps in fit, runs last", Sleeps, 0.0),
    ]


def register(models):
    for spec in specs():
        models[spec.name] = spec
'''

SITECUSTOMIZE = '''
import os

if os.environ.get("TABPAR_TEST_MODELS") == "1":
    import tabpar.models.zoo
    import tabpar_stand_in_models

    tabpar_stand_in_models.register(tabpar.models.zoo.MODELS)
'''


# --- helpers ---------------------------------------------------------------------------------

@pytest.fixture(scope="session")
def stand_ins(tmp_path_factory):
    folder = tmp_path_factory.mktemp("stand-in-models")
    (folder / "tabpar_stand_in_models.py").write_text(STAND_IN_MODELS)
    (folder / "sitecustomize.py").write_text(SITECUSTOMIZE)
    return folder


def stand_in_env(folder: Path, sleep: float) -> dict:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(p for p in (str(folder), env.get("PYTHONPATH")) if p)
    env.update(TABPAR_TEST_MODELS="1", TABPAR_TEST_SLEEP=str(sleep))
    return env


def register_in_process(monkeypatch, folder: Path) -> None:
    monkeypatch.syspath_prepend(str(folder))
    import tabpar_stand_in_models

    for spec in tabpar_stand_in_models.specs():
        monkeypatch.setitem(tabpar.models.zoo.MODELS, spec.name, spec)


def synthetic_frame(n: int = 120, seed: int = 0) -> pd.DataFrame:
    """SYNTHETIC rows: two features and a numeric target."""
    rng = np.random.default_rng(seed)
    x1 = rng.normal(size=n).round(4)
    x2 = rng.integers(0, 5, n)
    return pd.DataFrame({"x1": x1, "x2": x2, "y": (3 * x1 + x2 + rng.normal(size=n)).round(4)})


def write_suite(folder: Path, tasks=("t1", "t2"), name: str = "synthetic",
                source: str = "csv:d.csv") -> Path:
    """A suite of regression tasks on one SYNTHETIC table (t2 predicts x1 instead of y)."""
    folder.mkdir(parents=True, exist_ok=True)
    if source == "csv:d.csv":
        synthetic_frame().to_csv(folder / "d.csv", index=False)
    lines = ["[suite]", f'name = "{name}"']
    for i, task in enumerate(tasks):
        lines += ["", "[[task]]", f'name = "{task}"', f'source = "{source}"',
                  f'target = "{"y" if i % 2 == 0 else "x1"}"', 'type = "regression"',
                  'metric = "rmse"']
    path = folder / "s.toml"
    path.write_text("\n".join(lines) + "\n")
    return path


def keys(rows, status=None) -> collections.Counter:
    return collections.Counter((r["task"], r["model"], r["seed"]) for r in rows
                               if status is None or r["status"] == status)


def _processes() -> dict:
    """pid → (ppid, state, cmdline) of every process, from /proc."""
    found = {}
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            text = Path(f"/proc/{entry}/stat").read_text()
            cmdline = Path(f"/proc/{entry}/cmdline").read_bytes()
        except OSError:
            continue
        rest = text[text.rfind(")") + 2:].split()
        found[int(entry)] = (int(rest[1]), rest[0], cmdline)
    return found


def descendants(pid: int) -> dict:
    """pid → cmdline of every living descendant of ``pid``."""
    table = _processes()
    out, frontier = {}, [pid]
    while frontier:
        parent = frontier.pop()
        for child, (ppid, state, cmdline) in table.items():
            if ppid == parent and child not in out and state != "Z":
                out[child] = cmdline
                frontier.append(child)
    return out


def still_running(procs: dict) -> dict:
    """Those of ``procs`` (pid → cmdline) that still run (same pid and cmdline, not zombie)."""
    table = _processes()
    return {pid: cmd for pid, cmd in procs.items()
            if pid in table and table[pid][2] == cmd and table[pid][1] != "Z"}


def wait_until(condition, what: str, proc=None, logs: Path | None = None,
               timeout: float = DEADLINE):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        value = condition()
        if value:
            return value
        if proc is not None and proc.poll() is not None:
            break
        time.sleep(0.2)
    detail = ""
    if logs is not None:
        detail = "".join(f"\n--- {p.name}:\n{p.read_text()[-3000:]}" for p in
                         sorted(logs.glob("*.txt")))
    pytest.fail(f"gave up waiting for {what}{detail}")


@contextmanager
def tabpar_process(args, env, cwd: Path, logs: Path):
    """A real ``tabpar`` process in its own session; it and everything it started are killed
    on the way out, whatever the test did."""
    logs.mkdir(parents=True, exist_ok=True)
    with open(logs / "stdout.txt", "w") as out, open(logs / "stderr.txt", "w") as err:
        # SIGINT as an interactive shell leaves it: a test run started in the background
        # inherits it ignored, and Python then never turns Ctrl-C into KeyboardInterrupt
        proc = subprocess.Popen([sys.executable, "-m", "tabpar.cli.main", *args], cwd=cwd, env=env,
                                stdout=out, stderr=err, start_new_session=True,
                                preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
        try:
            yield proc
        finally:
            for _ in range(2):  # the session leader, then anything it left in its group
                try:
                    os.killpg(proc.pid, signal.SIGKILL)
                except (ProcessLookupError, PermissionError):
                    pass
                try:
                    proc.wait(timeout=30)
                except subprocess.TimeoutExpired:
                    pass


def rows_at_least(path: Path, n: int):
    rows = read_job_rows(path)
    return rows if len(rows) >= n else None


# --- a model that raises, a job that hangs, a worker that dies ---------------------------------

def test_a_model_that_raises_is_recorded_failed_and_the_other_jobs_go_on(
        tmp_path, stand_ins, monkeypatch, capsys):
    register_in_process(monkeypatch, stand_ins)
    suite = write_suite(tmp_path / "suite")
    out = tmp_path / "out"
    args = ["run", "--suite", str(suite), "--models", "naive,boom_fit,boom_predict",
            "--seeds", "1", "--workers", "1", "--out", str(out)]  # workers=1: in this process
    code = main(args)
    printed = capsys.readouterr().out
    assert code == 1
    rows = read_job_rows(out / "jobs.jsonl")
    assert keys(rows) == collections.Counter({(t, m, 0): 1 for t in ("t1", "t2")
                                              for m in ("naive", "boom_fit", "boom_predict")})
    by_model = collections.defaultdict(list)
    for r in rows:
        by_model[r["model"]].append(r)
    for r in by_model["boom_fit"]:
        assert r["status"] == "failed" and r["score"] is None and r["predictions"] is None
        assert r["error"] == "RuntimeError: synthetic failure in fit (stand-in model boom_fit)"
    for r in by_model["boom_predict"]:
        assert r["status"] == "failed"
        assert r["error"] == ("ValueError: synthetic failure in predict (stand-in model "
                              "boom_predict)")
    assert all(r["status"] == "ok" for r in by_model["naive"])
    # the failing jobs ran first (highest cost first) and the naive jobs still ran after them
    order = [r["model"] for r in rows]
    assert max(i for i, m in enumerate(order) if m != "naive") < min(
        i for i, m in enumerate(order) if m == "naive")
    assert "6 jobs: 2 ok, 4 failed, 0 reused" in printed
    assert "4 jobs did not finish" in printed
    assert "synthetic failure in fit" in printed and "synthetic failure in predict" in printed

    # a rerun retries the failed jobs only, and says so in JSON too
    code = main(args + ["--json"])
    summary = json.loads(capsys.readouterr().out)
    assert code == 1
    assert (summary["failed"], summary["reused"], summary["ok"]) == (4, 2, 2)
    again = read_job_rows(out / "jobs.jsonl")
    assert keys(again, "ok") == keys(rows, "ok")  # naive not repeated
    assert keys(again)[("t1", "boom_fit", 0)] == 2


def test_job_timeout_stops_the_job_and_the_pool_survives_a_dead_worker(
        tmp_path, stand_ins, monkeypatch, capsys):
    register_in_process(monkeypatch, stand_ins)
    # 120 s: far over the 5 s limit, yet short enough that a broken limit fails, not hangs
    for name, value in stand_in_env(stand_ins, sleep=120).items():  # for the worker processes
        if os.environ.get(name) != value:
            monkeypatch.setenv(name, value)
    suite = write_suite(tmp_path / "suite", tasks=("t1",))
    out = tmp_path / "out"
    # one worker: sleepy runs first and is stopped, crash kills its worker, naive runs last
    code = main(["run", "--suite", str(suite), "--models", "naive,sleepy,crash", "--seeds", "1",
                 "--workers", "1", "--job-timeout", "5", "--out", str(out)])
    printed = capsys.readouterr().out
    assert code == 1
    rows = {r["model"]: r for r in read_job_rows(out / "jobs.jsonl")}
    assert [r["model"] for r in read_job_rows(out / "jobs.jsonl")] == ["sleepy", "crash", "naive"]
    assert rows["sleepy"]["status"] == "timeout"
    assert rows["sleepy"]["error"] == "stopped after 5 s (--job-timeout)"
    assert rows["crash"]["status"] == "failed"
    assert rows["crash"]["error"] == "the worker process died (exit code 3)"
    assert rows["naive"]["status"] == "ok" and rows["naive"]["score"] is not None
    assert "3 jobs: 1 ok, 2 failed" in printed
    assert "timeout — stopped after 5 s" in printed
    workers = {pid: cmd for pid, cmd in descendants(os.getpid()).items()
               if b"spawn_main" in cmd}
    assert workers == {}, "worker processes outlived the run"


# --- interrupts ----------------------------------------------------------------------------

RESUME_HINT = "run the same command again (same --out) to resume"


def _start_long_run(tmp_path, stand_ins, workers: int, sleep: float = 600):
    suite = write_suite(tmp_path / "suite")
    out = tmp_path / "out"
    args = ["run", "--suite", str(suite), "--models", "naive,sleepy_last", "--seeds", "1",
            "--workers", str(workers), "--out", str(out)]
    return args, out, stand_in_env(stand_ins, sleep=sleep)


def _assert_complete_lines(path: Path) -> list:
    data = path.read_bytes()
    assert data.endswith(b"\n")
    lines = data.splitlines()
    parsed = [json.loads(line) for line in lines]
    assert len(parsed) == len(read_job_rows(path))
    return parsed


@pytest.mark.parametrize("how", ["SIGINT to the process group (Ctrl-C)", "SIGTERM to tabpar"])
def test_interrupt_exits_cleanly_keeps_finished_jobs_and_says_how_to_resume(
        how, tmp_path, stand_ins):
    args, out, env = _start_long_run(tmp_path, stand_ins, workers=2)
    logs = tmp_path / "logs"
    with tabpar_process(args, env, tmp_path, logs) as proc:
        wait_until(lambda: rows_at_least(out / "jobs.jsonl", 2), "the naive jobs", proc, logs)
        children = wait_until(lambda: {p: c for p, c in descendants(proc.pid).items()
                                       if b"spawn_main" in c} or None,
                              "the worker processes", proc, logs)
        before = descendants(proc.pid)
        if how.startswith("SIGINT"):
            os.killpg(proc.pid, signal.SIGINT)
        else:
            os.kill(proc.pid, signal.SIGTERM)
        code = proc.wait(timeout=DEADLINE)
        stdout, stderr = (logs / "stdout.txt").read_text(), (logs / "stderr.txt").read_text()
        assert code == 130, stderr
        assert "Traceback" not in stderr + stdout
        assert RESUME_HINT in stdout
        rows = _assert_complete_lines(out / "jobs.jsonl")
        assert keys(rows) == {("t1", "naive", 0): 1, ("t2", "naive", 0): 1}
        assert all(r["status"] == "ok" and (out / r["predictions"]).is_file() for r in rows)
        assert len(children) == 2
        wait_until(lambda: not still_running(before), "the worker processes to end",
                   timeout=30)


def test_sigkill_leaves_a_readable_file_no_orphans_and_a_rerun_resumes(tmp_path, stand_ins,
                                                                      monkeypatch, capsys):
    args, out, env = _start_long_run(tmp_path, stand_ins, workers=2)
    logs = tmp_path / "logs"
    with tabpar_process(args, env, tmp_path, logs) as proc:
        wait_until(lambda: rows_at_least(out / "jobs.jsonl", 2), "the naive jobs", proc, logs)
        wait_until(lambda: {p: c for p, c in descendants(proc.pid).items()
                            if b"spawn_main" in c} or None, "the worker processes", proc, logs)
        before = descendants(proc.pid)
        os.kill(proc.pid, signal.SIGKILL)  # the parent only, as the OOM killer would
        assert proc.wait(timeout=DEADLINE) == -signal.SIGKILL
        left = wait_until(lambda: not still_running(before) or None, "orphans to die",
                          timeout=30)
        assert left, f"orphan processes: {still_running(before)}"

    finished = read_job_rows(out / "jobs.jsonl")
    assert keys(finished) == {("t1", "naive", 0): 1, ("t2", "naive", 0): 1}
    # a crash in the middle of a write leaves a torn last line: never read as a result
    with open(out / "jobs.jsonl", "ab") as handle:
        handle.write(b'{"task": "t1", "model": "sleepy_last", "seed": 0, "status": "ok", "sc')
    assert read_job_rows(out / "jobs.jsonl") == finished

    # the rerun, in this process (one worker: the jobs run here, no pool to start)
    register_in_process(monkeypatch, stand_ins)
    monkeypatch.setenv("TABPAR_TEST_SLEEP", "0")
    rerun = list(args)
    rerun[rerun.index("--workers") + 1] = "1"
    capsys.readouterr()
    assert main(rerun) == 0, capsys.readouterr().err
    assert "4 jobs: 4 ok, 0 failed, 2 reused" in capsys.readouterr().out
    rows = read_job_rows(out / "jobs.jsonl")
    assert keys(rows) == {(t, m, 0): 1 for t in ("t1", "t2") for m in ("naive", "sleepy_last")}
    assert [r for r in rows if r["model"] == "naive"] == finished  # not run again


def test_a_second_run_on_a_folder_in_use_is_refused(tmp_path, stand_ins, capsys):
    args, out, env = _start_long_run(tmp_path, stand_ins, workers=1)
    logs = tmp_path / "logs"
    second = ["run", "--suite", args[2], "--models", "naive", "--seeds", "1", "--workers", "1",
              "--out", str(out)]
    with tabpar_process(args, env, tmp_path, logs) as proc:
        wait_until(lambda: rows_at_least(out / "jobs.jsonl", 2), "the naive jobs", proc, logs)
        before = {p: p.read_bytes() if p.is_file() else "<dir>"  # the first is asleep
                  for p in sorted(out.rglob("*"))}
        capsys.readouterr()
        assert main(second) == 2  # this process is not the one holding the folder
        refused = capsys.readouterr()
        assert refused.err.strip().splitlines() == [
            f"tabpar: error: Another tabpar process is writing to {out}; wait for it to finish "
            f"or choose another --out."]
        assert refused.out == ""
        assert {p: p.read_bytes() if p.is_file() else "<dir>"
                for p in sorted(out.rglob("*"))} == before
        assert proc.poll() is None  # the first is still running, undisturbed
        os.kill(proc.pid, signal.SIGTERM)
        assert proc.wait(timeout=DEADLINE) == 130
    # once the first has stopped, the folder is free again
    assert main(second) == 0
    assert "2 jobs: 2 ok, 0 failed, 2 reused" in capsys.readouterr().out


def job_row(seed, **changes):
    """A complete job row of the shape tabpar writes (SYNTHETIC values)."""
    row = {"task": "t", "model": "naive", "seed": seed, "status": "ok", "metric": "rmse",
           "lower_is_better": True, "score": 1.5, "train_score": 1.4, "fit_seconds": 0.01,
           "fingerprint": "0123456789abcdef", "error": None}
    return {**row, **changes}


def test_read_job_rows_skips_a_torn_last_line_and_blank_lines(tmp_path):
    good = [job_row(0), job_row(1, status="failed", score=None, error="ValueError: x")]
    path = tmp_path / "jobs.jsonl"
    path.write_bytes(b"".join([json.dumps(good[0]).encode() + b"\n", b"\n",
                               json.dumps(good[1]).encode() + b"\n",
                               b'{"task": "t", "model": "rf", "seed": 0, "status": "o']))
    with pytest.warns(StateWarning, match="line 4 of .* is incomplete"):
        assert read_job_rows(path) == good


@pytest.mark.parametrize("line, expected", [
    (b"not json at all", "is torn or not JSON"),
    (b"[1, 2]", "is not a JSON object"),
    (b'{"task": "t"}', "lacks 'model'"),
    (json.dumps({**job_row(2), "seed": "2"}).encode(), "has seed '2', not a whole number"),
    (json.dumps(job_row(2, score="abc")).encode(), "has score 'abc', not a number"),
    (json.dumps(job_row(2, score=None)).encode(), "an ok job without a finite score"),
])
def test_read_job_rows_refuses_a_foreign_line_in_the_middle(tmp_path, line, expected):
    path = tmp_path / "jobs.jsonl"
    path.write_bytes(json.dumps(job_row(0)).encode() + b"\n" + line + b"\n"
                     + json.dumps(job_row(1)).encode() + b"\n")
    with pytest.raises(UserError, match=f"Line 2 of {re.escape(str(path))} .*{expected}.*; "
                                        f"delete that line"):
        read_job_rows(path)


# --- atomic writes ---------------------------------------------------------------------------

class _HalfWriter:
    """A file handle that writes half of what it is given, then fails like a full disk."""

    def __init__(self, handle, error):
        self.handle, self.error = handle, error

    def write(self, data):
        self.handle.write(data[: len(data) // 2])
        self.handle.flush()
        raise self.error

    def __getattr__(self, name):
        return getattr(self.handle, name)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.handle.close()


@pytest.mark.parametrize("failure", ["rename", "write (disk full)", "fsync", "Ctrl-C in write"])
def test_atomic_write_keeps_the_old_file_when_the_write_fails(failure, tmp_path, monkeypatch):
    path = tmp_path / "report.json"
    atomic_write_bytes(path, b'{"old": true}\n')
    assert path.read_bytes() == b'{"old": true}\n'
    real_fdopen = os.fdopen
    if failure == "rename":
        def replace(src, dst):
            raise OSError(errno.EXDEV, "Invalid cross-device link")
        monkeypatch.setattr(tabpar.execution.store.os, "replace", replace)
    elif failure == "fsync":
        def fsync(fd):
            raise OSError(errno.EIO, "Input/output error")
        monkeypatch.setattr(tabpar.execution.store.os, "fsync", fsync)
    else:
        error = (OSError(errno.ENOSPC, "No space left on device") if "disk" in failure
                 else KeyboardInterrupt())
        monkeypatch.setattr(tabpar.execution.store.os, "fdopen",
                            lambda fd, mode: _HalfWriter(real_fdopen(fd, mode), error))
    # a file-system fault is one sentence naming the file (common.files.write_error)
    with pytest.raises((UserError, KeyboardInterrupt), match=re.escape(str(path)) + "|^$"):
        atomic_write_bytes(path, b'{"new": "a much longer text that is cut in half"}\n' * 100)
    monkeypatch.undo()
    assert path.read_bytes() == b'{"old": true}\n'
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.json"]  # no temporary left


def test_atomic_write_of_a_new_file_leaves_nothing_when_it_fails(tmp_path, monkeypatch):
    def replace(src, dst):
        raise OSError(errno.ENOSPC, "No space left on device")
    monkeypatch.setattr(tabpar.execution.store.os, "replace", replace)
    with pytest.raises(UserError, match="new.parquet .No space left on device.; free disk"):
        atomic_write_bytes(tmp_path / "new.parquet", b"data")
    monkeypatch.undo()
    assert list(tmp_path.iterdir()) == []


def test_atomic_write_gives_the_permissions_of_a_plain_write(tmp_path):
    old = os.umask(0o022)
    try:
        atomic_write_bytes(tmp_path / "atomic.json", b"{}")
        (tmp_path / "plain.json").write_bytes(b"{}")
    finally:
        os.umask(old)
    mode = stat.S_IMODE((tmp_path / "atomic.json").stat().st_mode)
    assert mode == stat.S_IMODE((tmp_path / "plain.json").stat().st_mode) == 0o644, oct(mode)


def test_replacing_a_leaderboard_that_fails_midway_keeps_the_old_one(tmp_path, monkeypatch):
    from tabpar.leaderboards.store import import_leaderboard, load_leaderboard

    store = tmp_path / "store"
    (tmp_path / "old.csv").write_text("team,rmsle\nteam_a,0.13\nteam_b,0.15\n")  # synthetic
    (tmp_path / "new.csv").write_text("team,rmsle\nteam_c,0.11\nteam_d,0.12\nteam_e,0.2\n")
    import_leaderboard(tmp_path / "old.csv", task="ames", score_column="rmsle", name="board",
                       store=store)
    real_replace, calls = os.replace, []

    def replace(src, dst):
        calls.append(dst)
        if len(calls) == 2:  # the entries went in; the meta file's write fails
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_replace(src, dst)

    monkeypatch.setattr(tabpar.execution.store.os, "replace", replace)
    with pytest.raises(UserError, match=r"Cannot write .*store.*\(No space left on device\); "
                                        r"choose another store"):
        import_leaderboard(tmp_path / "new.csv", task="ames", score_column="rmsle",
                           name="board", store=store, replace=True)
    monkeypatch.undo()
    board = load_leaderboard("board", store)
    assert board.entries["team"].tolist() == ["team_a", "team_b"]


def test_an_interrupted_cache_write_is_never_used(tmp_path, monkeypatch):
    from tabpar.execution.cache import cache_info, load_arrays, prepare_task

    task = tabpar.load_suite(write_suite(tmp_path / "suite", tasks=("t1",))).task("t1")
    real_save, saved = np.save, []

    def save(path, array, *a, **k):
        if saved:
            raise OSError(errno.ENOSPC, "No space left on device")
        saved.append(path)
        return real_save(path, array, *a, **k)

    monkeypatch.setattr(np, "save", save)
    with pytest.raises(UserError, match=r"\(No space left on device\); set TABPAR_CACHE"):
        prepare_task(task, cache_dir=tmp_path / "cache")
    monkeypatch.undo()
    assert cache_info(tmp_path / "cache")["entries"] == []
    again = load_arrays(prepare_task(task, cache_dir=tmp_path / "cache").folder)
    fresh = load_arrays(prepare_task(task, cache_dir=tmp_path / "fresh").folder)
    for name in fresh:
        np.testing.assert_array_equal(np.asarray(again[name]), np.asarray(fresh[name]))
    assert len(cache_info(tmp_path / "cache")["entries"]) == 1


# --- reproducibility and provenance --------------------------------------------------------

@pytest.fixture(scope="module")
def two_quick_runs(quick_run, quick_cli_rerun):
    """The same jobs run twice, each time with its own fresh prepared-array cache: the
    session's quick run (in this process) and two of its tasks again through the console
    script in a new process (conftest.quick_cli_rerun: same models, seed and workers).
    Returns (first folder, second folder, the tasks both ran)."""
    return quick_run.out, quick_cli_rerun["out"], quick_cli_rerun["tasks"]


def _without_timings(row: dict) -> dict:
    return {k: v for k, v in row.items() if k not in TIMING_FIELDS}


def test_the_same_command_twice_gives_identical_rows(two_quick_runs):
    *outs, tasks = two_quick_runs
    first, second = ([r for r in read_job_rows(out / "jobs.jsonl") if r["task"] in tasks]
                     for out in outs)
    assert keys(first) == keys(second) == collections.Counter(
        {(t, m, 0): 1 for t in tasks for m in SEEDED_ZOO})
    by_key = {(r["task"], r["model"], r["seed"]): r for r in second}
    for row in first:
        assert row["status"] == "ok"
        other = by_key[(row["task"], row["model"], row["seed"])]
        assert _without_timings(row) == _without_timings(other), (row["task"], row["model"])


def test_the_same_command_twice_gives_identical_predictions_files(two_quick_runs):
    first, second, tasks = two_quick_runs
    files = sorted(p.relative_to(first) for task in tasks
                   for p in (first / "predictions" / task).rglob("*.parquet"))
    assert files == sorted(p.relative_to(second)
                           for p in (second / "predictions").rglob("*.parquet"))
    assert len(files) == len(tasks) * len(SEEDED_ZOO)
    for name in files:
        assert (first / name).read_bytes() == (second / name).read_bytes(), name


# --- safety ----------------------------------------------------------------------------------

def test_data_paths_resolve_relative_to_the_suite_file(tmp_path, monkeypatch, capsys):
    project = tmp_path / "project"
    (project / "data").mkdir(parents=True)
    synthetic_frame().to_csv(project / "data" / "d.csv", index=False)
    suite = write_suite(project / "suites", tasks=("t1",), source="csv:../data/d.csv")
    elsewhere = tmp_path / "elsewhere" / "sub"
    elsewhere.mkdir(parents=True)
    # a decoy where a cwd-relative reading of the path would land: header only, so it fails
    (tmp_path / "elsewhere" / "data").mkdir()
    (tmp_path / "elsewhere" / "data" / "d.csv").write_text("x1,x2,y\n")
    monkeypatch.chdir(elsewhere)
    code = main(["run", "--suite", os.path.relpath(suite, elsewhere), "--models", "naive",
                 "--seeds", "1", "--workers", "1", "--out", "out", "--quiet"])
    assert code == 0, capsys.readouterr().err
    [row] = read_job_rows(elsewhere / "out" / "jobs.jsonl")
    assert row["status"] == "ok" and row["n_train"] + row["n_holdout"] == 120


def test_a_suite_name_cannot_put_results_outside_runs(tmp_path, monkeypatch, capsys):
    work = tmp_path / "a" / "b" / "work"
    suite = write_suite(work, tasks=("t1",), name="../../escaped")
    monkeypatch.chdir(work)
    before = {p for p in tmp_path.rglob("*")}
    code = main(["run", "--suite", str(suite), "--models", "naive", "--seeds", "1",
                 "--workers", "1", "--quiet"])
    capsys.readouterr()
    created = {p for p in tmp_path.rglob("*")} - before
    outside = sorted(str(p) for p in created if not p.is_relative_to(work / "runs"))
    assert code in (0, 2)
    assert outside == []


def test_leaderboard_names_are_sanitised_into_the_store(tmp_path, monkeypatch, capsys):
    deep = tmp_path / "deep" / "er"
    deep.mkdir(parents=True)
    monkeypatch.chdir(deep)
    store = tmp_path / "store"
    entries = tmp_path / "entries.csv"
    entries.write_text("team,rmsle\nteam_a,0.13\nteam_b,0.15\n")  # synthetic
    before = {p for p in tmp_path.rglob("*")}
    code = main(["leaderboard", "import", str(entries), "--task", "ames", "--score-column",
                 "rmsle", "--store", str(store), "--name", "../../outside/board"])
    printed = capsys.readouterr().out
    assert code == 0
    assert "became 'outside-board'" in printed
    created = {p for p in tmp_path.rglob("*")} - before
    names = {p.relative_to(tmp_path).as_posix() for p in created}
    assert {"store", "store/outside-board.json"} <= names and len(names) == 3
    # the entries file is named by its content: outside-board.HASH.parquet, inside the store
    (entries_file,) = names - {"store", "store/outside-board.json"}
    assert re.fullmatch(r"store/outside-board\.[0-9a-f]{12}\.parquet", entries_file)
    assert main(["leaderboard", "place", "../../outside/board", "--score", "0.14", "--store",
                 str(store)]) == 0
    assert "outside-board" in capsys.readouterr().out
