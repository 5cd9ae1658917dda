"""The answer paragraph of ``calibrate``: is a weak score more likely the pipeline's or the
data's, from the placement, the dataset's difficulty among the reference's tasks and the
diagnostics. Diagnostics still running lead (a provisional answer, before them), then a
suspected leak, then whether the verdict is provisional (fewer than every default ensemble
ran, or some still running), then the verdict and one sentence per finding worth a look.
"""
from __future__ import annotations

from tabpar.common.text import format_number as fmt
from tabpar.evaluation.placement import (
    DEFAULT_TOLERANCE,
    Placement,
    failure_causes,
    gap_to_par,
)
from tabpar.models.zoo import DEFAULT_ENSEMBLES


def compose_answer(p: Placement, dataset: str, percentile: float | None, diagnostics: list,
                   par_gain_share: float | None, n_holdout: int, ensembles: list,
                   tolerance: float = DEFAULT_TOLERANCE, pending=(),
                   diagnostics_pending=()) -> str:
    """One paragraph: is a weak score more likely the pipeline's or the data's, with numbers.

    Claims only differences outside the noise band; says so when the evidence is inconclusive.

    Parameters
    ----------
    p : Placement
        The user's score placed against the zoo's run on the same split.
    dataset : str
        ``hard``, ``typical``, ``easy`` or ``unknown`` (``dataset_label``).
    percentile : float or None
        The task's difficulty percentile among the suite's tasks (0–100, higher = harder).
    diagnostics : list of Diagnostic
        The diagnostics' answers (``run_diagnostics``).
    par_gain_share : float or None
        Par's gain share: 0 = the naive floor, 1 = the best default ensemble.
    n_holdout : int
        Rows in the holdout.
    ensembles : list of str
        The default ensembles that ran.
    tolerance : float
        The placement's tolerance (gain-share units) for calling a score under par.
    pending : list of str
        Models still running (a provisional answer, before the whole zoo has run).
    diagnostics_pending : list of str
        Diagnostics still running: the answer then says so first, as no leak check has
        finished (it never reads as "no leak found").

    Returns
    -------
    str
        The verdict first, then one sentence per finding worth a look.
    """
    d = {x.name: x for x in diagnostics}
    # a suspected leak comes first (or, before the diagnostics, that none has been looked for):
    # every number after it may be inflated by that column
    leads = [_diagnostics_pending_note(diagnostics_pending),
             leakage_headline(d.get("leakage")), _provisional_note(ensembles, p, pending),
             _verdict(p, dataset, percentile, par_gain_share, n_holdout, tolerance)]
    notes = [_shift_note(d.get("shift")), _optimism_note(d.get("split-optimism")),
             _learning_curve_note(d.get("learning-curve"), p),
             _duplicates_note(d.get("conflicting-duplicates"))]
    return " ".join(note for note in leads + notes if note)


