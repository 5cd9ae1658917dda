"""OpenML tasks as a source, and OpenML run evaluations as leaderboards — without the network.

The OpenML server is never contacted: the openml package's network functions are replaced by
stand-ins that return objects and frames shaped as the package documents them, filled with
SYNTHETIC values (invented task and dataset ids, columns, flows and scores):
- ``openml.tasks.get_task`` → a real ``OpenMLClassificationTask`` / ``OpenMLRegressionTask``
  built locally (constructor as in the openml-python API reference, tasks.OpenMLTask);
- ``openml.datasets.get_dataset`` → an object whose ``get_data(target=...)`` returns
  ``(X, y, categorical_indicator, attribute_names)`` (API reference, OpenMLDataset.get_data);
- ``openml.evaluations.list_evaluations(..., output_format="dataframe")`` → one row per run
  with the fields of ``OpenMLEvaluation`` (API reference: run_id, task_id, setup_id, flow_id,
  flow_name, data_id, data_name, function, upload_time, uploader, uploader_name, value,
  values, array_data).
The connection probe is replaced too, so "reachable" and "offline" are both simulated.
"""
from __future__ import annotations

import json
from pathlib import Path
from unittest.mock import create_autospec

import numpy as np
import pandas as pd
import pytest

openml = pytest.importorskip("openml")
requests = pytest.importorskip("requests")

from openml.datasets import OpenMLDataset  # noqa: E402
from openml.tasks import OpenMLClassificationTask, OpenMLRegressionTask, TaskType  # noqa: E402
from tabpar.cli.main import main  # noqa: E402
from tabpar.common.errors import UserError  # noqa: E402
from tabpar.data import openml_source  # noqa: E402
from tabpar.data.sources import load_source, load_task  # noqa: E402
from tabpar.data.suites import load_suite  # noqa: E402
from tabpar.leaderboards.openml_runs import pull_openml  # noqa: E402
from tabpar.leaderboards.store import load_leaderboard  # noqa: E402

CLS_ID, REG_ID, DATA_ID = 900001, 900002, 800001  # synthetic ids
# the package's own functions, captured before any test replaces them (the stand-ins' specs)
REAL = {(m.__name__, f): getattr(m, f) for m, f in (
    (openml.tasks, "get_task"), (openml.datasets, "get_dataset"),
    (openml.evaluations, "list_evaluations"))}


def synthetic_rows(n=150):
    """Synthetic rows: a numeric and a categorical feature, and a two-class target."""
    rng = np.random.default_rng(0)
    X = pd.DataFrame({"x_num": rng.normal(size=n).round(3),
                      "x_cat": pd.Categorical(rng.choice(["red", "green", "blue"], n))})
    y = pd.Series(pd.Categorical(np.where(X["x_num"] > 0, "pass", "fail")), name="outcome")
    return X, y


def synthetic_dataset(regression=False):
    """Stand-in for an OpenMLDataset, auto-specced from the real class: ``get_data`` as
    documented (4-tuple), with the real method's signature."""
    def get_data(target=None, include_row_id=False, include_ignore_attribute=False,
                 dataset_format="dataframe"):
        X, y = synthetic_rows()
        if regression:
            y = pd.Series(X["x_num"] * 2.0 + 1.0, name=target)
            X = X.drop(columns=["x_num"]).assign(x_other=np.arange(len(X), dtype=float))
        return X, y.rename(target), [False, True], list(X.columns)

    dataset = create_autospec(OpenMLDataset, instance=True)
    dataset.get_data.side_effect = get_data
    dataset.name, dataset.dataset_id, dataset.version = "synthetic-exam", DATA_ID, 1
    return dataset


def synthetic_task(task_id):
    if task_id == REG_ID:
        return OpenMLRegressionTask(
            task_type_id=TaskType.SUPERVISED_REGRESSION, task_type="Supervised Regression",
            data_set_id=DATA_ID, target_name="score", task_id=REG_ID,
            estimation_procedure_type="crossvalidation")
    return OpenMLClassificationTask(
        task_type_id=TaskType.SUPERVISED_CLASSIFICATION, task_type="Supervised Classification",
        data_set_id=DATA_ID, target_name="outcome", task_id=task_id,
        class_labels=["fail", "pass"], evaluation_measure="predictive_accuracy",
        estimation_procedure_type="crossvalidation")


