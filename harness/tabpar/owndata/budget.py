"""The model zoo within a time budget: which models run, in what order, and what each will cost.

Models run cheapest first (``MODELS[m].cost``); a model whose predicted time
(``tabpar.execution.estimates``: from the references' recorded fits, scaled to this machine)
does not fit in what is left of the budget is skipped, and so is every costlier one after it.
The naive floor and one default ensemble always run, as the placement needs them.
"""
from __future__ import annotations

import math
import time

import numpy as np

from tabpar.common.errors import UserError
from tabpar.common.system import available_cores
from tabpar.data.suites import Suite
from tabpar.evaluation.stats import N_BOOTSTRAP
from tabpar.execution.estimates import predict_seconds
from tabpar.execution.runner import run_suite
from tabpar.models.zoo import DEFAULT_ENSEMBLES, MODELS, check_models

# the zoo also predicts the training rows; a diagnostic fit only predicts the holdout
TRAIN_PREDICT_FACTOR = 1.5
# a fit predicted shorter than this says more about fixed costs than about the machine's speed
# (a LightGBM fit of a few thousand rows is mostly start-up: scaling the forests by it
# overestimated them up to 40-fold)
LEARN_FROM_SECONDS = 0.5


def zoo_order(models=None, task_type: str = "regression") -> list[str]:
    """The models to run, cheapest first by ``MODELS[m].cost`` (naive is always included).

    Parameters
    ----------
    models : list of str, optional
        Model names (default: the whole zoo); UserError for an unknown name or a list with no
        default ensemble.
    task_type : str
        ``regression``, ``binary`` or ``multiclass`` (the costs differ).

    Returns
    -------
    list of str
        Model names, cheapest first.
    """
    names = check_models(models)
    if "naive" not in names:
        names = ["naive"] + names
    if not any(m in DEFAULT_ENSEMBLES for m in names):
        raise UserError(f"--models needs at least one default ensemble "
                        f"({', '.join(DEFAULT_ENSEMBLES)}): the baseline's par and best are "
                        f"measured with them.")
    return sorted(names, key=lambda m: MODELS[m].cost(task_type))


def seconds_per_cost(fit_seconds: float | None, task_type: str) -> float | None:
    """The first estimate of the zoo's speed, from the diagnostics' full-size LightGBM fit.

    Parameters
    ----------
    fit_seconds : float or None
        Wall seconds of that fit (None when it did not run).
    task_type : str
        ``regression``, ``binary`` or ``multiclass``.

    Returns
    -------
    float or None
        Seconds per unit of ``MODELS[m].cost`` for one round of seeds (the zoo's job also
        predicts the training rows), or None without a fit to go by.
    """
    if fit_seconds is None:
        return None
    return fit_seconds * TRAIN_PREDICT_FACTOR / MODELS["lgbm"].cost(task_type)


