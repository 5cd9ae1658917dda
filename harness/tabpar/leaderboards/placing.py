"""Placing a score on a leaderboard, alone or beside the suite reference."""
from __future__ import annotations

from pathlib import Path

import numpy as np

from tabpar.common.errors import UserError
from tabpar.common.metrics import get_metric
from tabpar.evaluation.placement import (
    DEFAULT_TOLERANCE,
    Placement,
    choose_reference,
    place_task,
    reference_task,
)
from tabpar.evaluation.stats import competition_rank, percentile_of
from tabpar.leaderboards.store import Leaderboard, load_leaderboard

LEADERBOARD_KEYS = ("leaderboard_rank", "leaderboard_size", "top_percent",
                    "leaderboard_percentile")


def place_on_leaderboard(score: float, leaderboard: Leaderboard | str,
                         store: str | Path | None = None) -> dict:
    """Where ``score`` (in the leaderboard's units) would stand among a leaderboard's entries.

    ``leaderboard``: a Leaderboard, or the name of a stored one (looked up in ``store``).
    Returns a dict: ``leaderboard_rank`` (1 = best; the place the score would take among the
    entries, equal scores sharing the better place, as in competition ranking),
    ``leaderboard_size`` (the entries plus this score, so 1 <= rank <= size),
    ``leaderboard_entries``, ``top_percent`` (rank / size x 100; smaller is better),
    ``leaderboard_percentile`` (share 0-100 of the entries the score beats, ties half; larger is
    better), ``leaderboard_best`` (the best entry), and ``leaderboard_note`` (what the numbers
    cannot say).
    """
    board = (leaderboard if isinstance(leaderboard, Leaderboard)
             else load_leaderboard(leaderboard, store))
    if board.metric is not None:
        score = get_metric(board.metric).check_score(score, f"leaderboard '{board.name}'")
    elif score is None or not np.isfinite(score):
        raise UserError(f"The score {score!r} is not a finite number; give your holdout score "
                        f"in the leaderboard's units.")
    score = float(score)
    entries = board.scores
    # a Leaderboard has the direction-normalised gain these helpers need from a metric
    rank = competition_rank(board, score, entries)
    size = len(entries) + 1
    notes = []
    if board.kind == "openml":
        procedure = (board.meta.get("openml_task") or {}).get("estimation_procedure")
        procedure = procedure or "the task's own estimation procedure"
        notes.append(f"entries are OpenML run evaluations ({procedure}, over the whole "
                     f"dataset), not scores on the same holdout as yours, so the rank is "
                     f"indicative, not a like-for-like comparison")
        # OpenML's multiclass AUC is a class-frequency-weighted average (from memory)
        if board.metric == "roc_auc" and (board.meta.get("openml_task") or {}).get(
                "type") == "multiclass":
            notes.append("OpenML averages a multiclass AUC over classes differently from "
                         "tabpar's macro one-vs-rest")
    elif board.metric is None:
        notes.append(f"the leaderboard does not record its metric (only that "
                     f"{'lower' if board.lower_is_better else 'higher'} is better); the rank "
                     f"means something only for a score in the same metric on the same rows")
    else:
        notes.append("the leaderboard does not record the rows its entries were scored on; "
                     "the rank compares like with like only if they are the same holdout")
    if size <= 20:
        notes.append(f"with {len(entries)} entries one place moves top_percent by "
                     f"{100 / size:.0f} points")
    return {
        "leaderboard": board.name, "leaderboard_task": board.task,
        "leaderboard_rank": rank, "leaderboard_size": size,
        "leaderboard_entries": len(entries), "top_percent": 100.0 * rank / size,
        "leaderboard_percentile": percentile_of(board, score, entries),
        "leaderboard_best": board.best, "leaderboard_lower_is_better": board.lower_is_better,
        "leaderboard_note": "; ".join(notes),
    }


