"""End to end: the quick suite run once per session (conftest.quick_run), read back from disk,
and two of its tasks run again through the console script (conftest.quick_cli_rerun)."""
from __future__ import annotations

import json
import os
import platform
import shutil
from datetime import datetime
from importlib.metadata import version

import numpy as np
import pyarrow.parquet
import pytest
import tabpar
from sklearn import metrics as skm
from tabpar.common.files import StateWarning
from tabpar.execution.cache import load_arrays, prepare_task
from tabpar.execution.store import (
    JOBS_FILE,
    ResultsStore,
    read_job_rows,
    read_predictions,
)
from tabpar.models.zoo import DEFAULT_ENSEMBLES, MODELS

SEEDS = 1  # conftest.QUICK_SEEDS

# scikit-learn's scorer names mark a loss (lower is better) with the prefix "neg_": the
# direction of each metric from a source outside tabpar (sklearn.metrics.get_scorer_names)
SKLEARN_SCORER = {"rmse": "neg_root_mean_squared_error",
                  "rmsle": "neg_root_mean_squared_log_error", "mae": "neg_mean_absolute_error",
                  "r2": "r2", "accuracy": "accuracy", "log_loss": "neg_log_loss",
                  "roc_auc": "roc_auc"}


def sklearn_lower_is_better(metric: str) -> bool:
    scorer = SKLEARN_SCORER[metric]
    assert scorer in skm.get_scorer_names()
    return scorer.startswith("neg_")


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
    # the stored scores are scikit-learn's on the stored predictions (checked below), and
    # "beats" follows scikit-learn's direction for the metric, not tabpar's own flag
    frame = tabpar.load_results(quick_run.out)
    means = frame.groupby(["task", "model"])["score"].mean()
    failures = []
    for task, group in frame.groupby("task"):
        name = group["metric"].iloc[0]
        lower = sklearn_lower_is_better(name)
        assert (group["lower_is_better"] == lower).all()  # what the results folder says
        naive = means[(task, "naive")]
        for model in DEFAULT_ENSEMBLES:
            score = means[(task, model)]
            if not (score < naive if lower else score > naive):
                failures.append(f"{task}/{model}: {score:.4f} vs naive {naive:.4f} ({name})")
    assert not failures


def test_rows_carry_provenance(quick_run, rows, loaded, suites):
    import lightgbm
    import pandas
    import sklearn
    import xgboost

    # reference: the installed libraries' own version strings (platform, __version__, and the
    # installed distribution's metadata for tabpar)
    expected_versions = {"python": platform.python_version(), "numpy": np.__version__,
                         "pandas": pandas.__version__, "scikit-learn": sklearn.__version__,
                         "xgboost": xgboost.__version__, "lightgbm": lightgbm.__version__,
                         "tabpar": version("tabpar")}
    meta = json.loads((quick_run.out / "run.json").read_text())
    fingerprints = {}
    for row in rows:
        assert row["versions"] == expected_versions
        assert row["seed"] in range(SEEDS)
        started = datetime.fromisoformat(row["started_at"])  # ISO 8601 timestamp
        assert started.tzinfo is not None
        assert len(row["fingerprint"]) == 16 and int(row["fingerprint"], 16) >= 0  # 64-bit hex
        assert row["fingerprint"] == meta["tasks"][row["task"]]["fingerprint"]
        fingerprints.setdefault(row["task"], set()).add(row["fingerprint"])
    # one fingerprint per task, the one the loader gives its rows; no two tasks share one
    for task, found in fingerprints.items():
        assert found == {loaded("quick", task).fingerprint}, task
    assert set(fingerprints) == {t.name for t in suites["quick"].tasks}
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
        # the score is computed from full-precision predictions, the file keeps them as float32
        # (about 7 significant digits), so scikit-learn on the file agrees to about 1e-6
        assert row["score"] == pytest.approx(reference, rel=1e-5, abs=1e-9), row["task"]


def test_rerun_with_same_out_reuses_every_job(quick_run, quick_run_copy):
    before = (quick_run_copy / JOBS_FILE).read_bytes()
    models = sorted({m for info in quick_run.tasks.values() for m in info["models"]})
    again = tabpar.run_suite("quick", models=models, seeds=SEEDS, out=quick_run_copy, workers=2)
    assert again.reused == again.jobs == quick_run.jobs
    assert again.ok == quick_run.jobs and again.failed == 0
    assert (quick_run_copy / JOBS_FILE).read_bytes() == before  # no new lines appended
    for name, info in quick_run.tasks.items():
        for model, stats in info["models"].items():
            assert again.tasks[name]["models"][model]["mean"] == stats["mean"]


def test_torn_last_line_is_skipped_and_cut_off_by_the_next_append(quick_run, rows,
                                                                   tmp_path):
    folder = tmp_path / "copy"
    folder.mkdir()
    shutil.copy(quick_run.out / JOBS_FILE, folder / JOBS_FILE)
    complete = (folder / JOBS_FILE).read_bytes()
    torn = json.dumps(rows[0], sort_keys=True)[:37].encode()  # a crash cut this write short
    with open(folder / JOBS_FILE, "ab") as handle:
        handle.write(torn)
    with pytest.warns(StateWarning, match="incomplete"):
        assert read_job_rows(folder / JOBS_FILE) == rows

    new = dict(rows[-1], seed=99, started_at="2030-01-01T00:00:00+00:00")
    store = ResultsStore(folder)
    store.append(new)
    data = (folder / JOBS_FILE).read_bytes()
    assert data.startswith(complete)
    lines = data.splitlines(keepends=True)
    assert lines[-1] == (json.dumps(new, sort_keys=True) + "\n").encode()
    assert data == complete + lines[-1]  # the torn line cut off, not kept between records
    after = read_job_rows(folder / JOBS_FILE)
    assert after == rows + [new]


def test_console_script_json_output(quick_run, quick_cli_rerun):
    result, out = quick_cli_rerun["json"], quick_cli_rerun["out"]
    tasks, models = quick_cli_rerun["tasks"], quick_cli_rerun["models"]
    assert {"out", "jobs", "ok", "failed", "tasks"} <= set(result)
    n = len(tasks) * len(models) * SEEDS
    assert result["jobs"] == n and result["ok"] == n and result["failed"] == 0
    assert set(result["tasks"]) == set(tasks)
    assert os.path.samefile(result["out"], out)
    for name, info in result["tasks"].items():
        assert set(info["mean_score"]) == set(models)
        lower = sklearn_lower_is_better(info["metric"])
        assert info["lower_is_better"] is lower
        lgbm, naive = info["mean_score"]["lgbm"], info["mean_score"]["naive"]
        assert lgbm < naive if lower else lgbm > naive
        # the naive floor has no randomness: the session run's seed-0 score, exactly
        assert naive == _seed0_score(quick_run, name, "naive")
    assert len(read_job_rows(out / JOBS_FILE)) == n


def _seed0_score(quick_run, task, model):
    for row in read_job_rows(quick_run.out / JOBS_FILE):
        if row["task"] == task and row["model"] == model and row["seed"] == 0:
            return row["score"]
    raise AssertionError(f"no seed-0 row for {task}/{model}")
