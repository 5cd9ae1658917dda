"""A fitted model's predictions in the form the task's metric scores."""
from __future__ import annotations

import numpy as np

from tabpar.data.log_scale import from_log_scale


def predict(model, X, task_type: str, n_classes: int, log_target: bool) -> np.ndarray:
    """Predict ``X`` with a fitted zoo model, in the metric's terms.

    Parameters
    ----------
    model
        A fitted estimator of the zoo (``predict``, and ``predict_proba`` / ``classes_`` for
        classification, classes encoded as 0..K-1).
    X : array of shape (n, n_features)
        Prepared features.
    task_type : str
        ``"regression"``, ``"binary"`` or ``"multiclass"``.
    n_classes : int
        Number of classes of the task (2 for binary); ignored for regression.
    log_target : bool
        Whether the model was fitted on ``log1p`` of the target (regression only).

    Returns
    -------
    numpy.ndarray of float64
        Regression: shape (n,), values in the target's units (``expm1`` applied and clipped at
        0 when ``log_target``). Binary: shape (n,), the probability of the positive class
        (class 1), 0–1. Multiclass: shape (n, n_classes), class probabilities (each row sums
        to 1); a class unseen in training gets probability 0.
    """
    if task_type == "regression":
        out = np.asarray(model.predict(X), dtype=np.float64)
        return np.clip(from_log_scale(out), 0.0, None) if log_target else out
    proba = np.asarray(model.predict_proba(X), dtype=np.float64)
    full = np.zeros((len(X), n_classes))
    full[:, np.asarray(model.classes_, dtype=int)] = proba  # classes unseen in training → 0
    return full[:, 1] if task_type == "binary" else full
