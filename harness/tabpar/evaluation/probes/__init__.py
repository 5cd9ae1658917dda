"""Probes on a user's predictions: each tests one usual pipeline mistake directly, on the
holdout truth and the reference's predictions for the same rows, and reports a ``Finding``
only when its evidence clears the paired bootstrap band (the verdict's).

One module per family, run by ``run_probes`` (most decisive finding first):

- ``transform``: log values not undone (``expm1``), or the inverse applied twice (``log1p``);
- ``alignment``: predictions shifted against row_id, in another row order, sorted apart;
- ``scale``: the best factor (units: thousands, cents, percentages) and the best offset;
- ``classification``: labels instead of probabilities, ``1 − p``, class columns out of order,
  probability rows not summing to 1;
- ``groups``: the feature column along which the predictions lose to par;
- ``too_good``: a score beyond the standard baseline by more than tuning buys (leakage?).

Every probe works on predictions only (it never fits a model). ``place`` with a predictions
file (and ``calibrate --predictions``) runs them through ``probe_predictions``.
"""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.evaluation.probes import (
    alignment,
    classification,
    groups,
    scale,
    too_good,
    transform,
)
from tabpar.evaluation.probes.base import Candidate, Finding, PairedTest, ProbeContext
from tabpar.evaluation.stats import bootstrap_scores, half_width
from tabpar.execution.store import align_to
from tabpar.models.zoo import DEFAULT_ENSEMBLES

PROBE_BOOTSTRAP = 500  # resamples (the placement's verdict uses 1000): seconds on 100,000 rows
PROPOSERS = (transform.propose, alignment.propose, scale.propose, classification.propose)
EXAMINERS = (classification.examine, alignment.sorted_by_value, groups.examine,
             too_good.examine)

__all__ = ["Finding", "ProbeContext", "Candidate", "run_probes", "probe_predictions",
           "findings_lines", "holdout_features", "file_order"]


def run_probes(ctx: ProbeContext, n_boot: int = PROBE_BOOTSTRAP,
               seed: int = 0) -> list[Finding]:
    """Run every probe on ``ctx``; the findings, most decisive first (possibly none).

    The given predictions, par and best are scored on ``n_boot`` bootstrap resamples of the
    holdout rows, and the probes' candidate corrections on the very same resamples (the same
    seed draws the same rows), so every comparison is paired.

    Parameters
    ----------
    ctx : ProbeContext
        The truth, the given predictions and the reference's, aligned on the holdout rows.
    n_boot : int
        Bootstrap resamples.
    seed : int
        The resamples' seed.

    Returns
    -------
    list of Finding
    """
    metric = ctx.metric
    par, best = ctx.reference["par"], ctx.reference["best"]
    boot = bootstrap_scores(metric, ctx.y, [ctx.given, par, best], n_boot=n_boot, seed=seed)
    ctx.score = float(metric(ctx.y, ctx.given))
    ctx.vs_par = (float(metric.gain(ctx.score, ctx.par)),
                  half_width(metric.gain(boot[:, 0], boot[:, 1])))
    ctx.vs_best = (float(metric.gain(ctx.score, ctx.best)),
                   half_width(metric.gain(boot[:, 0], boot[:, 2])))
    corrections = []  # (finding, whether the corrected predictions reach par)
    candidates = [c for propose in PROPOSERS for c in propose(ctx)]
    if candidates:
        sets = [c.prediction for c in candidates]
        sets += [c.par_corrected for c in candidates if c.par_corrected is not None]
        cboot = bootstrap_scores(metric, ctx.y, sets, n_boot=n_boot, seed=seed)
        k = len(candidates)
        for j, candidate in enumerate(candidates):
            score = float(metric(ctx.y, candidate.prediction))
            test = PairedTest(
                score=score, gain=float(metric.gain(score, ctx.score)),
                gain_width=half_width(metric.gain(cboot[:, j], boot[:, 0])),
                vs_par=float(metric.gain(score, ctx.par)),
                vs_par_width=half_width(metric.gain(cboot[:, j], boot[:, 1])))
            if candidate.par_corrected is not None:
                gains = metric.gain(cboot[:, j], boot[:, 0])
                par_gains = metric.gain(cboot[:, k], boot[:, 1])
                k += 1
                par_score = float(metric(ctx.y, candidate.par_corrected))
                test.par_gain = max(float(metric.gain(par_score, metric(ctx.y, par))),
                                    candidate.reference_gain)
                test.excess_width = half_width(gains - par_gains)
            finding = candidate.judge(ctx, candidate, test)
            if finding is not None:
                corrections.append((finding, test.reaches_par))
    # a correction that brings the predictions to par explains the whole gap: weaker
    # corrections are then its consequences, not other mistakes
    explained = any(reaches for _, reaches in corrections)
    findings = [f for f, reaches in corrections if reaches or not explained]
    for examine in EXAMINERS:
        # where the losses fall is asked only when no mechanism is named: a named mistake
        # (a transform, labels, ...) spreads its losses along whatever it depends on
        if examine is groups.examine and any(f.mechanism for f in findings):
            continue
        findings.extend(examine(ctx))
    return sorted(findings, key=lambda f: -f.strength)


