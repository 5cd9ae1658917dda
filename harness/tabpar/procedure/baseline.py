"""The baseline procedure, ``BaselinePrep``: a scikit-learn transformer fitted on training
rows only. Dates become calendar fields (``tabpar.procedure.calendar``), other non-numeric
columns integer codes (missing and unseen → 0), numeric gaps the training median plus a 0/1
missing flag. Nothing else; the output is a float32 array (what the tree libraries use
internally), in column-major order.

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
from tabpar.procedure.calendar import CALENDAR_FIELDS, distinct_date_fields

MISSING_SUFFIX = "__missing"
# rows per block when one column of codes fills several output columns: 64k row codes (512 KiB)
# stay in cache across the columns (bench/prep_speed.py: 15 date fields of 982k rows in 27 ms
# against 35 ms a column at a time)
_ROWS_PER_BLOCK = 1 << 16
# np.take buffers ``out`` in its default mode ("raise"; NumPy's documentation of take): "wrap"
# writes straight into the output, about half the time on 982k rows. The row codes come from
# factorising, so they lie in -1..len(table)-2, and -1 wraps to the table's last entry, the one
# for missing rows, as it would in the default mode.
_SPREAD = "wrap"


def _sorted_levels(values) -> list:
    """Numbers in numeric order, anything else by its text (mixed types: numbers first)."""
    if all(type(v) is str for v in values):  # text only (most columns): plain order is the same
        return sorted(values)

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
    if gap is not None and gap.any():
        values = values[~gap]
    elif pd.api.types.is_integer_dtype(series) and len(values):
        ints = series.to_numpy()
        low, high = int(ints.min()), int(ints.max())
        if high - low < 1 << 20:
            # counted from 0 where the values allow it: saves a shifted copy of the column
            base = 0 if 0 <= low and high < 1 << 20 else low
            counts = np.bincount(ints - base if base else ints)
            return median_from_counts(np.arange(len(counts), dtype=float) + base, counts)
    return float(np.median(values)) if len(values) else float("nan")


def _text_names(X) -> bool:
    """Whether ``X`` names its columns with text (as scikit-learn: else no feature_names_in_)."""
    return isinstance(X, pd.DataFrame) and all(isinstance(c, str) for c in X.columns)


def is_date_column(series: pd.Series) -> bool:
    """Whether the procedure treats ``series`` as dates (a datetime dtype)."""
    return pd.api.types.is_datetime64_any_dtype(series)


def is_numeric_column(series: pd.Series) -> bool:
    """Whether the procedure fills ``series`` with a median (numbers, not categoricals)."""
    return pd.api.types.is_numeric_dtype(series) and not isinstance(series.dtype,
                                                                     pd.CategoricalDtype)


class BaselinePrep(TransformerMixin, BaseEstimator):
    """The baseline procedure (see the module docstring), learned on the rows given to ``fit``.

    Parameters
    ----------
    date_columns : list of str, default=None
        Columns to parse as dates when stored as text (text that is not a date becomes a
        missing date); columns of datetime dtype are dates anyway.
    ordinal : dict of str to list, default=None
        Level order of ordinal columns, numeric ones too: the first level gets code 1, the next
        2, and so on; values not listed get 0.
    calendar : bool, default=True
        Expand date columns into calendar fields; False drops date columns.
    missing_flags : bool, default=True
        Add a 0/1 flag (1 = missing) per numeric or date column with gaps in the training rows.
    fill : {"median", "mean"}, default="median"
        Training statistic that fills numeric gaps and, field by field, missing dates.
    one_hot_max_levels : int, default=0
        Non-numeric columns with at most this many training levels get one 0/1 column per level
        (missing and unseen → all zeros) instead of an integer code; 0 = never.

    Attributes
    ----------
    n_features_in_ : int
        Number of columns seen in ``fit``.
    feature_names_in_ : ndarray of shape (n_features_in_,), dtype object
        Names of the columns seen in ``fit``; defined only when they are all text (an array's
        columns are called x0, x1, ... in the other attributes).
    roles_ : dict of column to str
        What became of each input column, in input order: "date", "numeric", "category" (one
        code), "one_hot" (a 0/1 column per level) or "dropped" (dates with ``calendar=False``).
    categories_ : dict of column to pandas.Index
        Levels of each "category" and "one_hot" column, in code order: level ``k`` (from 0)
        gets code ``k + 1``.
    fill_values_ : dict of column to float or ndarray of shape (len(CALENDAR_FIELDS),)
        Training median (mean with ``fill="mean"``) that fills gaps: one number per numeric
        column, one per calendar field (in that field's unit) per date column; 0 where the
        training rows hold no value at all.
    flagged_ : list of column
        Columns with gaps in the training rows, which get a missing flag, in the flags' output
        order; empty with ``missing_flags=False``.
    feature_names_out_ : ndarray of shape (n_features_out,), dtype object
        Output feature names, in output order: a numeric or category column keeps its name, a
        date column gives ``COLUMN__FIELD`` for each calendar field, a one-hot column gives
        ``COLUMN==LEVEL`` per level, and the flags are ``COLUMN__missing``.
    feature_sources_ : ndarray of shape (n_features_out,), dtype object
        Input column (as in ``roles_``) each output feature comes from, in output order; a
        missing flag comes from the column it flags.

    See Also
    --------
    tabpar.procedure.calendar.calendar_fields : The calendar fields of a date column.
    sklearn.impute.SimpleImputer : With ``strategy="median", add_indicator=True``, the fill and
        flags of numeric columns.
    sklearn.preprocessing.OrdinalEncoder : With unknown and missing values encoded as -1, the
        category codes less one.

    Examples
    --------
    An invented frame: three days of a made-up bakery's sales, one count missing.

    >>> import pandas as pd
    >>> from tabpar.procedure.baseline import BaselinePrep
    >>> sales = pd.DataFrame({
    ...     "day": pd.to_datetime(["2021-01-03", "2021-01-04", "2021-01-05"]),
    ...     "bread": ["rye", "spelt", None],
    ...     "loaves_sold": [42.0, None, 35.0],
    ... })
    >>> prep = BaselinePrep().fit(sales)
    >>> prep.roles_
    {'day': 'date', 'bread': 'category', 'loaves_sold': 'numeric'}
    >>> list(prep.feature_sources_[[0, -1]]), list(prep.get_feature_names_out()[-3:])
    (['day', 'loaves_sold'], ['bread', 'loaves_sold', 'loaves_sold__missing'])
    >>> out = prep.set_output(transform="pandas").transform(sales)
    >>> out[["day__year", "day__iso_year", "day__iso_week", "day__iso_weekday"]].values.tolist()
    [[2021.0, 2020.0, 53.0, 7.0], [2021.0, 2021.0, 1.0, 1.0], [2021.0, 2021.0, 1.0, 2.0]]
    >>> out[["bread", "loaves_sold", "loaves_sold__missing"]].values.tolist()
    [[1.0, 42.0, 0.0], [2.0, 38.5, 1.0], [0.0, 35.0, 0.0]]
    """

    def __init__(self, date_columns=None, ordinal=None, calendar=True, missing_flags=True,
                 fill="median", one_hot_max_levels=0):
        self.date_columns = date_columns
        self.ordinal = ordinal
        self.calendar = calendar
        self.missing_flags = missing_flags
        self.fill = fill
        self.one_hot_max_levels = one_hot_max_levels

    def _check_params(self):
        """ValueError naming the parameter that holds a value ``fit`` cannot use."""
        def bad(name, wanted):
            return ValueError(f"{name} must be {wanted}, not {getattr(self, name)!r}")

        def listlike(value):
            return np.iterable(value) and not isinstance(value, (str, bytes, dict))

        if self.date_columns is not None and not listlike(self.date_columns):
            raise bad("date_columns", "a list of column names or None")
        if self.ordinal is not None and not hasattr(self.ordinal, "items"):
            raise bad("ordinal", "a dict of column name to level list, or None")
        for col, levels in (self.ordinal or {}).items():
            if not listlike(levels) or len(set(levels)) < len(levels):  # one level per code
                raise ValueError(f"ordinal[{col!r}] must be a list of distinct levels, not "
                                 f"{levels!r}")
        for name in ("calendar", "missing_flags"):
            if not isinstance(getattr(self, name), (bool, np.bool_)):
                raise bad(name, "True or False")
        if not (isinstance(self.fill, str) and self.fill in ("median", "mean")):
            raise bad("fill", "'median' or 'mean'")
        n = self.one_hot_max_levels
        if isinstance(n, (bool, np.bool_)) or not isinstance(n, (int, np.integer)) or n < 0:
            raise bad("one_hot_max_levels", "an integer >= 0")

    def _frame(self, X) -> pd.DataFrame:
        if not isinstance(X, pd.DataFrame):
            X = pd.DataFrame(X)
            X.columns = [f"x{i}" for i in range(X.shape[1])]
        dates = set(self.date_columns or ())
        for col in dates & set(X.columns):
            if not is_date_column(X[col]):
                # unparseable text becomes a missing date (the loaders reject it with a message)
                X = X.assign(**{col: to_datetimes(X[col])[0]})
        return X

    # Each column is factorised once (pandas' hash table): codes per row plus its few distinct
    # values. Category codes and calendar fields are then worked out on the distinct values
    # alone and spread to the rows by indexing, which is what makes this fast on large frames.

    def fit(self, X, y=None):
        """Learn codes, fill values and which columns get missing flags, from ``X`` only.

        Parameters
        ----------
        X : pandas.DataFrame of shape (n_samples, n_features)
            Training rows (an array is read as a frame with columns x0, x1, ...).
        y : ignored

        Returns
        -------
        self : BaselinePrep
        """
        self._check_params()
        self._learn(self._frame(X), _text_names(X))
        return self

    def fit_transform(self, X, y=None, **fit_params):
        """``fit(X).transform(X)``, sharing the per-column work between the two."""
        self._check_params()
        named, X = _text_names(X), self._frame(X)
        return self._encode(X, self._learn(X, named))

    def transform(self, X):
        """The prepared features of ``X`` (holding every column seen in ``fit``; others are
        ignored), with what ``fit`` learned.

        Returns
        -------
        ndarray of shape (n_samples, len(feature_names_out_)), dtype float32
        """
        check_is_fitted(self, "feature_names_out_")
        X = self._frame(X)
        missing_cols = [c for c, r in self.roles_.items() if c not in X.columns and
                        r != "dropped"]
        if missing_cols:
            raise ValueError(f"columns seen in fit are missing: {missing_cols[:5]}")
        return self._encode(X, {})

    def _learn(self, X: pd.DataFrame, named: bool) -> dict:
        self.n_features_in_ = X.shape[1]
        if named:
            self.feature_names_in_ = np.asarray(X.columns, dtype=object)
        elif hasattr(self, "feature_names_in_"):  # from an earlier fit on named columns
            del self.feature_names_in_
        ordinal = dict(self.ordinal or {})
        self.roles_, self.categories_, self.fill_values_, self.flagged_ = {}, {}, {}, []
        names, sources, work = [], [], {}
        for col in X.columns:
            series = X[col]
            if is_date_column(series) and not self.calendar:
                self.roles_[col] = "dropped"
                continue
            if is_date_column(series):
                self.roles_[col] = "date"
                codes, distinct, counts = distinct_date_fields(series)
                work[col] = (codes, distinct)
                gaps = bool(counts.sum() < len(series))
                if self.fill == "median":
                    stat = [median_from_counts(distinct[:, k], counts)
                            for k in range(distinct.shape[1])]
                else:
                    stat = (counts @ distinct) / max(counts.sum(), 1)
                self.fill_values_[col] = np.nan_to_num(np.asarray(stat, float), nan=0.0)
                names += [f"{col}__{f}" for f in CALENDAR_FIELDS]
            elif is_numeric_column(series) and col not in ordinal:
                self.roles_[col] = "numeric"
                values = _numeric(series)
                gap = np.isnan(values) if values.dtype.kind == "f" else None  # ints: no gaps
                gaps = gap is not None and bool(gap.any())
                stat = (_column_median(series, values, gap) if self.fill == "median"
                        else float(np.nanmean(values))
                        if len(values) and (gap is None or not gap.all()) else 0.0)
                self.fill_values_[col] = 0.0 if np.isnan(stat) else stat
                names.append(str(col))
            else:
                gaps = False  # missing is its own code (0), no flag needed
                codes, values = _value_codes(series)
                if col in ordinal:
                    levels = list(ordinal[col])
                elif isinstance(series.dtype, pd.CategoricalDtype) and series.dtype.ordered:
                    levels = list(series.dtype.categories)
                elif isinstance(series.dtype, pd.CategoricalDtype):
                    # the levels these rows hold: a categorical's unused levels are left out
                    held = np.bincount(codes[codes >= 0], minlength=len(values)) > 0
                    levels = _sorted_levels(np.asarray(values, dtype=object)[held])
                else:  # factorising the rows gave only values they hold
                    levels = _sorted_levels(np.asarray(values, dtype=object))
                self.categories_[col] = pd.Index(levels, dtype=object)
                work[col] = (codes, values)
                if 0 < len(levels) <= self.one_hot_max_levels:
                    self.roles_[col] = "one_hot"
                    names += [f"{col}=={level}" for level in levels]
                else:
                    self.roles_[col] = "category"
                    names.append(str(col))
            sources += [col] * (len(names) - len(sources))  # this column's features
            if gaps and self.missing_flags:
                self.flagged_.append(col)
        names += [f"{col}{MISSING_SUFFIX}" for col in self.flagged_]
        sources += self.flagged_
        self.feature_names_out_ = np.asarray(names, dtype=object)
        self.feature_sources_ = np.empty(len(sources), dtype=object)
        self.feature_sources_[:] = sources  # element-wise: a tuple label stays one element
        return work

    def _encode(self, X: pd.DataFrame, work: dict) -> np.ndarray:
        # column-major, so each column is written contiguously (the model libraries take either)
        out = np.empty((len(X), len(self.feature_names_out_)), dtype=np.float32, order="F")
        j, flags = 0, {}
        for col, role in self.roles_.items():
            if role == "dropped":
                continue
            if role == "date":
                codes, distinct = work[col] if col in work else distinct_date_fields(X[col])[:2]
                # one row past the distinct dates holds the fill: missing dates (code -1) get it
                table = np.vstack([distinct, self.fill_values_[col][None, :]]).astype(np.float32)
                fields = [np.ascontiguousarray(table[:, k]) for k in range(table.shape[1])]
                # a block of rows at a time, so its codes are read from cache by every field
                for start in range(0, len(codes), _ROWS_PER_BLOCK):
                    rows = slice(start, start + _ROWS_PER_BLOCK)
                    for k, field in enumerate(fields):
                        np.take(field, codes[rows], out=out[rows, j + k], mode=_SPREAD)
                j += table.shape[1]
                gap = codes < 0
            elif role == "numeric":
                values = _numeric(X[col])  # read again, not kept from fit: saves a copy
                out[:, j] = values
                if values.dtype.kind == "f":
                    gap = np.isnan(values)
                    if gap.any():
                        out[gap, j] = self.fill_values_[col]
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
                    np.take((lookup + 1).astype(np.float32), codes, out=out[:, j], mode=_SPREAD)
                    j += 1
                gap = None
            if col in self.flagged_:
                flags[col] = False if gap is None else gap
        for col in self.flagged_:
            out[:, j] = flags[col]
            j += 1
        return out

    def get_feature_names_out(self, input_features=None):
        """Output feature names, in the order of the columns ``transform`` returns.

        Parameters
        ----------
        input_features : array-like of str, default=None
            Input column names; if given, they must equal ``feature_names_in_`` or, for columns
            fitted without text names, replace x0, x1, ... in the output names.

        Returns
        -------
        ndarray of shape (n_features_out,), dtype object
            ``feature_names_out_``, with the given names for columns fitted without text names.
        """
        check_is_fitted(self, "feature_names_out_")
        if input_features is None:
            return self.feature_names_out_.copy()
        given = np.asarray(input_features, dtype=object)
        known = getattr(self, "feature_names_in_", None)
        # the opening words of both messages are those scikit-learn's estimator checks look for
        if known is not None and not np.array_equal(given, known):
            raise ValueError(f"input_features is not equal to feature_names_in_ "
                             f"{list(known)}: got {list(given)}")
        if len(given) != self.n_features_in_:
            raise ValueError(f"input_features should have length equal to the number of "
                             f"columns seen in fit ({self.n_features_in_}), not {len(given)}")
        # columns fitted without text names (x0, x1, ... of an array) take the names given
        rename = dict(zip(self.roles_, given))
        return np.asarray([str(rename[src]) + name[len(str(src)):] for name, src in
                           zip(self.feature_names_out_, self.feature_sources_)], dtype=object)
