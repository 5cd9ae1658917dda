"""The holdout split, and the one load → target → split path every stage shares.

``time``: the latest rows are held out and no training row is later than any holdout row.
``random``: a seeded draw, stratified by class for classification.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tabpar.common.errors import UserError
from tabpar.common.text import plain
from tabpar.data.sources import LoadedTask, load_task
from tabpar.data.target import Target, encode_target

MIN_HOLDOUT_ROWS = 20
MIN_TRAIN_ROWS = 20


@dataclass
class Split:
    """Row positions (into ``LoadedTask.frame``) of the training and holdout rows, ascending."""

    train: np.ndarray
    holdout: np.ndarray
    description: str
    notes: list


def _time_split(loaded: LoadedTask):
    import pandas as pd
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
    if len(positions) == 0:
        a = task.assemble_date
        source = (f" (assembled from {a.year}/{a.month}{'/' + a.day if a.day else ''}, none of "
                  f"which gave a valid date)" if a is not None and a.name == hold.date else "")
        raise UserError(f"The holdout date column '{hold.date}' of task '{task.name}' has no "
                        f"dates at all{source}; check that column, or use a random holdout.")
    # as UTC instants: a time-zone-aware column would otherwise give Timestamp objects
    stamps = dates.to_numpy(dtype="datetime64[ns]")[positions]
    order = np.argsort(stamps, kind="stable")
    n = len(positions)
    if hold.cutoff is not None:
        cutoff = pd.Timestamp(hold.cutoff)
        if dates.dt.tz is None and cutoff.tzinfo is not None:
            raise UserError(f"The holdout cutoff {hold.cutoff} of task '{task.name}' has a UTC "
                            f"offset but its date column '{hold.date}' has none; write the "
                            f"cutoff without an offset, on the dates' own clock.")
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
    from sklearn.model_selection import train_test_split
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
                                f"({plain(target.classes[found[0]])!r}); change the holdout so both "
                                f"sides see every class.")
        if len(np.unique(target.values[train])) < k:
            notes.append("some classes never appear in the training rows")
    desc = hold.describe() + f" = {len(holdout):,} holdout / {len(train):,} training rows"
    return Split(train=train.astype(np.int64), holdout=holdout.astype(np.int64),
                 description=desc, notes=notes)


@dataclass
class SplitTask:
    """A task's rows with the target as numbers and the holdout split chosen."""

    loaded: LoadedTask
    target: Target
    split: Split


def load_and_split(task) -> SplitTask:
    """Load ``task``'s rows, encode its target and split them: the one path the runner, export,
    the diagnostics and calibrate share, so they all see the same rows (UserError on bad
    input)."""
    return split_loaded(load_task(task))


def split_loaded(loaded: LoadedTask) -> SplitTask:
    """``load_and_split`` for rows already loaded (the cache loads first to learn the data's
    fingerprint, and splits only on a cache miss)."""
    target = encode_target(loaded)
    return SplitTask(loaded=loaded, target=target, split=split_rows(loaded, target))
