"""Scores and their directions.

A foundation module (imports nothing from the package), so every stage can ask a metric's
direction. Implemented in NumPy so the bootstrap can call them thousands of times; the tests check
each one against ``sklearn.metrics``.

Prediction shapes: regression → values in the target's units; binary → probability of the
positive class; multiclass → an (n, k) probability matrix with columns in class order.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from tabpar.common.errors import UserError

_EPS = np.finfo(np.float64).eps  # the clip sklearn.metrics.log_loss applies


def _weights(w, n):
    return np.ones(n) if w is None else np.asarray(w, float)


def _rmse(y, p, w=None):
    y, p = np.asarray(y, float), np.asarray(p, float)
    return float(np.sqrt(np.average((y - p) ** 2, weights=_weights(w, len(y)))))


def _rmsle(y, p, w=None):
    y = np.asarray(y, float)
    p = np.asarray(p, float)
    if (y < 0).any() or (p < 0).any():
        raise UserError("RMSLE needs targets and predictions >= 0; found a negative value "
                        "(use rmse for targets that can be negative).")
    # in extended precision: NumPy's float64 log1p rounds the last bit by the CPU's vector
    # instructions (the same choice as tabpar.data.log_scale, which common cannot import)
    return _rmse(np.log1p(y.astype(np.longdouble)).astype(float),
                 np.log1p(p.astype(np.longdouble)).astype(float), w)


def _mae(y, p, w=None):
    y, p = np.asarray(y, float), np.asarray(p, float)
    return float(np.average(np.abs(y - p), weights=_weights(w, len(y))))


def _r2(y, p, w=None):
    y, p = np.asarray(y, float), np.asarray(p, float)
    w = _weights(w, len(y))
    ss_res = np.sum(w * (y - p) ** 2)
    ss_tot = np.sum(w * (y - np.average(y, weights=w)) ** 2)
    if ss_tot == 0:
        return 1.0 if ss_res == 0 else 0.0  # sklearn's convention for a constant target
    return float(1.0 - ss_res / ss_tot)


def _labels(p):
    p = np.asarray(p, float)
    # a tie at 0.5 goes to class 0, as argmax (and scikit-learn's predict) does
    return p.argmax(axis=1) if p.ndim == 2 else (p > 0.5).astype(int)


def _accuracy(y, p, w=None):
    y = np.asarray(y)
    return float(np.average(y == _labels(p), weights=_weights(w, len(y))))


def _log_loss(y, p, w=None):
    y = np.asarray(y, int)
    p = np.asarray(p, float)
    if p.ndim == 1:
        p = np.column_stack([1.0 - p, p])
    p = np.clip(p, _EPS, 1.0)
    p = p / p.sum(axis=1, keepdims=True)
    own = p[np.arange(len(y)), y].astype(np.longdouble)  # as in _rmsle: same bits on any CPU
    return float(-np.average(np.log(own).astype(float), weights=_weights(w, len(y))))


def _binary_auc(y, score, w=None):
    """Weighted Mann-Whitney AUC: ties between a positive and a negative count one half."""
    y = np.asarray(y).astype(bool)
    w = _weights(w, len(y))
    values, group = np.unique(np.asarray(score, float), return_inverse=True)
    pos = np.bincount(group, weights=w * y, minlength=len(values))
    neg = np.bincount(group, weights=w * ~y, minlength=len(values))
    total_pos, total_neg = pos.sum(), neg.sum()
    if total_pos == 0 or total_neg == 0:
        return float("nan")  # undefined with one class present
    neg_below = np.cumsum(neg) - neg
    return float(np.sum(pos * (neg_below + 0.5 * neg)) / (total_pos * total_neg))


def _roc_auc(y, p, w=None):
    p = np.asarray(p, float)
    if p.ndim == 1:
        return _binary_auc(y, p, w)
    # multiclass: one-vs-rest, macro average (sklearn's multi_class="ovr", average="macro")
    y = np.asarray(y, int)
    return float(np.mean([_binary_auc(y == k, p[:, k], w) for k in range(p.shape[1])]))


@dataclass(frozen=True)
class Metric:
    """A score with its direction and the best value it can reach."""

    name: str
    lower_is_better: bool
    task_types: tuple[str, ...]
    perfect: float
    bounded: bool  # a bounded score (AUC, accuracy, R²) rather than an unbounded loss
    function: Callable
    lowest: float = 0.0  # the range a score of this metric can take, ends included
    highest: float = float("inf")

    def __call__(self, y_true, prediction, weights=None) -> float:
        """The score; ``weights`` are per-row counts or weights (the bootstrap's resampling)."""
        return self.function(y_true, prediction, weights)

    @property
    def in_target_units(self) -> bool:
        """True for scores measured in the target's own units (RMSE, MAE)."""
        return self.name in ("rmse", "mae")

    def check_score(self, score, where: str = "") -> float:
        """``score`` as a float; a UserError when it is not finite or outside the metric's range.

        A value outside the range is a mistake, not a great result: an AUC of 71 is a
        percentage, an RMSLE of -3 a sign slip.

        Examples
        --------
        >>> METRICS["roc_auc"].check_score(0.71)
        0.71
        """
        where = f" for {where}" if where else ""
        try:
            value = float(score)
        except (TypeError, ValueError):
            value = float("nan")
        if not np.isfinite(value):
            shown = score.item() if isinstance(score, np.generic) else score
            raise UserError(f"The score {shown!r}{where} is not a finite number; give the holdout "
                            f"score in {self.name}.")
        if not self.lowest <= value <= self.highest:
            low = "-inf" if self.lowest == -np.inf else f"{self.lowest:g}"
            high = "inf" if self.highest == np.inf else f"{self.highest:g}"
            hint = (f" (a percentage? give {value / 100:g})"
                    if self.highest == 1 and 1 < value <= 100 else "")
            raise UserError(f"The score {value:g}{where} is outside {self.name}'s range "
                            f"{low} to {high}{hint}; give the holdout score in {self.name}.")
        return value

    def better(self, a: float, b: float) -> bool:
        """True when score ``a`` is strictly better than ``b`` in this metric's direction."""
        return a < b if self.lower_is_better else a > b

    def gain(self, score, reference):
        """Direction-normalised difference: positive when ``score`` is better than ``reference``."""
        diff = np.asarray(score, float) - np.asarray(reference, float)
        return -diff if self.lower_is_better else diff


_REG = ("regression",)
_CLS = ("binary", "multiclass")
METRICS: dict[str, Metric] = {
    m.name: m
    for m in [
        Metric("rmse", True, _REG, 0.0, False, _rmse),
        Metric("rmsle", True, _REG, 0.0, False, _rmsle),
        Metric("mae", True, _REG, 0.0, False, _mae),
        Metric("r2", False, _REG, 1.0, True, _r2, lowest=-np.inf, highest=1.0),
        Metric("accuracy", False, _CLS, 1.0, True, _accuracy, highest=1.0),
        Metric("log_loss", True, _CLS, 0.0, False, _log_loss),
        Metric("roc_auc", False, _CLS, 1.0, True, _roc_auc, highest=1.0),
    ]
}

DEFAULT_METRIC = {"regression": "rmse", "binary": "roc_auc", "multiclass": "log_loss"}


def get_metric(name: str, task_type: str | None = None, where: str = "") -> Metric:
    """The metric called ``name``; a UserError if unknown or unfit for ``task_type``."""
    where = f" ({where})" if where else ""
    if name not in METRICS:
        raise UserError(f"Unknown metric '{name}'{where}; choose one of "
                        f"{', '.join(METRICS)}.")
    metric = METRICS[name]
    if task_type is not None and task_type not in metric.task_types:
        fits = [m for m, d in METRICS.items() if task_type in d.task_types]
        raise UserError(f"Metric '{name}' does not fit a {task_type} task{where}; use one of "
                        f"{', '.join(fits)}.")
    return metric
