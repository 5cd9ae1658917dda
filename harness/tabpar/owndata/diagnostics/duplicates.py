"""Conflicting duplicates: rows with identical features but different targets (a noise floor
no model can pass)."""
from __future__ import annotations

import numpy as np
import pandas as pd

from tabpar.common.text import format_number as fmt
from tabpar.owndata.diagnostics.base import Diagnostic, TaskData, timed

DUPLICATE_SHARE = 0.01  # share of rows in conflicting duplicate groups worth flagging


@timed
def conflicting_duplicates(data: TaskData) -> Diagnostic:
    """Rows whose feature values are all identical but whose targets differ.

    Numbers: ``duplicate_rows`` (rows sharing their features with another row),
    ``conflicting_rows`` and ``conflicting_share`` (0–1) of rows in groups with more than one
    target value; a floor no model can beat on those rows: for classification
    ``error_floor`` (share of all rows that must be misclassified), for regression
    ``rmse_floor`` (target units, over all rows: the within-group spread).

    Parameters
    ----------
    data : TaskData
        The task's rows (``task_data``); every row counts, training and holdout.

    Returns
    -------
    Diagnostic
        ``conflicting-duplicates``; flag True = ``conflicting_share`` at least
        ``DUPLICATE_SHARE``. Numbers as above.
    """
    features = data.loaded.features
    y = data.target.values
    n = len(y)
    if features.shape[1] == 0:
        return Diagnostic("conflicting-duplicates", False, {}, "No feature columns.")
    keys = pd.util.hash_pandas_object(features, index=False).to_numpy()
    frame = pd.DataFrame({"key": keys, "y": y})
    groups = frame.groupby("key")["y"]
    size = groups.transform("size").to_numpy()
    distinct = groups.transform("nunique").to_numpy()
    conflicting = distinct > 1
    numbers = {"duplicate_rows": int((size > 1).sum()), "conflicting_rows": int(conflicting.sum()),
               "conflicting_share": float(conflicting.mean()), "rows": n}
    if data.task.type == "regression":
        spread = (frame["y"] - groups.transform("mean")).to_numpy()
        floor = float(np.sqrt(np.mean(spread ** 2)))
        numbers["rmse_floor"] = floor
        floor_text = f"an RMSE floor of {fmt(floor)} over all rows (target units)"
    else:
        top = frame.groupby(["key", "y"]).size().groupby(level=0).max()
        wrong = n - int(top.sum())
        numbers["error_floor"] = wrong / n
        floor_text = f"at least {wrong / n:.1%} of all rows misclassified by any model"
    flag = numbers["conflicting_share"] >= DUPLICATE_SHARE
    if numbers["conflicting_rows"] == 0:
        sentence = (f"No rows share every feature value while differing in the target "
                    f"({numbers['duplicate_rows']:,} rows are duplicates with the same target).")
    else:
        share = numbers["conflicting_share"]
        sentence = (f"{numbers['conflicting_rows']:,} rows ({share:.2%}) "
                    f"have identical features but different targets: {floor_text}"
                    + (", a noise floor no pipeline can pass." if flag else
                       f", too few to limit the score (flagged from {DUPLICATE_SHARE:.0%})."))
    return Diagnostic("conflicting-duplicates", bool(flag), numbers, sentence)