def synthetic_evaluations(function, task_id):
    """Eight synthetic runs of three flows; run 108 has no value (as the server may send)."""
    values = [0.71, 0.74, 0.69, 0.80, 0.80, 0.65, 0.77, None]
    flows = [11, 11, 12, 12, 13, 13, 13, 12]
    return pd.DataFrame({
        "run_id": range(101, 109), "task_id": task_id, "setup_id": range(501, 509),
        "flow_id": flows, "flow_name": [f"synthetic.flow{f}" for f in flows],
        "data_id": DATA_ID, "data_name": "synthetic-exam", "function": function,
        "upload_time": "2026-01-02 03:04:05", "uploader": 7, "uploader_name": "synthetic user",
        "value": values, "values": None, "array_data": None})


@pytest.fixture
def cache(tmp_path, monkeypatch):
    folder = tmp_path / "openml-cache"
    monkeypatch.setenv("TABPAR_OPENML_CACHE", str(folder))
    monkeypatch.setenv("TABPAR_LEADERBOARDS", str(tmp_path / "boards"))
    return folder


@pytest.fixture
def server(monkeypatch, cache):
    """A reachable, synthetic OpenML server; ``calls`` records what was asked."""
    calls = {"get_task": [], "get_dataset": [], "list_evaluations": [], "cache_dirs": []}

    def get_task(task_id, *args, **kwargs):
        calls["get_task"].append((task_id, kwargs))
        calls["cache_dirs"].append(openml.config.get_cache_directory())
        return synthetic_task(task_id)

    def get_dataset(dataset_id, *args, **kwargs):
        calls["get_dataset"].append(dataset_id)
        return synthetic_dataset(regression=bool(calls["get_task"])
                                 and calls["get_task"][-1][0] == REG_ID)

    def list_evaluations(function, **kwargs):
        calls["list_evaluations"].append((function, kwargs))
        calls["cache_dirs"].append(openml.config.get_cache_directory())
        return synthetic_evaluations(function, kwargs["tasks"][0])

    # auto-specced from the real functions: a misspelt or missing argument fails the call
    stand_in(monkeypatch, openml.tasks, "get_task", get_task)
    stand_in(monkeypatch, openml.datasets, "get_dataset", get_dataset)
    stand_in(monkeypatch, openml.evaluations, "list_evaluations", list_evaluations)
    monkeypatch.setattr(openml_source, "_reach", lambda host, port, timeout=5.0: None)
    return calls


def stand_in(monkeypatch, module, name, side_effect):
    """Replace ``module.name`` by a stand-in with the real function's signature."""
    fake = create_autospec(REAL[module.__name__, name], side_effect=side_effect)
    monkeypatch.setattr(module, name, fake)
    return fake


def go_offline(monkeypatch):
    """No network: the probe fails, and every network function raises if called anyway."""
    def refuse(*args, **kwargs):
        raise AssertionError("the network was used")

    stand_in(monkeypatch, openml.tasks, "get_task", refuse)
    stand_in(monkeypatch, openml.datasets, "get_dataset", refuse)
    stand_in(monkeypatch, openml.evaluations, "list_evaluations", refuse)
    monkeypatch.setattr(openml_source, "_reach",
                        lambda host, port, timeout=5.0: "Name or service not known")


SUITE = """
[suite]
name = "om"

[[task]]
name = "exam"
source = "openml:{id}"
target = "{target}"
type = "{type}"
{extra}
"""


def exam_suite(write_suite, task_id=CLS_ID, target="outcome", type_="binary",
               extra='positive = "pass"'):
    return load_suite(write_suite(SUITE.format(id=task_id, target=target, type=type_,
                                               extra=extra)))


