"""Probes on a user's predictions: each usual mistake, injected into a small scikit-learn
pipeline fitted on an exported quick-suite split, is named by its probe; the same pipeline done
right gets no finding. Placed against the published quick reference (nothing is run).

Figures the probes compute are checked against scikit-learn's metrics and SciPy's one-way
ANOVA.
"""
from __future__ import annotations

import json
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
import tabpar
from scipy import stats
from sklearn.datasets import load_wine
from sklearn.ensemble import (
    HistGradientBoostingClassifier,
    HistGradientBoostingRegressor,
)
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import (
    log_loss,
    mean_absolute_error,
    mean_squared_error,
    roc_auc_score,
)
from sklearn.model_selection import train_test_split
from sklearn.preprocessing import OrdinalEncoder
from tabpar.cli.main import main
from tabpar.common.metrics import METRICS
from tabpar.data.split import load_and_split
from tabpar.data.suites import load_suite
from tabpar.evaluation.probes import ProbeContext, run_probes
from tabpar.evaluation.probes.groups import explained, row_losses
from tabpar.report.plots import placement_plot

QUICK = load_suite("quick")


def _calendar(frame: pd.DataFrame, column: str, day_first: bool = False) -> pd.DataFrame:
    """Year, month, day and weekday of a date column (replacing it). ``day_first`` reads the
    dates as a day-first parser reads an ambiguous M/D date: day and month swapped wherever
    the day is 12 or less."""
    when = pd.to_datetime(frame[column], utc=True).dt.tz_localize(None)
    if day_first:
        swapped = pd.to_datetime(dict(year=when.dt.year, month=when.dt.day, day=when.dt.month),
                                 errors="coerce")
        when = when.where(when.dt.day > 12, swapped)
    out = frame.drop(columns=[column])
    out[f"{column}_year"], out[f"{column}_month"] = when.dt.year, when.dt.month
    out[f"{column}_day"], out[f"{column}_weekday"] = when.dt.day, when.dt.day_of_week
    return out


def user_pipeline(task_name: str, folder, per_frame_codes: str | None = None,
                  day_first: str | None = None, labels: bool = False, log_values: bool = False,
                  leak: bool = False):
    """A small user's pipeline on ``tabpar export``'s files: calendar fields, category codes
    learned on the training rows, scikit-learn's histogram gradient boosting (on log1p of the
    target for an RMSLE task). Each keyword injects one mistake. Returns (row_id, prediction)
    in holdout.csv's order."""
    task = QUICK.task(task_name)
    tabpar.export(task_name, folder, suite="quick")
    train = pd.read_csv(folder / "train.csv")
    holdout = pd.read_csv(folder / "holdout.csv")
    ids = holdout.pop("row_id").to_numpy()
    train.pop("row_id")
    y = train.pop(task.target)
    if task.type == "binary":
        y = (y.astype(str) == str(task.positive)).astype(int)
    dates = list(task.dates) + ([task.assemble_date.name] if task.assemble_date else [])
    for column in dates:
        train = _calendar(train, column)
        # the mistake: the holdout file read by a day-first parser
        holdout = _calendar(holdout, column, day_first=(column == day_first))
    categories = [c for c in train if not pd.api.types.is_numeric_dtype(train[c])]
    codes = OrdinalEncoder(handle_unknown="use_encoded_value", unknown_value=-1)
    codes.fit(train[categories].astype(str))
    X_hold = holdout.copy()
    X_hold[categories] = codes.transform(holdout[categories].astype(str))
    train[categories] = codes.transform(train[categories].astype(str))
    if per_frame_codes:  # the mistake: this column's codes learned on the holdout rows alone
        X_hold[per_frame_codes] = OrdinalEncoder().fit_transform(
            holdout[[per_frame_codes]].astype(str))
    if leak:  # the mistake: the holdout rows and their targets reach training
        rows = load_and_split(task)
        truth = rows.target.values[rows.split.holdout]
        order = pd.Index(rows.loaded.row_ids[rows.split.holdout]).get_indexer(ids)
        train = pd.concat([train, X_hold], ignore_index=True)
        y = pd.concat([y, pd.Series(truth[order])], ignore_index=True)
    if task.type == "regression":
        target = np.log1p(y) if task.log_target else y
        model = HistGradientBoostingRegressor(random_state=0).fit(train, target)
        prediction = model.predict(X_hold)
        if task.log_target and not log_values:
            prediction = np.expm1(prediction)
        return ids, prediction
    model = HistGradientBoostingClassifier(random_state=0).fit(train, y)
    return ids, (model.predict(X_hold) if labels else model.predict_proba(X_hold)[:, 1])


def write_predictions(folder, ids, prediction):
    path = folder / "predictions.csv"
    pd.DataFrame({"row_id": ids, "prediction": prediction}).to_csv(path, index=False)
    return path


def place(task_name, path):
    return tabpar.place(task_name, predictions=path, reference="quick")


