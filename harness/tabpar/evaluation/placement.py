"""Placement: where a score stands against a task's reference, and a verdict in plain words.

Numbers (all in the task metric's units unless said otherwise):
- ``percentile``: share of reference runs the score beats, ties counting half, 0–100;
- ``rank``: 1 = best among the reference runs plus this score (equal scores share a rank);
- ``gain_share``: ``gain(score, naive) / gain(best, naive)``: 0 = the naive floor, 1 = the best
  default ensemble, > 1 better; None when the best default does not beat naive beyond the noise;
- ``noise``: half-width of the 95% bootstrap band (holdout rows resampled) of the best default's
  score, or of the paired difference user − best when predictions are given.
"""
from __future__ import annotations

from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.metrics import get_metric
from tabpar.common.text import format_number as fmt
from tabpar.common.text import html_table
from tabpar.data.suites import Task, load_suite
from tabpar.evaluation.predictions import read_predictions_file
from tabpar.evaluation.probes import findings_lines, probe_predictions, too_good
from tabpar.evaluation.reference import (
    Reference,
    published_names,
    reference_for,
    references_for_rows,
)
from tabpar.evaluation.stats import (
    bootstrap_scores,
    competition_rank,
    half_width,
    percentile_of,
    share_below,
)
from tabpar.execution.cache import load_arrays, prepare_task
from tabpar.execution.store import align_to
from tabpar.models.zoo import DEFAULT_ENSEMBLES

VERDICTS = ("worse-than-naive", "below-baseline", "at-baseline", "above-baseline")
DEFAULT_TOLERANCE = 0.05
NOISE_DIGITS = 2  # a band's half-width is known to about two significant digits


@dataclass
class Placement:
    """The answer of ``place``; renders as text (str) and as an HTML table in a notebook."""

    task: str
    metric: str
    lower_is_better: bool
    score: float
    percentile: float
    rank: int
    n_reference: int
    naive: float
    best: float
    best_model: str
    par: float
    par_model: str
    gain_share: float | None
    gain_share_note: str
    noise: float
    seed_spread: float
    paired: bool
    verdict: str
    difficulty_percentile: float | None
    message: str
    tolerance: float
    reference: str  # the reference's folder
    reference_label: str = ""  # how the answer names it: "published reference 'quick'"
    reference_reason: str = ""  # why this reference: asked for, recognised from the rows, ...
    units: str = ""  # the score's units where the metric is in the target's (RMSE, MAE)
    model_means: dict = field(default_factory=dict)
    reference_scores: dict = field(default_factory=dict)  # model → per-seed scores (for plots)
    extra: dict = field(default_factory=dict)  # added by other answers (e.g. a leaderboard)
    extra_lines: list = field(default_factory=list, repr=False)  # their text, for __str__
    extra_shown: set = field(default_factory=set, repr=False)  # keys extra_lines already show
    findings: list = field(default_factory=list)  # probes on the user's predictions (Finding)
    # worse than par beyond the noise (an at-baseline verdict then rests on the tolerance)
    worse_than_par: bool = False

    def attach(self, numbers: dict, lines: list[str]) -> None:
        """Add another answer's numbers (kept in ``extra``, merged by ``to_dict``) and the lines
        that show them in ``__str__``."""
        self.extra.update(numbers)
        self.extra_lines.extend(lines)
        self.extra_shown.update(numbers)

    def to_dict(self) -> dict:
        d = asdict(self)
        d.pop("extra_lines")
        d.pop("extra_shown")
        d.update(d.pop("extra"))
        d["findings"] = [f.to_dict() for f in self.findings]
        return d

    def __str__(self) -> str:
        direction = "lower is better" if self.lower_is_better else "higher is better"
        gain_share = "n/a" if self.gain_share is None else f"{self.gain_share:.2f}"
        diff = ("n/a" if self.difficulty_percentile is None
                else f"{self.difficulty_percentile:.0f}")
        lines = [
            f"{self.task}: {self.metric} {fmt(self.score)}{' ' + self.units if self.units else ''}"
            f" ({direction})  →  {self.verdict}",
            f"  {self.message}",
            f"  beats {self.percentile:.0f}% of the {self.n_reference} reference runs "
            f"(percentile); rank {self.rank} of {self.n_reference + 1}",
            f"  naive {fmt(self.naive)} · par {fmt(self.par)} ({self.par_model}) · best "
            f"{fmt(self.best)} ({self.best_model}) · gain share {gain_share}",
            f"  noise ±{fmt(self.noise, NOISE_DIGITS)} (95% bootstrap over holdout rows"
            f"{', paired with your predictions' if self.paired else ''}) · seed spread "
            f"{fmt(self.seed_spread, NOISE_DIGITS)}",
            f"  task difficulty percentile {diff} among the reference's tasks (higher = harder: "
            f"less of the room between naive and perfect taken by the best default)",
        ]
        why = f" ({self.reference_reason})" if self.reference_reason else ""
        lines.append(f"  placed on the {self.reference_label or self.reference}{why}")
        lines[2:2] = findings_lines(self.findings, heading="probes on your predictions"
                                    if self.paired else "checks on your score")  # under the verdict, most decisive first
        if self.gain_share is None and self.gain_share_note:
            lines.append(f"  gain share: {self.gain_share_note}")
        lines.extend(self.extra_lines)
        for key, value in self.extra.items():
            if key not in self.extra_shown:
                lines.append(f"  {key}: {value}")
        return "\n".join(lines)

    def to_frame(self) -> pd.DataFrame:
        """One row per reference run (model, seed, score), in the metric's units: the
        distribution the score was placed against."""
        import pandas as pd
        return pd.DataFrame([{"task": self.task, "model": model, "seed_index": i, "score": v}
                             for model, values in self.reference_scores.items()
                             for i, v in enumerate(values)])

    def _repr_html_(self) -> str:
        return html_table({k: v for k, v in self.to_dict().items()
                           if k not in ("reference_scores", "model_means")},
                          caption=f"{self.task}: {self.verdict}")


