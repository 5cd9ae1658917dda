"""The baseline procedure (tabpar.procedure.baseline.BaselinePrep) against outside references.

References: ISO 8601 week dates (through Python's ``datetime.date.isocalendar``, which works
them out independently of pandas, and worked examples), the Gregorian calendar (Python's
``datetime`` and ``calendar`` modules and hand-written dates with known answers), POSIX time
(``datetime.timestamp``), Python's ``zoneinfo``, ``sklearn.impute.SimpleImputer``,
``sklearn.preprocessing.OrdinalEncoder`` / ``OneHotEncoder`` and scikit-learn's own estimator
checks. Every frame here is a synthetic stand-in.
"""
from __future__ import annotations

import copy
import datetime as dt
import inspect
import re
from calendar import monthrange
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest
from sklearn.base import clone
from sklearn.exceptions import NotFittedError
from sklearn.impute import SimpleImputer
from sklearn.linear_model import LinearRegression
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import OneHotEncoder, OrdinalEncoder
from sklearn.utils.validation import check_is_fitted
from tabpar.procedure.baseline import MISSING_SUFFIX, BaselinePrep
from tabpar.procedure.calendar import CALENDAR_FIELDS, calendar_fields

# The product's calendar fields, written out here as the specification the code must follow.
SPEC_FIELDS = ("year", "quarter", "month", "day_of_month", "day_of_year", "iso_year",
               "iso_week", "iso_weekday", "month_start", "month_end", "quarter_start",
               "quarter_end", "year_start", "year_end", "epoch_seconds")
FIELD = {name: k for k, name in enumerate(SPEC_FIELDS)}
N_FIELDS = len(SPEC_FIELDS)
UTC = dt.timezone.utc


def stdlib_fields(moment) -> list:
    """The calendar fields of one moment worked out with Python's ``datetime`` and ``calendar``
    modules alone (no pandas); all NaN for a missing moment."""
    if moment is None or moment is pd.NaT:
        return [np.nan] * N_FIELDS
    y, m, d = moment.year, moment.month, moment.day
    last = monthrange(y, m)[1]  # days in the month, leap years included
    iso = moment.date().isocalendar()
    # POSIX time; a naive moment is read as UTC wall-clock time
    stamp = (moment if moment.tzinfo else moment.replace(tzinfo=UTC)).timestamp()
    values = {"year": y, "quarter": (m - 1) // 3 + 1, "month": m, "day_of_month": d,
              "day_of_year": moment.timetuple().tm_yday, "iso_year": iso[0],
              "iso_week": iso[1], "iso_weekday": iso[2], "month_start": d == 1,
              "month_end": d == last, "quarter_start": d == 1 and m in (1, 4, 7, 10),
              "quarter_end": d == last and m in (3, 6, 9, 12), "year_start": (m, d) == (1, 1),
              "year_end": (m, d) == (12, 31), "epoch_seconds": stamp}
    return [float(values[name]) for name in SPEC_FIELDS]


def stdlib_table(dates: pd.Series) -> np.ndarray:
    return np.array([stdlib_fields(None if pd.isna(ts) else ts.to_pydatetime())
                     for ts in dates], dtype=np.float64).reshape(len(dates), N_FIELDS)


def synthetic_datetimes(n=500, seed=0) -> pd.Series:
    """Synthetic timestamps over 1990-2030 with times of day, plus calendar edge cases."""
    rng = np.random.default_rng(seed)
    start = pd.Timestamp("1990-01-01")
    seconds = rng.integers(0, 40 * 365 * 86400, size=n)
    stamps = [start + pd.Timedelta(seconds=int(s)) for s in seconds]
    edges = ["2021-01-03", "2021-01-04", "2020-12-31", "2020-02-29", "2019-12-30", "2016-01-01",
             "2024-12-30", "2015-12-31 23:59:59", "2020-03-31", "2020-04-01", "2021-12-31",
             "2022-01-01", "1999-06-30", "2000-07-01", "2008-12-29", "2010-01-03"]
    return pd.Series(stamps + [pd.Timestamp(e) for e in edges], name="d")


def fields_of(*texts) -> np.ndarray:
    return calendar_fields(pd.Series(pd.to_datetime(list(texts), format="ISO8601")))


