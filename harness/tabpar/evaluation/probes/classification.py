"""Classification outputs: labels instead of probabilities, the other class's probability,
and, for (n, k) class probabilities, rows that do not sum to 1 and columns in the wrong order.

Labels (a binary prediction with at most two distinct values) throw away the ranking a
probability carries: named when the score is below par beyond the noise. ``1 − p`` and a
reordering of the class columns are candidates, named when they improve the score beyond the
paired noise. Rows of class probabilities that do not sum to 1 are a fact, named as such.
"""
from __future__ import annotations

import numpy as np

from tabpar.common.text import format_number as fmt
from tabpar.evaluation.probes.base import Candidate, Finding

PROBE = "classification-output"
SUM_TOLERANCE = 1e-3  # a probability row may be off 1 by rounding, not by more


def positive_words(task) -> str:
    if task.derive_target is not None:
        return repr(task.derive_target.label or f"{task.derive_target.column} >= "
                                                f"{task.derive_target.at_least}")
    return repr(task.positive)


def propose(ctx) -> list[Candidate]:
    p = np.asarray(ctx.given, float)
    if ctx.task.type == "regression":
        return []
    if p.ndim == 1:
        return [Candidate(PROBE, "1 - p", 1.0 - p, judge_other_class)]
    order = column_order(ctx.y, p)
    if (order == np.arange(p.shape[1])).all():
        return []
    return [Candidate(PROBE, "columns reordered", p[:, order], judge_column_order,
                      info={"order": order.tolist()})]


def column_order(y, proba) -> np.ndarray:
    """The column of ``proba`` that best matches each class (an assignment maximising the mean
    probability each class's rows get in its matched column)."""
    from scipy.optimize import linear_sum_assignment
    y = np.asarray(y, int)
    k = proba.shape[1]
    mean = np.zeros((k, k))  # class × column
    for c in range(k):
        rows = y == c
        if rows.any():
            mean[c] = proba[rows].mean(axis=0)
    _, columns = linear_sum_assignment(-mean)
    return np.asarray(columns)


def judge_other_class(ctx, candidate: Candidate, test) -> Finding | None:
    if not test.improves:
        return None
    sentence = (f"Scored as 1 − p, your predictions reach {ctx.metric.name} "
                f"{fmt(test.score)} ({ctx.figures()}): they are the probability of the other "
                f"class; the task scores the probability of {positive_words(ctx.task)}.")
    return Finding(PROBE, {"correction": "1 - p", "score": ctx.score,
                           "corrected_score": test.score, "par": ctx.par, "gain": test.gain,
                           "noise": test.gain_width}, sentence,
                   strength=test.gain / max(test.gain_width, 1e-12))


def judge_column_order(ctx, candidate: Candidate, test) -> Finding | None:
    if not test.improves:
        return None
    order = candidate.info["order"]
    sentence = (f"With the class columns reordered to {order}, your predictions reach "
                f"{ctx.metric.name} {fmt(test.score)} ({ctx.figures()}): the probability "
                f"columns are not in the task's class order.")
    return Finding(PROBE, {"correction": "column order", "order": order, "score": ctx.score,
                           "corrected_score": test.score, "par": ctx.par, "gain": test.gain,
                           "noise": test.gain_width}, sentence,
                   strength=test.gain / max(test.gain_width, 1e-12))


def examine(ctx) -> list[Finding]:
    """Labels instead of probabilities; probability rows that do not sum to 1."""
    p = np.asarray(ctx.given, float)
    if ctx.task.type == "regression":
        return []
    if p.ndim == 2:
        off = np.abs(p.sum(axis=1) - 1.0)
        if off.max() <= SUM_TOLERANCE:
            return []
        share = float((off > SUM_TOLERANCE).mean())
        return [Finding(PROBE, {"rows_not_summing_to_1": share, "largest_deviation":
                                float(off.max())},
                        f"{share:.0%} of your probability rows do not sum to 1 (off by up to "
                        f"{fmt(float(off.max()), 3)}): give each class's probability, as "
                        f"predict_proba does, not scores or a partial set of classes.",
                        strength=float(off.max()) / SUM_TOLERANCE)]
    values = np.unique(p)
    if len(values) > 2 or not ctx.below_par:
        return []
    gain, width = ctx.vs_par
    shown = ", ".join(fmt(v) for v in values)
    return [Finding(PROBE, {"distinct_values": values.tolist(), "score": ctx.score,
                            "par": ctx.par, "gain_over_par": gain, "noise": width},
                    f"Your predictions take only {len(values)} distinct value"
                    f"{'s' if len(values) > 1 else ''} ({shown}; {ctx.figures()}): labels "
                    f"instead of probabilities; give the probability of "
                    f"{positive_words(ctx.task)} (predict_proba), which {ctx.metric.name} "
                    f"ranks.", strength=-gain / max(width, 1e-12))]
