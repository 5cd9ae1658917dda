"""The baseline procedure (tabpar.procedure.baseline.BaselinePrep) against outside references.

References: ISO 8601 week numbering (through Python's ``datetime.date.isocalendar``), pandas'
``.dt`` accessors, Python's ``zoneinfo``, ``sklearn.impute.SimpleImputer`` and
``sklearn.preprocessing.OrdinalEncoder``. Every frame here is a synthetic stand-in.
"""
from __future__ import annotations

import copy
import datetime as dt
import inspect
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest
from sklearn.base import clone
from sklearn.exceptions import NotFittedError
from sklearn.impute import SimpleImputer
from sklearn.linear_model import LinearRegression
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import OrdinalEncoder
from sklearn.utils.validation import check_is_fitted

from tabpar.procedure.baseline import CALENDAR_FIELDS, MISSING_SUFFIX, BaselinePrep, calendar_fields

# The procedure's field names, by the pandas accessor they mirror (older spellings accepted).
_SPELLINGS = {"day_of_week": ("day_of_week", "dayofweek"),
              "day_of_year": ("day_of_year", "dayofyear")}
PANDAS_ACCESSORS = ("year", "month", "day", "day_of_week", "day_of_year", "is_month_start",
                    "is_month_end", "is_quarter_start", "is_quarter_end", "is_year_start",
                    "is_year_end")


def _position(name: str) -> int:
    for spelling in _SPELLINGS.get(name, (name,)):
        if spelling in CALENDAR_FIELDS:
            return CALENDAR_FIELDS.index(spelling)
    raise AssertionError(f"no calendar field for {name}")


FIELD = {name: _position(name) for name in PANDAS_ACCESSORS + ("week", "elapsed_days")}


def synthetic_datetimes(n=500, seed=0) -> pd.Series:
    """Synthetic timestamps over 1990-2030 with times of day, plus calendar edge cases."""
    rng = np.random.default_rng(seed)
    start = pd.Timestamp("1990-01-01")
    seconds = rng.integers(0, 40 * 365 * 86400, size=n)
    stamps = [start + pd.Timedelta(seconds=int(s)) for s in seconds]
    edges = ["2021-01-03", "2021-01-04", "2020-12-31", "2020-02-29", "2019-12-30", "2016-01-01",
             "2024-12-30", "2015-12-31 23:59:59", "2020-03-31", "2020-04-01", "2021-12-31",
             "2022-01-01", "1999-06-30", "2000-07-01"]
    return pd.Series(stamps + [pd.Timestamp(e) for e in edges], name="d")


# --- calendar fields ------------------------------------------------------------------------

def test_iso_week_examples():
    fields = calendar_fields(pd.Series(pd.to_datetime(["2021-01-03", "2021-01-04"])))
    # ISO 8601 (from memory): 2021-01-03 is a Sunday in week 53 of ISO year 2020, and
    # 2021-01-04 is the Monday of week 1 of 2021; confirmed here by datetime.date.isocalendar
    assert tuple(dt.date(2021, 1, 3).isocalendar()) == (2020, 53, 7)
    assert tuple(dt.date(2021, 1, 4).isocalendar()) == (2021, 1, 1)
    assert fields[0, FIELD["week"]] == 53
    assert fields[1, FIELD["week"]] == 1
    # the "year" field is the calendar year (pandas .dt.year), not the ISO year
    assert fields[0, FIELD["year"]] == 2021


def test_week_is_iso_8601_week_number():
    dates = synthetic_datetimes()
    fields = calendar_fields(dates)
    # reference: ISO 8601 week numbering via datetime.date.isocalendar()
    expected = [ts.date().isocalendar()[1] for ts in dates]
    np.testing.assert_array_equal(fields[:, FIELD["week"]], expected)


def test_fields_match_pandas_dt_accessors():
    dates = synthetic_datetimes(seed=1)
    fields = calendar_fields(dates)
    for name in PANDAS_ACCESSORS:
        # reference: pandas Series.dt.<name> (day_of_week: Monday = 0)
        expected = getattr(dates.dt, name).to_numpy().astype(float)
        np.testing.assert_array_equal(fields[:, FIELD[name]], expected, err_msg=name)