# --- calendar fields ------------------------------------------------------------------------

def test_field_names_and_order_are_the_products_own():
    assert CALENDAR_FIELDS == SPEC_FIELDS
    # no names taken over from a teaching library's date helper
    assert not any(re.search(r"elapsed|^is_|[A-Z]", name) for name in CALENDAR_FIELDS)


# ISO 8601 week dates, worked examples recalled from memory (YYYY-Www-D: ISO year, week,
# weekday with 1 = Monday); each is cross-checked below with datetime.date.isocalendar.
ISO_EXAMPLES = {"2021-01-03": (2020, 53, 7), "2021-01-04": (2021, 1, 1),
                "2008-12-28": (2008, 52, 7), "2008-12-29": (2009, 1, 1),
                "2009-12-31": (2009, 53, 4), "2010-01-03": (2009, 53, 7),
                "2005-01-01": (2004, 53, 6), "2007-01-01": (2007, 1, 1)}


@pytest.mark.parametrize("day, expected", ISO_EXAMPLES.items())
def test_iso_week_date_examples(day, expected):
    assert tuple(dt.date.fromisoformat(day).isocalendar()) == expected  # the cross-check
    row = fields_of(day)[0]
    got = tuple(row[FIELD[f]] for f in ("iso_year", "iso_week", "iso_weekday"))
    assert got == expected
    # "year" stays the Gregorian year: ISO week 53 of 2020 can hold days of 2021
    assert row[FIELD["year"]] == int(day[:4])


def test_iso_week_one_holds_the_first_thursday():
    # ISO 8601: week 1 of a year is the week (Monday to Sunday) with the year's first Thursday;
    # a year has 53 weeks when it starts on a Thursday, or on a Wednesday in a leap year
    for year in range(1990, 2031):
        jan1 = dt.date(year, 1, 1)
        thursday = jan1 + dt.timedelta(days=(3 - jan1.weekday()) % 7)  # weekday(): Monday = 0
        monday = thursday - dt.timedelta(days=3)
        long_year = jan1.weekday() == 3 or (jan1.weekday() == 2 and monthrange(year, 2)[1] == 29)
        days = [thursday, monday, monday - dt.timedelta(days=1), dt.date(year, 12, 28)]
        rows = calendar_fields(pd.Series(pd.to_datetime(days)))
        iso = rows[:, [FIELD["iso_year"], FIELD["iso_week"], FIELD["iso_weekday"]]]
        assert list(iso[0]) == [year, 1, 4] and list(iso[1]) == [year, 1, 1]
        assert iso[2, 0] == year - 1 and iso[2, 1] in (52, 53) and iso[2, 2] == 7
        assert iso[3, 1] == (53 if long_year else 52)  # 28 December is always in the last week


def test_iso_fields_match_python_isocalendar():
    dates = synthetic_datetimes()
    fields = calendar_fields(dates)
    # reference: ISO 8601 week dates via datetime.date.isocalendar()
    expected = np.array([tuple(ts.date().isocalendar()) for ts in dates], dtype=float)
    got = fields[:, [FIELD["iso_year"], FIELD["iso_week"], FIELD["iso_weekday"]]]
    np.testing.assert_array_equal(got, expected)


