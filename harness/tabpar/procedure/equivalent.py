"""The built-in procedure written with scikit-learn's own parts, as an outside check of
``BaselinePrep`` (tests) and the speed it is measured against (bench/)."""
from __future__ import annotations

import numpy as np
import pandas as pd

from tabpar.procedure.baseline import is_date_column, is_numeric_column
from tabpar.procedure.calendar import calendar_fields


def calendar_block(frame: pd.DataFrame) -> np.ndarray:
    """``calendar_fields`` of each date column of ``frame``, side by side in column order."""
    return np.hstack([calendar_fields(frame[c]) for c in frame.columns])


def _plus_one(values):
    return np.asarray(values, dtype=np.float64) + 1  # OrdinalEncoder's -1 (missing/unseen) → 0


def _as_object(frame):
    # OrdinalEncoder refuses pd.NA (pandas' nullable string dtype): give it NaN in object columns
    return frame.astype(object).where(frame.notna(), np.nan)


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

    dates = [c for c in frame.columns if c in set(date_columns) or is_date_column(frame[c])]
    numeric = [c for c in frame.columns if c not in dates and is_numeric_column(frame[c])]
    text = [c for c in frame.columns if c not in dates and c not in numeric]
    parts = []
    if dates:
        parts.append(("dates", make_pipeline(FunctionTransformer(calendar_block),
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
