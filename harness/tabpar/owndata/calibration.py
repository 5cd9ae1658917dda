"""Calibrate a score on one's own data (``tabpar calibrate``): the steps in order.

The user's table becomes a ``Task`` (``tabpar.owndata.inference``) in a one-task ``Suite``; the
model zoo runs on it through ``run_suite`` (one call per model, cheapest first, within an
optional time budget: ``tabpar.owndata.budget``) into ``OUT/run``, in two stretches: the naive
floor and the histogram boosters, then (after a provisional answer on them) the diagnostics
(``tabpar.owndata.diagnostics``) and the other models; the user's score is placed against that
run with ``place_task``, the task's difficulty is placed among the widest published
reference's tasks of its type (``tabpar.owndata.difficulty``), and the answer
(``tabpar.owndata.answer``) says which explanation — the pipeline or the data — the evidence supports. The plots are drawn
later, from the ``Calibration``, by ``tabpar.report.learning_curve.save_calibration_plots``.
"""
from __future__ import annotations

import contextlib
import math
import os
import signal
import threading
import time
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

import numpy as np

from tabpar.common.errors import UserError
from tabpar.common.files import read_state_json
from tabpar.common.metrics import get_metric
from tabpar.common.system import available_cores
from tabpar.common.text import plain
from tabpar.data.suites import Suite
from tabpar.evaluation.placement import DEFAULT_TOLERANCE, place_task
from tabpar.evaluation.predictions import read_predictions_file
from tabpar.evaluation.reference import Reference, reference_for
from tabpar.execution.cache import load_arrays, prepare_task
from tabpar.execution.executors import connect_check
from tabpar.models.zoo import DEFAULT_ENSEMBLES
from tabpar.owndata.answer import Calibration
from tabpar.owndata.budget import (
    ZooRun,
    reserve_seconds,
    seconds_per_cost,
    stretches,
    zoo_order,
)
from tabpar.owndata.diagnostics import NAMES as DIAGNOSTIC_NAMES
from tabpar.owndata.diagnostics import run_diagnostics, task_data
from tabpar.owndata.difficulty import dataset_label, suite_difficulties
from tabpar.owndata.explanation import compose_answer
from tabpar.owndata.inference import calibration_task

SUITE_NAME = "calibrate"


