"""The holdout split, and the target as numbers.

``time``: the latest rows are held out and no training row is later than any holdout row.
``random``: a seeded draw, stratified by class for classification.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
from sklearn.model_selection import train_test_split

from tabpar.common.errors import UserError
from tabpar.data.sources import LoadedTask

MIN_HOLDOUT_ROWS = 20
MIN_TRAIN_ROWS = 20


@dataclass
class Split:
    """Row positions (into ``LoadedTask.frame``) of the training and holdout rows, ascending."""

    train: np.ndarray
    holdout: np.ndarray
    description: str
    notes: list


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
                                f"{series.iloc[row]!r} at row {loaded.row_ids[row]}; use a numeric "
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
            raise UserError(f"The positive class {positive!r} of task '{task.name}' is not among "
                            f"the values of its target '{task.target}' "
                            f"({', '.join(map(repr, sorted(map(str, present))[:6]))}); set "
                            f"positive to one of them.")
        if len(present) > 2:
            raise UserError(f"The binary {where} has {len(present)} classes; use type = "
                            f"'multiclass' or derive a two-class target.")
        if len(present) < 2:
            raise UserError(f"The {where} has a single class ({present[0]!r}); there is nothing "
                            f"to tell apart; choose a target with two classes.")
        # compared as text, as the suite file gives it; on the distinct values, then per row
        codes, uniques = pd.factorize(series)
        is_positive = np.array([str(v) == str(matches[0]) for v in uniques], dtype=int)
        others = [v for v in present if str(v) != str(matches[0])]
        return Target(values=is_positive[codes], classes=[others[0], matches[0]])
    classes = sorted(present, key=str)
    if len(classes) < 2:
        raise UserError(f"The {where} has a single class ({classes[0]!r}); there is nothing to "
                        f"tell apart; choose a target with two or more classes.")
    index = {str(c): i for i, c in enumerate(classes)}
    codes, uniques = pd.factorize(series)
    return Target(values=np.array([index[str(v)] for v in uniques], dtype=int)[codes],
                  classes=classes)


def _time_split(loaded: LoadedTask):
    task, hold = loaded.task, loaded.task.holdout
    dates = loaded.frame[hold.date]
    if not pd.api.types.is_datetime64_any_dtype(dates):
        raise UserError(f"The holdout date column '{hold.date}' of task '{task.name}' is not a "
                        f"date column; list it under dates or assemble it.")
    notes = []
    known = dates.notna().to_numpy()
    if not known.all():
        notes.append(f"left out {int((~known).sum()):,} rows with no {hold.date} (cannot be "
                     f"placed in time)")
    positions = np.flatnonzero(known)
    # as UTC instants: a time-zone-aware column would otherwise give Timestamp objects
    stamps = dates.to_numpy(dtype="datetime64[ns]")[positions]
    order = np.argsort(stamps, kind="stable")
    n = len(positions)
    if hold.cutoff is not None:
        cutoff = pd.Timestamp(hold.cutoff)
        if dates.dt.tz is not None and cutoff.tzinfo is None:
            cutoff = cutoff.tz_localize(dates.dt.tz)
        in_holdout = dates.iloc[positions] >= cutoff
        in_holdout = in_holdout.to_numpy()
    else:
        n_hold = hold.rows if hold.rows is not None else math.ceil(hold.share * n)
        if n_hold >= n:
            raise UserError(f"The holdout of task '{task.name}' asks for {n_hold:,} of its {n:,} "
                            f"rows, leaving none to train on; hold out fewer.")
        first = stamps[order[n - n_hold]] if n_hold > 0 else None
        # every row tied with the first holdout time joins the holdout
        in_holdout = (stamps >= first) if first is not None else np.zeros(n, bool)
    holdout = positions[in_holdout]
    train = positions[~in_holdout]
    return train, holdout, notes


def split_rows(loaded: LoadedTask, target: Target) -> Split:
    """Choose the holdout rows by the task's policy; UserError when either side is too small."""
    task, hold = loaded.task, loaded.task.holdout
    n = len(loaded.frame)
    notes: list[str] = []
    if hold.policy == "time":
        train, holdout, notes = _time_split(loaded)
    else:
        size = hold.rows if hold.rows is not None else hold.share
        if isinstance(size, int) and size >= n:
            raise UserError(f"The holdout of task '{task.name}' asks for {size:,} of its {n:,} "
                            f"rows, leaving none to train on; hold out fewer.")
        stratify = target.values if task.type != "regression" else None
        if stratify is not None and np.bincount(stratify).min() < 2:
            raise UserError(f"A class of task '{task.name}' has a single row, so a stratified "
                            f"holdout is impossible; drop that class or add rows.")
        try:
            train, holdout = train_test_split(np.arange(n), test_size=size,
                                              random_state=hold.seed, stratify=stratify)
        except ValueError as exc:
            raise UserError(f"The random holdout of task '{task.name}' is impossible: {exc}.") \
                from None
        train, holdout = np.sort(train), np.sort(holdout)
    if len(holdout) < MIN_HOLDOUT_ROWS:
        raise UserError(f"The holdout of task '{task.name}' would have {len(holdout)} rows, "
                        f"fewer than the minimum {MIN_HOLDOUT_ROWS}; hold out more rows or move "
                        f"the cutoff earlier.")
    if len(train) < MIN_TRAIN_ROWS:
        raise UserError(f"Task '{task.name}' would train on {len(train)} rows, fewer than the "
                        f"minimum {MIN_TRAIN_ROWS}; hold out fewer rows.")
    if task.type != "regression":
        k = len(target.classes)
        for side, rows in (("training", train), ("holdout", holdout)):
            found = np.unique(target.values[rows])
            if len(found) < 2:
                raise UserError(f"The {side} rows of task '{task.name}' hold a single class "
                                f"({target.classes[found[0]]!r}); change the holdout so both "
                                f"sides see every class.")
        if len(np.unique(target.values[train])) < k:
            notes.append("some classes never appear in the training rows")
    desc = hold.describe() + f" = {len(holdout):,} holdout / {len(train):,} training rows"
    return Split(train=train.astype(np.int64), holdout=holdout.astype(np.int64),
                 description=desc, notes=notes)