def _verdict(p: Placement, dataset: str, percentile: float | None, par_gain_share: float | None,
             n_holdout: int, tolerance: float) -> str:
    """The answer's first sentence: pipeline, data, neither, or inconclusive."""
    noise = f"±{fmt(p.noise, 3)}"
    base = (f"on the same {n_holdout:,} holdout rows the standard baseline gets par "
            f"{fmt(p.par)} (the median default ensemble) and best {fmt(p.best)} "
            f"({p.best_model}) against a naive floor of {fmt(p.naive)}")
    where = ("" if percentile is None else
             f"the dataset is {dataset} for the suite (difficulty percentile {percentile:.0f})")
    score = f"your {p.metric} {fmt(p.score)}"
    if p.verdict == "worse-than-naive":
        return (f"The pipeline: {score} is worse than the naive floor ({fmt(p.naive)}) by more "
                f"than the noise ({noise}), which no dataset explains; {base}. Look for "
                f"{failure_causes(p.metric)}.")
    if p.gain_share is None:
        return (f"The data: the standard baseline does not beat the naive floor beyond the "
                f"noise on this split (best {p.best_model} {fmt(p.best)} vs naive "
                f"{fmt(p.naive)}, {noise}), so a score near the floor — {score} — is what "
                f"these columns allow, not a fault of the pipeline"
                + (f"; {where}" if where else "") + ".")
    if p.verdict == "below-baseline":
        return (f"More likely the pipeline: {base}, and {score} (gain share {p.gain_share:.2f} against "
                f"par's {par_gain_share:.2f}) is below par by more than the noise ({noise}), so these "
                f"rows allow more than the pipeline gets"
                + (f"; that {where} does not explain the gap, because the baseline's "
                   f"numbers come from the same split"
                   if dataset == "hard" else (f"; {where}" if where else ""))
                + ". Usual causes: category codes learned separately on the holdout rows, a "
                  "target transform forgotten, rows shuffled against row_id, a leaky or random "
                  "validation split during tuning.")
    if p.verdict == "above-baseline":
        return (f"Neither: {score} beats the best default ensemble ({p.best_model} "
                f"{fmt(p.best)}) by more than the noise ({noise})"
                + (f"; {where}" if where else "") + ".")
    if par_gain_share is not None and p.gain_share < par_gain_share - tolerance:
        return (f"Inconclusive: {score} (gain share {p.gain_share:.2f}) is under par ({fmt(p.par)}, "
                f"gain share {par_gain_share:.2f}) but not by more than the noise of these "
                f"{n_holdout:,} holdout rows ({noise}), so the evidence supports neither the "
                f"pipeline nor the data as the cause; a larger holdout"
                + ("" if p.paired else " or a predictions file (for a paired band)")
                + " would settle it" + (f"; {where}" if where else "") + ".")
    if p.worse_than_par:  # at the baseline by the tolerance alone: not "inside the noise"
        return (f"Close to the baseline, not on it: {score} is worse than par ({fmt(p.par)}) "
                f"beyond the noise ({noise}), by {gap_to_par(p.score, p.par)}, which is less "
                f"than the tolerance ({tolerance:g}) in gain share ({p.gain_share:.2f} against "
                f"par's {par_gain_share:.2f}); {base}"
                + (f"; {where}" if where else "") + ".")
    if dataset == "hard":
        return (f"The data, not the pipeline: {score} matches the standard baseline (gain share "
                f"{p.gain_share:.2f}, par {par_gain_share:.2f}, differences inside the noise {noise}), "
                f"and {where}, so a weak-looking score is what these columns allow.")
    return (f"Not the pipeline: {score} matches the standard baseline (gain share "
            f"{p.gain_share:.2f}, par {par_gain_share:.2f}, differences inside the noise {noise})"
            + (f"; {where}, so the score is about what default models get from these "
               f"columns" if where else "") + ".")


def leakage_headline(leak) -> str | None:
    """When a column alone reaches most of the full model's gain: the answer's first sentence,
    since a leaked target inflates the baseline and every verdict measured against it."""
    if leak is None or not leak.flag:
        return None
    top = leak.numbers["columns"][0]
    suspects = leak.numbers["suspects"]
    names = ", ".join(repr(c) for c in suspects[:3])
    one = len(suspects) == 1
    reach = (f"{'alone reaches' if one else 'each alone reach up to'} "
             f"{top['share']:.0%} of the full model's gain")
    return (f"Possible leak first: {names} {reach}. If {'it restates' if one else 'they restate'}"
            f" the target or {'is' if one else 'are'} known only after it, drop "
            f"{'it' if one else 'them'} (--drop) and run again, since the baseline and every "
            f"verdict measured against it are inflated; if {'it is a' if one else 'they are'} "
            f"legitimately dominant column{'' if one else 's'}, what follows stands.")


def missing_ensembles(ensembles) -> list[str]:
    """The default ensembles that did not run (budget, --models or a failure)."""
    return [m for m in DEFAULT_ENSEMBLES if m not in ensembles]


