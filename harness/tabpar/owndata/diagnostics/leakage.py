"""Leakage: a fast model on one column alone reaching most of the full model's gain over the
naive floor, or a column that predicts the target near-perfectly."""
from __future__ import annotations

import numpy as np

from tabpar.common.text import format_number as fmt
from tabpar.evaluation.reference import headroom_taken
from tabpar.evaluation.stats import bootstrap_scores, half_width
from tabpar.owndata.diagnostics.base import (
    Diagnostic,
    TaskData,
    can_fit,
    column_list,
    fit_predict,
    gain_of,
    importance_by_column,
    subsample,
    timed,
)

# thresholds (documented in README "Your own data"; each sentence states the numbers)
LEAK_SHARE = 0.9  # one column reaching this share of the full model's gain over naive
LEAK_HEADROOM = 0.95  # one column taking this share of the headroom: near-perfect


@timed
def leakage(data: TaskData, rows: int = 5000, max_columns: int = 30, seed: int = 0) -> Diagnostic:
    """One column alone against all columns, with the fast model on a subsample.

    Only training rows are used, split at random (seeded): two thirds to fit on, one third to
    score on, at most ``rows`` each. A leak shows on any rows, and leaving the holdout out keeps
    a train/holdout shift from blurring the comparison. Date columns are in the full model but
    not tried alone: a date is known at prediction time, and inside a random split it would
    interpolate a trend (what a split does with time is ``split_optimism``'s question). With
    more than ``max_columns`` columns only the ones the full model uses most (split gain) are
    tried.

    Parameters
    ----------
    data : TaskData
        The task's rows (``task_data``).
    rows : int
        Most rows to fit on, and to score on.
    max_columns : int
        Most columns tried alone.
    seed : int
        Seeds the row draw and the model.

    Returns
    -------
    Diagnostic
        ``leakage``; flag True = a column alone reaches ``LEAK_SHARE`` of the full model's gain
        (when the full model beats naive beyond the noise) or ``LEAK_HEADROOM`` of the
        headroom. Numbers: ``full_score``, ``naive_score`` (metric units); per column
        ``share`` = its gain over naive / the full model's gain (1 = all of it) and
        ``headroom`` = the share of the possible improvement over naive it takes (1 =
        perfect); ``suspects``, the flagged columns.
    """
    metric = data.metric
    order = np.random.default_rng(seed).permutation(len(data.X_train))
    cut = (2 * len(order)) // 3
    fit = subsample(order[:cut], rows, seed)
    ev = subsample(order[cut:], rows, seed + 1)
    X_fit, y_fit = data.X_train[fit], data.y_train[fit]
    X_ev, y_ev = data.X_train[ev], data.y_train[ev]
    if not can_fit(data, y_fit):
        return Diagnostic("leakage", False, {}, "Not run: the subsample of training rows holds "
                                                "a single class.")
    naive_pred, _ = fit_predict(data, X_fit, y_fit, X_ev, model="naive")
    naive = metric(y_ev, naive_pred)
    full_pred, full_model = fit_predict(data, X_fit, y_fit, X_ev, seed=seed)
    full = metric(y_ev, full_pred)
    full_gain = gain_of(metric, full, naive)
    noise = half_width(metric.gain(*bootstrap_scores(metric, y_ev, [full_pred, naive_pred],
                                                     n_boot=200, seed=seed).T))
    dates = {c for c, role in data.prep.roles_.items() if role == "date"}
    columns = [c for c in dict.fromkeys(data.sources) if c not in dates]
    tried_note = ""
    if len(columns) > max_columns:
        ranked = importance_by_column(full_model, data.sources)
        columns = [c for c in ranked.index if c in set(columns)][:max_columns]
        tried_note = (f" (the {max_columns} columns the full model uses most, of "
                      f"{len(ranked)})")
    sources = np.asarray(data.sources, dtype=object)
    per_column = []
    for col in columns:
        mask = sources == col
        pred, _ = fit_predict(data, X_fit[:, mask], y_fit, X_ev[:, mask], seed=seed)
        score = metric(y_ev, pred)
        share = gain_of(metric, score, naive) / full_gain if full_gain > 0 else float("nan")
        per_column.append({"column": col, "score": float(score), "share": float(share),
                           "headroom": headroom_taken(metric.name, naive, score)})
    per_column.sort(key=lambda c: -c["headroom"])
    learnable = full_gain > noise
    leaks = [c for c in per_column
             if c["headroom"] >= LEAK_HEADROOM or (learnable and c["share"] >= LEAK_SHARE)]
    numbers = {"full_score": float(full), "naive_score": float(naive),
               "full_gain_noise": float(noise), "rows_fitted": int(len(fit)),
               "rows_scored": int(len(ev)), "columns_tried": len(columns),
               "columns": per_column[:10], "suspects": [c["column"] for c in leaks],
               "share_threshold": LEAK_SHARE, "headroom_threshold": LEAK_HEADROOM}
    top = per_column[0] if per_column else None
    if leaks:
        worst = leaks[0]
        who = (f"Column '{worst['column']}' alone reaches" if len(leaks) == 1 else
               f"Columns {column_list(c['column'] for c in leaks)} each reach on their own up to")
        sentence = (f"{who} {worst['share']:.0%} of the full model's gain over naive "
                    f"({metric.name} {fmt(worst['score'])} alone vs {fmt(full)} with every "
                    f"column, naive {fmt(naive)}; {worst['headroom']:.0%} of the headroom; "
                    f"scored on held-back training rows), so either a leak or a column that "
                    f"carries nearly all the signal: check that "
                    f"{'it is' if len(leaks) == 1 else 'they are'} known at prediction time and "
                    f"not computed from the target; drop a leaking column with --drop.")
    elif top is None:
        sentence = "No columns to test."
    else:
        skipped = "; date columns not tried alone" if dates else ""
        sentence = (f"No single column comes close to the full model: the strongest, "
                    f"'{top['column']}', reaches {top['share']:.0%} of its gain over naive "
                    f"(threshold {LEAK_SHARE:.0%}){tried_note}{skipped}.")
        if not learnable:
            sentence = (f"Not conclusive: the fast model with every column ({fmt(full)}) is "
                        f"not better than naive ({fmt(naive)}) beyond the noise (±{fmt(noise, 3)}), "
                        f"and no column alone predicts the target near-perfectly.")
    return Diagnostic("leakage", bool(leaks), numbers, sentence)