def _align(ids, prediction, row_id, folder):
    """Reference predictions reordered to ``row_id``."""
    aligned = align_to(ids, prediction, row_id)
    if aligned is None:
        raise UserError(f"The stored predictions in {folder} do not cover the task's holdout "
                        f"rows; rebuild the reference.")
    return aligned


def _check_fingerprint(ref: Reference, name: str, fingerprint: str, force: bool) -> None:
    expected = ref.task(name).fingerprint
    if fingerprint != expected and not force:
        raise UserError(f"The data of task '{name}' no longer matches the reference "
                        f"{ref.folder} (fingerprint {fingerprint} now, {expected} in the "
                        f"reference); rebuild the reference, or pass --force to place anyway.")


def _file_row_ids(predictions) -> np.ndarray | None:
    """The row ids of a predictions file, or None when it cannot be read as one (the full
    check, with its error, comes when the file is scored)."""
    import pandas as pd

    from tabpar.data.sources import read_table
    try:
        ids = pd.to_numeric(read_table(Path(predictions))["row_id"], errors="coerce")
    except (UserError, KeyError, OSError, ValueError):
        return None
    return None if ids.isna().any() else ids.to_numpy()


def choose_reference(task: str, reference: str | Path | None = None, suite: str | None = None,
                     predictions: str | Path | None = None) -> tuple[str | Path, str]:
    """The reference a placement uses and why, as (name or folder, reason).

    ``reference`` given: that one, unless a predictions file's rows are the holdout of another
    published reference (a UserError naming it). Otherwise the rows of ``predictions`` say which
    published split they belong to; failing that, ``reference_for(suite)``: the published
    reference named like the suite, else ``default``.
    """
    ids = _file_row_ids(predictions) if predictions is not None else None
    recognised = references_for_rows(task, ids) if ids is not None else []
    chosen = reference_for(suite)
    if reference is not None:
        # only a published name is checked: a results folder of the user's may hold any split
        if recognised and str(reference) in published_names() and str(reference) not in recognised:
            raise UserError(f"The rows of {predictions} are the holdout of task '{task}' in the "
                            f"published reference '{recognised[0]}', not in '{reference}'; "
                            f"place them with --reference {recognised[0]}.")
        return reference, "as asked"
    if recognised:
        return (chosen if chosen in recognised else recognised[0],
                "recognised from the predictions' row ids")
    return chosen, ("the published reference of the suite" if suite is not None
                    and chosen == str(suite) else "the default reference")


def reference_task(task: str, suite: str | None = None,
                   reference: str | Path = "default") -> tuple[Reference, Task]:
    """The reference at ``reference`` and the definition of its task ``task`` (from ``suite``,
    default: the reference's own suite); UserError naming what is unknown."""
    ref = Reference(reference)
    ref.task(task)  # an unknown task is named against the reference's tasks
    return ref, load_suite(suite or ref.suite).task(task)