# --- the source -----------------------------------------------------------------------------
def test_rows_target_and_type_come_from_the_task(server, cache, write_suite):
    loaded = load_task(exam_suite(write_suite).task("exam"))
    X, y = synthetic_rows()
    assert list(loaded.frame.columns) == ["x_num", "x_cat", "outcome"]
    assert len(loaded.frame) == len(X) and loaded.n_source_rows == len(X)
    assert (loaded.frame["outcome"].astype(str) == y.astype(str)).all()
    assert server["get_task"][0][0] == CLS_ID and server["get_dataset"] == [DATA_ID]
    info = openml_source.openml_task_info(CLS_ID)
    assert info["type"] == "binary" and info["target"] == "outcome"
    assert info["class_labels"] == ["fail", "pass"]
    # the openml package's cache is the tabpar folder during tabpar's calls, and its own
    # setting again afterwards (so a notebook user's own openml calls do not land in ours)
    assert server["cache_dirs"] and all(d.startswith(str(cache)) for d in server["cache_dirs"])
    assert not openml.config.get_cache_directory().startswith(str(cache))


def test_a_suite_task_runs_its_holdout_policy_on_openml_rows(server, cache, write_suite):
    from tabpar.data.split import split_rows
    from tabpar.data.target import encode_target

    loaded = load_task(exam_suite(write_suite).task("exam"))
    split = split_rows(loaded, encode_target(loaded))
    # the suite's default holdout: random 20%, stratified (not OpenML's folds)
    assert len(split.holdout) == 30 and len(split.train) == 120


def test_regression_task(server, cache, write_suite):
    suite = exam_suite(write_suite, task_id=REG_ID, target="score", type_="regression",
                       extra="")
    frame = load_task(suite.task("exam")).frame
    assert "score" in frame and frame["score"].dtype == float
    assert openml_source.openml_task_info(REG_ID)["type"] == "regression"


def test_second_run_works_offline_from_the_cache(server, cache, write_suite, monkeypatch):
    first = load_task(exam_suite(write_suite).task("exam"))
    go_offline(monkeypatch)
    second = load_task(exam_suite(write_suite).task("exam"))
    pd.testing.assert_frame_equal(first.frame, second.frame)
    assert first.fingerprint == second.fingerprint
    assert (cache / "tabpar" / f"task-{CLS_ID}" / "rows.parquet").exists()


def test_offline_without_cache_is_one_sentence_naming_the_cache(cache, monkeypatch, capsys,
                                                                write_suite):
    go_offline(monkeypatch)
    with pytest.raises(UserError) as err:
        load_source(f"openml:{CLS_ID}")
    text = str(err.value)
    assert str(cache) in text and "TABPAR_OPENML_CACHE" in text
    assert "cannot be reached (Name or service not known)" in text
    assert text.count(". ") == 0 and text.endswith(".")  # one sentence
    path = write_suite(SUITE.format(id=CLS_ID, target="outcome", type="binary",
                                    extra='positive = "pass"'))
    assert main(["run", "--suite", str(path), "--models", "naive", "--seeds", "1",
                 "--out", str(cache.parent / "out")]) == 2
    stderr = capsys.readouterr().err
    assert "Traceback" not in stderr and str(cache) in stderr


def test_the_probe_itself_fails_without_network(cache, monkeypatch):
    import socket

    def no_route(*args, **kwargs):
        raise OSError(101, "Network is unreachable")

    monkeypatch.setattr(socket, "create_connection", no_route)
    assert openml_source._reach("server.invalid", 443) == "Network is unreachable"
    with pytest.raises(UserError, match="Network is unreachable"):
        load_source(f"openml:{CLS_ID}")


def test_a_connection_error_mid_call_is_the_offline_sentence(server, cache, monkeypatch):
    def dropped(*args, **kwargs):
        raise requests.exceptions.ConnectionError("synthetic dropped connection")

    stand_in(monkeypatch, openml.tasks, "get_task", dropped)
    with pytest.raises(UserError, match="has nothing for it"):
        load_source(f"openml:{CLS_ID}")
    assert not (cache / "tabpar" / f"task-{CLS_ID}").exists()  # nothing half-cached


def test_a_server_refusal_names_the_answer(server, cache, monkeypatch):
    def unknown(task_id, *args, **kwargs):
        raise openml.exceptions.OpenMLServerException("Unknown task", code=151)

    stand_in(monkeypatch, openml.tasks, "get_task", unknown)
    with pytest.raises(UserError, match=r"refused OpenML task 900001.*Unknown task, code 151"):
        load_source(f"openml:{CLS_ID}")


