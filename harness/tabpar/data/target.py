"""The target as numbers: floats for regression, class indices for classification."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.text import plain
from tabpar.data.sources import LoadedTask


@dataclass
class Target:
    """The target as numbers: floats for regression, class indices for classification."""

    values: np.ndarray
    classes: list  # class labels in index order (binary: [other, positive]); [] for regression


def as_numbers(values: pd.Series):
    """(the values as numbers, NaN where missing; position of the first value that is given but
    is not a number, or None)."""
    converted = pd.to_numeric(values, errors="coerce")
    bad = (converted.isna() & values.notna()).to_numpy()
    return converted, (int(np.flatnonzero(bad)[0]) if bad.any() else None)


def encode_target(loaded: LoadedTask) -> Target:
    """The task's target as numbers (see Target); UserError naming the first bad value."""
    task = loaded.task
    series = loaded.frame[task.target]
    where = f"target '{task.target}' of task '{task.name}'"
    if task.type == "regression":
        if not pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series):
            converted, row = as_numbers(series)
            if row is not None:
                raise UserError(f"The regression {where} has a non-numeric value "
                                f"{plain(series.iloc[row])!r} at row {loaded.row_ids[row]}; use a numeric "
                                f"target or "
                                f"type = 'binary'/'multiclass'.")
            series = converted
        values = series.to_numpy(dtype=float)
        if not np.isfinite(values).all():
            row = int(np.flatnonzero(~np.isfinite(values))[0])
            raise UserError(f"The {where} has an infinite value at row {loaded.row_ids[row]}; "
                            f"remove or fix it.")
        if np.ptp(values) == 0:
            raise UserError(f"The {where} is constant ({values[0]:g}); there is nothing to "
                            f"predict; choose another target column.")
        if task.log_target and (values < 0).any():
            row = int(np.flatnonzero(values < 0)[0])
            raise UserError(f"The {where} has a negative value {values[row]:g} at row "
                            f"{loaded.row_ids[row]}, "
                            f"but RMSLE needs values >= 0; use metric rmse or fix the data.")
        return Target(values=values, classes=[])
    present = pd.unique(series)
    if task.type == "binary":
        positive = task.positive
        matches = [v for v in present if v == positive or str(v) == str(positive)]
        if not matches:
            raise UserError(f"The positive class {plain(positive)!r} of task '{task.name}' is not among "
                            f"the values of its target '{task.target}' "
                            f"({', '.join(map(repr, sorted(map(str, present))[:6]))}); set "
                            f"positive to one of them.")
        if len(present) > 2:
            raise UserError(f"The binary {where} has {len(present)} classes; use type = "
                            f"'multiclass' or derive a two-class target.")
        if len(present) < 2:
            raise UserError(f"The {where} has a single class ({plain(present[0])!r}); there is nothing "
                            f"to tell apart; choose a target with two classes.")
        # compared as text, as the suite file gives it; on the distinct values, then per row
        codes, uniques = pd.factorize(series)
        is_positive = np.array([str(v) == str(matches[0]) for v in uniques], dtype=int)
        others = [v for v in present if str(v) != str(matches[0])]
        return Target(values=is_positive[codes], classes=[others[0], matches[0]])
    classes = sorted(present, key=str)
    if len(classes) < 2:
        raise UserError(f"The {where} has a single class ({plain(classes[0])!r}); there is nothing to "
                        f"tell apart; choose a target with two or more classes.")
    index = {str(c): i for i, c in enumerate(classes)}
    codes, uniques = pd.factorize(series)
    return Target(values=np.array([index[str(v)] for v in uniques], dtype=int)[codes],
                  classes=classes)