def place_on_reference(task: str, score: float | None = None,
                       predictions: str | Path | None = None, suite: str | None = None,
                       reference: str | Path | None = None,
                       tolerance: float = DEFAULT_TOLERANCE, force: bool = False) -> Placement:
    """Place a holdout score (or a predictions file, scored here) on a suite task's reference.

    ``reference`` None: chosen by ``choose_reference``. See ``tabpar.place``, which also places
    on a leaderboard.
    """
    if (score is None) == (predictions is None):
        raise UserError("Give exactly one of --score and --predictions.")
    reference, reason = choose_reference(task, reference, suite, predictions)
    ref, definition = reference_task(task, suite, reference)
    placement = place_task(definition, ref, score=score, predictions=predictions,
                           tolerance=tolerance, force=force)
    placement.reference_reason = reason
    return placement


def place_task(definition: Task, ref: Reference, score: float | None = None,
               predictions: str | Path | None = None, tolerance: float = DEFAULT_TOLERANCE,
               force: bool = False, difficulties: dict | None = None) -> Placement:
    """Place a score (or predictions) on ``definition`` against the results in ``ref``.

    ``difficulties``: task → difficulty to rank this task's difficulty among (default: the
    other tasks of ``ref``).
    """
    task = definition.name
    tref = ref.task(task)
    metric = get_metric(tref.metric)
    paired = predictions is not None
    user = None
    if not paired:  # checked before the slow part, so a mistyped score fails at once
        score = metric.check_score(score, f"task '{task}'")
    # the holdout rows are needed for the bootstrap band even when only a score is given
    prepared = prepare_task(definition)
    _check_fingerprint(ref, task, prepared.fingerprint, force)
    arrays = load_arrays(prepared.folder)
    y, row_id = np.asarray(arrays["y_holdout"]), np.asarray(arrays["row_id"])
    if paired:
        user = read_predictions_file(Path(predictions), row_id, definition.type, task,
                                     classes=prepared.classes)
        score = metric(y, user)
    score = metric.check_score(score, f"task '{task}'")

    named = {"best": tref.best_model, "par": tref.par_model, "naive": "naive"}
    ref_preds = {role: _align(*ref.predictions(task, model), row_id, ref.folder)
                 for role, model in named.items()}
    roles = list(named)
    sets = [ref_preds[r] for r in roles] + ([user] if paired else [])
    boot = bootstrap_scores(metric, y, sets)
    best_noise = half_width(boot[:, roles.index("best")])
    bands = {}
    for j, role in enumerate(roles):
        reference_value = {"best": tref.best, "par": tref.par, "naive": tref.naive}[role]
        centre = float(metric.gain(score, reference_value))
        width = (half_width(metric.gain(boot[:, -1], boot[:, j])) if paired else best_noise)
        bands[role] = (centre - width, centre + width)
    noise = (bands["best"][1] - bands["best"][0]) / 2

    gain_best = float(metric.gain(tref.best, tref.naive))
    if gain_best > best_noise:
        gain_share = float(metric.gain(score, tref.naive)) / gain_best
        par_gain_share = float(metric.gain(tref.par, tref.naive)) / gain_best
        gain_share_note = ""
    else:
        gain_share = par_gain_share = None
        gain_share_note = (f"the best default ({tref.best_model} {fmt(tref.best)}) is not "
                           f"better than naive ({fmt(tref.naive)}) beyond the noise "
                           f"(±{fmt(best_noise, NOISE_DIGITS)}): nothing to learn on this split")

    if bands["naive"][1] < 0:
        verdict = "worse-than-naive"
    elif bands["best"][0] > 0:
        verdict = "above-baseline"
    elif gain_share is not None and gain_share < par_gain_share - tolerance and bands["par"][1] < 0:
        verdict = "below-baseline"
    else:
        verdict = "at-baseline"

    runs = [s for m in tref.scores for s in tref.scores[m]]
    if difficulties is None:
        difficulties = {t: d for t, d in ref.difficulties().items() if t != task}
    difficulty_pct = share_below(tref.difficulty, difficulties.values())
    worse_than_par = bool(bands["par"][1] < 0)
    message = _message(verdict, metric, score, tref, gain_share, noise, gain_share_note, tolerance,
                       par_gain_share, worse_than_par)
    if paired:
        findings = probe_predictions(definition, metric, y, user, row_id, ref_preds, tref,
                                     predictions, ref)
    elif verdict == "above-baseline":  # a typed-in score far past the best: units or a leak
        findings = too_good.judge(metric, score, tref.best, tref.best_model,
                                  float(metric.gain(score, tref.best)), best_noise,
                                  [tref.means[m] for m in DEFAULT_ENSEMBLES if m in tref.means],
                                  runs, typed_in=True)
    else:
        findings = []
    return Placement(
        task=task, metric=metric.name, lower_is_better=metric.lower_is_better, score=score,
        percentile=percentile_of(metric, score, runs),
        rank=competition_rank(metric, score, runs), n_reference=len(runs), naive=tref.naive,
        best=tref.best, best_model=tref.best_model, par=tref.par, par_model=tref.par_model,
        gain_share=gain_share, gain_share_note=gain_share_note, noise=float(noise), seed_spread=tref.seed_spread,
        paired=paired, verdict=verdict, difficulty_percentile=difficulty_pct, message=message,
        tolerance=tolerance, reference=str(ref.folder), reference_label=ref.label,
        units=definition.units if metric.in_target_units else "",
        model_means=dict(tref.means),
        reference_scores={m: list(v) for m, v in tref.scores.items()}, findings=findings,
        worse_than_par=worse_than_par)


