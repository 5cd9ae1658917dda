"""Statistics shared by placement, comparison and the diagnostics: one bootstrap over holdout
rows, interval half-widths, percentiles and ranks that respect a metric's direction, and the
multiple-testing and signed-rank helpers of a comparison across tasks.

Everything here takes a ``metric``-like object with ``gain(a, b)``: how much better ``a`` is
than ``b`` in the metric's units (positive = better, whatever the direction), so no function
ever mixes "lower is better" with "higher is better".
"""
from __future__ import annotations

import numpy as np

N_BOOTSTRAP = 1000  # resamples for a placement's noise band


def bootstrap_scores(metric, y, predictions: list, n_boot: int = N_BOOTSTRAP,
                     seed: int | np.random.Generator = 0) -> np.ndarray:
    """Scores of several prediction sets on the same bootstrap resamples of the holdout rows.

    Parameters
    ----------
    metric : callable
        ``metric(y, prediction, weights)``; a resample is passed as row weights (how many times
        each row was drawn), so no copy of the rows is made.
    y : array of shape (n,)
        The holdout truth.
    predictions : list of arrays
        Prediction sets for the same rows; all are scored on each resample (paired).
    n_boot : int
        Number of resamples.
    seed : int or numpy Generator
        A seed, or a Generator to continue (so several calls can share one stream).

    Returns
    -------
    ndarray of shape (n_boot, len(predictions))
        Scores in the metric's own units and direction.

    Examples
    --------
    >>> import numpy as np
    >>> from tabpar.common.metrics import METRICS
    >>> y = np.array([1.0, 2.0, 3.0, 4.0])
    >>> bootstrap_scores(METRICS["mae"], y, [y + 1.0], n_boot=3).ravel().tolist()
    [1.0, 1.0, 1.0]
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    n = len(y)
    out = np.empty((n_boot, len(predictions)))
    for b in range(n_boot):
        counts = np.bincount(rng.integers(0, n, n), minlength=n)
        for j, p in enumerate(predictions):
            out[b, j] = metric(y, p, counts)
    return out


def half_width(values) -> float:
    """Half the width of the central 95% interval of ``values`` (percentile method), in their
    units; non-finite values are ignored.

    Examples
    --------
    >>> half_width(list(range(101)))
    47.5
    """
    values = np.asarray(values, float)
    values = values[np.isfinite(values)]
    lo, hi = np.percentile(values, [2.5, 97.5])
    return float((hi - lo) / 2)


def share_below(value: float, others) -> float | None:
    """Share (0-100) of ``others`` strictly below ``value``, ties counting half; None when
    ``others`` is empty. The one ties-half percentile every placement uses.

    Examples
    --------
    >>> share_below(2.0, [1.0, 2.0, 3.0, 4.0])
    37.5
    """
    others = np.asarray(list(others), float)
    if not len(others):
        return None
    return float(100.0 * (np.sum(others < value) + 0.5 * np.sum(others == value)) / len(others))


def percentile_of(metric, score: float, reference_scores) -> float:
    """Share (0-100) of ``reference_scores`` that ``score`` beats in ``metric``'s direction,
    ties counting half (higher = better placed).

    Examples
    --------
    >>> from tabpar.common.metrics import METRICS
    >>> percentile_of(METRICS["rmse"], 2.0, [1.0, 2.0, 3.0, 4.0])  # lower is better
    62.5
    """
    gains = np.asarray(metric.gain(score, np.asarray(reference_scores, float)), float)
    return share_below(0.0, -gains)


def competition_rank(metric, score: float, reference_scores) -> int:
    """1-based rank of ``score`` among ``reference_scores`` plus itself (1 = best); equal scores
    share the better rank, as in competition ranking.

    Examples
    --------
    >>> from tabpar.common.metrics import METRICS
    >>> competition_rank(METRICS["roc_auc"], 0.8, [0.9, 0.8, 0.7])
    2
    """
    gains = metric.gain(np.asarray(reference_scores, float), score)
    return int(1 + np.sum(gains > 0))


def holm(p_values) -> np.ndarray:
    """Holm's step-down adjusted p-values (family-wise error control), in the order given.

    Examples
    --------
    >>> holm([0.01, 0.04, 0.03]).round(2).tolist()
    [0.03, 0.06, 0.06]
    """
    p = np.asarray(p_values, float)
    order = np.argsort(p)
    m = len(p)
    adjusted = np.empty(m)
    running = 0.0
    for rank, index in enumerate(order):
        running = max(running, min(1.0, (m - rank) * p[index]))
        adjusted[index] = running
    return adjusted


def signed_rank_p(deltas, tolerance: float, se=None) -> float | None:
    """Two-sided Wilcoxon signed-rank p-value of per-task deltas; None with fewer than two
    non-zero deltas.

    Deltas under ``tolerance`` count as zero and are dropped. With ``se`` the test ranks the
    standardised deltas (delta / se): still a signed-rank test of symmetry around zero, but a
    noisy task (a wide band) no longer outweighs a precise one.
    """
    from scipy import stats
    d = np.where(np.abs(deltas) < tolerance, 0.0, np.asarray(deltas, float))
    if se is not None:
        se = np.asarray(se, float)
        exact = se == 0  # seed-invariant models on identical features: no noise at all
        z = np.divide(d, se, out=np.zeros_like(d), where=~exact)
        # a non-zero delta without any noise outranks every noisy one
        d = np.where(exact, np.sign(d) * (np.abs(z).max(initial=0.0) + 1.0), z)
    if np.count_nonzero(d) < 2:
        return None
    return float(stats.wilcoxon(d, zero_method="wilcox", alternative="two-sided").pvalue)


def smallest_signed_rank_p(n: int) -> float:
    """The smallest two-sided p-value the exact Wilcoxon signed-rank test can give with ``n``
    non-zero deltas: every delta of one sign, ``2 / 2**n``.

    Below about six tasks no result can reach 0.05, so a suite-wide "no difference" from a
    handful of tasks says nothing; the comparison says so.

    Examples
    --------
    >>> smallest_signed_rank_p(3), smallest_signed_rank_p(4), smallest_signed_rank_p(6)
    (0.25, 0.125, 0.03125)
    """
    return 2.0 / 2.0 ** n if n > 0 else 1.0

