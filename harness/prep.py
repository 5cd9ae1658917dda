"""The baseline procedure: a scikit-learn transformer fitted on training rows only.

- date columns → calendar fields (year, month, ISO week, day, day of week, day of year, month /
  quarter / year start and end flags, elapsed days since 1970-01-01);
- other non-numeric columns → integer codes learned on the training rows: 1..K in sorted order
  (or the given level order for ordinal columns); missing and unseen values → 0;
- numeric columns → as they are, gaps filled with the training median, plus a 0/1 missing flag
  for each column that had gaps in the training rows (as SimpleImputer(add_indicator=True)).

Nothing else. Output is a float32 array (what the tree libraries use internally).

The switches ``calendar``, ``missing_flags``, ``fill`` and ``one_hot_max_levels`` exist for
variants that ``tabpar compare`` tests against the built-in procedure; their defaults are the
built-in procedure.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.utils.validation import check_is_fitted

from .sources import to_datetimes

CALENDAR_FIELDS = ("year", "month", "week", "day", "day_of_week", "day_of_year", "is_month_start",
                   "is_month_end", "is_quarter_start", "is_quarter_end", "is_year_start",
                   "is_year_end", "elapsed_days")
MISSING_SUFFIX = "__missing"


def calendar_fields(dates: pd.Series) -> np.ndarray:
    """(n, 13) float64 array of CALENDAR_FIELDS; NaN where the date is missing.

    Time-zone-aware dates give fields in their own zone; ``week`` is the ISO 8601 week number;
    ``day_of_week`` is 0 = Monday; ``elapsed_days`` counts days (fractional) since the Unix epoch.
    """
    accessor = dates.dt
    out = np.empty((len(dates), len(CALENDAR_FIELDS)), dtype=np.float64)
    for j, name in enumerate(CALENDAR_FIELDS):
        if name == "week":
            values = accessor.isocalendar()["week"]
        elif name == "elapsed_days":
            epoch = pd.Timestamp("1970-01-01", tz="UTC" if accessor.tz is not None else None)
            values = (dates - epoch) / pd.Timedelta(days=1)
        else:
            values = getattr(accessor, name)
        if values.dtype == bool:
            out[:, j] = values.to_numpy()
            out[dates.isna().to_numpy(), j] = np.nan
        else:
            out[:, j] = values.to_numpy(dtype=np.float64, na_value=np.nan)
    return out


def _sorted_levels(values) -> list:
    """Numbers in numeric order, anything else by its text (mixed types: numbers first)."""
    def key(v):
        if isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool):
            return (0, float(v), "")
        return (1, 0.0, str(v))
    return sorted(values, key=key)


def _is_date(series: pd.Series) -> bool:
    return pd.api.types.is_datetime64_any_dtype(series)


def _is_numeric(series: pd.Series) -> bool:
    return pd.api.types.is_numeric_dtype(series) and not isinstance(series.dtype,
                                                                     pd.CategoricalDtype)


class BaselinePrep(TransformerMixin, BaseEstimator):
    """The baseline procedure (see module docstring).

    Parameters
    ----------
    date_columns : list of str, optional
        Columns to treat as dates even if stored as text; datetime columns are found anyway.
    ordinal : dict of str → list, optional
        Level order for ordinal columns: the first level gets code 1.
    calendar : bool, default True
        Expand dates into calendar fields; False drops date columns.
    missing_flags : bool, default True
        Add a 0/1 flag per column with gaps in the training rows.
    fill : {"median", "mean"}, default "median"
        Statistic of the training rows that fills numeric gaps.
    one_hot_max_levels : int, default 0
        Columns with at most this many training levels get one 0/1 column per level (missing
        and unseen → all zeros) instead of an integer code; 0 = never.
    """

    def __init__(self, date_columns=None, ordinal=None, calendar=True, missing_flags=True,
                 fill="median", one_hot_max_levels=0):
        self.date_columns = date_columns
        self.ordinal = ordinal
        self.calendar = calendar
        self.missing_flags = missing_flags
        self.fill = fill
        self.one_hot_max_levels = one_hot_max_levels

    def _frame(self, X) -> pd.DataFrame:
        if not isinstance(X, pd.DataFrame):
            X = pd.DataFrame(X)
            X.columns = [f"x{i}" for i in range(X.shape[1])]
        dates = set(self.date_columns or ())
        for col in dates & set(X.columns):
            if not _is_date(X[col]):
                # unparseable text becomes a missing date (the loaders reject it with a message)
                X = X.assign(**{col: to_datetimes(X[col])[0]})
        return X

    def fit(self, X, y=None):
        """Learn codes, medians and which columns get missing flags, from these rows only."""
        if self.fill not in ("median", "mean"):
            raise ValueError(f"fill must be 'median' or 'mean', not {self.fill!r}")
        stat = np.nanmedian if self.fill == "median" else np.nanmean
        X = self._frame(X)
        self.feature_names_in_ = np.asarray([str(c) for c in X.columns], dtype=object)
        self.n_features_in_ = X.shape[1]
        ordinal = dict(self.ordinal or {})
        self.roles_ = {}
        self.categories_ = {}
        self.medians_ = {}
        self.flagged_ = []
        names = []
        for col in X.columns:
            series = X[col]
            if _is_date(series) and not self.calendar:
                self.roles_[col] = "dropped"
                continue
            if _is_date(series):
                self.roles_[col] = "date"
                fields = calendar_fields(series)
                gaps = bool(np.isnan(fields[:, 0]).any())
                med = stat(fields, axis=0) if not np.isnan(fields).all() else \
                    np.zeros(fields.shape[1])
                self.medians_[col] = np.where(np.isnan(med), 0.0, med)
                names += [f"{col}__{f}" for f in CALENDAR_FIELDS]
            elif _is_numeric(series) and col not in ordinal:
                self.roles_[col] = "numeric"
                values = series.to_numpy(dtype=np.float64, na_value=np.nan)
                gaps = bool(np.isnan(values).any())
                med = stat(values) if not np.isnan(values).all() else 0.0
                self.medians_[col] = float(med)
                names.append(str(col))
            else:
                self.roles_[col] = "category"
                gaps = False  # missing is its own code (0), no flag needed
                if col in ordinal:
                    levels = list(ordinal[col])
                elif isinstance(series.dtype, pd.CategoricalDtype) and series.dtype.ordered:
                    levels = list(series.dtype.categories)
                else:
                    levels = _sorted_levels(pd.unique(series.dropna().to_numpy(dtype=object)))
                self.categories_[col] = pd.Index(levels, dtype=object)
                if 0 < len(levels) <= self.one_hot_max_levels:
                    self.roles_[col] = "one_hot"
                    names += [f"{col}=={level}" for level in levels]
                else:
                    names.append(str(col))
            if gaps and self.missing_flags:
                self.flagged_.append(col)
        names += [f"{col}{MISSING_SUFFIX}" for col in self.flagged_]
        self.feature_names_out_ = np.asarray(names, dtype=object)
        return self

    def transform(self, X):
        """Float32 array (n_rows, len(get_feature_names_out())) of prepared features."""
        check_is_fitted(self, "feature_names_out_")
        X = self._frame(X)
        missing_cols = [c for c, r in self.roles_.items() if c not in X.columns and
                        r != "dropped"]
        if missing_cols:
            raise ValueError(f"columns seen in fit are missing: {missing_cols[:5]}")
        n = len(X)
        out = np.empty((n, len(self.feature_names_out_)), dtype=np.float32)
        j = 0
        flags = {}
        for col, role in self.roles_.items():
            if role == "dropped":
                continue
            series = X[col]
            if role == "date":
                fields = calendar_fields(series)
                gap = np.isnan(fields[:, 0])
                if gap.any():
                    fields[gap] = self.medians_[col]
                out[:, j:j + fields.shape[1]] = fields
                j += fields.shape[1]
            elif role == "numeric":
                values = series.to_numpy(dtype=np.float64, na_value=np.nan)
                gap = np.isnan(values)
                out[:, j] = np.where(gap, self.medians_[col], values)
                j += 1
            else:
                levels = self.categories_[col]
                codes = levels.get_indexer(series.to_numpy(dtype=object))  # -1: missing, unseen
                if role == "one_hot":
                    block = out[:, j:j + len(levels)]
                    block[:] = 0
                    seen = codes >= 0
                    block[np.flatnonzero(seen), codes[seen]] = 1
                    j += len(levels)
                else:
                    out[:, j] = codes + 1
                    j += 1
                gap = None
            if col in self.flagged_:
                flags[col] = gap
        for col in self.flagged_:
            out[:, j] = flags[col]
            j += 1
        return out

    def get_feature_names_out(self, input_features=None):
        check_is_fitted(self, "feature_names_out_")
        return self.feature_names_out_.copy()