def run_zoo(suite: Suite, order, seeds, out_run, workers, budget, started, rate, say,
            executor="local", scheduler=None):
    """Run ``order`` one model at a time; stop starting models the budget cannot hold.

    A model's time is predicted from the published references' recorded fits of that model
    (``tabpar.execution.estimates``: training rows, features, kind of task, threads), scaled
    to this machine by the diagnostics' LightGBM fit and then by every model already run.

    Parameters
    ----------
    suite : Suite
        The one-task suite of the user's table.
    order : list of str
        Model names, cheapest first (``zoo_order``).
    seeds : int
        Seeds per model.
    out_run : Path
        The run's results folder.
    workers : int
        Parallel jobs.
    budget : float or None
        Seconds the zoo may take, counted from ``started`` (None: no limit).
    started : float
        ``time.monotonic()`` when the budget started.
    rate : float or None
        ``seconds_per_cost`` of the diagnostics' LightGBM fit (None: no fit to go by; the
        machine is then first assumed as fast as the references').
    say : callable
        Takes one progress message.
    executor, scheduler : str
        As for ``run_suite``.

    Returns
    -------
    (list, list, list, str or None)
        The models run, the skipped ones (``{model, estimate_seconds}``), the failed jobs
        (``{model, seed, status, error}``), and a note when the zoo ran past the budget.
    """
    rounds = math.ceil(seeds / workers)
    threads = max(1, available_cores() // max(1, min(workers, seeds)))
    kind = suite.tasks[0].type
    ran, skipped, failures = [], [], []
    have_ensemble, stopped = False, False
    sizes = None  # (training rows, features) once the first model has prepared them
    # this machine's speed against the references' (actual / predicted seconds), learnt only
    # from fits long enough not to be swamped by fixed costs, and the fixed cost of one run of
    # a model (bookkeeping: cached arrays, predictions file, results line), from the short ones
    ratios, overhead = [], 0.0

    def predicted(model, target="job"):
        return predict_seconds(model, kind, *sizes, threads=threads, target=target)

    for model in order:
        required = model == "naive" or (model in DEFAULT_ENSEMBLES and not have_ensemble)
        if budget is not None and not required and sizes is not None:
            if rate is not None and predicted("lgbm", "fit") >= LEARN_FROM_SECONDS:
                # the diagnostics' full-size LightGBM fit, used once
                lgbm_fit = rate * MODELS["lgbm"].cost(kind) / TRAIN_PREDICT_FACTOR
                ratios.append(lgbm_fit / predicted("lgbm", "fit"))
                rate = None
            scale = float(np.median(ratios)) if ratios else 1.0
            left = budget - (time.monotonic() - started)
            estimate = overhead + scale * predicted(model) * rounds
            # once one model does not fit, no costlier one is started either
            if stopped or estimate > left:
                stopped = True
                skipped.append({"model": model, "estimate_seconds": round(estimate, 1)})
                say(f"budget: skipping {model} (estimated {estimate:.1f} s, "
                    f"{max(left, 0):.1f} s left)")
                continue
        t0 = time.monotonic()
        result = run_suite(suite, models=[model], seeds=seeds, out=out_run, workers=workers,
                           executor=executor, scheduler=scheduler)
        seconds = time.monotonic() - t0
        if result.interrupted:  # Ctrl-C/SIGTERM: stop here, never report the rest as run
            raise KeyboardInterrupt
        failures += [{k: r.get(k) for k in ("model", "seed", "status", "error")}
                     for r in result.failures]
        summary = next(iter(result.tasks.values()))
        sizes = sizes or (summary["n_train"], summary["n_features"])
        ok = model in summary["models"]
        say(f"model {model}: {'ok' if ok else 'FAILED'} ({seconds:.1f} s)")
        if ok:
            ran.append(model)
            have_ensemble = have_ensemble or model in DEFAULT_ENSEMBLES
            if predicted(model) * rounds >= LEARN_FROM_SECONDS:
                ratios.append(max(seconds - overhead, 0.0) / (predicted(model) * rounds))
            else:  # mostly bookkeeping: the latest such run is the fixed cost to expect
                overhead = seconds
    overrun = None
    if budget is not None and time.monotonic() - started > budget:
        overrun = ("the model zoo ran past its share of the budget: the naive floor and one "
                   "default ensemble always run, and model times are predicted from the "
                   "references' recorded fits, scaled by the models already run")
    return ran, skipped, failures, overrun


def reserve_seconds(data_) -> float:
    """Rough seconds the placement (a 1000-resample bootstrap of 4 prediction sets) and the
    plots take after the zoo, from the time of one metric call on the holdout.

    Parameters
    ----------
    data_ : TaskData
        The task's rows (``tabpar.owndata.diagnostics.task_data``).

    Returns
    -------
    float
        Seconds to keep out of the zoo's share of the budget.
    """
    metric, y = data_.metric, data_.y_holdout
    guess = (np.full(len(y), float(np.mean(data_.y_train))) if data_.task.type == "regression"
             else np.full((len(y), data_.n_classes), 1.0 / data_.n_classes)
             if data_.task.type == "multiclass" else np.full(len(y), 0.5))
    weights = np.ones(len(y))
    t0 = time.perf_counter()
    metric(y, guess, weights)
    return 1.0 + 4 * N_BOOTSTRAP * (time.perf_counter() - t0)