def gap_to_par(score: float, par: float) -> str:
    """How far ``score`` is from ``par``, in the metric's units and as a share of par.

    Returns
    -------
    str
        The absolute difference (metric units, no direction), then its share of ``|par|`` in
        percent, which is left out when par is 0.

    Examples
    --------
    >>> gap_to_par(0.12, 0.08852)
    '0.0315, 36% of par'
    """
    gap = abs(score - par)
    return fmt(gap, 3) + (f", {gap / abs(par):.0%} of par" if par else "")


def failure_causes(metric_name: str) -> str:
    """The usual mistakes behind a score under the naive floor, for this metric's task type."""
    regression = "regression" in get_metric(metric_name).task_types
    return _CAUSES["regression" if regression else "classification"]


_CAUSES = {
    # the mistakes that put a score under the naive floor, by what the predictions are
    "regression": "predictions misaligned with row_id, a target transform not undone (log "
                  "values submitted as prices), values in other units",
    "classification": "predictions misaligned with row_id, hard labels given instead of "
                      "probabilities, the probability of the other class",
}


def _message(verdict, metric, score, tref, gain_share, noise, gain_share_note, tolerance,
             par_gain_share=None, worse_than_par=False) -> str:
    band = f"±{fmt(noise, NOISE_DIGITS)}"
    regression = "regression" in metric.task_types
    if verdict == "worse-than-naive":
        floor = "the mean" if regression else "the class prior"
        causes = failure_causes(metric.name)
        return (f"Worse than predicting {floor} ({fmt(tref.naive)}) by more than the noise "
                f"({band}): look for a bug before tuning anything — {causes}.")
    if verdict == "above-baseline":
        return (f"Better than the best default ensemble ({tref.best_model} {fmt(tref.best)}) by "
                f"more than the noise ({band}). If this is surprising, check that no "
                f"holdout information reached training.")
    beaten_by = sorted((m for m in DEFAULT_ENSEMBLES if m in tref.means
                        and metric.better(tref.means[m], score)),
                       key=lambda m: -float(metric.gain(tref.means[m], score)))
    if verdict == "below-baseline":
        listing = ", ".join(f"{m} {fmt(tref.means[m])} (better by "
                            f"{fmt(abs(tref.means[m] - score), 3)})" for m in beaten_by)
        log_hint = ", an RMSLE task trained without log1p" if metric.name == "rmsle" else ""
        return (f"Gain share {gain_share:.2f} is more than {tolerance:g} under par's "
                f"({tref.par_model} {fmt(tref.par)}), beyond the noise ({band}); beaten "
                f"by {listing}. Usual causes: category codes learned separately on the holdout "
                f"rows{log_hint}, rows shuffled against row_id, a leaky or random validation "
                f"split during tuning.")
    if gain_share is None:
        return (f"At the baseline: {gain_share_note}; this task's holdout does not reward "
                f"modelling, so a weak score here is the data's, not the pipeline's.")
    if worse_than_par:
        # at the baseline by the tolerance alone: say how far in the metric's own terms, since
        # with naive far off a large gap is a small share of the gain
        return (f"Within the standard baseline's tolerance, but worse than par {tref.par_model} "
                f"{fmt(tref.par)} beyond the noise ({band}): by {gap_to_par(score, tref.par)}. "
                f"As a share of the gain over naive ({fmt(tref.naive)}) that is {gain_share:.2f} "
                f"against par's {par_gain_share:.2f}, less than the tolerance "
                f"({tolerance:g}) under it (--tolerance, or tolerance= in Python, sets it).")
    return (f"Within the standard baseline's range: gain share {gain_share:.2f} against par "
            f"{tref.par_model} {fmt(tref.par)} and best {tref.best_model} {fmt(tref.best)}; "
            f"not worse than par nor better than the best beyond the noise ({band}).")