def test_fields_match_python_datetime():
    dates = synthetic_datetimes(seed=2)
    fields = calendar_fields(dates)
    py = [ts.to_pydatetime() for ts in dates]
    # reference: Python's datetime (weekday(): Monday = 0; tm_yday: day of the year)
    np.testing.assert_array_equal(fields[:, FIELD["year"]], [d.year for d in py])
    np.testing.assert_array_equal(fields[:, FIELD["month"]], [d.month for d in py])
    np.testing.assert_array_equal(fields[:, FIELD["day"]], [d.day for d in py])
    np.testing.assert_array_equal(fields[:, FIELD["day_of_week"]], [d.weekday() for d in py])
    np.testing.assert_array_equal(fields[:, FIELD["day_of_year"]],
                                  [d.timetuple().tm_yday for d in py])


def test_elapsed_days_since_unix_epoch():
    dates = synthetic_datetimes(seed=3)
    fields = calendar_fields(dates)
    epoch = dt.datetime(1970, 1, 1)
    # reference: Python datetime arithmetic, (date - 1970-01-01) in days
    expected = [(ts.to_pydatetime() - epoch).total_seconds() / 86400 for ts in dates]
    np.testing.assert_allclose(fields[:, FIELD["elapsed_days"]], expected, rtol=0, atol=1e-9)
    assert calendar_fields(pd.Series([pd.Timestamp("1970-01-02")]))[0, FIELD["elapsed_days"]] == 1


@pytest.mark.parametrize("zone", ["America/New_York", "Asia/Kolkata", "Pacific/Auckland"])
def test_time_zone_aware_dates_give_local_fields(zone):
    rng = np.random.default_rng(4)
    seconds = rng.integers(1_500_000_000, 1_800_000_000, size=300)
    instants = [dt.datetime.fromtimestamp(int(s), tz=dt.timezone.utc) for s in seconds]
    instants.append(dt.datetime(2021, 1, 4, 2, 0, tzinfo=dt.timezone.utc))  # 2021-01-03 local NY
    dates = pd.Series(pd.to_datetime(instants, utc=True)).dt.tz_convert(zone)
    fields = calendar_fields(dates)
    local = [i.astimezone(ZoneInfo(zone)) for i in instants]
    # reference: Python zoneinfo local time, datetime.date.isocalendar (ISO 8601 week)
    np.testing.assert_array_equal(fields[:, FIELD["year"]], [d.year for d in local])
    np.testing.assert_array_equal(fields[:, FIELD["month"]], [d.month for d in local])
    np.testing.assert_array_equal(fields[:, FIELD["day"]], [d.day for d in local])
    np.testing.assert_array_equal(fields[:, FIELD["day_of_week"]], [d.weekday() for d in local])
    np.testing.assert_array_equal(fields[:, FIELD["week"]],
                                  [d.date().isocalendar()[1] for d in local])
    # reference: POSIX time, datetime.timestamp() / 86400 (days since the epoch, zone-free)
    np.testing.assert_allclose(fields[:, FIELD["elapsed_days"]],
                               [i.timestamp() / 86400 for i in instants], rtol=0, atol=1e-9)


@pytest.mark.parametrize("aware", [False, True], ids=["naive", "tz-aware"])
def test_transformer_accepts_naive_and_aware_dates(aware):
    dates = synthetic_datetimes(n=60, seed=5)
    if aware:
        dates = dates.dt.tz_localize("UTC").dt.tz_convert("Europe/Lisbon")
    frame = pd.DataFrame({"d": dates, "x": np.arange(len(dates), dtype=float)})
    out = BaselinePrep().fit(frame).transform(frame)
    names = list(BaselinePrep().fit(frame).get_feature_names_out())
    assert names == [f"d__{f}" for f in CALENDAR_FIELDS] + ["x"]
    assert out.shape == (len(frame), len(names))
    # reference: pandas Series.dt accessors in the dates' own zone
    np.testing.assert_array_equal(out[:, FIELD["day_of_week"]], dates.dt.day_of_week.to_numpy())
    np.testing.assert_array_equal(out[:, FIELD["week"]],
                                  dates.dt.isocalendar()["week"].to_numpy(dtype=float))


