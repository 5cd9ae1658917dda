"""Calendar fields of a date column: the numbers and 0/1 flags the baseline procedure makes of
each date.

The fields, in output order (``CALENDAR_FIELDS``), grouped as a date is read: where it falls
in the Gregorian calendar, then in the ISO 8601 week calendar, then whether it opens or closes
a month, quarter or year, then the instant itself as a plain number.

=================  ==========================================================================
year               Gregorian calendar year
quarter            1..4 (January-March is 1)
month              1..12
day_of_month       1..31
day_of_year        1..366 (1 January is 1)
iso_year           ISO 8601 week-numbering year: the year the date's ISO week belongs to,
                   which differs from ``year`` for a few days around 1 January
iso_week           ISO 8601 week number, 1..53 (week 1 holds the year's first Thursday)
iso_weekday        ISO 8601 day of the week, 1 = Monday ... 7 = Sunday
month_start        1 on the first day of a month, else 0
month_end          1 on the last day of a month, else 0
quarter_start      1 on 1 January, 1 April, 1 July and 1 October, else 0
quarter_end        1 on 31 March, 30 June, 30 September and 31 December, else 0
year_start         1 on 1 January, else 0
year_end           1 on 31 December, else 0
epoch_seconds      seconds since 1970-01-01 00:00 UTC (fractional; negative before it)
=================  ==========================================================================

All fields but ``epoch_seconds`` are read in the dates' own time zone (their wall clock);
``epoch_seconds`` of a time-zone-aware date counts to the instant, whatever its zone, and that
of a naive date counts its wall-clock time as if it were UTC. In the float32 arrays the
procedure writes, present-day epoch seconds are exact to 128 s (as fine as the day count they
replace was).
"""
from __future__ import annotations

import numpy as np
import pandas as pd

CALENDAR_FIELDS = ("year", "quarter", "month", "day_of_month", "day_of_year", "iso_year",
                   "iso_week", "iso_weekday", "month_start", "month_end", "quarter_start",
                   "quarter_end", "year_start", "year_end", "epoch_seconds")


def _epoch_seconds(dates: pd.Series) -> pd.Series:
    epoch = pd.Timestamp("1970-01-01", tz="UTC" if dates.dt.tz is not None else None)
    # a division by a Timedelta works whatever the resolution (s, ms, us, ns) of the dtype
    return (dates - epoch) / pd.Timedelta(seconds=1)


def _field_values(dates: pd.Series) -> dict:
    """Each field of CALENDAR_FIELDS as a pandas Series (booleans for the flags)."""
    on = dates.dt
    iso = on.isocalendar()  # computed once: three of the fields come from it
    return {"year": on.year, "quarter": on.quarter, "month": on.month,
            "day_of_month": on.day, "day_of_year": on.day_of_year,
            "iso_year": iso["year"], "iso_week": iso["week"], "iso_weekday": iso["day"],
            "month_start": on.is_month_start, "month_end": on.is_month_end,
            "quarter_start": on.is_quarter_start, "quarter_end": on.is_quarter_end,
            "year_start": on.is_year_start, "year_end": on.is_year_end,
            "epoch_seconds": _epoch_seconds(dates)}


def calendar_fields(dates: pd.Series) -> np.ndarray:
    """The calendar fields of each date.

    Parameters
    ----------
    dates : pandas.Series of datetime64 dtype, naive or time-zone-aware
        Missing dates (NaT) are allowed.

    Returns
    -------
    ndarray of shape (len(dates), len(CALENDAR_FIELDS)), dtype float64
        Column ``k`` holds field ``CALENDAR_FIELDS[k]`` (see the module docstring for units
        and directions); flags are 0.0 or 1.0. A missing date is NaN in every field.
    """
    values = _field_values(dates)
    missing = dates.isna().to_numpy()
    out = np.empty((len(dates), len(CALENDAR_FIELDS)), dtype=np.float64)
    for k, name in enumerate(CALENDAR_FIELDS):
        column = values[name]
        if column.dtype == bool:  # pandas gives False, not NA, for a missing date's flags
            out[:, k] = column.to_numpy()
            out[missing, k] = np.nan
        else:
            out[:, k] = column.to_numpy(dtype=np.float64, na_value=np.nan)
    return out


def distinct_date_fields(dates: pd.Series):
    """Calendar fields worked out once per distinct date, for spreading to the rows later.

    Returns
    -------
    codes : ndarray of int, shape (len(dates),)
        Each row's index into the distinct dates; -1 where the date is missing.
    fields : ndarray of shape (n_distinct, len(CALENDAR_FIELDS))
        ``calendar_fields`` of the distinct dates.
    counts : ndarray of int, shape (n_distinct,)
        How many rows hold each distinct date.
    """
    codes, uniques = pd.factorize(dates, use_na_sentinel=True)
    fields = calendar_fields(pd.Series(uniques))
    if len(codes) and codes.min() < 0:  # missing dates: -1 → bin 0, dropped
        counts = np.bincount(codes + 1, minlength=len(uniques) + 1)[1:]
    else:  # no shifted copy of the codes to make
        counts = np.bincount(codes, minlength=len(uniques))
    return codes, fields, counts
