"""The fast paths: jobs in the calling process when no worker is worth starting, scripts without
a ``__main__`` guard, the fingerprint index (and that it still catches a changed file), and the
fit-time predictions behind the job order, the ETA and the budget.

Behaviour only: the speed itself is measured by the bench/ scripts (no timed assertions here).
"""
from __future__ import annotations

import json
import os
import re
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import tabpar
from tabpar.common.system import available_cores
from tabpar.data.source_index import known_fingerprint
from tabpar.data.sources import fingerprint
from tabpar.data.suites import load_suite
from tabpar.execution import cache as cache_module
from tabpar.execution import executors
from tabpar.execution.estimates import FitClock, predict_seconds
from tabpar.execution.progress import Progress

ROOT = Path(__file__).resolve().parents[1]


def _script_env(tmp_path) -> dict:
    env = dict(os.environ, TABPAR_CACHE=str(tmp_path / "cache"))
    env["PYTHONPATH"] = os.pathsep.join([str(ROOT / "harness"), env.get("PYTHONPATH", "")])
    return env


def _jobs_rows(folder: Path) -> list[dict]:
    return [json.loads(line) for line in (folder / "jobs.jsonl").read_text().splitlines()]


# --- no needless processes -------------------------------------------------------------------

def test_readme_python_example_runs_as_a_script_without_a_main_guard(tmp_path):
    # the README's Python block, saved as a file and run as `python FILE`: no
    # `if __name__ == "__main__":` guard, the default worker count (one per core), two jobs
    block = re.search(r"```python\n(.*?)```", (ROOT / "README.md").read_text(), re.S).group(1)
    assert "__main__" not in block
    script = tmp_path / "example.py"
    script.write_text(block, encoding="utf-8")
    done = subprocess.run([sys.executable, str(script)], cwd=tmp_path, env=_script_env(tmp_path),
                          capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr[-2000:]
    (run,) = (tmp_path / "runs").iterdir()
    rows = _jobs_rows(run)
    assert sorted((r["model"], r["status"]) for r in rows) == [("lgbm", "ok"), ("naive", "ok")]


def test_workers_that_all_die_while_starting_raise_one_user_error(tmp_path):
    # a stand-in for a script the guard check misses: the check is switched off, so the two
    # workers re-run the script, which tries to start workers of its own while bootstrapping
    # (multiprocessing refuses that) and dies
    script = tmp_path / "unguarded.py"
    script.write_text(textwrap.dedent("""
        import tabpar
        import tabpar.execution.runner as runner
        runner.unguarded_main_call = lambda: False
        tabpar.run("quick", tasks=["attrition", "diamonds"], models=["naive"], seeds=1,
                   out="out", workers=2)
    """), encoding="utf-8")
    done = subprocess.run([sys.executable, str(script)], cwd=tmp_path, env=_script_env(tmp_path),
                          capture_output=True, text=True, timeout=600)
    assert done.returncode != 0
    last = done.stderr.strip().splitlines()[-1]
    assert last.startswith("tabpar.common.errors.UserError: Every worker process died while "
                           "starting"), last
    assert 'if __name__ == "__main__":' in last


def test_a_single_job_runs_in_the_calling_process_with_every_core(tmp_path, monkeypatch):
    def no_worker(*args, **kwargs):
        raise AssertionError("a worker process was started for a single job")

    monkeypatch.setattr(executors, "_Worker", no_worker)
    result = tabpar.run("quick", tasks=["attrition"], models=["naive"], seeds=1,
                        out=tmp_path / "one", workers=2)
    assert result.ok == 1
    (row,) = _jobs_rows(tmp_path / "one")
    assert row["threads"] == available_cores()


def test_guard_check_sees_the_line_inside_or_outside_the_guard(tmp_path):
    script = tmp_path / "s.py"
    script.write_text("import os\nx = 1\nif __name__ == '__main__':\n    y = 2\n")
    assert not executors._inside_name_guard(str(script), 2)
    assert executors._inside_name_guard(str(script), 4)


def test_jobs_start_longest_first(tmp_path):
    # one worker in process: the file's order is the order the jobs ran in; the references
    # record a random forest fit as far slower than the class prior (results/reference/*)
    tabpar.run("quick", tasks=["attrition"], models=["naive", "rf"], seeds=1,
               out=tmp_path / "order", workers=1)
    assert [r["model"] for r in _jobs_rows(tmp_path / "order")] == ["rf", "naive"]


# --- the fingerprint index -------------------------------------------------------------------

# a synthetic stand-in table (invented numbers), 100 rows
SYNTHETIC = "size,colour,price\n" + "".join(
    f"{i % 7 + 1},{'red' if i % 3 else 'blue'},{10 + i}\n" for i in range(100))


@pytest.fixture
def csv_task(write_suite, tmp_path):
    path = write_suite("""
        [[task]]
        name = "prices"
        source = "csv:prices.csv"
        target = "price"
        type = "regression"
        metric = "rmse"
        holdout = { policy = "random", fraction = 0.25, seed = 0 }
    """, files={"prices.csv": SYNTHETIC})
    return load_suite(path).task("prices"), tmp_path / "prices.csv", tmp_path / "cache"


def _loads_counted(monkeypatch):
    # prepare_task imports load_task from the sources module on a miss, so count it there
    import tabpar.data.sources as sources

    calls = []
    original = sources.load_task

    def counted(task):
        calls.append(task.name)
        return original(task)

    monkeypatch.setattr(sources, "load_task", counted)
    return calls


def test_an_unchanged_source_is_not_read_again(csv_task, monkeypatch):
    task, data, cache = csv_task
    calls = _loads_counted(monkeypatch)
    first = cache_module.prepare_task(task, cache_dir=cache)
    second = cache_module.prepare_task(task, cache_dir=cache)
    assert calls == ["prices"]  # the second call took the warm path
    assert second.folder == first.folder and second.fingerprint == first.fingerprint
    # the remembered fingerprint is that of the rows as pandas reads them
    assert known_fingerprint(task, cache) == fingerprint(pd.read_csv(data))


def test_a_changed_source_is_caught(csv_task, monkeypatch):
    task, data, cache = csv_task
    calls = _loads_counted(monkeypatch)
    before = cache_module.prepare_task(task, cache_dir=cache)
    # the same number of bytes, one price changed, modification time moved
    changed = SYNTHETIC.replace("\n1,blue,10\n", "\n1,blue,99\n")
    assert len(changed) == len(SYNTHETIC) and changed != SYNTHETIC
    stat = data.stat()
    data.write_text(changed)
    os.utime(data, ns=(stat.st_atime_ns, stat.st_mtime_ns + 1_000_000_000))
    after = cache_module.prepare_task(task, cache_dir=cache)
    assert calls == ["prices", "prices"]
    assert after.fingerprint != before.fingerprint
    assert after.fingerprint == fingerprint(pd.read_csv(data))
    # the same bytes with the old modification time put back: the status-change time moved,
    # so the file is read and hashed again (and gives the fingerprint of its bytes)
    data.write_text(SYNTHETIC)
    os.utime(data, ns=(stat.st_atime_ns, stat.st_mtime_ns))
    again = cache_module.prepare_task(task, cache_dir=cache)
    assert calls == ["prices"] * 3
    assert again.fingerprint == before.fingerprint


def test_a_touched_source_is_hashed_again(csv_task, monkeypatch):
    task, data, cache = csv_task
    calls = _loads_counted(monkeypatch)
    before = cache_module.prepare_task(task, cache_dir=cache)
    stat = data.stat()
    os.utime(data, ns=(stat.st_atime_ns, stat.st_mtime_ns + 5_000_000))
    assert cache_module.prepare_task(task, cache_dir=cache).fingerprint == before.fingerprint
    assert calls == ["prices", "prices"]


@pytest.mark.parametrize("index_text", [
    '{"format": 1, "entries": {',  # torn mid-write
    '["not", "an", "index"]',
    '{"format": 2, "entries": {}}',
    None,  # an entry whose types are wrong: filled in by the test
])
def test_a_torn_or_mistyped_index_is_ignored_and_rebuilt(csv_task, monkeypatch, index_text):
    task, data, cache = csv_task
    cache_module.prepare_task(task, cache_dir=cache)
    index = cache / "fingerprints.json"
    if index_text is None:
        stored = json.loads(index.read_text())
        (entry,) = stored["entries"].values()
        entry["identity"]["size"] = str(entry["identity"]["size"])
        index_text = json.dumps(stored)
    index.write_text(index_text)
    calls = _loads_counted(monkeypatch)
    assert known_fingerprint(task, cache) is None
    cache_module.prepare_task(task, cache_dir=cache)
    assert calls == ["prices"]
    assert known_fingerprint(task, cache) == fingerprint(pd.read_csv(data))  # rebuilt


# --- fit-time predictions ------------------------------------------------------------------

def test_predictions_follow_the_references_recorded_fits():
    # the published quick reference's own records: each job's fit against the power law's
    # prediction for the same rows and features (the law alone, not the job's own record),
    # and the ordering of the models
    rows = [json.loads(line) for line in
            (ROOT / "results/reference/quick/jobs.jsonl").read_text().splitlines()]
    ratios = []
    for r in rows:
        if r["fit_seconds"] >= 0.05:
            kind = "regression" if r["metric"] in ("rmse", "rmsle", "mae", "r2") else "binary"
            ratios.append(predict_seconds(r["model"], kind, r["n_train"], r["n_features"],
                                          records=False) / r["fit_seconds"])
    assert 0.67 <= np.median(ratios) <= 1.5
    assert (predict_seconds("rf", "regression", 50_000, 30)
            > predict_seconds("lgbm", "regression", 50_000, 30))


def test_a_published_task_is_predicted_from_its_own_record(monkeypatch):
    # SYNTHETIC records: three seeds of one forest on a 10,000 × 5 table that took 40-60 s
    # (the law fitted to the real references would say far less for so few features)
    import tabpar.execution.estimates as estimates

    rows = tuple({"model": "rf", "kind": "regression", "n": 10_000, "p": 5, "threads": 1,
                  "seed": seed, "fit": fit, "job": fit + 1.0}
                 for seed, fit in enumerate((40.0, 50.0, 60.0)))
    monkeypatch.setattr(estimates, "_reference_rows", lambda: rows)
    estimates.recorded_seconds.cache_clear()
    try:
        assert predict_seconds("rf", "regression", 10_000, 5) == pytest.approx(50.0)  # median
        assert predict_seconds("rf", "regression", 10_000, 5, target="job") == pytest.approx(51.0)
        two = predict_seconds("rf", "regression", 10_000, 5, threads=2)
        assert two == pytest.approx(50.0 / 2 ** estimates.THREAD_EXPONENT)
        # another table, or the records left out: the power law answers
        law = predict_seconds("rf", "regression", 10_001, 5)
        assert law == pytest.approx(predict_seconds("rf", "regression", 10_001, 5,
                                                    records=False))
        assert predict_seconds("rf", "regression", 10_000, 5, records=False) != 50.0
    finally:
        estimates.recorded_seconds.cache_clear()


def test_the_clock_learns_this_machines_speed():
    job = {"model": "et", "type": "binary", "n_train": 3000, "n_features": 20, "threads": 1}
    clock = FitClock()
    base = clock.fit_seconds(job)
    for factor in (3.0, 2.0, 4.0):
        clock.observe(job, fit_seconds=factor * base)
    assert clock.fit_seconds(job) == pytest.approx(3.0 * base)  # the median ratio


def test_eta_weighs_the_jobs_left_by_their_predicted_time(monkeypatch):
    import io

    import tabpar.execution.progress as progress

    now = [0.0]
    monkeypatch.setattr(progress.time, "monotonic", lambda: now[0])
    small = {"task": "t", "model": "lgbm", "seed": 0, "type": "regression", "n_train": 1000,
             "n_features": 10, "threads": 1}
    big = dict(small, model="rf", seed=1, n_train=100_000, n_features=40)
    bar = Progress(2, True, stream=io.StringIO(), jobs=[big, small])
    clock = FitClock()
    # the long job took twice its prediction: what is left is predicted twice as slow too
    now[0] = 2 * clock.job_seconds(big)
    bar.step("t/rf", big, fit_seconds=2 * clock.fit_seconds(big))
    assert bar.eta_seconds() == pytest.approx(2 * clock.job_seconds(small), rel=1e-6)


def test_budget_is_not_inflated_by_a_small_tables_slow_diagnostic_fit(monkeypatch):
    # the failure reported on a daily table of a few thousand rows: the diagnostics' LightGBM
    # fit (mostly start-up at that size) made the forests look 40 times slower than they were,
    # and the budget skipped them. Stand-in runs here: fixed wall times, no fits.
    from types import SimpleNamespace

    from tabpar.owndata import budget

    clock = [0.0]
    monkeypatch.setattr(budget.time, "monotonic", lambda: clock[0])

    def stand_in_run(suite, models, **kwargs):
        (model,) = models
        # bookkeeping 0.3 s a run, plus each model's reference-predicted time
        clock[0] += 0.3 + predict_seconds(model, "regression", 3000, 20, threads=2,
                                          target="job")
        return SimpleNamespace(failures=[], interrupted=False, tasks={"daily": {
            "n_train": 3000, "n_features": 20, "models": {model: {}}}})

    monkeypatch.setattr(budget, "run_suite", stand_in_run)
    monkeypatch.setattr(budget, "available_cores", lambda: 2, raising=False)
    suite = SimpleNamespace(tasks=[SimpleNamespace(type="regression")])
    order = budget.zoo_order(None, "regression")
    whole_zoo = sum(0.3 + predict_seconds(m, "regression", 3000, 20, threads=2, target="job")
                    for m in order)
    slow_small_fit = budget.seconds_per_cost(2.0, "regression")  # 2 s for a 0.1 s fit
    # a budget one second longer than the whole zoo takes: only estimates near the truth fit
    ran, skipped, failures, overrun = budget.run_zoo(
        suite, order, 1, None, 1, whole_zoo + 1.0, 0.0, slow_small_fit, lambda message: None)
    assert skipped == [] and set(ran) == set(order) and overrun is None
