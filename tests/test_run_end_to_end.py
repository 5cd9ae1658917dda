"""End to end: the quick suite run once per session (conftest.quick_run), read back from disk."""
from __future__ import annotations

import json
import os
import platform
import shutil
import subprocess
import sys
from datetime import datetime
from importlib.metadata import version

import numpy as np
import pyarrow.parquet
import pytest
from sklearn import metrics as skm

import tabpar
from tabpar.common.metrics import get_metric
from tabpar.execution.runner import load_arrays, prepare_task
from tabpar.execution.store import JOBS_FILE, ResultsStore, read_job_rows, read_predictions
from tabpar.models.zoo import DEFAULT_ENSEMBLES, MODELS

SEEDS = 2


@pytest.fixture(scope="module")
def rows(quick_run):
    return read_job_rows(quick_run.out / JOBS_FILE)


def test_one_ok_row_per_job(quick_run, rows, suites):
    n_tasks = len(suites["quick"].tasks)
    assert quick_run.jobs == n_tasks * len(MODELS) * SEEDS
    assert quick_run.ok == quick_run.jobs and quick_run.failed == 0 and quick_run.reused == 0
    frame = tabpar.load_results(quick_run.out)
    assert len(frame) == quick_run.jobs
    assert (frame["status"] == "ok").all(), frame.loc[frame["status"] != "ok", "error"].tolist()
    assert not frame.duplicated(["task", "model", "seed"]).any()
    assert len(rows) == quick_run.jobs  # no job written twice
    expected = {(t.name, m, s) for t in suites["quick"].tasks for m in MODELS
                for s in range(SEEDS)}
    assert set(zip(frame["task"], frame["model"], frame["seed"])) == expected


def test_every_default_ensemble_beats_naive_on_every_task(quick_run):
    frame = tabpar.load_results(quick_run.out)
    means = frame.groupby(["task", "model"])["score"].mean()
    failures = []
    for task, group in frame.groupby("task"):
        metric = get_metric(group["metric"].iloc[0])
        assert (group["lower_is_better"] == metric.lower_is_better).all()
        naive = means[(task, "naive")]
        for model in DEFAULT_ENSEMBLES:
            if not metric.better(means[(task, model)], naive):
                failures.append(f"{task}/{model}: {means[(task, model)]:.4f} vs naive "
                                f"{naive:.4f} ({metric.name})")
    assert not failures


def test_rows_carry_provenance(rows, loaded, suites):
    import lightgbm
    import pandas
    import sklearn
    import xgboost

    # reference: the installed libraries' own version strings
    expected_versions = {"python": platform.python_version(), "numpy": np.__version__,
                         "pandas": pandas.__version__, "scikit-learn": sklearn.__version__,
                         "xgboost": xgboost.__version__, "lightgbm": lightgbm.__version__,
                         "tabpar": version("tabpar")}
    fingerprints = {}
    for row in rows:
        assert row["versions"] == expected_versions
        assert row["seed"] in range(SEEDS)
        started = datetime.fromisoformat(row["started_at"])  # ISO 8601 timestamp
        assert started.tzinfo is not None
        assert isinstance(row["fingerprint"], str) and len(row["fingerprint"]) >= 16
        fingerprints.setdefault(row["task"], set()).add(row["fingerprint"])
    for task, found in fingerprints.items():
        assert found == {loaded("quick", task).fingerprint}, task
    assert len({next(iter(f)) for f in fingerprints.values()}) == len(fingerprints)


def test_predictions_files_have_a_row_per_holdout_row(quick_run, rows):
    for row in rows:
        path = quick_run.out / row["predictions"]
        assert path.is_file() and path.suffix == ".parquet", path
        # reference: the Parquet file's own footer, read by pyarrow
        assert pyarrow.parquet.ParquetFile(path).metadata.num_rows == row["n_holdout"]
        row_id, prediction = read_predictions(path)
        assert len(row_id) == row["n_holdout"] == len(prediction)
        assert len(np.unique(row_id)) == len(row_id)
        if row["metric"] == "roc_auc":  # binary tasks: probability of the positive class
            assert prediction.ndim == 1 and ((prediction >= 0) & (prediction <= 1)).all()