def truth(task_name, ids):
    """The holdout truth in the order of ``ids`` (the encoded target: 1 = positive class)."""
    rows = load_and_split(QUICK.task(task_name))
    order = pd.Index(rows.loaded.row_ids[rows.split.holdout]).get_indexer(ids)
    return rows.target.values[rows.split.holdout][order]


@pytest.fixture(scope="module")
def sound(tmp_path_factory):
    """The pipeline done right, per task: (folder, row_id, prediction)."""
    memo = {}

    def get(task_name):
        if task_name not in memo:
            folder = tmp_path_factory.mktemp(f"sound-{task_name}")
            memo[task_name] = (folder, *user_pipeline(task_name, folder))
        return memo[task_name]

    return get


@pytest.mark.parametrize("task_name", ["ames", "hotel_rates", "chicago", "credit_data"])
def test_the_sound_pipeline_gets_no_finding(sound, task_name):
    folder, ids, prediction = sound(task_name)
    answer = place(task_name, write_predictions(folder, ids, prediction))
    assert answer.findings == [], [str(f) for f in answer.findings]
    assert answer.to_dict()["findings"] == []
    assert "probes on your predictions" not in str(answer)


def test_log_values_not_undone_name_the_transform(sound, tmp_path):
    ids, logs = user_pipeline("ames", tmp_path, log_values=True)
    answer = place("ames", write_predictions(tmp_path, ids, logs))
    top = answer.findings[0]
    assert top.probe == "target-transform" and top.evidence["transform"] == "expm1"
    assert "not undone" in top.sentence
    # the figures: RMSLE as the root of scikit-learn's mean squared log error
    y = truth("ames", ids)
    assert top.evidence["score"] == pytest.approx(
        np.sqrt(mean_squared_error(np.log1p(y), np.log1p(logs))), rel=1e-9)
    assert top.evidence["transformed_score"] == pytest.approx(
        np.sqrt(mean_squared_error(np.log1p(y), np.log1p(np.expm1(logs)))), rel=1e-9)
    assert top.evidence["transformed_score"] < answer.par  # back at or above par


def test_the_done_when_cases_through_the_command_line(tmp_path, capsys):
    """``tabpar place hotel_rates --predictions FILE``: per-frame codes on one category column
    name that column; log values on an RMSLE task name the transform (--json)."""
    folder = tmp_path / "hotel"
    ids, prediction = user_pipeline("hotel_rates", folder, per_frame_codes="agent")
    path = write_predictions(folder, ids, prediction)
    assert main(["place", "hotel_rates", "--predictions", str(path), "--reference",
                 "quick"]) == 0
    text = capsys.readouterr().out
    assert "[where-it-loses]" in text and "'agent'" in text
    # the findings sit under the verdict: right after the verdict's message
    lines = text.splitlines()
    assert lines[2].strip().startswith("probes on your predictions")

    folder = tmp_path / "diamonds"
    ids, logs = user_pipeline("diamonds", folder, log_values=True)
    path = write_predictions(folder, ids, logs)
    assert main(["place", "diamonds", "--predictions", str(path), "--reference", "quick",
                 "--json"]) == 0
    found = json.loads(capsys.readouterr().out)["findings"]
    assert found[0]["probe"] == "target-transform"
    assert set(found[0]) == {"probe", "evidence", "sentence"}


def test_rows_shifted_by_one_name_the_alignment(sound, tmp_path):
    _, ids, prediction = sound("ames")
    answer = place("ames", write_predictions(tmp_path, ids, np.roll(prediction, 1)))
    top = answer.findings[0]
    assert top.probe == "row-alignment"
    # np.roll by 1 puts each prediction one row below (after) the row it was made for
    assert top.evidence["reordering"] == "shifted down by 1 row"
    # realigned, the predictions are the sound ones again (RMSLE from scikit-learn)
    y = truth("ames", ids)
    assert top.evidence["realigned_score"] == pytest.approx(
        np.sqrt(mean_squared_error(np.log1p(y), np.log1p(prediction))), rel=1e-9)


def test_values_in_thousands_name_the_units(sound, tmp_path):
    _, ids, prediction = sound("hotel_rates")
    answer = place("hotel_rates", write_predictions(tmp_path, ids, prediction / 1000))
    top = answer.findings[0]
    assert top.probe == "scale" and top.evidence["correction"] == "factor"
    assert top.evidence["factor"] / top.evidence["par_factor"] == pytest.approx(1000, rel=0.03)
    assert "1,000 times too small" in top.sentence
    y = truth("hotel_rates", ids)  # RMSE from scikit-learn
    assert top.evidence["corrected_score"] == pytest.approx(
        np.sqrt(mean_squared_error(y, prediction / 1000 * top.evidence["factor"])), rel=1e-9)


def test_labels_instead_of_probabilities_are_named(tmp_path):
    ids, labels = user_pipeline("credit_data", tmp_path, labels=True)
    answer = place("credit_data", write_predictions(tmp_path, ids, labels))
    assert [f.probe for f in answer.findings] == ["classification-output"]
    assert answer.findings[0].evidence["distinct_values"] == [0.0, 1.0]
    assert "labels instead of probabilities" in answer.findings[0].sentence
    assert answer.score == pytest.approx(roc_auc_score(truth("credit_data", ids), labels))


