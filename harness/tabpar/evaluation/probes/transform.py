"""Target transform: the predictions scored after ``expm1`` and after ``log1p``.

Log values submitted as if they were the target (the transform of an RMSLE task not undone)
score far below par; ``expm1`` of them scores at par. The other way round, ``expm1`` applied to
values already in the target's units is undone by ``log1p``. A finding when a transform moves
a score that is below par beyond the noise to at or above par (within the noise) and improves
it beyond the paired noise.
"""
from __future__ import annotations

import numpy as np

from tabpar.common.text import format_number as fmt
from tabpar.evaluation.probes.base import Candidate, Finding, best_by_score

PROBE = "target-transform"
EXP_CLIP = 300.0  # expm1 beyond this overflows the metric's squares; no target is that large


def propose(ctx) -> list[Candidate]:
    if ctx.task.type != "regression" or not ctx.below_par:
        return []
    p = np.asarray(ctx.given, float)
    options = {"expm1": np.expm1(np.minimum(p, EXP_CLIP))}
    if (p > -1).all():
        options["log1p"] = np.log1p(p)
    chosen = best_by_score(ctx, options)
    if chosen is None:
        return []
    return [Candidate(PROBE, chosen[0], chosen[1], judge)]


def judge(ctx, candidate: Candidate, test) -> Finding | None:
    if not (test.improves and test.reaches_par):
        return None
    metric = ctx.metric.name
    if candidate.label == "expm1":
        what = "they are log1p values, so the target transform was not undone"
        if ctx.task.log_target:
            what += (" (an RMSLE task: train on log1p(target), then submit "
                     "expm1(prediction))")
    else:
        what = ("they look like expm1 of values already in the target's units (the inverse "
                "transform applied twice)")
    sentence = (f"Scored after {candidate.label}, your predictions reach {metric} "
                f"{fmt(test.score)} ({ctx.figures()}): {what}.")
    return Finding(PROBE, {"transform": candidate.label, "score": ctx.score,
                           "transformed_score": test.score, "par": ctx.par,
                           "gain": test.gain, "noise": test.gain_width}, sentence,
                   strength=test.gain / max(test.gain_width, 1e-12))