@pytest.mark.parametrize("target, type_, extra, expected", [
    ("label", "binary", 'positive = "pass"', "predicts 'outcome'; set target"),
    ("outcome", "multiclass", "", "the OpenML task is binary"),
    ("outcome", "binary", 'positive = "maybe"', "not a class of the OpenML task"),
])
def test_suite_fields_must_match_the_openml_task(server, cache, write_suite, target, type_,
                                                 extra, expected):
    suite = exam_suite(write_suite, target=target, type_=type_, extra=extra)
    with pytest.raises(UserError, match=expected):
        load_task(suite.task("exam"))


@pytest.mark.parametrize("text", ["openml:abc", "openml:-3", "openml:0", "openml:"])
def test_bad_task_ids(text):
    with pytest.raises(UserError, match="not a positive whole number"):
        load_source(text)


def test_unsupported_task_type(server, cache, monkeypatch):
    clustering = OpenMLClassificationTask(
        task_type_id=TaskType.CLUSTERING, task_type="Clustering", data_set_id=DATA_ID,
        target_name="outcome", task_id=CLS_ID)
    stand_in(monkeypatch, openml.tasks, "get_task", lambda *a, **k: clustering)
    with pytest.raises(UserError, match="supervised classification and regression"):
        load_source(f"openml:{CLS_ID}")


# --- run evaluations as leaderboards --------------------------------------------------------
def test_pull_stores_all_runs_and_best_run_per_flow(server, cache, tmp_path):
    best, every = pull_openml(CLS_ID, metric="roc_auc")
    function, kwargs = server["list_evaluations"][0]
    assert function == "area_under_roc_curve"  # tabpar's roc_auc on OpenML
    assert kwargs["tasks"] == [CLS_ID] and kwargs["output_format"] == "dataframe"
    assert best.name == f"openml-{CLS_ID}-roc_auc" and every.name == f"{best.name}-all-runs"
    # by hand: flow 11 best 0.74 (run 102), flow 12 best 0.80 (run 104), flow 13 best 0.80
    # (runs 105 and 107 are 0.80 and 0.77: run 105)
    assert sorted(zip(best.entries["flow_id"], best.entries["run_id"])) == [(11, 102),
                                                                           (12, 104),
                                                                           (13, 105)]
    assert len(every.entries) == 7  # run 108 has no value
    for board in (best, every):
        assert board.meta["n_runs"] == 7 and board.meta["n_flows"] == 3
        assert board.meta["n_runs_without_value"] == 1
        assert board.meta["task"] == f"openml:{CLS_ID}" and board.metric == "roc_auc"
        assert board.meta["source"]["fetched_at"] and not board.meta["source"]["from_cache"]
        assert "uploader_name" not in board.entries  # a person's name is not needed to rank
    assert best.meta["view"] == "best run per flow" and every.meta["view"] == "all runs"
    assert load_leaderboard(best.name).scores.tolist() == pytest.approx([0.80, 0.80, 0.74])


def test_pull_default_metric_is_the_tasks_own_measure(server, cache):
    best, _ = pull_openml(CLS_ID)  # the synthetic task is evaluated on predictive_accuracy
    assert best.metric == "accuracy"
    assert server["list_evaluations"][0][0] == "predictive_accuracy"


def test_pull_a_loss_keeps_the_lowest_run_per_flow(server, cache):
    best, _ = pull_openml(REG_ID, metric="rmse", name="exam-rmse")
    assert server["list_evaluations"][0][0] == "root_mean_squared_error"
    assert best.lower_is_better
    # by hand: the lowest value of each flow: 11 → 0.71, 12 → 0.69, 13 → 0.65
    assert sorted(best.entries["value"]) == pytest.approx([0.65, 0.69, 0.71])


@pytest.mark.parametrize("metric, expected", [
    ("r2", "no OpenML run evaluation"),
    ("rmse", "a binary task; use one of roc_auc, accuracy"),
    ("f1", "Unknown metric"),
])
def test_pull_metric_mistakes(server, cache, metric, expected):
    with pytest.raises(UserError, match=expected):
        pull_openml(CLS_ID, metric=metric)


