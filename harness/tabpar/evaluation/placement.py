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

import numpy as np
import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.metrics import get_metric
from tabpar.common.text import format_number as fmt
from tabpar.common.text import html_table
from tabpar.data.sources import read_table
from tabpar.data.suites import Task, load_suite
from tabpar.evaluation.probes import findings_lines, probe_predictions
from tabpar.evaluation.reference import Reference
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
    reference: str
    model_means: dict = field(default_factory=dict)
    reference_scores: dict = field(default_factory=dict)  # model → per-seed scores (for plots)
    extra: dict = field(default_factory=dict)  # added by other answers (e.g. a leaderboard)
    extra_lines: list = field(default_factory=list, repr=False)  # their text, for __str__
    extra_shown: set = field(default_factory=set, repr=False)  # keys extra_lines already show
    findings: list = field(default_factory=list)  # probes on the user's predictions (Finding)

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
            f"{self.task}: {self.metric} {self.score:.4g} ({direction})  →  {self.verdict}",
            f"  {self.message}",
            f"  beats {self.percentile:.0f}% of the {self.n_reference} reference runs "
            f"(percentile); rank {self.rank} of {self.n_reference + 1}",
            f"  naive {self.naive:.4g} · par {self.par:.4g} ({self.par_model}) · best "
            f"{self.best:.4g} ({self.best_model}) · gain share {gain_share}",
            f"  noise ±{self.noise:.3g} (95% bootstrap over holdout rows"
            f"{', paired with your predictions' if self.paired else ''}) · seed spread "
            f"{self.seed_spread:.3g}",
            f"  task difficulty percentile {diff} among the reference's tasks (higher = harder)",
        ]
        lines[2:2] = findings_lines(self.findings)  # under the verdict, most decisive first
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
        return pd.DataFrame([{"task": self.task, "model": model, "seed_index": i, "score": v}
                             for model, values in self.reference_scores.items()
                             for i, v in enumerate(values)])

    def _repr_html_(self) -> str:
        return html_table({k: v for k, v in self.to_dict().items()
                           if k not in ("reference_scores", "model_means")},
                          caption=f"{self.task}: {self.verdict}")


def read_predictions_file(path: Path, row_id: np.ndarray, task_type: str, task: str):
    """The user's predictions aligned to ``row_id``; UserError for every kind of mismatch."""
    frame = read_table(Path(path))
    for col in ("row_id", "prediction"):
        if col not in frame.columns:
            raise UserError(f"{path} has no '{col}' column; it needs columns row_id and "
                            f"prediction (see task.json from 'tabpar export').")
    ids = pd.to_numeric(frame["row_id"], errors="coerce")
    if ids.isna().any() or (ids % 1 != 0).any():
        bad = frame["row_id"][ids.isna() | (ids % 1 != 0)].iloc[0]
        raise UserError(f"{path} has a row_id that is not a whole number: {bad!r}.")
    ids = ids.astype(np.int64).to_numpy()
    dup = pd.Series(ids).duplicated()
    if dup.any():
        raise UserError(f"{path} lists row_id {ids[dup.to_numpy()][0]} more than once; give "
                        f"each holdout row exactly one prediction.")
    expected = set(row_id.tolist())
    unknown = [i for i in ids if i not in expected]
    if unknown:
        raise UserError(f"{path} has row_id {unknown[0]}, which is not a holdout row of task "
                        f"'{task}' (wrong task or a training row?); predict only the rows of "
                        f"holdout.csv.")
    missing = expected - set(ids.tolist())
    if missing:
        raise UserError(f"{path} lacks {len(missing):,} holdout rows of task '{task}' (e.g. "
                        f"row_id {min(missing)}); predict every row of holdout.csv.")
    values = pd.to_numeric(frame["prediction"], errors="coerce")
    bad = values.isna() | ~np.isfinite(values.to_numpy(dtype=float, na_value=np.nan))
    if bad.any():
        i = int(np.flatnonzero(bad.to_numpy())[0])
        raise UserError(f"{path} has a prediction that is missing, not numeric or infinite "
                        f"({frame['prediction'].iloc[i]!r} for row_id {ids[i]}); fix it.")
    values = values.to_numpy(dtype=float)
    if task_type == "binary" and ((values < 0) | (values > 1)).any():
        raise UserError(f"{path} has predictions outside 0..1, but task '{task}' needs the "
                        f"probability of the positive class.")
    if task_type == "multiclass":
        raise UserError(f"Task '{task}' is multiclass; place it with --score (predictions "
                        f"files take one probability column, for binary tasks).")
    order = pd.Series(values, index=ids)
    return order.loc[row_id].to_numpy()


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


