"""The holdout split: time holdouts never train on later rows; random holdouts are seeded and
stratified exactly as scikit-learn's train_test_split draws them."""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from sklearn.model_selection import train_test_split
from tabpar.common.metrics import DEFAULT_METRIC
from tabpar.data.sources import LoadedTask
from tabpar.data.split import split_rows
from tabpar.data.suites import Holdout, Task, load_suite
from tabpar.data.target import encode_target

TIME_TASKS = [t.name for t in load_suite("quick").tasks if t.holdout.policy == "time"]


def synthetic_task(frame: pd.DataFrame, holdout: Holdout, target="y", type_="regression",
                   positive=None) -> LoadedTask:
    """A LoadedTask around a synthetic frame (no file behind it)."""
    task = Task(name="synthetic", source="csv:synthetic.csv", target=target, type=type_,
                metric=DEFAULT_METRIC[type_], holdout=holdout, positive=positive)
    return LoadedTask(task=task, frame=frame, fingerprint="synthetic", n_source_rows=len(frame))


def split(loaded: LoadedTask):
    return split_rows(loaded, encode_target(loaded))


def check_partition(result, n_rows, known=None):
    rows = np.arange(n_rows) if known is None else np.flatnonzero(known)
    assert len(np.intersect1d(result.train, result.holdout)) == 0
    np.testing.assert_array_equal(np.sort(np.concatenate([result.train, result.holdout])), rows)
    assert (np.diff(result.train) > 0).all() and (np.diff(result.holdout) > 0).all()


# --- time holdout ---------------------------------------------------------------------------

def test_quick_suite_has_time_tasks():
    assert set(TIME_TASKS) == {"ames", "hotel_rates", "flights", "chicago", "txhousing"}


@pytest.mark.parametrize("name", TIME_TASKS)
def test_time_holdout_never_trains_on_later_rows(name, loaded):
    task = loaded("quick", name)
    result = split(task)
    dates = task.frame[task.task.holdout.date]
    known = dates.notna().to_numpy()
    check_partition(result, len(task.frame), known)
    # ties at the first holdout time go to the holdout, so training rows are strictly earlier
    assert dates.iloc[result.train].max() < dates.iloc[result.holdout].min()
    assert len(result.holdout) >= math.ceil(task.task.holdout.share * known.sum())


def tied_frame(seed=0, n_days=10, per_day=10) -> pd.DataFrame:
    """Synthetic: per_day rows on each of n_days days, shuffled (many ties at every time)."""
    rng = np.random.default_rng(seed)
    days = np.repeat(np.arange(n_days), per_day)
    rng.shuffle(days)
    return pd.DataFrame({"when": pd.Timestamp("2024-01-01") + pd.to_timedelta(days, unit="D"),
                         "x": rng.normal(size=len(days)),
                         "y": rng.normal(size=len(days))})


def test_time_holdout_takes_every_row_tied_at_the_cutoff():
    frame = tied_frame()
    result = split(synthetic_task(frame, Holdout(policy="time", date="when", fraction=0.25)))
    check_partition(result, len(frame))
    # the latest 25 rows start inside day 7 (rows 75..79 of the sorted order), so all of day 7
    # and later (30 rows) are held out
    first_holdout_day = frame["when"].sort_values().iloc[len(frame) - 25]
    expected = np.flatnonzero(frame["when"] >= first_holdout_day)
    np.testing.assert_array_equal(result.holdout, expected)
    assert len(result.holdout) == 30
    assert frame["when"].iloc[result.train].max() < frame["when"].iloc[result.holdout].min()


def test_time_holdout_by_rows_without_ties_at_the_boundary():
    frame = tied_frame(seed=1)
    result = split(synthetic_task(frame, Holdout(policy="time", date="when", rows=20)))
    np.testing.assert_array_equal(result.holdout,
                                  np.flatnonzero(frame["when"] >= pd.Timestamp("2024-01-09")))


def test_time_holdout_by_cutoff():
    frame = tied_frame(seed=2)
    result = split(synthetic_task(frame, Holdout(policy="time", date="when",
                                                 cutoff="2024-01-08")))
    np.testing.assert_array_equal(result.holdout,
                                  np.flatnonzero(frame["when"] >= pd.Timestamp("2024-01-08")))
    assert len(result.holdout) == 30


