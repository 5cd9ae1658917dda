"""Learning curve: the default model's holdout score at 25 / 50 / 100 % of the training rows
(the latest rows for a time split)."""
from __future__ import annotations

import time

import numpy as np

from tabpar.common.text import format_number as fmt
from tabpar.evaluation.stats import bootstrap_scores, half_width
from tabpar.owndata.diagnostics.base import (
    FAST_MODEL,
    N_BOOT,
    Diagnostic,
    TaskData,
    can_fit,
    fit_predict,
    gain_of,
    noise_of,
    prepare_rows,
    timed,
)

LEARNING_FRACTIONS = (0.25, 0.5, 1.0)


@timed
def learning_curve(data: TaskData, fractions=LEARNING_FRACTIONS, seed: int = 0) -> Diagnostic:
    """The default model's holdout score when trained on shares of the training rows.

    For a time holdout the subsets are the latest training rows (nearest the holdout), else a
    seeded sample (nested: each subset holds the smaller ones). The baseline procedure is
    refitted on each subset. Numbers: per point ``rows``, ``score`` (metric units) and its 95%
    bootstrap ``noise``; ``gain_last`` = how much the last step improves the score (positive =
    better) with ``gain_last_noise`` (paired bootstrap over the same holdout rows);
    ``fit_seconds`` of the full-size fit. ``flag`` True = still improving beyond the noise, so
    more rows would likely help.

    Parameters
    ----------
    data : TaskData
        The task's rows (``task_data``).
    fractions : sequence of float
        Shares of the training rows (0–1], ascending; a share under 20 rows (or one class)
        is left out.
    seed : int
        Seeds the sample and the model.

    Returns
    -------
    Diagnostic
        ``learning-curve``, with the numbers above.
    """
    task, metric, split = data.task, data.metric, data.split
    train = np.asarray(split.train)
    if task.holdout.policy == "time":
        stamps = data.loaded.frame[task.holdout.date].to_numpy()[train]
        order = train[np.argsort(stamps, kind="stable")][::-1]  # latest first
    else:
        order = np.random.default_rng(seed).permutation(train)
    points, predictions = [], []
    for fraction in fractions:
        k = int(round(fraction * len(train)))
        rows = np.sort(order[:k])
        if k < 20 or not can_fit(data, data.target.values[rows]):
            continue
        t0 = time.perf_counter()
        if fraction == 1.0:
            X_fit, X_ev = data.X_train, data.X_holdout
        else:
            _, X_fit, X_ev = prepare_rows(task, data.loaded, rows, split.holdout)
        pred, _ = fit_predict(data, X_fit, data.target.values[rows], X_ev, seed=seed)
        seconds = time.perf_counter() - t0
        score = metric(data.y_holdout, pred)
        points.append({"fraction": float(fraction), "rows": int(k), "score": float(score),
                       "noise": noise_of(metric, data.y_holdout, pred, seed),
                       "seconds": round(seconds, 3)})
        predictions.append(pred)
    naive, _ = fit_predict(data, data.X_train, data.y_train, data.X_holdout, model="naive")
    numbers = {"points": points, "naive_score": float(metric(data.y_holdout, naive)),
               "model": FAST_MODEL, "latest_rows": task.holdout.policy == "time",
               "fit_seconds": points[-1]["seconds"] if points else None}
    if len(points) < 2:
        return Diagnostic("learning-curve", False, numbers,
                          "Too few training rows for a learning curve.")
    boot = bootstrap_scores(metric, data.y_holdout, predictions[-2:], n_boot=N_BOOT, seed=seed)
    gain = gain_of(metric, points[-1]["score"], points[-2]["score"])
    noise = half_width(metric.gain(boot[:, 1], boot[:, 0]))
    numbers.update(gain_last=gain, gain_last_noise=noise)
    curve = " → ".join(f"{fmt(p['score'])} ({p['rows']:,} rows)" for p in points)
    which = "latest " if task.holdout.policy == "time" else ""
    flag = gain > noise
    if flag:
        sentence = (f"LightGBM at its defaults on the {which}training rows: {curve}; still "
                    f"improving in the last step (by {fmt(abs(gain), 3)}, beyond the paired noise "
                    f"±{fmt(noise, 3)}), so more rows would likely help.")
    elif gain < -noise:
        sentence = (f"LightGBM at its defaults on the {which}training rows: {curve}; the full "
                    f"training set scores worse than half of it (by {fmt(abs(gain), 3)}, beyond "
                    f"±{fmt(noise, 3)}), a sign that older rows differ from the holdout's.")
    else:
        sentence = (f"LightGBM at its defaults on the {which}training rows: {curve}; flat in "
                    f"the last step ({fmt(gain, 3, sign=True)}, inside the paired noise ±{fmt(noise, 3)}), so "
                    f"more rows of the same kind are unlikely to help much.")
    return Diagnostic("learning-curve", bool(flag), numbers, sentence)