def _provisional_note(ensembles: list, p: Placement, pending=()) -> str | None:
    """Par and best are defined over every default ensemble: a verdict on fewer is provisional
    (except worse-than-naive, which does not depend on them)."""
    missing = missing_ensembles(ensembles)
    if not missing or p.verdict == "worse-than-naive":
        return None
    consequence = {
        "above-baseline": "the score may no longer beat the best",
        "below-baseline": "the gap to par may shrink or grow",
        "at-baseline": "the score could turn out below par",
    }[p.verdict]
    running = [m for m in missing if m in pending]
    absent = [m for m in missing if m not in pending]
    why = " and ".join(
        ([f"{', '.join(running)} {'is' if len(running) == 1 else 'are'} still running"]
         if running else [])
        + ([f"{', '.join(absent)} did not run"] if absent else []))
    then = ("the final answer follows when they finish" if running else
            "run without --budget (or with every model) for the final verdict")
    return (f"Provisional: this verdict rests on {len(ensembles)} of the "
            f"{len(DEFAULT_ENSEMBLES)} default ensembles ({', '.join(ensembles)}); "
            f"{why}. Par and best are defined over all "
            f"{len(DEFAULT_ENSEMBLES)}: with the others best can only improve and par can move "
            f"either way, so {consequence}; {then}.")


def _diagnostics_pending_note(names) -> str | None:
    """Before the diagnostics have run, the answer must not read as if none found anything
    (a leak above all, which would inflate the baseline and every verdict against it)."""
    if not names:
        return None
    leak = (" No leak check has finished yet: a column that leaks the target would inflate "
            "the baseline and this verdict." if "leakage" in names else "")
    return (f"Diagnostics still running ({', '.join(names)}); the final answer adds what they "
            f"find.{leak}")


def _shift_note(sh) -> str | None:
    """Holdout rows unlike the training rows: a limit for every pipeline alike."""
    if sh is None or not sh.flag:
        return None
    if sh.numbers.get("auc") is not None and sh.numbers["auc"] >= 0.7:
        drivers = ", ".join(x["column"] for x in sh.numbers["drivers"][:2])
        return (f"The holdout rows differ from the training rows (train-vs-holdout "
                f"ROC AUC {sh.numbers['auc']:.2f}"
                + (f", mostly through {drivers}" if drivers else "")
                + "); that limits the baseline as much as any pipeline — it is the "
                  "data or the choice of split.")
    return ("Some columns shift between training and holdout rows (see shift): "
            "that limits any pipeline alike.")


def _optimism_note(opt) -> str | None:
    """A random validation split that flatters the score on a time holdout."""
    if opt is None or not opt.flag:
        return None
    return (f"A random split scores {fmt(opt.numbers['random_score'])} against "
            f"{fmt(opt.numbers['time_score'])} on the time holdout: a validation score "
            f"from a random split would have been optimistic.")


def _learning_curve_note(curve, p: Placement) -> str | None:
    """Whether more rows of the same kind would likely help."""
    if curve is None or curve.numbers.get("gain_last") is None:
        return None
    points = curve.numbers["points"]
    if curve.flag:
        return (f"The default model still improves with more rows "
                f"({fmt(points[-2]['score'])} → {fmt(points[-1]['score'])} from "
                f"{points[-2]['rows']:,} to {points[-1]['rows']:,} rows), so more data "
                f"would likely help.")
    if p.verdict != "below-baseline" and p.verdict != "worse-than-naive":
        return ("More rows of the same kind are unlikely to help (the learning curve "
                "is flat within the noise).")
    return None


def _duplicates_note(dup) -> str | None:
    """Rows with identical features and different targets: a floor no model passes."""
    if dup is None or not dup.flag:
        return None
    floor = (f"an RMSE floor of {fmt(dup.numbers['rmse_floor'])} in target units"
             if "rmse_floor" in dup.numbers else
             f"at least {dup.numbers['error_floor']:.1%} of rows misclassified")
    return (f"{dup.numbers['conflicting_share']:.1%} of rows have identical features "
            f"but different targets ({floor} over all rows), a floor no model passes.")