def calibrate(data, target: str, type: str | None = None, metric: str | None = None,
              positive=None, dates=(), holdout: str | None = None,
              holdout_fraction: float | None = None, holdout_rows: int | None = None,
              cutoff: str | None = None, drop=(), score: float | None = None,
              predictions=None, seeds: int = 1, models=None, budget: float | None = None,
              out=None, workers: int | None = None, reference: str | None = None,
              tolerance: float = DEFAULT_TOLERANCE, on_event=None, on_update=None,
              executor: str = "local", scheduler: str | None = None) -> Calibration:
    """Place ``score`` (or a ``predictions`` file: columns row_id, prediction) on the user's own
    table against the baseline procedure and zoo run on the same split.

    The zoo runs in two stretches: the naive floor and the histogram boosters first (a
    provisional answer on them goes to ``on_update``), then the diagnostics and the other
    models. Writes ``OUT/run`` (the zoo's jobs), ``report.md`` and ``report.json`` (default OUT:
    ``runs/calibrate-NAME-DATE-TIME``); the plots are drawn from the result by
    ``tabpar.report.learning_curve.save_calibration_plots``. Every mistake in the input raises
    UserError before anything is written. ``executor="dask"`` runs the zoo's jobs on the Dask
    cluster at ``scheduler`` (the prepared arrays are sent to it); the diagnostics and the
    placement run in this process.

    Parameters
    ----------
    data, target
        The table (``.csv`` or ``.parquet``) and the column to predict.
    type, metric, positive, dates, holdout, holdout_fraction, holdout_rows, cutoff, drop
        What the table is and how it is split, as for
        ``tabpar.owndata.inference.calibration_task``; each one left out is inferred and the
        inference is stated (``Calibration.inferred``).
    score : float, optional
        The user's holdout score, in the metric's units. Exactly one of ``score`` and
        ``predictions``.
    predictions : str or Path, optional
        A CSV/Parquet file with ``row_id`` and ``prediction`` for every holdout row (binary:
        the positive class's probability); scored here, with a paired noise band.
    seeds : int
        Seeds per model (seeds 0..K-1).
    models : list of str, optional
        The zoo's models (default: all; naive always runs; at least one default ensemble).
    budget : float, optional
        Seconds the diagnostics and the zoo may take: models run cheapest first and one whose
        estimated time does not fit is skipped (the naive floor and one default ensemble
        always run).
    out : str or Path, optional
        The output folder.
    workers : int, optional
        Parallel jobs (default: 1 for one seed, else up to one per seed).
    reference : str, optional
        The published reference whose tasks (of the same type) the difficulty is placed
        among; default: the widest published one (``reference_for``: ``wide``, else
        ``default``), as on the command line.
    tolerance : float
        Gain share (0 = naive floor, 1 = best default) within which a score counts as at par.
    on_event : callable, optional
        Takes one progress message per step.
    on_update : callable, optional
        Takes each answer as it comes: first a provisional ``Calibration`` (``final`` False)
        once the naive floor and the histogram boosters (hgb, xgb, lgbm: seconds where the
        forests take minutes) have run, resting on them (``rests_on``) with the models still
        to run in ``pending`` and every diagnostic in ``diagnostics_pending``; then the final
        one (``final`` True), the one returned. No provisional answer when none of the
        boosters ran (``models`` without them, or they all failed). A provisional answer
        writes no report; its verdict is labelled provisional and hedged like one resting
        on fewer ensembles (best can only improve, par can move either way).
    executor, scheduler : str
        ``"local"`` or ``"dask"``, and the Dask scheduler's address.

    Returns
    -------
    Calibration
        The verdict, the dataset's difficulty, the baseline's scores, the diagnostics and the
        answer; scores in the metric's units (``placement.lower_is_better`` gives the
        direction).
    """
    started = time.monotonic()
    say = on_event or (lambda message: None)
    if (score is None) == (predictions is None):
        raise UserError("Give exactly one of --score and --predictions (or --export-split DIR "
                        "to write the split first).")
    if score is not None and not (isinstance(score, (int, float)) and math.isfinite(score)):
        raise UserError(f"--score {plain(score)!r} is not a finite number; give your holdout score in "
                        f"the metric.")
    zoo_order(models)  # an unknown model fails before any work
    if isinstance(seeds, bool) or not isinstance(seeds, int) or seeds < 1:
        raise UserError(f"--seeds must be a positive whole number, not {seeds!r}.")
    if budget is not None and not budget > 0:
        raise UserError(f"--budget must be a positive number of seconds, not {budget!r}.")
    cores = available_cores()
    workers = workers or (1 if seeds == 1 else min(cores, seeds))
    if workers < 1:
        raise UserError(f"--workers must be at least 1, not {workers}.")

    task, inferred = calibration_task(data, target, type=type, metric=metric,
                                      positive=positive, dates=dates, holdout=holdout,
                                      holdout_fraction=holdout_fraction,
                                      holdout_rows=holdout_rows, cutoff=cutoff, drop=drop)
    order = zoo_order(models, task.type)
    connect_check(scheduler, executor, None)  # after the data's checks, before any work
    say(f"preparing {task.name}")
    prepared = prepare_task(task)  # every load/split/prep mistake surfaces here, before OUT
    if predictions is not None:
        row_id = np.asarray(load_arrays(prepared.folder)["row_id"])
        read_predictions_file(Path(predictions), row_id, task.type, task.name,
                              classes=prepared.classes)
    difficulties, suite_folder, suite_note = suite_difficulties(reference or reference_for(),
                                                                task.type)
    out = Path(out) if out is not None else (
        Path("runs") / f"calibrate-{task.name}-{datetime.now():%Y%m%d-%H%M%S}")
    if os.path.lexists(out / "report.json"):
        old = read_state_json(out / "report.json", f"delete it to calibrate into {out} afresh, "
                              f"or choose another --out")
        if old.get("task") != task.definition():
            raise UserError(f"{out} holds a calibration of other data or options; choose "
                            f"another --out.")

    suite = Suite(name=SUITE_NAME, path=Path(task.source.split(":", 1)[1]),
                  description="tabpar calibrate on the user's own data", tasks=[task])
    run_dir = out / "run"
    zoo_budget = None
    if budget is not None:  # keep time for the placement's bootstrap and the plots
        arrays = load_arrays(prepared.folder)
        zoo_budget = budget - reserve_seconds(task.type, get_metric(task.metric),
                                              arrays["y_train"], arrays["y_holdout"],
                                              max(len(prepared.classes), 2))
    zoo = ZooRun(suite, seeds, run_dir, workers, started, say, executor=executor,
                 scheduler=scheduler)
    first, rest = stretches(order)

    setting = _Setting(str(data), task, inferred, prepared, out, run_dir, score, predictions,
                       tolerance, seeds, budget, zoo_budget, started, difficulties,
                       suite_folder, suite_note)

    def answer(diagnostics, pending=(), final=True) -> Calibration:
        return _answer(setting, zoo, diagnostics, [m for m in order if m in pending], final)

    with _sigterm_as_interrupt():  # Ctrl-C or SIGTERM: exit 130, whatever was answered so far
        # the first stretch takes seconds: naive and the histogram boosters, then an answer
        # on them; the diagnostics and the slow models refine it
        deferred = zoo.run(first, zoo_budget, defer=True)
        if on_update is not None and "naive" in zoo.ran and _ensembles(zoo.ran):
            say("provisional answer")
            on_update(answer([], pending=deferred + rest, final=False))
        data_ = task_data(task, threads=cores)
        diagnostics = run_diagnostics(data_, on_event=say)
        curve = next(d for d in diagnostics if d.name == "learning-curve")
        rate = seconds_per_cost(curve.numbers.get("fit_seconds"), task.type)
        zoo.run([m for m in order if m in deferred + rest], zoo_budget, rate)
    if "naive" not in zoo.ran or not _ensembles(zoo.ran):
        raise RuntimeError(f"the naive floor or every default ensemble failed on {task.name}: "
                           f"{zoo.failures}")
    calibration = answer(diagnostics)
    calibration.write_reports()
    if on_update is not None:
        on_update(calibration)
    return calibration