def test_missing_dates_get_training_medians_and_a_flag():
    dates = synthetic_datetimes(n=80, seed=6).reset_index(drop=True)
    dates[[3, 10, 11, 40]] = pd.NaT
    train = pd.DataFrame({"d": dates})
    prep = BaselinePrep().fit(train)
    # reference: numpy.nanmedian of each pandas .dt field over the training rows with a date
    known = dates.dropna()
    reference = {name: float(np.median(getattr(known.dt, name).to_numpy().astype(float)))
                 for name in PANDAS_ACCESSORS}
    reference["week"] = float(np.median(known.dt.isocalendar()["week"].to_numpy(dtype=float)))
    epoch = pd.Timestamp("1970-01-01")
    reference["elapsed_days"] = float(np.median((known - epoch) / pd.Timedelta(days=1)))
    expected = np.full(len(CALENDAR_FIELDS), np.nan)
    for name, value in reference.items():
        expected[FIELD[name]] = value
    assert not np.isnan(expected).any()
    np.testing.assert_allclose(prep.medians_["d"], expected, rtol=1e-12)

    names = list(prep.get_feature_names_out())
    assert names[-1] == f"d{MISSING_SUFFIX}"
    holdout = pd.DataFrame({"d": pd.Series([pd.NaT, pd.Timestamp("2021-01-03")],
                                           dtype=dates.dtype)})
    out = prep.transform(holdout)
    np.testing.assert_allclose(out[0, :len(CALENDAR_FIELDS)], expected.astype(np.float32),
                               rtol=1e-6)
    assert out[0, -1] == 1 and out[1, -1] == 0
    assert out[1, FIELD["week"]] == 53  # ISO 8601, confirmed above by datetime.date.isocalendar
    flags = prep.transform(train)[:, -1]
    np.testing.assert_array_equal(flags, dates.isna().to_numpy().astype(np.float32))


def test_missing_date_only_in_holdout_gets_median_without_flag():
    train = pd.DataFrame({"d": synthetic_datetimes(n=31, seed=7)})
    prep = BaselinePrep().fit(train)
    assert all(not n.endswith(MISSING_SUFFIX) for n in prep.get_feature_names_out())
    out = prep.transform(pd.DataFrame({"d": pd.Series([pd.NaT], dtype=train["d"].dtype)}))
    assert out.shape == (1, len(CALENDAR_FIELDS))
    np.testing.assert_allclose(out[0], prep.medians_["d"].astype(np.float32), rtol=1e-6)


def test_date_columns_given_as_text_are_parsed():
    text = pd.DataFrame({"d": ["2021-01-03", "2021-01-04", "2020-02-29"]})  # synthetic
    out = BaselinePrep(date_columns=["d"]).fit_transform(text)
    # reference: datetime.date.isocalendar (ISO 8601 week) and date.weekday() (Monday = 0)
    assert list(out[:, FIELD["week"]]) == [dt.date(2021, 1, 3).isocalendar()[1],
                                           dt.date(2021, 1, 4).isocalendar()[1],
                                           dt.date(2020, 2, 29).isocalendar()[1]]
    assert list(out[:, FIELD["day_of_week"]]) == [6, 0, 5]


def test_date_columns_text_mixing_iso_8601_date_and_date_time():
    # synthetic; both forms are ISO 8601 (datetime.fromisoformat reads both)
    text = pd.DataFrame({"d": ["2021-01-03", "2021-01-04 06:30", "2021-01-05T12:00:00"]})
    out = BaselinePrep(date_columns=["d"]).fit_transform(text)
    expected = [dt.datetime.fromisoformat(v).day for v in text["d"]]
    assert list(out[:, FIELD["day"]]) == expected
    assert f"d{MISSING_SUFFIX}" not in BaselinePrep(date_columns=["d"]).fit(
        text).get_feature_names_out()


# --- median fill and missing flags ----------------------------------------------------------

def synthetic_numeric(n, seed, gaps: dict) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame({"a": rng.normal(10, 3, n), "b": rng.integers(0, 50, n).astype(float),
                          "c": rng.gamma(2.0, 5.0, n), "d": rng.uniform(-1, 1, n)})
    for col, rate in gaps.items():
        frame.loc[rng.uniform(size=n) < rate, col] = np.nan
    return frame


