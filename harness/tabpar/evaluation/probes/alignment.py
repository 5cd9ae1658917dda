"""Row alignment: the given predictions matched to other rows than their row_id says.

Each candidate reorders the prediction values as they stand in the user's file: shifted by a
few rows either way (an off-by-one when the row_id column was attached; "shifted down by 1 row"
= each prediction sits one row after the row it was made for), assigned to the rows
in row_id order (the order of the exported holdout and of the source file, whose positions the
row ids are), and in the order of the time holdout's date (the holdout sorted by date before
predicting). A finding when the best reordering improves the score beyond the paired noise and
closes most of the gap to par.

Predictions written sorted by value while the row ids run in order cannot be realigned; they
are named without a candidate (``sorted_by_value``).
"""
from __future__ import annotations

import numpy as np

from tabpar.common.text import format_number as fmt
from tabpar.evaluation.probes.base import GAP_SHARE, Candidate, Finding, best_by_score

PROBE = "row-alignment"
MAX_SHIFT = 3


def _placed(order, values_in_file_order, positions) -> np.ndarray:
    """Values given in file order, put on the rows ``positions`` (one per file row)."""
    out = np.empty_like(values_in_file_order)
    out[positions] = values_in_file_order
    return out


def propose(ctx) -> list[Candidate]:
    if not ctx.below_par:
        return []
    n = len(ctx.y)
    order = ctx.file_order if ctx.file_order is not None else np.arange(n)
    values = np.asarray(ctx.given)[order]  # the prediction column as the file lists it
    options = {}
    for k in range(1, MAX_SHIFT + 1):
        for sign, word in ((1, "down"), (-1, "up")):
            label = f"shifted {word} by {k} row{'s' if k > 1 else ''}"
            options[label] = _placed(order, np.roll(values, -sign * k, axis=0), order)
    by_id = np.argsort(ctx.row_id, kind="stable")
    if not np.array_equal(by_id, order):
        options["taken in file order for rows sorted by row_id"] = _placed(order, values, by_id)
    date = _holdout_dates(ctx)
    if date is not None:
        by_date = np.argsort(date, kind="stable")
        if not np.array_equal(by_date, order):
            options[f"taken in file order for rows sorted by {ctx.task.holdout.date}"] = \
                _placed(order, values, by_date)
    chosen = best_by_score(ctx, options)
    return [] if chosen is None else [Candidate(PROBE, chosen[0], chosen[1], judge)]


def _holdout_dates(ctx):
    if ctx.task.holdout.policy != "time":
        return None
    features = ctx.features()
    if features is None or ctx.task.holdout.date not in features:
        return None
    return features[ctx.task.holdout.date].to_numpy(dtype="datetime64[ns]")


def judge(ctx, candidate: Candidate, test) -> Finding | None:
    share = test.gap_closed(ctx)
    if not (test.improves and share > GAP_SHARE):
        return None
    sentence = (f"Matched to other rows ({candidate.label}), your predictions reach "
                f"{ctx.metric.name} {fmt(test.score)} ({ctx.figures()}): the predictions are "
                f"not aligned with their row_id.")
    return Finding(PROBE, {"reordering": candidate.label, "score": ctx.score,
                           "realigned_score": test.score, "par": ctx.par, "gain": test.gain,
                           "noise": test.gain_width, "gap_closed": share}, sentence,
                   strength=test.gain / max(test.gain_width, 1e-12))


def sorted_by_value(ctx) -> list[Finding]:
    """The file's predictions run in sorted order and so do its row ids: the two columns were
    sorted apart, so no reordering can recover the rows. Named when the score is below par
    beyond the noise."""
    if ctx.file_order is None or not ctx.below_par or np.ndim(ctx.given) != 1:
        return []
    values = np.asarray(ctx.given)[ctx.file_order]
    ids = np.asarray(ctx.row_id)[ctx.file_order]
    step = np.diff(values)
    monotone = (step >= 0).all() or (step <= 0).all()
    if not (monotone and len(np.unique(values)) > 2 and (np.diff(ids) > 0).all()):
        return []
    gain, width = ctx.vs_par
    return [Finding(PROBE, {"sorted_file": True, "score": ctx.score, "par": ctx.par},
                    f"Your file lists the predictions sorted by value and the row ids in "
                    f"ascending order ({ctx.figures()}): the prediction column was sorted "
                    f"apart from row_id, so each prediction sits on another row.",
                    strength=-gain / max(width, 1e-12))]