def _ensembles(models) -> list[str]:
    return [m for m in models if m in DEFAULT_ENSEMBLES]


@dataclass
class _Setting:
    """What every answer of one ``calibrate`` call shares: the data, the split, the options."""

    data: str
    task: object
    inferred: dict
    prepared: object  # PreparedTask
    out: Path
    run_dir: Path
    score: float | None
    predictions: object
    tolerance: float
    seeds: int
    budget: float | None
    zoo_budget: float | None
    started: float
    difficulties: dict | None
    suite_folder: object
    suite_note: str


def _answer(s: _Setting, zoo: ZooRun, diagnostics: list, pending: list,
            final: bool) -> Calibration:
    """The answer on the models ``zoo`` has run so far and the ``diagnostics`` done; not
    ``final`` while ``pending`` models or the diagnostics are still to run."""
    task, prepared = s.task, s.prepared
    ref = Reference(s.run_dir)
    placement = place_task(task, ref, score=s.score, predictions=s.predictions,
                           tolerance=s.tolerance, difficulties=s.difficulties)
    tref = ref.task(task.name)
    metric_obj = get_metric(task.metric)
    gain_best = float(metric_obj.gain(tref.best, tref.naive))
    par_gain_share = (float(metric_obj.gain(tref.par, tref.naive)) / gain_best
                      if placement.gain_share is not None else None)
    dataset = dataset_label(placement.difficulty_percentile)
    ensembles = _ensembles(zoo.ran)
    diagnostics_pending = [] if final else list(DIAGNOSTIC_NAMES)
    answer = compose_answer(placement, dataset, placement.difficulty_percentile, diagnostics,
                            par_gain_share, prepared.n_holdout, ensembles, s.tolerance,
                            pending=pending, diagnostics_pending=diagnostics_pending)
    elapsed = time.monotonic() - s.started
    warnings = _cautions(s.suite_note, ensembles, s.seeds, s.budget, elapsed,
                         zoo.overrun(s.zoo_budget), zoo.failures)
    calibration = Calibration(
        data=s.data, task=task, out=s.out, inferred=s.inferred,
        split=prepared.split_description, notes=list(prepared.notes), placement=placement,
        score_verdict=placement.verdict, dataset=dataset, difficulty=float(tref.difficulty),
        difficulty_percentile=placement.difficulty_percentile, suite_reference=s.suite_folder,
        suite_tasks=len(s.difficulties or {}), gain_share=placement.gain_share,
        par_gain_share=par_gain_share, baseline=_baseline(ref, task.name),
        diagnostics=diagnostics, answer=answer, n_holdout=prepared.n_holdout,
        n_train=prepared.n_train, seeds=s.seeds, skipped=list(zoo.skipped),
        failures=list(zoo.failures), warnings=warnings, budget_seconds=s.budget,
        given=(["--predictions", str(s.predictions)] if s.predictions is not None
               else ["--score", repr(float(s.score))]),
        final=final, pending=pending, diagnostics_pending=diagnostics_pending)
    if final:
        calibration.files = {"report": str(s.out / "report.md"),
                             "json": str(s.out / "report.json"), "run": str(s.run_dir)}
    calibration.elapsed_seconds = round(elapsed, 1)
    return calibration


