"""Too good to be true: a score that beats the standard baseline by more than tuning usually
buys, a sign that holdout rows (or their targets) reached training or tuning.

Named when the score is better than the best default ensemble beyond the paired noise and at
least one of: the gain over the best default is more than twice the band's half-width (the
band's lower end clears the noise again) and more than the default ensembles' means differ
among themselves (a better pipeline moves the score by about that much; a leak, by far more);
the score is within the noise of the metric's
perfect value while the best default is not; it beats every reference run on a task where the
default ensembles agree (their means span less than the noise).
"""
from __future__ import annotations

from tabpar.common.text import format_number as fmt
from tabpar.evaluation.probes.base import Finding

PROBE = "too-good"


def examine(ctx) -> list[Finding]:
    if not ctx.above_best:
        return []
    gain, width = ctx.vs_best
    metric = ctx.metric
    reasons = []
    means = list(ctx.ensemble_means.values())
    spread = max(means) - min(means) if means else float("inf")
    if gain > max(2 * width, spread):
        reasons.append(f"it beats the best default ({ctx.best_model} {fmt(ctx.best)}) by "
                       f"{fmt(gain, 3)}, {gain / width:.1f} times the noise (±{fmt(width, 3)}) "
                       f"and more than the default ensembles differ among themselves "
                       f"({fmt(spread, 3)})")
    remaining = abs(metric.perfect - ctx.score)
    if remaining <= width < abs(metric.perfect - ctx.best):
        reasons.append(f"it is within the noise of the perfect {metric.name} "
                       f"({fmt(metric.perfect)}), which the best default is not")
    beats_all = all(metric.better(ctx.score, s) for s in ctx.reference_scores)
    if beats_all and spread < width:
        reasons.append(f"it beats every reference run while the default ensembles agree "
                       f"within {fmt(spread, 3)}")
    if not reasons:
        return []
    sentence = (f"Too good to be true? Your {metric.name} {fmt(ctx.score)}: "
                + "; ".join(reasons)
                + ". Check that no holdout row or its target reached training, feature "
                  "engineering or tuning.")
    return [Finding(PROBE, {"score": ctx.score, "best": ctx.best, "gain_over_best": gain,
                            "noise": width, "ensemble_spread": spread,
                            "beats_every_run": beats_all}, sentence,
                    strength=gain / max(width, 1e-12), mechanism=False)]
