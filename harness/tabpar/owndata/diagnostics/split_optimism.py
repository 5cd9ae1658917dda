"""Split optimism: for a time holdout, the same default model scored on a random split of the
same size against the time holdout."""
from __future__ import annotations

from dataclasses import replace

import numpy as np

from tabpar.common.text import format_number as fmt
from tabpar.data.sources import LoadedTask
from tabpar.data.split import split_rows
from tabpar.data.suites import Holdout
from tabpar.evaluation.reference import headroom_taken
from tabpar.owndata.diagnostics.base import (
    Diagnostic,
    TaskData,
    fit_predict,
    gain_of,
    noise_of,
    prepare_rows,
    timed,
)


@timed
def split_optimism(data: TaskData, seed: int = 0) -> Diagnostic:
    """The default model on a random split of the same size vs on the time holdout.

    Numbers (metric units): ``time_score`` and ``random_score``, each with its 95% bootstrap
    half-width, ``gap`` = how much better the random split scores (positive = the random split
    looks better), ``noise`` = the two bands combined; ``time_headroom`` and
    ``random_headroom`` = share of the headroom over each split's own naive floor (0–1).
    Only for a time holdout (flag False otherwise).

    Parameters
    ----------
    data : TaskData
        The task's rows (``task_data``).
    seed : int
        Seeds the random split and the model.

    Returns
    -------
    Diagnostic
        ``split-optimism``; flag True = the random split scores better than the time holdout
        by more than ``noise``. Numbers as above.
    """
    task, metric = data.task, data.metric
    if task.holdout.policy != "time":
        return Diagnostic("split-optimism", False, {"applies": False},
                          "Not applicable: the holdout is random, so there is no time order "
                          "for a random split to ignore.")
    n_hold = len(data.split.holdout)
    random_task = replace(task, holdout=Holdout(policy="random", rows=n_hold, seed=seed))
    loaded = data.loaded
    shuffled = LoadedTask(task=random_task, frame=loaded.frame, fingerprint=loaded.fingerprint,
                          n_source_rows=loaded.n_source_rows, notes=[], row_ids=loaded.row_ids)
    rsplit = split_rows(shuffled, data.target)
    _, X_rt, X_rh = prepare_rows(task, loaded, rsplit.train, rsplit.holdout)
    y_rt, y_rh = data.target.values[rsplit.train], data.target.values[rsplit.holdout]
    results = {}
    for label, (X_fit, y_fit, X_ev, y_ev) in {
            "time": (data.X_train, data.y_train, data.X_holdout, data.y_holdout),
            "random": (X_rt, y_rt, X_rh, y_rh)}.items():
        pred, _ = fit_predict(data, X_fit, y_fit, X_ev, seed=seed)
        naive, _ = fit_predict(data, X_fit, y_fit, X_ev, model="naive")
        score, naive_score = metric(y_ev, pred), metric(y_ev, naive)
        results[label] = {"score": float(score), "naive": float(naive_score),
                          "noise": noise_of(metric, y_ev, pred, seed),
                          "headroom": headroom_taken(metric.name, naive_score, score)}
    t, r = results["time"], results["random"]
    gap = gain_of(metric, r["score"], t["score"])
    noise = float(np.hypot(t["noise"], r["noise"]))
    flag = gap > noise
    numbers = {"applies": True, "time_score": t["score"], "time_noise": t["noise"],
               "random_score": r["score"], "random_noise": r["noise"], "gap": gap,
               "noise": noise, "time_headroom": t["headroom"],
               "random_headroom": r["headroom"], "time_naive": t["naive"],
               "random_naive": r["naive"]}
    head = (f"LightGBM at its defaults scores {fmt(r['score'])} on a random split of the same "
            f"size vs {fmt(t['score'])} on the time holdout ({metric.name})")
    if flag:
        sentence = (f"{head}: the random split looks better by {fmt(abs(gap), 3)}, beyond the noise "
                    f"(±{fmt(noise, 3)}), so a random validation split overstates what this model "
                    f"gets on later rows; validate on the latest rows instead.")
    elif gap < -noise:
        sentence = (f"{head}: the time holdout is the easier one here (by {fmt(abs(gap), 3)}, beyond "
                    f"±{fmt(noise, 3)}), so a random validation split would not flatter the score.")
    else:
        sentence = (f"{head}: the difference ({fmt(gap, 3, sign=True)}) is inside the noise (±{fmt(noise, 3)}), "
                    f"so there is no sign that a random validation split overstates the score.")
    return Diagnostic("split-optimism", bool(flag), numbers, sentence)