def test_median_fill_and_flags_match_simple_imputer():
    # synthetic: training gaps in a and c; holdout gaps in a, b and d (b, d: only in holdout)
    train = synthetic_numeric(300, 1, {"a": 0.2, "c": 0.05})
    holdout = synthetic_numeric(120, 2, {"a": 0.3, "b": 0.1, "d": 0.2})
    prep = BaselinePrep().fit(train)
    imputer = SimpleImputer(strategy="median", add_indicator=True).fit(train)
    # reference: sklearn.impute.SimpleImputer(strategy="median", add_indicator=True)
    np.testing.assert_allclose(prep.transform(holdout), imputer.transform(holdout), rtol=1e-6)
    np.testing.assert_allclose(prep.transform(train), imputer.transform(train), rtol=1e-6)
    assert [prep.medians_[c] for c in train.columns] == pytest.approx(list(imputer.statistics_))
    flagged = [train.columns[i] for i in imputer.indicator_.features_]
    assert list(prep.flagged_) == flagged == ["a", "c"]
    assert list(prep.get_feature_names_out()) == ["a", "b", "c", "d", "a__missing",
                                                  "c__missing"]


def test_gaps_only_in_holdout_match_simple_imputer():
    train = synthetic_numeric(200, 3, {})
    holdout = synthetic_numeric(50, 4, {"b": 0.3, "c": 0.3})
    prep = BaselinePrep().fit(train)
    imputer = SimpleImputer(strategy="median", add_indicator=True).fit(train)
    got = prep.transform(holdout)
    # reference: sklearn.impute.SimpleImputer(add_indicator=True): no indicator for a column
    # without gaps in the fitted rows, and the fitted median fills the holdout's gaps
    assert got.shape == imputer.transform(holdout).shape == (50, 4)
    np.testing.assert_allclose(got, imputer.transform(holdout), rtol=1e-6)


def test_nullable_integer_column_with_gaps():
    values = pd.array([1, 2, None, 4, 10, None, 7], dtype="Int64")  # synthetic
    frame = pd.DataFrame({"n": values})
    out = BaselinePrep().fit_transform(frame)
    as_float = pd.DataFrame({"n": values.to_numpy(dtype=float, na_value=np.nan)})
    # reference: sklearn.impute.SimpleImputer(strategy="median", add_indicator=True)
    expected = SimpleImputer(strategy="median", add_indicator=True).fit_transform(as_float)
    np.testing.assert_allclose(out, expected)


# --- category codes -------------------------------------------------------------------------

LEVELS = ["delta", "alpha", "echo", "charlie", "bravo"]


def synthetic_categories(n, seed, pool=LEVELS, missing=0.1) -> list:
    rng = np.random.default_rng(seed)
    values = list(rng.choice(pool, size=n))
    return [None if rng.uniform() < missing else v for v in values]


def as_dtype(values, kind):
    if kind == "object":
        return pd.Series(values, dtype=object)
    if kind == "string":
        return pd.Series(values, dtype="string")  # pandas StringDtype, pd.NA for missing
    if kind == "str":
        return pd.Series(values, dtype="str")  # pandas' default string dtype, NaN for missing
    if kind == "category":
        return pd.Series(pd.Categorical(values))
    raise AssertionError(kind)


def reference_codes(train_values, test_values, categories="auto"):
    """sklearn OrdinalEncoder (unknown and missing → -1) plus 1: the procedure's 0..K codes."""
    enc = OrdinalEncoder(categories=categories, handle_unknown="use_encoded_value",
                         unknown_value=-1, encoded_missing_value=-1)
    to_2d = lambda v: np.array([np.nan if x is None else x for x in v], dtype=object)[:, None]
    enc.fit(to_2d(train_values))
    return enc.transform(to_2d(test_values))[:, 0] + 1