# Gregorian calendar, hand-written: date → (quarter, day of year, month start, month end,
# quarter start, quarter end, year start, year end)
GREGORIAN = {
    "2021-01-01": (1, 1, 1, 0, 1, 0, 1, 0),
    "2021-02-28": (1, 59, 0, 1, 0, 0, 0, 0),  # 2021 is not a leap year
    "2020-02-28": (1, 59, 0, 0, 0, 0, 0, 0),  # 2020 is
    "2020-02-29": (1, 60, 0, 1, 0, 0, 0, 0),
    "1900-02-28": (1, 59, 0, 1, 0, 0, 0, 0),  # divisible by 100, not by 400: no 29 February
    "2000-02-29": (1, 60, 0, 1, 0, 0, 0, 0),  # divisible by 400: a leap year
    "2021-03-31": (1, 90, 0, 1, 0, 1, 0, 0),
    "2021-04-01": (2, 91, 1, 0, 1, 0, 0, 0),
    "2021-05-15 13:45": (2, 135, 0, 0, 0, 0, 0, 0),
    "2021-06-30": (2, 181, 0, 1, 0, 1, 0, 0),
    "2021-07-01": (3, 182, 1, 0, 1, 0, 0, 0),
    "2021-08-01": (3, 213, 1, 0, 0, 0, 0, 0),
    "2021-09-30": (3, 273, 0, 1, 0, 1, 0, 0),
    "2021-10-01": (4, 274, 1, 0, 1, 0, 0, 0),
    "2021-11-30": (4, 334, 0, 1, 0, 0, 0, 0),
    "2020-12-31": (4, 366, 0, 1, 0, 1, 0, 1),
    "2021-12-31 23:59:59": (4, 365, 0, 1, 0, 1, 0, 1),  # the flags are about the day
}
GREGORIAN_FIELDS = ("quarter", "day_of_year", "month_start", "month_end", "quarter_start",
                    "quarter_end", "year_start", "year_end")


def test_gregorian_fields_of_hand_written_dates():
    fields = fields_of(*GREGORIAN)
    for row, (day, expected) in zip(fields, GREGORIAN.items()):
        got = tuple(row[FIELD[f]] for f in GREGORIAN_FIELDS)
        assert got == expected, day


def test_fields_match_python_datetime_and_calendar():
    dates = synthetic_datetimes(seed=2)
    # reference: Python's datetime and calendar modules (see stdlib_fields)
    np.testing.assert_array_equal(calendar_fields(dates), stdlib_table(dates))


def test_epoch_seconds_known_values():
    # POSIX time, from memory: 2000-01-01T00:00Z is 946 684 800 s; cross-checked by datetime
    assert dt.datetime(2000, 1, 1, tzinfo=UTC).timestamp() == 946_684_800
    got = fields_of("1970-01-01", "1970-01-02", "1969-12-31", "2000-01-01", "2000-01-01 00:00:01.5")
    np.testing.assert_array_equal(got[:, FIELD["epoch_seconds"]],
                                  [0, 86_400, -86_400, 946_684_800, 946_684_801.5])


def test_epoch_seconds_match_datetime_timestamp():
    dates = synthetic_datetimes(seed=3)
    # reference: datetime.timestamp() of the stdlib, a naive date read as UTC
    expected = [ts.to_pydatetime().replace(tzinfo=UTC).timestamp() for ts in dates]
    np.testing.assert_array_equal(calendar_fields(dates)[:, FIELD["epoch_seconds"]], expected)


@pytest.mark.parametrize("zone", [None, "UTC", "America/New_York"])
def test_missing_dates_are_missing_in_every_field(zone):
    dates = pd.Series(pd.to_datetime([None, "2021-01-03", None]))
    if zone:
        dates = dates.dt.tz_localize(zone)
    fields = calendar_fields(dates)
    assert np.isnan(fields[[0, 2]]).all() and not np.isnan(fields[1]).any()


@pytest.mark.parametrize("zone", ["America/New_York", "Asia/Kolkata", "Pacific/Auckland"])
def test_time_zone_aware_dates_give_local_fields(zone):
    rng = np.random.default_rng(4)
    seconds = rng.integers(1_500_000_000, 1_800_000_000, size=300)
    instants = [dt.datetime.fromtimestamp(int(s), tz=UTC) for s in seconds]
    instants.append(dt.datetime(2021, 1, 4, 2, 0, tzinfo=UTC))  # 2021-01-03 local NY
    instants.append(dt.datetime(2020, 12, 31, 12, 0, tzinfo=UTC))  # 2021-01-01 in Auckland
    dates = pd.Series(pd.to_datetime(instants, utc=True)).dt.tz_convert(zone)
    # reference: Python zoneinfo local time, then datetime / calendar / isocalendar, and POSIX
    # time (datetime.timestamp(), the same instant whatever the zone)
    local = [i.astimezone(ZoneInfo(zone)) for i in instants]
    expected = np.array([stdlib_fields(d) for d in local])
    np.testing.assert_array_equal(calendar_fields(dates), expected)
    np.testing.assert_array_equal(expected[:, FIELD["epoch_seconds"]],
                                  [i.timestamp() for i in instants])


