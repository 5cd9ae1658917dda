"""Scale and units: the best single factor ``a`` in ``prediction × a`` and the best offset.

Values in thousands scored against units, cents against currency, a percentage against a
fraction: each is one factor away from par. The factor is searched over twelve decades (a grid
of log10 a, then refined), the offset in closed form for RMSE/R² (mean residual) and MAE
(median residual), else by a bounded search. Par's predictions get their own best factor and
offset too (a time holdout's drift lets any model gain a little from one): a finding when the
correction improves the given predictions by more than it improves par's, beyond the paired
noise, and by more than it improves any default ensemble of the reference (point figures),
and that excess closes most of the gap to par. A factor is read as a change of units
when its ratio to par's factor is near a power of ten.
"""
from __future__ import annotations

import numpy as np

from tabpar.common.errors import UserError
from tabpar.common.text import format_number as fmt
from tabpar.evaluation.probes.base import GAP_SHARE, Candidate, Finding, best_by_score

PROBE = "scale"
DECADES = 6  # factors from 10^-6 to 10^6
UNIT_TOLERANCE = 0.03  # a factor within 3% of a power of ten is read as a change of units


def _loss(ctx, prediction) -> float:
    with np.errstate(all="ignore"):
        try:
            value = ctx.metric(ctx.y, prediction)
        except (ValueError, UserError):  # a metric refusing the values: the worst score
            return np.inf
    value = float(value)
    if not np.isfinite(value):
        return np.inf
    return value if ctx.metric.lower_is_better else -value


def best_factor(ctx, p) -> float:
    """The factor ``a`` (> 0) that gives ``p × a`` the best score."""
    from scipy.optimize import minimize_scalar
    grid = np.arange(-DECADES, DECADES + 1e-9, 0.1)
    losses = [_loss(ctx, p * 10 ** g) for g in grid]
    g0 = grid[int(np.argmin(losses))]
    fine = minimize_scalar(lambda g: _loss(ctx, p * 10 ** g), bounds=(g0 - 0.1, g0 + 0.1),
                           method="bounded", options={"xatol": 1e-4})
    g = fine.x if fine.fun <= min(losses) else g0
    return float(10 ** g)


def best_offset(ctx, p) -> float:
    from scipy.optimize import minimize_scalar
    residual = np.asarray(ctx.y, float) - p
    if ctx.metric.name in ("rmse", "r2"):
        return float(residual.mean())
    if ctx.metric.name == "mae":
        return float(np.median(residual))
    low = -float(p.min())  # RMSLE needs p + b >= 0
    span = float(np.abs(residual).max()) + 1.0
    fit = minimize_scalar(lambda b: _loss(ctx, p + b), bounds=(low, max(low, 0) + span),
                          method="bounded")
    return float(fit.x)


def propose(ctx) -> list[Candidate]:
    if ctx.task.type != "regression" or not ctx.below_par:
        return []
    p = np.asarray(ctx.given, float)
    par = np.asarray(ctx.reference["par"], float)
    factor, offset = best_factor(ctx, p), best_offset(ctx, p)
    # par's own best factor and offset: a time holdout's drift makes every model gain a
    # little from one; what counts is how much more the given predictions gain
    par_factor, par_offset = best_factor(ctx, par), best_offset(ctx, par)
    options = {"factor": p * factor, "offset": p + offset}
    chosen = best_by_score(ctx, options)
    if chosen is None:
        return []
    fixed_par = par * par_factor if chosen[0] == "factor" else par + par_offset
    return [Candidate(PROBE, chosen[0], chosen[1], judge, par_corrected=fixed_par,
                      reference_gain=_reference_gain(ctx, chosen[0]),
                      info={"factor": factor, "offset": offset, "par_factor": par_factor,
                            "par_offset": par_offset})]


def _reference_gain(ctx, kind: str) -> float:
    """The most any default ensemble of the reference gains from its own best factor (or
    offset), in the metric's direction: tree ensembles under a time holdout's drift lean
    alike, and that is no mistake of theirs."""
    gains = [0.0]
    for prediction in ctx.ensembles.values():
        p = np.asarray(prediction, float)
        fixed = p * best_factor(ctx, p) if kind == "factor" else p + best_offset(ctx, p)
        gains.append(float(ctx.metric.gain(ctx.metric(ctx.y, fixed), ctx.metric(ctx.y, p))))
    return max(gains)


def unit_words(factor: float) -> tuple[bool, str]:
    """(whether ``factor`` reads as a change of units, the words): a factor near a power of
    ten is read as one, e.g. thousands against units.

    Examples
    --------
    >>> unit_words(1012.0)[0], unit_words(1.2)[0]
    (True, False)
    """
    power = round(np.log10(factor))
    if power != 0 and abs(factor / 10.0 ** power - 1) <= UNIT_TOLERANCE:
        scale = f"{10.0 ** abs(power):,.0f}"
        if power > 0:
            return True, (f"the predictions look {scale} times too small (another unit, e.g. "
                          f"thousands, or a fraction for a percentage)")
        return True, (f"the predictions look {scale} times too large (another unit, e.g. "
                      f"cents for currency, or a percentage for a fraction)")
    return False, ("the predictions are off by a constant factor (a bias in every row, not "
                   "a change of units)")


def judge(ctx, candidate: Candidate, test) -> Finding | None:
    share = test.gap_closed(ctx)
    if not (test.improves and share > GAP_SHARE):
        return None
    factor, offset = candidate.info["factor"], candidate.info["offset"]
    units = False
    if candidate.label == "factor":
        done = f"multiplied by {fmt(factor, 4)}"
        units, why = unit_words(factor / candidate.info["par_factor"])
    else:
        done = f"shifted by {fmt(offset, 4)}"
        why = "the predictions are off by a constant (another origin, or a bias)"
    sentence = (f"{done[0].upper()}{done[1:]}, your predictions reach {ctx.metric.name} "
                f"{fmt(test.score)} ({ctx.figures()}): {why}.")
    return Finding(PROBE, {"correction": candidate.label, "factor": factor, "offset": offset,
                           "par_factor": candidate.info["par_factor"],
                           "par_offset": candidate.info["par_offset"], "score": ctx.score, "corrected_score": test.score, "par": ctx.par,
                           "gain": test.gain, "noise": test.gain_width, "gap_closed": share},
                   sentence, strength=(test.gain - test.par_gain) / max(test.excess_width, 1e-12),
                   mechanism=units)