def test_the_other_class_probability_is_named(sound, tmp_path):
    _, ids, p = sound("credit_data")
    answer = place("credit_data", write_predictions(tmp_path, ids, 1 - p))
    top = answer.findings[0]
    assert top.probe == "classification-output" and top.evidence["correction"] == "1 - p"
    assert top.evidence["corrected_score"] == pytest.approx(
        roc_auc_score(truth("credit_data", ids), p), rel=1e-9)  # scikit-learn's ROC AUC


def test_a_date_read_day_first_names_the_date_column(tmp_path):
    ids, prediction = user_pipeline("chicago", tmp_path, day_first="date")
    answer = place("chicago", write_predictions(tmp_path, ids, prediction))
    assert answer.verdict == "below-baseline"
    names = [f.evidence.get("column", "") for f in answer.findings]
    assert any(name.startswith("date") for name in names), [str(f) for f in answer.findings]


def test_holdout_rows_in_training_are_too_good(tmp_path):
    ids, prediction = user_pipeline("hotel_rates", tmp_path, leak=True)
    answer = place("hotel_rates", write_predictions(tmp_path, ids, prediction))
    assert [f.probe for f in answer.findings] == ["too-good"]
    assert "reached training" in answer.findings[0].sentence
    fig = placement_plot(answer)  # the plot carries a note naming the finding
    notes = [t.get_text() for t in fig.axes[0].texts]
    assert any("too-good" in note for note in notes)


# --- the pieces, against scikit-learn and SciPy ----------------------------------------------

def test_row_losses_average_to_the_metric():
    rng = np.random.default_rng(0)  # synthetic stand-in data
    y = rng.integers(0, 2, 300)
    p = np.clip(0.3 * y + rng.uniform(0, 0.7, 300), 0, 1)
    r = rng.gamma(2.0, 10.0, 300)
    q = r * rng.lognormal(0, 0.2, 300)
    assert row_losses("roc_auc", y, p)[y == 1].mean() == pytest.approx(1 - roc_auc_score(y, p))
    assert row_losses("roc_auc", y, p)[y == 0].mean() == pytest.approx(1 - roc_auc_score(y, p))
    assert row_losses("log_loss", y, p).mean() == pytest.approx(log_loss(y, p))
    assert row_losses("rmse", r, q).mean() == pytest.approx(mean_squared_error(r, q))
    assert row_losses("mae", r, q).mean() == pytest.approx(mean_absolute_error(r, q))


def test_explained_share_is_epsilon_squared_of_scipys_one_way_anova():
    rng = np.random.default_rng(1)  # synthetic stand-in data
    codes = rng.integers(0, 5, 400)
    d = rng.normal(0, 1, 400) + 0.3 * codes
    f = stats.f_oneway(*[d[codes == g] for g in range(5)]).statistic
    k, n = 5, len(d)
    # epsilon squared from F (Kelley 1935; the formula recalled from memory)
    assert explained(codes, d) == pytest.approx((k - 1) * (f - 1) / ((k - 1) * f + n - k))
    weights = rng.integers(0, 3, 400)  # a bootstrap resample as counts = the rows repeated
    rows = np.repeat(np.arange(n), weights)
    assert explained(codes, d, weights) == pytest.approx(explained(codes[rows], d[rows]))


def test_multiclass_columns_out_of_order_and_rows_not_summing_to_one():
    """The multiclass probe on an (n, k) probability array: scikit-learn's wine data, logistic
    regression for the user and two other models as the reference."""
    X, y = load_wine(return_X_y=True)
    X_train, X_hold, y_train, y_hold = train_test_split(X, y, test_size=0.4, random_state=0,
                                                        stratify=y)
    fit = LogisticRegression(max_iter=5000).fit(X_train, y_train)
    proba = fit.predict_proba(X_hold)
    reference = {"par": HistGradientBoostingClassifier(random_state=0).fit(
        X_train, y_train).predict_proba(X_hold)}
    reference["best"] = reference["par"]
    metric = METRICS["log_loss"]

    def context(given):
        score = metric(y_hold, reference["par"])
        return ProbeContext(
            task=SimpleNamespace(type="multiclass", log_target=False, derive_target=None,
                                 positive=None, holdout=SimpleNamespace(policy="random")),
            metric=metric, y=y_hold, given=given, row_id=np.arange(len(y_hold)),
            reference=reference, par=score, best=score, best_model="hgb", par_model="hgb",
            ensemble_means={"hgb": score}, reference_scores=[score])

    assert run_probes(context(proba)) == []
    swapped = proba[:, [1, 0, 2]]
    found = run_probes(context(swapped))
    assert found[0].probe == "classification-output"
    assert found[0].evidence["order"] == [1, 0, 2]
    assert found[0].evidence["corrected_score"] == pytest.approx(log_loss(y_hold, proba))
    found = run_probes(context(proba * 0.9))
    assert found[0].evidence["rows_not_summing_to_1"] == 1.0