def test_time_holdout_with_time_zone_aware_dates_and_naive_cutoff():
    frame = tied_frame(seed=3)
    frame["when"] = frame["when"].dt.tz_localize("Europe/Berlin")
    result = split(synthetic_task(frame, Holdout(policy="time", date="when",
                                                 cutoff="2024-01-08")))
    cutoff = pd.Timestamp("2024-01-08", tz="Europe/Berlin")
    np.testing.assert_array_equal(result.holdout, np.flatnonzero(frame["when"] >= cutoff))


def test_time_holdout_leaves_out_rows_without_a_date():
    frame = tied_frame(seed=4)
    frame.loc[[0, 5, 50], "when"] = pd.NaT
    result = split(synthetic_task(frame, Holdout(policy="time", date="when", fraction=0.2)))
    known = frame["when"].notna().to_numpy()
    check_partition(result, len(frame), known)
    assert any("no when" in note for note in result.notes)
    assert frame["when"].iloc[result.train].max() < frame["when"].iloc[result.holdout].min()


# --- random holdout -------------------------------------------------------------------------

def imbalanced_frame(n=600, seed=0, share=0.12) -> pd.DataFrame:
    """Synthetic two-class frame, about 12% positives."""
    rng = np.random.default_rng(seed)
    labels = np.where(rng.uniform(size=n) < share, "pos", "neg")
    return pd.DataFrame({"x": rng.normal(size=n), "y": labels})


@pytest.mark.parametrize("seed", [0, 7])
def test_random_holdout_is_train_test_split_stratified(seed):
    frame = imbalanced_frame(seed=seed)
    loaded = synthetic_task(frame, Holdout(policy="random", fraction=0.2, seed=seed),
                            type_="binary", positive="pos")
    result = split(loaded)
    check_partition(result, len(frame))
    # reference: sklearn.model_selection.train_test_split(test_size=0.2, random_state=seed,
    # stratify=labels); "neg" < "pos" sorts as the encoded 0 < 1, so the class order matches
    ref_train, ref_holdout = train_test_split(np.arange(len(frame)), test_size=0.2,
                                              random_state=seed, stratify=frame["y"])
    np.testing.assert_array_equal(result.holdout, np.sort(ref_holdout))
    np.testing.assert_array_equal(result.train, np.sort(ref_train))
    # the class ratio is kept to within one row of the holdout
    ratio_all = (frame["y"] == "pos").mean()
    ratio_holdout = (frame["y"].iloc[result.holdout] == "pos").mean()
    assert abs(ratio_holdout - ratio_all) <= 1 / len(result.holdout)


def test_random_holdout_multiclass_stratified():
    rng = np.random.default_rng(9)
    frame = pd.DataFrame({"x": rng.normal(size=500),
                          "y": rng.choice(["a", "b", "c"], size=500, p=[0.6, 0.3, 0.1])})
    loaded = synthetic_task(frame, Holdout(policy="random", rows=100, seed=3),
                            type_="multiclass")
    result = split(loaded)
    # reference: sklearn.model_selection.train_test_split(test_size=100, stratify=labels)
    _, ref_holdout = train_test_split(np.arange(500), test_size=100, random_state=3,
                                      stratify=frame["y"])
    np.testing.assert_array_equal(result.holdout, np.sort(ref_holdout))
    counts = frame["y"].iloc[result.holdout].value_counts(normalize=True)
    overall = frame["y"].value_counts(normalize=True)
    assert (abs(counts - overall) <= 1 / 100 + 1e-12).all()


def test_random_holdout_regression_is_unstratified_train_test_split():
    frame = tied_frame(seed=5)
    result = split(synthetic_task(frame, Holdout(policy="random", fraction=0.3, seed=11)))
    # reference: sklearn.model_selection.train_test_split(test_size=0.3, random_state=11)
    _, ref_holdout = train_test_split(np.arange(len(frame)), test_size=0.3, random_state=11)
    np.testing.assert_array_equal(result.holdout, np.sort(ref_holdout))


def test_random_holdout_is_seeded():
    frame = imbalanced_frame(seed=1)
    a = split(synthetic_task(frame, Holdout(policy="random", seed=4), type_="binary",
                             positive="pos"))
    b = split(synthetic_task(frame, Holdout(policy="random", seed=4), type_="binary",
                             positive="pos"))
    c = split(synthetic_task(frame, Holdout(policy="random", seed=5), type_="binary",
                             positive="pos"))
    np.testing.assert_array_equal(a.holdout, b.holdout)
    assert not np.array_equal(a.holdout, c.holdout)