# recompute each stored score from the stored predictions with scikit-learn's own metrics
SKLEARN_METRIC = {
    "rmse": skm.root_mean_squared_error,  # reference: sklearn.metrics.root_mean_squared_error
    "rmsle": skm.root_mean_squared_log_error,  # reference: sklearn root_mean_squared_log_error
    "roc_auc": skm.roc_auc_score,  # reference: sklearn.metrics.roc_auc_score
}


def test_stored_scores_match_sklearn_on_stored_predictions(quick_run, rows, suites):
    holdout = {}
    for task in suites["quick"].tasks:
        prepared = prepare_task(task)  # the session's cached arrays
        arrays = load_arrays(prepared.folder)
        holdout[task.name] = (np.asarray(arrays["row_id"]), np.asarray(arrays["y_holdout"]))
    for row in rows:
        row_id, prediction = read_predictions(quick_run.out / row["predictions"])
        expected_rows, y = holdout[row["task"]]
        np.testing.assert_array_equal(row_id, expected_rows)
        reference = SKLEARN_METRIC[row["metric"]](y, prediction)
        assert row["score"] == pytest.approx(reference, rel=1e-9, abs=1e-12), row["task"]


def test_rerun_with_same_out_reuses_every_job(quick_run):
    before = (quick_run.out / JOBS_FILE).read_bytes()
    again = tabpar.run_suite("quick", seeds=SEEDS, out=quick_run.out, workers=2)
    assert again.reused == again.jobs == quick_run.jobs
    assert again.ok == quick_run.jobs and again.failed == 0
    assert (quick_run.out / JOBS_FILE).read_bytes() == before  # no new lines appended
    for name, info in quick_run.tasks.items():
        for model, stats in info["models"].items():
            assert again.tasks[name]["models"][model]["mean"] == stats["mean"]


def test_torn_last_line_is_ignored_and_next_append_starts_a_new_line(quick_run, rows,
                                                                      tmp_path):
    folder = tmp_path / "copy"
    folder.mkdir()
    shutil.copy(quick_run.out / JOBS_FILE, folder / JOBS_FILE)
    complete = (folder / JOBS_FILE).read_bytes()
    torn = json.dumps(rows[0], sort_keys=True)[:37].encode()  # a crash cut this write short
    with open(folder / JOBS_FILE, "ab") as handle:
        handle.write(torn)
    assert read_job_rows(folder / JOBS_FILE) == rows

    new = dict(rows[-1], seed=99, started_at="2030-01-01T00:00:00+00:00")
    store = ResultsStore(folder)
    store.append(new)
    data = (folder / JOBS_FILE).read_bytes()
    assert data.startswith(complete)
    lines = data.splitlines(keepends=True)
    assert lines[-1] == (json.dumps(new, sort_keys=True) + "\n").encode()
    assert lines[-2] == torn + b"\n"  # the torn line ended, not glued to the new row
    after = read_job_rows(folder / JOBS_FILE)
    assert after == rows + [new]


def test_console_script_json_output(quick_run, tmp_path):
    out = tmp_path / "cli-run"
    proc = subprocess.run(
        [sys.executable, "-m", "tabpar.cli.main", "run", "--suite", "quick", "--tasks",
         "diamonds,attrition", "--models", "naive,lgbm", "--seeds", "1", "--out", str(out),
         "--json"],
        capture_output=True, text=True, cwd=tmp_path, env=dict(os.environ), timeout=600)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    result = json.loads(proc.stdout)
    assert {"out", "jobs", "ok", "failed", "tasks"} <= set(result)
    assert result["jobs"] == 4 and result["ok"] == 4 and result["failed"] == 0
    assert set(result["tasks"]) == {"diamonds", "attrition"}
    assert os.path.samefile(result["out"], out)
    for name, info in result["tasks"].items():
        assert set(info["mean_score"]) == {"naive", "lgbm"}
        metric = get_metric(info["metric"])
        assert metric.better(info["mean_score"]["lgbm"], info["mean_score"]["naive"])
        # the naive floor has no randomness: the session run's seed-0 score, exactly
        assert info["mean_score"]["naive"] == _seed0_score(quick_run, name, "naive")
    assert len(read_job_rows(out / JOBS_FILE)) == 4


def _seed0_score(quick_run, task, model):
    for row in read_job_rows(quick_run.out / JOBS_FILE):
        if row["task"] == task and row["model"] == model and row["seed"] == 0:
            return row["score"]
    raise AssertionError(f"no seed-0 row for {task}/{model}")