def holdout_features(task, row_id) -> pd.DataFrame:
    """The holdout rows' feature columns (dates parsed, drops applied; no target), in the
    order of ``row_id``, through the one load → target → split path export uses."""
    import pandas as pd

    from tabpar.data.split import load_and_split
    rows = load_and_split(task)
    frame = rows.loaded.features.iloc[rows.split.holdout]
    ids = np.asarray(rows.loaded.row_ids)[rows.split.holdout]
    where = pd.Index(ids).get_indexer(np.asarray(row_id))
    if (where < 0).any():
        raise RuntimeError(f"the holdout of {task.name} does not hold every placed row_id")
    return frame.iloc[where].reset_index(drop=True)


def file_order(path, row_id) -> np.ndarray:
    """For each row of a predictions file, in the file's order, its position in ``row_id``.
    The file must already have passed ``read_predictions_file``'s checks."""
    import pandas as pd

    from tabpar.data.sources import read_table
    ids = pd.to_numeric(read_table(Path(path))["row_id"]).astype(np.int64).to_numpy()
    return pd.Index(np.asarray(row_id)).get_indexer(ids)


def probe_predictions(task, metric, y, given, row_id, reference: dict, task_reference,
                      path=None, ref=None) -> list[Finding]:
    """Run the probes on predictions placed on ``task`` (what ``place_task`` calls).

    Parameters
    ----------
    task : Task
        The task definition (its holdout's features are loaded only when a probe needs them).
    metric : Metric
    y, given : arrays
        The holdout truth and the user's predictions, aligned to ``row_id``.
    row_id : array of int
    reference : dict
        Role (``best``, ``par``, ``naive``) → the reference's predictions aligned to ``row_id``.
    task_reference : TaskReference
        The reference's numbers for the task (par, best, per-run scores).
    path : path, optional
        The predictions file (its row order feeds the alignment probe).
    ref : Reference, optional
        The reference itself, whose default ensembles' predictions (lowest seed each) set the
        spread between reasonable models; without it, best and par stand for them.

    Returns
    -------
    list of Finding
        Most decisive first; empty when no probe's evidence clears the noise.
    """
    tref = task_reference
    memo = {}

    def features():
        if "frame" not in memo:
            memo["frame"] = holdout_features(task, row_id)
        return memo["frame"]

    ctx = ProbeContext(
        task=task, metric=metric, y=np.asarray(y), given=np.asarray(given, float),
        row_id=np.asarray(row_id), reference=reference, par=tref.par, best=tref.best,
        best_model=tref.best_model, par_model=tref.par_model,
        ensemble_means={m: v for m, v in tref.means.items() if m in DEFAULT_ENSEMBLES},
        reference_scores=[s for m in tref.scores for s in tref.scores[m]],
        file_order=None if path is None else file_order(path, row_id), features=features,
        ensembles=_ensembles(ref, task.name, tref, row_id, reference))
    return run_probes(ctx)


def _ensembles(ref, task_name, tref, row_id, reference) -> dict:
    """Default ensemble → its predictions aligned to ``row_id`` (lowest seed)."""
    if ref is None:
        return {tref.best_model: reference["best"], tref.par_model: reference["par"]}
    out = {}
    for model in DEFAULT_ENSEMBLES:
        if model in tref.means:
            try:
                stored = ref.predictions(task_name, model)
            except UserError:  # a results folder without this model's predictions
                continue
            aligned = align_to(*stored, np.asarray(row_id))
            if aligned is not None:
                out[model] = aligned
    return out or {tref.best_model: reference["best"], tref.par_model: reference["par"]}


def findings_lines(findings: list, indent: str = "  ",
                   heading: str = "probes on your predictions") -> list[str]:
    """The text lines that show findings under a verdict (none when there are none)."""
    if not findings:
        return []
    return ([f"{indent}{heading} ({len(findings)} finding"
             f"{'s' if len(findings) > 1 else ''}, most decisive first):"]
            + [f"{indent}- {f}" for f in findings])