def reference_task(task: str, suite: str | None = None,
                   reference: str | Path = "default") -> tuple[Reference, Task]:
    """The reference at ``reference`` and the definition of its task ``task`` (from ``suite``,
    default: the reference's own suite); UserError naming what is unknown."""
    ref = Reference(reference)
    ref.task(task)  # an unknown task is named against the reference's tasks
    return ref, load_suite(suite or ref.suite).task(task)


def place_on_reference(task: str, score: float | None = None,
                       predictions: str | Path | None = None, suite: str | None = None,
                       reference: str | Path = "default", tolerance: float = DEFAULT_TOLERANCE,
                       force: bool = False) -> Placement:
    """Place a holdout score (or a predictions file, scored here) on a suite task's reference.

    See ``tabpar.place``, which also places on a leaderboard.
    """
    if (score is None) == (predictions is None):
        raise UserError("Give exactly one of --score and --predictions.")
    ref, definition = reference_task(task, suite, reference)
    return place_task(definition, ref, score=score, predictions=predictions,
                      tolerance=tolerance, force=force)


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
    # the holdout rows are needed for the bootstrap band even when only a score is given
    prepared = prepare_task(definition)
    _check_fingerprint(ref, task, prepared.fingerprint, force)
    arrays = load_arrays(prepared.folder)
    y, row_id = np.asarray(arrays["y_holdout"]), np.asarray(arrays["row_id"])
    if paired:
        user = read_predictions_file(Path(predictions), row_id, definition.type, task)
        score = metric(y, user)
    if score is None or not np.isfinite(score):
        raise UserError(f"The score {score!r} is not a finite number; give your holdout score "
                        f"in the task's metric.")
    score = float(score)

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
        gain_share_note = (f"the best default ({tref.best_model} {tref.best:.4g}) is not better than "
                      f"naive ({tref.naive:.4g}) beyond the noise (±{best_noise:.3g}): nothing "
                      f"to learn on this split")

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
    message = _message(verdict, metric, score, tref, gain_share, noise, gain_share_note, tolerance)
    findings = (probe_predictions(definition, metric, y, user, row_id, ref_preds, tref,
                                  predictions, ref) if paired else [])
    return Placement(
        task=task, metric=metric.name, lower_is_better=metric.lower_is_better, score=score,
        percentile=percentile_of(metric, score, runs),
        rank=competition_rank(metric, score, runs), n_reference=len(runs), naive=tref.naive,
        best=tref.best, best_model=tref.best_model, par=tref.par, par_model=tref.par_model,
        gain_share=gain_share, gain_share_note=gain_share_note, noise=float(noise), seed_spread=tref.seed_spread,
        paired=paired, verdict=verdict, difficulty_percentile=difficulty_pct, message=message,
        tolerance=tolerance, reference=str(ref.folder), model_means=dict(tref.means),
        reference_scores={m: list(v) for m, v in tref.scores.items()}, findings=findings)


def _message(verdict, metric, score, tref, gain_share, noise, gain_share_note, tolerance) -> str:
    if verdict == "worse-than-naive":
        floor = "the mean" if "regression" in metric.task_types else "the class prior"
        return (f"Worse than predicting {floor} ({fmt(tref.naive)}) by more than the noise (±{noise:.3g}): look for a bug "
                f"before tuning anything — predictions misaligned with row_id, labels given "
                f"instead of probabilities, a target transform not undone.")
    if verdict == "above-baseline":
        return (f"Better than the best default ensemble ({tref.best_model} {fmt(tref.best)}) by "
                f"more than the noise (±{noise:.3g}). If this is surprising, check that no "
                f"holdout information reached training.")
    beaten_by = sorted((m for m in DEFAULT_ENSEMBLES if m in tref.means
                        and metric.better(tref.means[m], score)),
                       key=lambda m: -float(metric.gain(tref.means[m], score)))
    if verdict == "below-baseline":
        listing = ", ".join(f"{m} {fmt(tref.means[m])} (by {abs(tref.means[m] - score):.3g})"
                            for m in beaten_by)
        return (f"Gain share {gain_share:.2f} is more than {tolerance:g} under par's "
                f"({tref.par_model} {fmt(tref.par)}), beyond the noise (±{noise:.3g}); beaten "
                f"by {listing}. Usual causes: category codes learned separately on the holdout "
                f"rows, an RMSLE task trained without log1p, rows shuffled against row_id, a "
                f"leaky or random validation split during tuning.")
    if gain_share is None:
        return (f"At the baseline: {gain_share_note}; this task's holdout does not reward "
                f"modelling, so a weak score here is the data's, not the pipeline's.")
    return (f"Within the standard baseline's range: gain share {gain_share:.2f} against par "
            f"{tref.par_model} {fmt(tref.par)} and best {tref.best_model} {fmt(tref.best)}, "
            f"differences inside the noise (±{noise:.3g}) or the tolerance ({tolerance:g}).")
