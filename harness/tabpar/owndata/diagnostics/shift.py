"""Shift: how well a classifier tells holdout rows from training rows (cross-validated ROC
AUC), the columns that drive it, and per-column unseen-category and missing-rate shifts."""
from __future__ import annotations

import numpy as np

from tabpar.common.metrics import METRICS
from tabpar.models.zoo import build_model
from tabpar.owndata.diagnostics.base import (
    FAST_MODEL,
    SMALL_FIT_ROWS,
    Diagnostic,
    TaskData,
    column_list,
    importance_by_column,
    subsample,
    timed,
)

# thresholds (documented in README "Your own data"; each sentence states the numbers)
SHIFT_AUC = 0.7  # train-vs-holdout ROC AUC from which the two sides are clearly different
COLUMN_SHIFT = 0.10  # unseen-category share / missing-rate difference worth flagging


@timed
def shift(data: TaskData, rows: int = 10_000, folds: int = 3, seed: int = 0) -> Diagnostic:
    """How different the holdout rows are from the training rows.

    ``auc``: 3-fold cross-validated ROC AUC of the fast model telling holdout rows (positive)
    from training rows on the prepared features (0.5 = indistinguishable, 1 = fully separable);
    at most ``rows`` rows per side. For a time holdout the date-derived features are left out,
    since they separate the two sides by construction. ``drivers``: the columns the classifier
    uses most (share of split gain). ``unseen``: per category column, the share of holdout rows
    whose value never occurs in the training rows; ``missing``: per column, the holdout's
    missing share minus the training rows' (both 0–1).

    Parameters
    ----------
    data : TaskData
        The task's rows (``task_data``).
    rows : int
        Most rows per side for the classifier.
    folds : int
        Cross-validation folds.
    seed : int
        Seeds the row draw, the folds and the model.

    Returns
    -------
    Diagnostic
        ``shift``; flag True = ROC AUC at least ``SHIFT_AUC``, or a column whose unseen share
        or missing-share difference reaches ``COLUMN_SHIFT``. Numbers as above.
    """
    from sklearn.model_selection import StratifiedKFold, cross_val_predict

    task, loaded, split = data.task, data.loaded, data.split
    keep = ~data.date_features() if task.holdout.policy == "time" else np.ones(
        len(data.sources), dtype=bool)
    left_out = sorted({s for s, k in zip(data.sources, keep) if not k})
    numbers: dict = {"auc": None, "drivers": [], "left_out": left_out}

    # per-column shifts on the raw values
    features = loaded.features
    train, hold = features.iloc[split.train], features.iloc[split.holdout]
    unseen, missing = [], []
    for col in features.columns:
        gap = float(hold[col].isna().mean() - train[col].isna().mean())
        if abs(gap) >= 0.005:
            missing.append({"column": col, "train": float(train[col].isna().mean()),
                            "holdout": float(hold[col].isna().mean()), "difference": gap})
        if data.prep.roles_.get(col) in ("category", "one_hot"):
            values = hold[col].dropna()
            if len(values):
                seen = data.prep.categories_[col]
                share = float((seen.get_indexer(values.to_numpy(dtype=object)) < 0).sum()
                              / len(hold))
                if share > 0:
                    unseen.append({"column": col, "share": share,
                                   "levels_in_training": int(len(seen))})
    unseen.sort(key=lambda c: -c["share"])
    missing.sort(key=lambda c: -abs(c["difference"]))
    numbers["unseen"] = unseen[:10]
    numbers["missing"] = missing[:10]

    auc = None
    if keep.any():
        a = subsample(np.arange(len(data.X_train)), rows, seed)
        b = subsample(np.arange(len(data.X_holdout)), rows, seed + 1)
        X = np.vstack([data.X_train[a][:, keep], data.X_holdout[b][:, keep]])
        y = np.r_[np.zeros(len(a), int), np.ones(len(b), int)]
        from threadpoolctl import threadpool_limits

        cv = StratifiedKFold(n_splits=folds, shuffle=True, random_state=seed)
        threads = 1 if len(X) <= SMALL_FIT_ROWS else data.threads
        model = build_model(FAST_MODEL, "binary", seed, threads)
        with threadpool_limits(limits=threads):
            proba = cross_val_predict(model, X, y, cv=cv, method="predict_proba")[:, 1]
            fitted = build_model(FAST_MODEL, "binary", seed, threads).fit(X, y)
        auc = METRICS["roc_auc"](y, proba)
        sources = [s for s, k in zip(data.sources, keep) if k]
        shares = importance_by_column(fitted, sources)
        numbers["auc"] = float(auc)
        numbers["drivers"] = [{"column": c, "share": float(v)} for c, v in shares.head(5).items()
                              if v >= 0.01]
        numbers["rows_per_side"] = [int(len(a)), int(len(b))]

    column_flags = ([u["column"] for u in unseen if u["share"] >= COLUMN_SHIFT]
                    + [m["column"] for m in missing if abs(m["difference"]) >= COLUMN_SHIFT])
    flag = (auc is not None and auc >= SHIFT_AUC) or bool(column_flags)
    parts = []
    if auc is None:
        parts.append("No columns besides the dates to compare, so no classifier was fitted")
    else:
        drivers = ", ".join(f"'{d['column']}' ({d['share']:.0%})" for d in numbers["drivers"][:3])
        strength = ("clearly" if auc >= SHIFT_AUC else "slightly" if auc >= 0.6 else "hardly")
        parts.append(f"A classifier {strength} tells holdout rows from training rows: ROC AUC "
                     f"{auc:.2f} ({folds}-fold cross-validated; 0.5 = indistinguishable)"
                     + (f", driven by {drivers}" if drivers and auc >= 0.6 else ""))
    if left_out:
        parts.append(f"date-derived features of {column_list(left_out)} left out, as a time "
                     f"holdout separates them by construction")
    if unseen and unseen[0]["share"] >= COLUMN_SHIFT:
        u = unseen[0]
        parts.append(f"{u['share']:.0%} of holdout rows have a '{u['column']}' value never seen "
                     f"in training (coded 0 by the baseline)")
    if missing and abs(missing[0]["difference"]) >= COLUMN_SHIFT:
        m = missing[0]
        parts.append(f"'{m['column']}' is missing in {m['holdout']:.0%} of holdout rows vs "
                     f"{m['train']:.0%} of training rows")
    return Diagnostic("shift", bool(flag), numbers, "; ".join(parts) + ".")