def leaderboard_lines(numbers: dict) -> list[str]:
    """``place_on_leaderboard``'s answer as indented text lines."""
    lines = [f"  leaderboard {numbers['leaderboard']}: rank {numbers['leaderboard_rank']} of "
             f"{numbers['leaderboard_size']} (top {numbers['top_percent']:.1f}%) · beats "
             f"{numbers['leaderboard_percentile']:.1f}% of its "
             f"{numbers['leaderboard_entries']} entries (ties half) · best entry "
             f"{numbers['leaderboard_best']:.4g}"]
    if numbers.get("leaderboard_note"):
        lines.append(f"  leaderboard caution: {numbers['leaderboard_note']}")
    return lines


def check_leaderboard_fits(board: Leaderboard, task, metric) -> None:
    """UserError unless ``board`` ranks scores of suite task ``task`` in its metric."""
    if board.task not in (task.name, task.source):
        raise UserError(f"Leaderboard '{board.name}' is for task '{board.task}', not "
                        f"'{task.name}'; choose a leaderboard of this task (tabpar leaderboard "
                        f"list).")
    if board.metric is not None and board.metric != metric.name:
        raise UserError(f"Leaderboard '{board.name}' ranks {board.metric}, but task "
                        f"'{task.name}' is scored on {metric.name}; choose a leaderboard in "
                        f"{metric.name}.")
    if board.lower_is_better != metric.lower_is_better:
        raise UserError(f"Leaderboard '{board.name}' ranks scores where "
                        f"{'lower' if board.lower_is_better else 'higher'} is better, but "
                        f"task '{task.name}' is scored on {metric.name}; its scores are in "
                        f"another metric.")


def place(task: str, score: float | None = None, predictions: str | Path | None = None,
          suite: str | None = None, reference: str | Path | None = None,
          tolerance: float = DEFAULT_TOLERANCE, force: bool = False,
          leaderboard: Leaderboard | str | None = None) -> Placement:
    """Place a holdout score, or a predictions file scored here, on a suite task.

    Parameters
    ----------
    task : str
        A task of the reference (``tabpar suites`` lists them).
    score : float, optional
        Your holdout score in the task's metric (its units and direction).
    predictions : path, optional
        A CSV or Parquet file with ``row_id`` and ``prediction`` for every holdout row of the
        exported split (``tabpar export``); give exactly one of ``score`` and ``predictions``.
    suite : str, optional
        The suite defining the task (default: the reference's own).
    reference : str or path, optional
        A published reference (``default``, ``quick``) or a results folder. When not given:
        the published reference whose holdout the predictions' row ids are, else the one named
        like ``suite``, else ``default`` (the same rule as every command).
    tolerance : float
        How far under par's 0-to-1 scale value (in those units) a score may fall before it is
        called below the baseline, when the noise allows.
    force : bool
        Place even when the task's data no longer matches the reference's fingerprint.
    leaderboard : Leaderboard or str, optional
        Also place the score on this leaderboard (an object or a stored name); its numbers
        (``place_on_leaderboard``) are added to the answer.

    Returns
    -------
    Placement
        Percentile and rank among the reference runs (higher percentile, lower rank = better),
        the naive floor, par, best, the 0-to-1 scale, the noise band and a verdict.

    Examples
    --------
    >>> import tabpar
    >>> answer = tabpar.place("diamonds", score=0.10, reference="quick")  # doctest: +SKIP
    >>> answer.verdict  # doctest: +SKIP
    'at-baseline'
    """
    board = None
    if (score is None) == (predictions is None):
        raise UserError("Give exactly one of --score and --predictions.")
    # the reference is chosen and read once (choosing reads the predictions' row ids)
    reference, reason = choose_reference(task, reference, suite, predictions)
    ref, definition = reference_task(task, suite, reference)
    if leaderboard is not None:  # checked before the slow part, so a mistake fails fast
        board = (leaderboard if isinstance(leaderboard, Leaderboard)
                 else load_leaderboard(leaderboard))
        check_leaderboard_fits(board, definition, get_metric(ref.task(task).metric))
    placement = place_task(definition, ref, score=score, predictions=predictions,
                           tolerance=tolerance, force=force)
    placement.reference_reason = reason
    if board is not None:
        numbers = place_on_leaderboard(placement.score, board)
        placement.attach(numbers, leaderboard_lines(numbers))
    return placement
