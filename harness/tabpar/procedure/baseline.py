"""The baseline procedure: a scikit-learn transformer fitted on training rows only.

- date columns → calendar fields (year, month, ISO week, day, day of week, day of year, month /
  quarter / year start and end flags, elapsed days since 1970-01-01);
- other non-numeric columns → integer codes learned on the training rows: 1..K in sorted order
  (or the given level order for ordinal columns); missing and unseen values → 0;
- numeric columns → as they are, gaps filled with the training median, plus a 0/1 missing flag
  for each column that had gaps in the training rows (as SimpleImputer(add_indicator=True)).

Nothing else. Output is a float32 array (what the tree libraries use internally), in
column-major order.

The switches ``calendar``, ``missing_flags``, ``fill`` and ``one_hot_max_levels`` exist for
variants that ``tabpar compare`` tests against the built-in procedure; their defaults are the
built-in procedure.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.base import BaseEstimator, TransformerMixin
from sklearn.utils.validation import check_is_fitted

from tabpar.data.sources import to_datetimes

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


def median_from_counts(values: np.ndarray, counts: np.ndarray) -> float:
    """The median of ``values`` each repeated ``counts`` times, exactly as np.median would give
    on the repeated rows (the mean of the two middle values for an even count); NaN if empty."""
    order = np.argsort(values, kind="stable")
    values, counts = values[order], counts[order]
    total = int(counts.sum())
    if total == 0:
        return float("nan")
    ends = np.cumsum(counts)
    lower = values[np.searchsorted(ends, (total - 1) // 2, side="right")]
    upper = values[np.searchsorted(ends, total // 2, side="right")]
    return float((lower + upper) / 2)


def _date_fields(dates: pd.Series):
    """(code of each row's distinct date, -1 if missing; calendar_fields of the distinct dates;
    each distinct date's row count). Fields are worked out once per distinct date and only
    spread to the rows when the output is written."""
    codes, uniques = pd.factorize(dates, use_na_sentinel=True)
    fields = calendar_fields(pd.Series(uniques))
    counts = np.bincount(codes[codes >= 0], minlength=len(uniques))
    return codes, fields, counts


def _numeric(series: pd.Series) -> np.ndarray:
    """The column as a NumPy array, a view where pandas allows it (int, float, bool); nullable
    dtypes give float64 with NaN for missing."""
    if isinstance(series.dtype, np.dtype):
        return series.to_numpy()
    return series.to_numpy(dtype=np.float64, na_value=np.nan)


def _value_codes(series: pd.Series):
    """(each row's index into ``values``, -1 if missing; ``values``). A categorical column gives
    its own codes and levels (no hashing of the rows); any other is factorised once."""
    if isinstance(series.dtype, pd.CategoricalDtype):
        return series.cat.codes.to_numpy(), series.cat.categories
    return pd.factorize(series, use_na_sentinel=True)


def _column_median(series: pd.Series, values: np.ndarray, gap: np.ndarray) -> float:
    """Median of the non-missing values (NaN if none), by counting for small-range integers."""
    if pd.api.types.is_integer_dtype(series) and not gap.any() and len(values):
        ints = series.to_numpy()
        low, high = int(ints.min()), int(ints.max())
        if high - low < 1 << 20:
            counts = np.bincount(ints - low)
            return median_from_counts(np.arange(len(counts), dtype=float) + low, counts)
    known = values[~gap] if gap.any() else values
    return float(np.median(known)) if len(known) else float("nan")


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

    # Each column is factorised once (pandas' hash table): codes per row plus its few distinct
    # values. Category codes and calendar fields are then worked out on the distinct values
    # alone and spread to the rows by indexing, which is what makes this fast on large frames.

    def fit(self, X, y=None):
        """Learn codes, medians and which columns get missing flags, from these rows only."""
        self._learn(self._frame(X))
        return self

    def fit_transform(self, X, y=None, **fit_params):
        """``fit(X).transform(X)`` sharing the per-column work between the two."""
        X = self._frame(X)
        return self._encode(X, self._learn(X))

    def transform(self, X):
        """Float32 array (n_rows, len(get_feature_names_out())) of prepared features."""
        check_is_fitted(self, "feature_names_out_")
        X = self._frame(X)
        missing_cols = [c for c, r in self.roles_.items() if c not in X.columns and
                        r != "dropped"]
        if missing_cols:
            raise ValueError(f"columns seen in fit are missing: {missing_cols[:5]}")
        return self._encode(X, {})

    def _learn(self, X: pd.DataFrame) -> dict:
        if self.fill not in ("median", "mean"):
            raise ValueError(f"fill must be 'median' or 'mean', not {self.fill!r}")
        self.feature_names_in_ = np.asarray([str(c) for c in X.columns], dtype=object)
        self.n_features_in_ = X.shape[1]
        ordinal = dict(self.ordinal or {})
        self.roles_, self.categories_, self.medians_, self.flagged_ = {}, {}, {}, []
        names, work = [], {}
        for col in X.columns:
            series = X[col]
            if _is_date(series) and not self.calendar:
                self.roles_[col] = "dropped"
                continue
            if _is_date(series):
                self.roles_[col] = "date"
                codes, distinct, counts = _date_fields(series)
                work[col] = (codes, distinct)
                gaps = bool(counts.sum() < len(series))
                if self.fill == "median":
                    stat = [median_from_counts(distinct[:, k], counts)
                            for k in range(distinct.shape[1])]
                else:
                    stat = (counts @ distinct) / max(counts.sum(), 1)
                self.medians_[col] = np.nan_to_num(np.asarray(stat, float), nan=0.0)
                names += [f"{col}__{f}" for f in CALENDAR_FIELDS]
            elif _is_numeric(series) and col not in ordinal:
                self.roles_[col] = "numeric"
                values = _numeric(series)
                gap = np.isnan(values) if values.dtype.kind == "f" else np.zeros(len(values), bool)
                gaps = bool(gap.any())
                stat = (_column_median(series, values, gap) if self.fill == "median"
                        else float(np.nanmean(values)) if (~gap).any() else 0.0)
                self.medians_[col] = 0.0 if np.isnan(stat) else stat
                names.append(str(col))
            else:
                gaps = False  # missing is its own code (0), no flag needed
                codes, values = _value_codes(series)
                if col in ordinal:
                    levels = list(ordinal[col])
                elif isinstance(series.dtype, pd.CategoricalDtype) and series.dtype.ordered:
                    levels = list(series.dtype.categories)
                else:  # the values these rows hold (a categorical's unused levels are not)
                    held = np.bincount(codes[codes >= 0], minlength=len(values)) > 0
                    levels = _sorted_levels(np.asarray(values, dtype=object)[held])
                self.categories_[col] = pd.Index(levels, dtype=object)
                work[col] = (codes, values)
                if 0 < len(levels) <= self.one_hot_max_levels:
                    self.roles_[col] = "one_hot"
                    names += [f"{col}=={level}" for level in levels]
                else:
                    self.roles_[col] = "category"
                    names.append(str(col))
            if gaps and self.missing_flags:
                self.flagged_.append(col)
        names += [f"{col}{MISSING_SUFFIX}" for col in self.flagged_]
        self.feature_names_out_ = np.asarray(names, dtype=object)
        return work

    def _encode(self, X: pd.DataFrame, work: dict) -> np.ndarray:
        # column-major, so each column is written contiguously (the model libraries take either)
        out = np.empty((len(X), len(self.feature_names_out_)), dtype=np.float32, order="F")
        j, flags = 0, {}
        for col, role in self.roles_.items():
            if role == "dropped":
                continue
            if role == "date":
                codes, distinct = work[col] if col in work else _date_fields(X[col])[:2]
                # one row past the distinct dates holds the fill: missing dates (code -1) get it
                table = np.vstack([distinct, self.medians_[col][None, :]]).astype(np.float32)
                for k in range(table.shape[1]):  # each output column written in one pass
                    np.take(np.ascontiguousarray(table[:, k]), codes, out=out[:, j + k])
                j += table.shape[1]
                gap = codes < 0
            elif role == "numeric":
                values = _numeric(X[col])  # read again, not kept from fit: saves a copy
                out[:, j] = values
                if values.dtype.kind == "f":
                    gap = np.isnan(values)
                    if gap.any():
                        out[gap, j] = self.medians_[col]
                else:
                    gap = None  # int and bool columns cannot have gaps
                j += 1
            else:
                codes, uniques = work[col] if col in work else _value_codes(X[col])
                # learned level index of each distinct value (-1: unseen), then of each row
                mapped = self.categories_[col].get_indexer(np.asarray(uniques, dtype=object))
                # the last entry is for missing rows (code -1)
                lookup = np.append(mapped, -1)
                if role == "one_hot":
                    row_codes = lookup[codes]
                    levels = len(self.categories_[col])
                    block = out[:, j:j + levels]
                    block[:] = 0
                    seen = row_codes >= 0
                    block[np.flatnonzero(seen), row_codes[seen]] = 1
                    j += levels
                else:  # 0 = missing or unseen, else 1..K, written in one pass
                    np.take((lookup + 1).astype(np.float32), codes, out=out[:, j])
                    j += 1
                gap = None
            if col in self.flagged_:
                flags[col] = False if gap is None else gap
        for col in self.flagged_:
            out[:, j] = flags[col]
            j += 1
        return out

    def get_feature_names_out(self, input_features=None):
        check_is_fitted(self, "feature_names_out_")
        return self.feature_names_out_.copy()


def _plus_one(values):
    return np.asarray(values, dtype=np.float64) + 1  # OrdinalEncoder's -1 (missing/unseen) → 0


def _as_object(frame):
    # OrdinalEncoder refuses pd.NA (pandas' nullable string dtype): give it NaN in object columns
    return frame.astype(object).where(frame.notna(), np.nan)


def _calendar_block(frame):
    return np.hstack([calendar_fields(frame[c]) for c in frame.columns])


def sklearn_equivalent(frame: pd.DataFrame, date_columns=()):
    """The built-in procedure written with scikit-learn parts, for checks and benchmarks.

    A ColumnTransformer of OrdinalEncoder (unknown and missing → -1, then +1) on text columns,
    SimpleImputer(median, add_indicator=True) on numeric columns, and calendar_fields +
    SimpleImputer(median) on date columns. It gives BaselinePrep's values (in another column
    order) except the one missing flag per date column, which it lacks.
    """
    from sklearn.compose import ColumnTransformer
    from sklearn.impute import SimpleImputer
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import FunctionTransformer, OrdinalEncoder

    dates = [c for c in frame.columns if c in set(date_columns) or _is_date(frame[c])]
    numeric = [c for c in frame.columns if c not in dates and _is_numeric(frame[c])]
    text = [c for c in frame.columns if c not in dates and c not in numeric]
    parts = []
    if dates:
        parts.append(("dates", make_pipeline(FunctionTransformer(_calendar_block),
                                             SimpleImputer(strategy="median")), dates))
    if text:
        parts.append(("codes", make_pipeline(
            FunctionTransformer(_as_object),
            OrdinalEncoder(handle_unknown="use_encoded_value", unknown_value=-1,
                           encoded_missing_value=-1),
            FunctionTransformer(_plus_one)), text))
    if numeric:
        parts.append(("numeric", SimpleImputer(strategy="median", add_indicator=True), numeric))
    return ColumnTransformer(parts, sparse_threshold=0.0)
