"""The fast baseline procedure gives exactly what the same steps give when written with
scikit-learn's own parts (reference: sklearn ColumnTransformer + OrdinalEncoder + SimpleImputer).
The date part of the reference also uses ``calendar_fields``, so this checks the fast path's
distinct-value bookkeeping and median fill, not the calendar itself (tests/test_prep.py checks
that against Python's datetime and ISO 8601). Frames here are synthetic stand-ins."""
import numpy as np
import pandas as pd
import pytest
from tabpar.procedure.baseline import BaselinePrep
from tabpar.procedure.calendar import CALENDAR_FIELDS
from tabpar.procedure.equivalent import sklearn_equivalent


def _frames(kind):
    rng = np.random.default_rng(3)
    n = 400
    letters = np.array(list("abcdefg"), dtype=object)
    text = letters[rng.integers(0, 7, n)]
    text[rng.random(n) < 0.1] = None
    train = pd.DataFrame({
        "colour": text,
        "size": np.where(rng.random(n) < 0.15, np.nan, rng.normal(10, 3, n)),
        "count": rng.integers(0, 50, n),
        "when": pd.Timestamp("2020-01-01") + pd.to_timedelta(rng.integers(0, 900, n), "D"),
    })
    if kind == "string":
        train["colour"] = train["colour"].astype("string")
    elif kind == "category":
        train["colour"] = train["colour"].astype("category")
    elif kind == "tz":
        train["when"] = train["when"].dt.tz_localize("Europe/Paris")
    elif kind == "date-gaps":
        train.loc[rng.random(n) < 0.1, "when"] = pd.NaT
    holdout = train.sample(150, random_state=1).reset_index(drop=True)
    if kind == "category":  # an unseen level must be declared before it can be assigned
        holdout["colour"] = holdout["colour"].cat.add_categories(["unseen-level"])
    holdout.loc[:9, "colour"] = "unseen-level"  # unseen categories
    holdout.loc[10:19, "count"] = np.nan  # gaps only in the holdout
    return train, holdout


def _by_name(values, names):
    return pd.DataFrame(np.asarray(values, dtype=np.float64), columns=list(names))


@pytest.mark.parametrize("kind", ["object", "string", "category", "tz", "date-gaps"])
def test_same_output_as_the_column_transformer(kind):
    train, holdout = _frames(kind)
    ours = BaselinePrep().fit(train)
    theirs = sklearn_equivalent(train).fit(train)
    for rows in (train, holdout):
        a = ours.transform(rows)
        b = theirs.transform(rows)
        ours_cols = _by_name(a, ours.get_feature_names_out())
        # the reference has no per-date missing flag: the only column it lacks
        assert a.shape[1] == b.shape[1] + ("when__missing" in ours_cols)
        # reference column order: the calendar fields, the text codes, numeric, indicators
        expected = np.column_stack([
            ours_cols[[f"when__{f}" for f in CALENDAR_FIELDS]],
            ours_cols[["colour"]], ours_cols[["size", "count"]],
            ours_cols[["size__missing"]]])
        assert np.allclose(expected, np.asarray(b, np.float32), equal_nan=True)
        if "when__missing" in ours_cols:  # reference: the input's own missing dates
            assert (ours_cols["when__missing"] == rows["when"].isna().to_numpy()).all()


def test_fit_transform_equals_fit_then_transform():
    train, _ = _frames("object")
    a = BaselinePrep().fit_transform(train)
    b = BaselinePrep().fit(train).transform(train)
    assert np.array_equal(a, b, equal_nan=True)