@pytest.mark.parametrize("kind", ["object", "string", "str", "category"])
def test_codes_match_ordinal_encoder(kind):
    train = synthetic_categories(200, 1)
    test = synthetic_categories(60, 2, pool=LEVELS + ["foxtrot", "golf"])  # unseen levels
    prep = BaselinePrep().fit(pd.DataFrame({"c": as_dtype(train, kind)}))
    got = prep.transform(pd.DataFrame({"c": as_dtype(test, kind)}))[:, 0]
    # reference: sklearn.preprocessing.OrdinalEncoder(handle_unknown="use_encoded_value",
    # unknown_value=-1, encoded_missing_value=-1) + 1
    np.testing.assert_array_equal(got, reference_codes(train, test))
    # sorted levels get 1..K (reference: Python's sorted)
    assert list(prep.categories_["c"]) == sorted(set(v for v in train if v is not None))
    assert set(np.unique(got)) <= set(range(len(LEVELS) + 1))
    unseen_or_missing = np.array([v is None or v not in LEVELS for v in test])
    assert unseen_or_missing.any() and (got[unseen_or_missing] == 0).all()
    assert (got[~unseen_or_missing] >= 1).all()


def test_categorical_levels_unused_in_training_rows_are_unseen():
    # a categorical declares every level of its source, but codes are learned from the levels
    # the training rows hold; reference: OrdinalEncoder learns its categories from the values
    levels = LEVELS + ["hotel"]  # "hotel" is declared and never used in training
    train = synthetic_categories(200, 5)
    test = synthetic_categories(60, 6, pool=levels)
    dtype = pd.CategoricalDtype(levels)
    prep = BaselinePrep().fit(pd.DataFrame({"c": pd.Series(train, dtype=dtype)}))
    got = prep.transform(pd.DataFrame({"c": pd.Series(test, dtype=dtype)}))[:, 0]
    assert "hotel" not in list(prep.categories_["c"]) and "hotel" in test
    np.testing.assert_array_equal(got, reference_codes(train, test))
    assert (got[np.array([v == "hotel" for v in test])] == 0).all()


def test_ordinal_order_is_honoured():
    order = ["Fair", "Good", "Very Good", "Premium", "Ideal"]  # synthetic quality grades
    train = synthetic_categories(100, 3, pool=order)
    test = synthetic_categories(40, 4, pool=order + ["Unknown"])
    prep = BaselinePrep(ordinal={"q": order}).fit(pd.DataFrame({"q": train}))
    got = prep.transform(pd.DataFrame({"q": test}))[:, 0]
    # reference: sklearn.preprocessing.OrdinalEncoder(categories=[order], ...) + 1
    np.testing.assert_array_equal(got, reference_codes(train, test, categories=[order]))
    assert list(prep.categories_["q"]) == order


def test_ordered_categorical_uses_its_own_order():
    order = ["low", "medium", "high", "extreme"]  # synthetic; "extreme" never appears
    train = pd.Categorical(synthetic_categories(80, 5, pool=order[:3]), categories=order,
                           ordered=True)
    test = pd.Categorical(["extreme", "high", None, "low"], categories=order, ordered=True)
    prep = BaselinePrep().fit(pd.DataFrame({"r": train}))
    got = prep.transform(pd.DataFrame({"r": test}))[:, 0]
    # reference: sklearn.preprocessing.OrdinalEncoder(categories=[order], ...) + 1
    expected = reference_codes(list(train.astype(object)), list(test.astype(object)),
                               categories=[order])
    np.testing.assert_array_equal(got, expected)
    np.testing.assert_array_equal(got, [4, 3, 0, 1])


def test_ordinal_order_is_honoured_for_integer_coded_column():
    order = [3, 2, 1]  # synthetic grades coded 3 = best ... 1 = worst, first level gets code 1
    train = [3, 1, 2, 3, 1]
    got = BaselinePrep(ordinal={"grade": order}).fit_transform(pd.DataFrame({"grade": train}))
    # reference: sklearn.preprocessing.OrdinalEncoder(categories=[order], ...) + 1
    np.testing.assert_array_equal(got[:, 0], reference_codes(train, train, categories=[order]))


@pytest.mark.parametrize("kind", ["object", "category"])
def test_integer_valued_levels_sorted_numerically(kind):
    train = [3, 10, 2, 10, 3]  # synthetic integer-labelled groups stored as categories
    column = (pd.Series(train, dtype=object) if kind == "object"
              else pd.Series(pd.Categorical(train)))
    got = BaselinePrep().fit_transform(pd.DataFrame({"g": column}))[:, 0]
    # reference: sklearn.preprocessing.OrdinalEncoder (levels in sorted order 2, 3, 10) + 1
    np.testing.assert_array_equal(got, reference_codes(train, train))