@pytest.mark.parametrize("aware", [False, True], ids=["naive", "tz-aware"])
def test_transformer_accepts_naive_and_aware_dates(aware):
    dates = synthetic_datetimes(n=60, seed=5)
    if aware:
        dates = dates.dt.tz_localize("UTC").dt.tz_convert("Europe/Lisbon")
    frame = pd.DataFrame({"d": dates, "x": np.arange(len(dates), dtype=float)})
    prep = BaselinePrep().fit(frame)
    out = prep.transform(frame)
    names = list(prep.get_feature_names_out())
    assert names == [f"d__{f}" for f in SPEC_FIELDS] + ["x"]
    assert out.shape == (len(frame), len(names))
    # reference: Python's datetime in the dates' own zone (see stdlib_fields); the output is
    # float32, so epoch seconds are compared at float32 precision
    expected = stdlib_table(dates).astype(np.float32)
    np.testing.assert_array_equal(out[:, :N_FIELDS], expected)


def test_missing_dates_get_training_medians_and_a_flag():
    dates = synthetic_datetimes(n=80, seed=6).reset_index(drop=True)
    dates[[3, 10, 11, 40]] = pd.NaT
    train = pd.DataFrame({"d": dates})
    prep = BaselinePrep().fit(train)
    # reference: SimpleImputer(strategy="median") on the fields worked out by the stdlib
    imputer = SimpleImputer(strategy="median").fit(stdlib_table(dates))
    medians = imputer.statistics_

    names = list(prep.get_feature_names_out())
    assert names[-1] == f"d{MISSING_SUFFIX}"
    holdout = pd.DataFrame({"d": pd.Series([pd.NaT, pd.Timestamp("2021-01-03")],
                                           dtype=dates.dtype)})
    out = prep.transform(holdout)
    np.testing.assert_allclose(out[0, :N_FIELDS], medians.astype(np.float32), rtol=1e-6)
    assert out[0, -1] == 1 and out[1, -1] == 0
    assert out[1, FIELD["iso_week"]] == 53  # ISO 8601: 2021-01-03 is 2020-W53-7 (above)
    on_train = prep.transform(train)
    np.testing.assert_allclose(on_train[:, :N_FIELDS],
                               imputer.transform(stdlib_table(dates)).astype(np.float32),
                               rtol=1e-6)
    # reference: the input itself, missing where the date is NaT
    np.testing.assert_array_equal(on_train[:, -1], dates.isna().to_numpy().astype(np.float32))


def test_missing_date_only_in_holdout_gets_median_without_flag():
    train = pd.DataFrame({"d": synthetic_datetimes(n=31, seed=7)})
    prep = BaselinePrep().fit(train)
    assert all(not n.endswith(MISSING_SUFFIX) for n in prep.get_feature_names_out())
    out = prep.transform(pd.DataFrame({"d": pd.Series([pd.NaT], dtype=train["d"].dtype)}))
    assert out.shape == (1, N_FIELDS)
    # reference: SimpleImputer(strategy="median") on the stdlib fields of the training rows
    medians = SimpleImputer(strategy="median").fit(stdlib_table(train["d"])).statistics_
    np.testing.assert_allclose(out[0], medians.astype(np.float32), rtol=1e-6)


def test_date_columns_given_as_text_are_parsed():
    text = pd.DataFrame({"d": ["2021-01-03", "2021-01-04", "2020-02-29"]})  # synthetic
    out = BaselinePrep(date_columns=["d"]).fit_transform(text)
    # reference: datetime.date.isocalendar (ISO 8601 week) and isoweekday() (Monday = 1)
    days = [dt.date.fromisoformat(v) for v in text["d"]]
    assert list(out[:, FIELD["iso_week"]]) == [d.isocalendar()[1] for d in days]
    assert list(out[:, FIELD["iso_weekday"]]) == [d.isoweekday() for d in days] == [7, 1, 6]