def test_pull_offline_uses_the_cached_evaluations_and_says_so(server, cache, monkeypatch,
                                                              capsys):
    pull_openml(CLS_ID, metric="roc_auc")
    go_offline(monkeypatch)
    assert main(["leaderboard", "pull-openml", str(CLS_ID), "--metric", "roc_auc",
                 "--replace"]) == 0
    out = capsys.readouterr().out
    assert "could not be reached, so these are the evaluations cached on" in out
    assert load_leaderboard(f"openml-{CLS_ID}-roc_auc").meta["source"]["from_cache"]


def test_pull_offline_without_cache_fails_with_one_sentence(cache, monkeypatch, capsys):
    go_offline(monkeypatch)
    assert main(["leaderboard", "pull-openml", str(CLS_ID)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and str(cache) in err and "Traceback" not in err
    assert not (cache.parent / "boards").exists()  # nothing stored


def test_pull_with_no_runs(server, cache, monkeypatch):
    stand_in(monkeypatch, openml.evaluations, "list_evaluations",
                        lambda function, **kwargs: pd.DataFrame())
    with pytest.raises(UserError, match="lists no runs"):
        pull_openml(CLS_ID, metric="roc_auc")


def test_place_against_an_openml_leaderboard_says_it_is_not_like_for_like(server, cache):
    from tabpar.leaderboards.placing import place_on_leaderboard

    best, _ = pull_openml(CLS_ID, metric="roc_auc")
    got = place_on_leaderboard(0.78, best)
    assert got["leaderboard_rank"] == 3 and got["leaderboard_percentile"] == pytest.approx(
        100 / 3)  # by hand: below 0.80, 0.80; above 0.74
    assert "not a like-for-like comparison" in got["leaderboard_note"]
    assert "crossvalidation" in got["leaderboard_note"]
    meta = json.loads(best.path.read_text())
    assert meta["openml_task"]["estimation_procedure"] == "crossvalidation"


# --- the package's real parsing path, offline -----------------------------------------------
# The openml package reads a task's description (task.xml), its dataset's description
# (description.xml), features (features.xml) and rows (dataset_ID.pq) from its own cache folder
# before asking the server (openml 0.15: tasks.functions._get_cached_task,
# datasets.functions._get_dataset_description / _get_dataset_features_file /
# _get_dataset_parquet). Written here in that layout and format (the XML of the OpenML REST
# API, oml namespace), with SYNTHETIC content, the real get_task → get_dataset → get_data path
# runs with no request: every function that would reach the network is an auto-specced
# stand-in that fails the test when called.
XML_ID, XML_DATA = 900003, 800003  # synthetic ids

TASK_XML = f"""<oml:task xmlns:oml="http://openml.org/openml">
  <oml:task_id>{XML_ID}</oml:task_id>
  <oml:task_type_id>1</oml:task_type_id>
  <oml:task_type>Supervised Classification</oml:task_type>
  <oml:input name="source_data">
    <oml:data_set>
      <oml:data_set_id>{XML_DATA}</oml:data_set_id>
      <oml:target_feature>outcome</oml:target_feature>
    </oml:data_set>
  </oml:input>
  <oml:input name="estimation_procedure">
    <oml:estimation_procedure>
      <oml:id>1</oml:id>
      <oml:type>crossvalidation</oml:type>
      <oml:data_splits_url>https://openml.invalid/splits/{XML_ID}</oml:data_splits_url>
      <oml:parameter name="number_repeats">1</oml:parameter>
      <oml:parameter name="number_folds">10</oml:parameter>
      <oml:parameter name="stratified_sampling">true</oml:parameter>
    </oml:estimation_procedure>
  </oml:input>
  <oml:input name="evaluation_measures">
    <oml:evaluation_measures>
      <oml:evaluation_measure>predictive_accuracy</oml:evaluation_measure>
    </oml:evaluation_measures>
  </oml:input>
</oml:task>
"""

DESCRIPTION_XML = f"""<oml:data_set_description xmlns:oml="http://openml.org/openml">
  <oml:id>{XML_DATA}</oml:id>
  <oml:name>synthetic-exam-xml</oml:name>
  <oml:version>1</oml:version>
  <oml:format>ARFF</oml:format>
  <oml:url>https://openml.invalid/data/{XML_DATA}.arff</oml:url>
  <oml:parquet_url>https://openml.invalid/data/dataset_{XML_DATA}.pq</oml:parquet_url>
  <oml:default_target_attribute>outcome</oml:default_target_attribute>
  <oml:row_id_attribute>row_number</oml:row_id_attribute>
  <oml:ignore_attribute>note</oml:ignore_attribute>
  <oml:status>active</oml:status>
</oml:data_set_description>
"""


def feature_xml(index, name, data_type, nominal=()):
    values = "".join(f"<oml:nominal_value>{v}</oml:nominal_value>" for v in nominal)
    return (f"<oml:feature><oml:index>{index}</oml:index><oml:name>{name}</oml:name>"
            f"<oml:data_type>{data_type}</oml:data_type>{values}"
            f"<oml:number_of_missing_values>0</oml:number_of_missing_values></oml:feature>")


FEATURES_XML = ('<oml:data_features xmlns:oml="http://openml.org/openml">'
                + feature_xml(0, "row_number", "numeric") + feature_xml(1, "note", "string")
                + feature_xml(2, "x_num", "numeric")
                + feature_xml(3, "x_cat", "nominal", ("blue", "green", "red"))
                + feature_xml(4, "outcome", "nominal", ("fail", "pass"))
                + "</oml:data_features>")


@pytest.fixture
def package_cache(cache, monkeypatch):
    """The synthetic task in the openml package's own cache layout; the network refused."""
    own = openml.config.get_config_as_dict()["cachedir"]
    openml.config.set_root_cache_directory(str(cache))  # only to learn the package's layout
    try:
        base = Path(openml.config.get_cache_directory())
    finally:
        openml.config.set_root_cache_directory(own)
    (base / "tasks" / str(XML_ID)).mkdir(parents=True)
    (base / "tasks" / str(XML_ID) / "task.xml").write_text(TASK_XML)
    data = base / "datasets" / str(XML_DATA)
    data.mkdir(parents=True)
    (data / "description.xml").write_text(DESCRIPTION_XML)
    (data / "features.xml").write_text(FEATURES_XML)
    X, y = synthetic_rows()
    rows = pd.DataFrame({"row_number": np.arange(len(X)), "note": "synthetic", **X,
                         "outcome": y})
    rows.to_parquet(data / f"dataset_{XML_DATA}.pq", index=False)

    def no_network(*args, **kwargs):
        raise AssertionError("the network was used")
    for name in ("_perform_api_call", "_download_minio_file", "_download_minio_bucket",
                 "_download_text_file"):
        real = getattr(openml._api_calls, name)
        monkeypatch.setattr(openml._api_calls, name,
                            create_autospec(real, side_effect=no_network))
    monkeypatch.setattr(openml_source, "_reach", lambda host, port, timeout=5.0: None)
    return rows, own


def test_the_packages_own_parsing_path_reads_its_cache_offline(package_cache, cache,
                                                               write_suite):
    rows, own = package_cache
    suite = exam_suite(write_suite, task_id=XML_ID)
    loaded = load_task(suite.task("exam"))
    # the row id and the ignored column are left out, as the dataset description marks them
    assert list(loaded.frame.columns) == ["x_num", "x_cat", "outcome"]
    pd.testing.assert_series_equal(loaded.frame["x_num"], rows["x_num"])
    assert (loaded.frame["outcome"].astype(str) == rows["outcome"].astype(str)).all()
    info = openml_source.openml_task_info(XML_ID)
    assert info["type"] == "binary" and info["class_labels"] == ["fail", "pass"]
    assert info["dataset_id"] == XML_DATA and info["estimation_procedure"] == "crossvalidation"
    assert info["dataset_name"] == "synthetic-exam-xml"
    assert openml.config.get_config_as_dict()["cachedir"] == own  # the package's own again