# --- scikit-learn API -----------------------------------------------------------------------

def mixed_frame(n=120, seed=0) -> pd.DataFrame:
    """Synthetic frame with a numeric column with gaps, a category and a date column."""
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame({
        "size": rng.gamma(2.0, 30.0, n),
        "kind": rng.choice(["north", "south", "east"], n),
        "when": pd.Timestamp("2020-01-01") + pd.to_timedelta(rng.integers(0, 900, n), unit="D"),
        "rooms": rng.integers(1, 6, n).astype(float),
    })
    frame.loc[rng.uniform(size=n) < 0.1, "rooms"] = np.nan
    return frame


def test_feature_names_match_output_width_and_columns():
    frame = mixed_frame()
    prep = BaselinePrep().fit(frame)
    names = list(prep.get_feature_names_out())
    expected = (["size", "kind"] + [f"when__{f}" for f in CALENDAR_FIELDS] + ["rooms",
                                                                               "rooms__missing"])
    assert names == expected
    assert prep.transform(frame).shape == (len(frame), len(names))
    # scikit-learn's set_output wraps the output with get_feature_names_out as columns
    as_frame = BaselinePrep().set_output(transform="pandas").fit_transform(frame)
    assert list(as_frame.columns) == names


def test_works_inside_a_pipeline():
    frame = mixed_frame()
    y = frame["size"].to_numpy() * 2 + 1  # synthetic target
    pipe = Pipeline([("prep", BaselinePrep()), ("model", LinearRegression())])
    pipe.fit(frame, y)
    assert pipe.predict(frame).shape == (len(frame),)
    width = pipe.named_steps["prep"].transform(frame).shape[1]
    assert len(pipe[:-1].get_feature_names_out()) == width
    assert pipe.named_steps["model"].coef_.shape == (width,)


def test_clone_and_get_params():
    params = {"date_columns": ["when"], "ordinal": {"kind": ["south", "east", "north"]}}
    prep = BaselinePrep(**params)
    # get_params returns exactly the constructor's parameters, with the values given
    signature = inspect.signature(BaselinePrep.__init__)
    defaults = {name: p.default for name, p in signature.parameters.items() if name != "self"}
    assert prep.get_params() == {**defaults, **params}
    prep.fit(mixed_frame())
    copy_ = clone(prep)  # reference: sklearn.base.clone
    assert copy_.get_params() == prep.get_params()
    assert copy_ is not prep
    with pytest.raises(NotFittedError):
        check_is_fitted(copy_, "feature_names_out_")
    np.testing.assert_array_equal(copy_.fit(mixed_frame()).transform(mixed_frame()),
                                  prep.transform(mixed_frame()))


def test_transform_before_fit_raises():
    with pytest.raises(NotFittedError):
        BaselinePrep().transform(mixed_frame())


# --- leakage guard --------------------------------------------------------------------------

def test_learned_codes_and_medians_do_not_move_with_holdout_rows():
    train = mixed_frame(200, seed=1)
    prep = BaselinePrep().fit(train)
    categories = copy.deepcopy(prep.categories_)
    medians = copy.deepcopy(prep.medians_)

    holdout = mixed_frame(50, seed=2)
    holdout.loc[::3, "kind"] = "west"  # a level never seen in training
    holdout["size"] *= 100.0  # very different values
    holdout.loc[::2, "rooms"] = np.nan
    out = prep.transform(holdout)
    names = list(prep.get_feature_names_out())

    assert prep.categories_.keys() == categories.keys()
    for col in categories:
        assert list(prep.categories_[col]) == list(categories[col])
    for col in medians:
        np.testing.assert_array_equal(prep.medians_[col], medians[col])
    kind = out[:, names.index("kind")]
    assert (kind[::3] == 0).all()  # unseen → 0
    assert (kind[holdout["kind"] != "west"] > 0).all()
    rooms = out[:, names.index("rooms")]
    # reference: numpy.nanmedian of the training rows only
    assert rooms[0] == pytest.approx(np.nanmedian(train["rooms"]))