def test_date_columns_text_mixing_iso_8601_date_and_date_time():
    # synthetic; both forms are ISO 8601 (datetime.fromisoformat reads both)
    text = pd.DataFrame({"d": ["2021-01-03", "2021-01-04 06:30", "2021-01-05T12:00:00"]})
    out = BaselinePrep(date_columns=["d"]).fit_transform(text)
    expected = [dt.datetime.fromisoformat(v).day for v in text["d"]]
    assert list(out[:, FIELD["day_of_month"]]) == expected
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
    assert [prep.fill_values_[c] for c in train.columns] == pytest.approx(list(imputer.statistics_))
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


def test_mean_fill_matches_simple_imputer_mean():
    # synthetic; fill="mean" is the variant switch: the training mean fills numeric gaps and,
    # field by field, missing dates
    train = synthetic_numeric(150, 5, {"a": 0.2})
    holdout = synthetic_numeric(40, 6, {"a": 0.3, "c": 0.2})
    prep = BaselinePrep(fill="mean").fit(train)
    # reference: sklearn.impute.SimpleImputer(strategy="mean", add_indicator=True)
    imputer = SimpleImputer(strategy="mean", add_indicator=True).fit(train)
    np.testing.assert_allclose(prep.transform(holdout), imputer.transform(holdout), rtol=1e-6)

    dates = synthetic_datetimes(n=50, seed=9).reset_index(drop=True)
    dates[[0, 7]] = pd.NaT
    out = BaselinePrep(fill="mean").fit_transform(pd.DataFrame({"d": dates}))
    # reference: SimpleImputer(strategy="mean") on the stdlib fields of the dates
    expected = SimpleImputer(strategy="mean").fit_transform(stdlib_table(dates))
    np.testing.assert_allclose(out[:, :N_FIELDS], expected.astype(np.float32), rtol=1e-6)


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


@pytest.mark.parametrize("shape", ["several chunks", "all missing", "no rows"])
def test_arrow_held_text_gives_the_codes_of_the_same_text_as_objects(shape):
    # pandas 3 reads text into Arrow memory, in chunks; the codes must not depend on how the
    # text is held. Reference: OrdinalEncoder on the same values (+ 1, as above).
    pieces = {"several chunks": [synthetic_categories(70, s) for s in (7, 8, 9)],
              "all missing": [[None] * 30],
              "no rows": [[]]}[shape]
    train = sum(pieces, [])
    # pd.concat keeps each piece as its own Arrow chunk
    arrow = pd.concat([pd.Series(p, dtype="string[pyarrow]") for p in pieces],
                      ignore_index=True)
    test = synthetic_categories(50, 10, pool=LEVELS + ["kilo"])
    as_objects = BaselinePrep().fit(pd.DataFrame({"c": pd.Series(train, dtype=object)}))
    as_arrow = BaselinePrep().fit(pd.DataFrame({"c": arrow}))
    assert list(as_arrow.categories_["c"]) == list(as_objects.categories_["c"])
    for rows in (test, train):
        got = as_arrow.transform(pd.DataFrame({"c": pd.Series(rows, dtype="string[pyarrow]")}))
        np.testing.assert_array_equal(
            got, as_objects.transform(pd.DataFrame({"c": pd.Series(rows, dtype=object)})))
        if train and any(v is not None for v in train):
            np.testing.assert_array_equal(got[:, 0], reference_codes(train, rows))
        else:  # nothing learned: every row is unseen or missing
            assert (got == 0).all()


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


