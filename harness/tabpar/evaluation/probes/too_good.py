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
    return judge(ctx.metric, ctx.score, ctx.best, ctx.best_model, gain, width,
                 list(ctx.ensemble_means.values()), ctx.reference_scores)


def judge(metric, score: float, best: float, best_model: str, gain: float, width: float,
          ensemble_means: list, reference_scores: list, typed_in: bool = False
          ) -> list[Finding]:
    """The finding for a score that beats the best default by ``gain`` (metric units, > 0 =
    better) with noise ``width`` (the band's half-width), or none. ``typed_in``: the score was
    given as a number, whose units are then as suspect as a leak."""
    reasons = []
    spread = max(ensemble_means) - min(ensemble_means) if ensemble_means else float("inf")
    if gain > max(2 * width, spread):
        reasons.append(f"it beats the best default ({best_model} {fmt(best)}) by "
                       f"{fmt(gain, 3)}, {gain / width:.1f} times the noise (±{fmt(width, 3)}) "
                       f"and more than the default ensembles differ among themselves "
                       f"({fmt(spread, 3)})")
    remaining = abs(metric.perfect - score)
    if remaining <= width < abs(metric.perfect - best):
        reasons.append(f"it is within the noise of the perfect {metric.name} "
                       f"({fmt(metric.perfect)}), which the best default is not")
    beats_all = all(metric.better(score, s) for s in reference_scores)
    if beats_all and spread < width:
        reasons.append(f"it beats every reference run while the default ensembles agree "
                       f"within {fmt(spread, 3)}")
    if not reasons:
        return []
    check = ("Check that it is this task's metric in its units, and that no holdout row or its "
             "target reached training, feature engineering or tuning." if typed_in else
             "Check that no holdout row or its target reached training, feature engineering "
             "or tuning.")
    sentence = f"Too good to be true? Your {metric.name} {fmt(score)}: {'; '.join(reasons)}. {check}"
    return [Finding(PROBE, {"score": score, "best": best, "gain_over_best": gain,
                            "noise": width, "ensemble_spread": spread,
                            "beats_every_run": beats_all}, sentence,
                    strength=gain / max(width, 1e-12), mechanism=False)]