@contextlib.contextmanager
def _sigterm_as_interrupt():
    """SIGTERM raises KeyboardInterrupt, as Ctrl-C does, while the zoo runs (between models
    too), so the command stops with exit 130 instead of finishing on part of the zoo."""
    if threading.current_thread() is not threading.main_thread():
        yield  # signal handlers can only be set in the main thread
        return

    def on_term(signum, frame):
        raise KeyboardInterrupt

    previous = signal.signal(signal.SIGTERM, on_term)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _baseline(ref: Reference, task_name: str) -> dict:
    """Each model's mean holdout and training score (metric units), fit seconds and seeds."""
    baseline = {}
    rows = ref.rows[ref.rows["task"] == task_name]
    for model, group in rows.groupby("model"):
        baseline[model] = {"score": float(group["score"].mean()),
                           "train_score": float(group["train_score"].mean()),
                           "fit_seconds": float(group["fit_seconds"].mean()),
                           "seeds": int(len(group))}
    return baseline


def _cautions(suite_note: str, ensembles: list, seeds: int, budget: float | None,
              elapsed: float, overrun: str | None, failures: list) -> list[str]:
    """What limits the answer: the reference used, fewer ensembles or seeds, the budget."""
    warnings = []
    if suite_note:
        warnings.append(suite_note)
    if len(ensembles) < len(DEFAULT_ENSEMBLES):
        warnings.append(f"difficulty is measured with {len(ensembles)} of the "
                        f"{len(DEFAULT_ENSEMBLES)} default ensembles (the suite reference used "
                        f"all of them): fewer make a dataset look harder than it is")
    if seeds == 1:
        warnings.append("1 seed per model: the noise band covers the finite holdout, not the "
                        "spread over seeds (boosting at its defaults does not depend on it)")
    if budget is not None and elapsed > budget:
        warnings.append(f"the budget of {budget:g} s was exceeded ({elapsed:.1f} s so far)"
                        + (f"; {overrun}" if overrun else ""))
    if failures:
        warnings.append("some jobs failed: " + "; ".join(
            f"{f['model']} seed {f['seed']}: {f['error']}" for f in failures[:3]))
    return warnings