def test_prepared_task_learns_only_from_training_rows(write_suite, tmp_path):
    """Through the runner: a time holdout whose later rows carry new levels and gaps."""
    rng = np.random.default_rng(8)
    n = 120
    days = pd.date_range("2022-01-01", periods=n, freq="D")
    kind = rng.choice(["red", "green", "blue"], n).astype(object)
    value = rng.normal(50.0, 5.0, n)
    late = days >= pd.Timestamp("2022-04-01")  # the holdout rows (cutoff below)
    kind[late & (np.arange(n) % 2 == 0)] = "violet"  # level only in the holdout rows
    value[late & (np.arange(n) % 3 == 0)] = np.nan  # gaps only in the holdout rows
    target = rng.normal(0, 1, n) + np.arange(n)
    frame = pd.DataFrame({"day": days.strftime("%Y-%m-%d"), "kind": kind, "value": value,
                          "target": target})

    def prepared(data: pd.DataFrame, tag: str):
        from tabpar.execution.runner import load_arrays, prepare_task
        from tabpar.data.suites import load_suite

        data.to_csv(tmp_path / f"{tag}.csv", index=False)  # synthetic stand-in data
        path = write_suite(f"""
            [suite]
            name = "leak"
            [[task]]
            name = "leak"
            source = "csv:{tag}.csv"
            target = "target"
            type = "regression"
            dates = ["day"]
            holdout = {{ policy = "time", date = "day", cutoff = "2022-04-01" }}
            """, name=f"{tag}.toml")
        task = load_suite(path).tasks[0]
        p = prepare_task(task, cache_dir=tmp_path / f"cache-{tag}")
        return p, load_arrays(p.folder)

    p, arrays = prepared(frame, "first")
    names = p.feature_names
    assert "value__missing" not in names  # no gaps in the training rows → no flag
    assert p.n_holdout == int(late.sum())
    hold = frame[late].reset_index(drop=True)
    kind_codes = np.asarray(arrays["X_holdout"])[:, names.index("kind")]
    assert (kind_codes[(hold["kind"] == "violet").to_numpy()] == 0).all()
    filled = np.asarray(arrays["X_holdout"])[:, names.index("value")][hold["value"].isna()]
    # reference: numpy.median of the training rows' values
    np.testing.assert_allclose(filled, np.median(frame.loc[~late, "value"]), rtol=1e-6)

    changed = frame.copy()
    changed.loc[late, "value"] = changed.loc[late, "value"] * 10 - 999  # other holdout values
    changed.loc[late, "kind"] = "amber"  # and other holdout levels
    p2, arrays2 = prepared(changed, "second")
    np.testing.assert_array_equal(np.asarray(arrays["X_train"]), np.asarray(arrays2["X_train"]))
    assert p2.feature_names == names


def test_integer_column_in_transform_after_gaps_in_training_gets_flag_zero():
    # training rows with gaps give a flag column; later rows stored as integers have no gaps
    # reference: sklearn.impute.SimpleImputer(strategy="median", add_indicator=True)
    train = pd.DataFrame({"n": [1.0, np.nan, 3.0, 8.0]})  # synthetic
    later = pd.DataFrame({"n": np.array([5, 6], dtype=np.int64)})
    ours = BaselinePrep().fit(train)
    reference = SimpleImputer(strategy="median", add_indicator=True).fit(train)
    np.testing.assert_allclose(ours.transform(later), reference.transform(later.astype(float)))


def test_date_column_missing_on_every_training_row():
    # no date to learn from: fields are filled with 0 and flagged (synthetic frame)
    train = pd.DataFrame({"when": pd.to_datetime([None, None, None]), "x": [1, 2, 3]})
    later = pd.DataFrame({"when": pd.to_datetime(["2024-02-29", None]), "x": [4, 5]})
    prep = BaselinePrep().fit(train)
    names = list(prep.get_feature_names_out())
    out = pd.DataFrame(prep.transform(later), columns=names)
    assert out.loc[1, "when__year"] == 0 and out.loc[1, "when__missing"] == 1
    # reference: ISO 8601 via datetime.date.isocalendar (2024-02-29 is in ISO week 9)
    assert out.loc[0, "when__week"] == dt.date(2024, 2, 29).isocalendar().week
    assert out.loc[0, "when__missing"] == 0