def test_one_hot_matches_one_hot_encoder():
    train = synthetic_categories(200, 7)
    test = synthetic_categories(60, 8, pool=LEVELS + ["foxtrot"])  # one unseen level
    prep = BaselinePrep(one_hot_max_levels=len(LEVELS)).fit(pd.DataFrame({"c": train}))
    got = prep.transform(pd.DataFrame({"c": test}))
    # reference: sklearn.preprocessing.OneHotEncoder(handle_unknown="ignore") fitted on the
    # training values; missing values are given to it as an unknown level (all zeros)
    known = np.array([v for v in train if v is not None], dtype=object)[:, None]
    encoder = OneHotEncoder(handle_unknown="ignore", sparse_output=False).fit(known)
    given = np.array(["<missing>" if v is None else v for v in test], dtype=object)[:, None]
    np.testing.assert_array_equal(got, encoder.transform(given))
    levels = encoder.categories_[0]
    assert list(prep.get_feature_names_out()) == [f"c=={level}" for level in levels]
    # more training levels than the limit: one integer code instead
    fewer = BaselinePrep(one_hot_max_levels=len(LEVELS) - 1).fit(pd.DataFrame({"c": train}))
    assert list(fewer.get_feature_names_out()) == ["c"]


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
    expected = (["size", "kind"] + [f"when__{f}" for f in SPEC_FIELDS] + ["rooms",
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


BAD_PARAMETERS = [("date_columns", "when"), ("date_columns", 3), ("ordinal", ["kind"]),
                  ("ordinal", {"kind": "north"}), ("ordinal", {"kind": ["east", "east"]}),
                  ("calendar", "yes"), ("missing_flags", 1), ("fill", "mode"), ("fill", None),
                  ("one_hot_max_levels", -1), ("one_hot_max_levels", 2.5),
                  ("one_hot_max_levels", True)]


@pytest.mark.parametrize("name, value", BAD_PARAMETERS)
def test_parameters_are_stored_unchanged_and_checked_in_fit(name, value):
    # scikit-learn convention: __init__ stores the values as given, fit validates them
    prep = BaselinePrep(**{name: value})
    assert prep.get_params()[name] is value
    for method in (prep.fit, prep.fit_transform):
        with pytest.raises(ValueError, match=name):
            method(mixed_frame())
    assert not hasattr(prep, "n_features_in_")


def test_parameters_accept_numpy_scalars_and_tuples():
    frame = mixed_frame()
    prep = BaselinePrep(date_columns=("when",), ordinal={"kind": ("south", "east", "north")},
                        calendar=np.True_, missing_flags=np.False_,
                        one_hot_max_levels=np.int64(2))
    assert prep.fit_transform(frame).shape == (len(frame), 3 + N_FIELDS)


# scikit-learn's own estimator checks, as far as they apply. Left out on purpose:
# check_dataframe_column_names_consistency (BaselinePrep takes columns by name, so other
# column orders and extra columns are accepted) and the checks on y, sparse input or dtypes.
SKLEARN_CHECKS = ["check_no_attributes_set_in_init", "check_parameters_default_constructible",
                  "check_get_params_invariance", "check_set_params",
                  "check_dont_overwrite_parameters", "check_estimators_overwrite_params",
                  "check_n_features_in", "check_fit_check_is_fitted",
                  "check_estimators_unfitted", "check_transformer_general",
                  "check_fit_idempotent", "check_transformer_get_feature_names_out",
                  "check_transformer_get_feature_names_out_pandas"]


@pytest.mark.parametrize("check", SKLEARN_CHECKS)
def test_scikit_learn_estimator_check(check):
    from sklearn.utils import estimator_checks

    run = getattr(estimator_checks, check, None)
    if run is None:
        pytest.skip(f"{check} is not in this scikit-learn version")
    run("BaselinePrep", BaselinePrep())


def _documented(section: str) -> set:
    doc = inspect.getdoc(BaselinePrep)
    body = doc.split(f"\n{section}\n{'-' * len(section)}\n")[1]
    body = re.split(r"\n\S[^\n]*\n-{3,}\n", body)[0]  # up to the next numpydoc section
    return set(re.findall(r"^(\w+) :", body, flags=re.MULTILINE))


def test_parameters_and_learned_attributes_are_documented():
    # numpydoc / scikit-learn convention: every parameter under Parameters; every attribute
    # fit learns ends in "_" and is listed under Attributes
    params = set(inspect.signature(BaselinePrep.__init__).parameters) - {"self"}
    assert _documented("Parameters") == params
    prep = BaselinePrep()
    before = set(vars(prep))
    prep.fit(mixed_frame())
    learned = set(vars(prep)) - before
    assert learned and all(name.endswith("_") and not name.startswith("_") for name in learned)
    assert _documented("Attributes") == learned
    for section in ("See Also", "Examples"):
        assert f"\n{section}\n{'-' * len(section)}\n" in inspect.getdoc(BaselinePrep)


def test_get_feature_names_out_input_features_must_match():
    frame = mixed_frame()
    prep = BaselinePrep().fit(frame)
    names = prep.get_feature_names_out()
    np.testing.assert_array_equal(prep.get_feature_names_out(list(frame.columns)), names)
    np.testing.assert_array_equal(prep.feature_names_in_, list(frame.columns))
    # reference: scikit-learn's SimpleImputer refuses the same kinds of input_features
    imputer = SimpleImputer().fit(frame[["size", "rooms"]])
    for wrong, wrong_for_imputer in [(list(frame.columns)[:3], ["size"]),
                                     (list(frame.columns)[::-1], ["rooms", "size"]),
                                     (list(frame.columns) + ["extra"], ["size", "rooms", "x"])]:
        with pytest.raises(ValueError, match="input_features"):
            prep.get_feature_names_out(wrong)
        with pytest.raises(ValueError, match="input_features"):
            imputer.get_feature_names_out(wrong_for_imputer)


def test_array_input_follows_scikit_learn_naming():
    X = np.array([[1.0, np.nan], [2.0, 5.0], [4.0, 6.0], [3.0, np.nan]])  # synthetic
    prep = BaselinePrep().fit(X)
    # reference: sklearn SimpleImputer(median, add_indicator=True) on the same array: no
    # feature_names_in_, names x0, x1, and names given as input_features replace them
    ref = SimpleImputer(strategy="median", add_indicator=True).fit(X)
    assert not hasattr(prep, "feature_names_in_") and not hasattr(ref, "feature_names_in_")
    np.testing.assert_allclose(prep.transform(X), ref.transform(X))
    assert list(prep.get_feature_names_out()[:2]) == list(ref.get_feature_names_out()[:2])
    assert list(prep.get_feature_names_out(["u", "v"])) == ["u", "v", "v__missing"]
    with pytest.raises(ValueError, match="input_features"):
        prep.get_feature_names_out(["u"])
    # fitted again on named columns it has feature_names_in_, and again on an array it has not
    assert list(prep.fit(pd.DataFrame(X, columns=["u", "v"])).feature_names_in_) == ["u", "v"]
    assert not hasattr(prep.fit(X), "feature_names_in_")


def test_feature_sources_name_the_input_column_of_each_output():
    frame = mixed_frame()
    frame.loc[[2, 5], "when"] = pd.NaT  # a date column with gaps gets a flag too
    prep = BaselinePrep(one_hot_max_levels=3).fit(frame)
    # hand-written from the layout: size; kind as 3 one-hot columns; 15 calendar fields;
    # rooms; then the flags of when and rooms
    expected = (["size", "kind", "kind", "kind"] + ["when"] * 15 + ["rooms", "when", "rooms"])
    assert list(prep.feature_sources_) == expected
    names = list(prep.get_feature_names_out())
    assert names[-2:] == ["when__missing", "rooms__missing"]
    # reference: fitting without a column removes exactly the features attributed to it
    for col in frame.columns:
        without = BaselinePrep(one_hot_max_levels=3).fit(frame.drop(columns=[col]))
        kept = [n for n, source in zip(names, prep.feature_sources_) if source != col]
        assert list(without.get_feature_names_out()) == kept, col


# --- leakage guard --------------------------------------------------------------------------

def test_learned_codes_and_fill_values_do_not_move_with_holdout_rows():
    train = mixed_frame(200, seed=1)
    prep = BaselinePrep().fit(train)
    categories = copy.deepcopy(prep.categories_)
    fill_values = copy.deepcopy(prep.fill_values_)

    holdout = mixed_frame(50, seed=2)
    holdout.loc[::3, "kind"] = "west"  # a level never seen in training
    holdout["size"] *= 100.0  # very different values
    holdout.loc[::2, "rooms"] = np.nan
    out = prep.transform(holdout)
    names = list(prep.get_feature_names_out())

    assert prep.categories_.keys() == categories.keys()
    for col in categories:
        assert list(prep.categories_[col]) == list(categories[col])
    for col in fill_values:
        np.testing.assert_array_equal(prep.fill_values_[col], fill_values[col])
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
        from tabpar.data.suites import load_suite
        from tabpar.execution.cache import load_arrays, prepare_task

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
    assert out.loc[0, "when__iso_week"] == dt.date(2024, 2, 29).isocalendar().week
    assert out.loc[0, "when__missing"] == 0
