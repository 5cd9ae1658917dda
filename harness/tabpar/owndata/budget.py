"""The model zoo within a time budget: which models run, in what order, and what each will cost.

Models run cheapest first (``MODELS[m].cost``); a model whose predicted time
(``tabpar.execution.estimates``: from the references' recorded fits, scaled to this machine)
does not fit in what is left of the budget is skipped, and so is every costlier one after it.
The naive floor and one default ensemble always run, as the placement needs them.
``calibrate`` runs the zoo in two stretches (``stretches``): the naive floor and the histogram
boosters, which take seconds, before its provisional answer; the rest after it.
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
# the default ensembles that fit in seconds where the forests take minutes (histogram
# boosting: bench/RESULTS.md, "calibrate")
FAST_ENSEMBLES = ("hgb", "xgb", "lgbm")
# the diagnostics' time, for a budget that must keep room for them after the first models:
# measured at 16 s beside a 2.3 s LightGBM run on bench/calibrate_speed.py's 100,000-row table
# and 1.3 s beside 0.1 s on a 932-row one (2 cores). An overestimate only defers a model until
# the diagnostics have run, where the budget decides on it again.
DIAGNOSTICS_FIXED_SECONDS = 2.0
DIAGNOSTICS_PER_LGBM_RUN = 8.0


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


def stretches(order) -> tuple[list[str], list[str]]:
    """``order`` cut into the models of the provisional answer (the naive floor and the
    histogram boosters, ``FAST_ENSEMBLES``) and the rest, each cheapest first.

    Parameters
    ----------
    order : list of str
        Model names, cheapest first (``zoo_order``).

    Returns
    -------
    (list of str, list of str)
        The first stretch and the second.

    Examples
    --------
    >>> stretches(zoo_order(None, "regression"))
    (['naive', 'lgbm', 'xgb', 'hgb'], ['linear', 'et', 'rf'])
    """
    first = [m for m in order if m == "naive" or m in FAST_ENSEMBLES]
    return first, [m for m in order if m not in first]


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
    ``ZooRun`` does the same in several stretches (``calibrate`` answers between them).

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
    zoo = ZooRun(suite, seeds, out_run, workers, started, say, executor, scheduler)
    zoo.run(order, budget, rate)
    return zoo.ran, zoo.skipped, zoo.failures, zoo.overrun(budget)


class ZooRun:
    """The zoo of one task run model by model, in stretches that share what they have learnt.

    Each ``run`` call takes a stretch of models (cheapest first); what the runs so far taught
    about this machine's speed, and whether the naive floor and a default ensemble have run,
    carry over to the next call, so ``calibrate`` can answer between two stretches.

    Parameters
    ----------
    suite, seeds, out_run, workers, started, say, executor, scheduler
        As for ``run_zoo``.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> suite = SimpleNamespace(tasks=[SimpleNamespace(type="regression")])
    >>> zoo = ZooRun(suite, 1, None, 1, 0.0, print)
    >>> zoo.ran, zoo.skipped, zoo.overrun(None)
    ([], [], None)
    """

    def __init__(self, suite: Suite, seeds, out_run, workers, started, say, executor="local",
                 scheduler=None):
        self.suite, self.seeds, self.out_run, self.workers = suite, seeds, out_run, workers
        self.started, self.say = started, say
        self.executor, self.scheduler = executor, scheduler
        self.ran, self.skipped, self.failures = [], [], []
        self.seconds = {}  # model → wall seconds of its run (every seed)
        self.rounds = math.ceil(seeds / workers)
        self.threads = max(1, available_cores() // max(1, min(workers, seeds)))
        self.kind = suite.tasks[0].type
        self.sizes = None  # (training rows, features) once the first model has prepared them
        # this machine's speed against the references' (actual / predicted seconds), learnt
        # only from fits long enough not to be swamped by fixed costs, and the fixed cost of
        # one run of a model (bookkeeping: cached arrays, predictions file, results line),
        # from the short ones
        self.ratios, self.overhead = [], 0.0
        self.have_ensemble, self.stopped, self.rate_used = False, False, False

    def predicted(self, model, target="job") -> float:
        """The references' predicted seconds of one ``model`` job (or ``target="fit"``: its
        fit alone) at this task's size, before any scaling to this machine."""
        return predict_seconds(model, self.kind, *self.sizes, threads=self.threads,
                               target=target)

    def estimate(self, model, rate=None) -> float:
        """Predicted wall seconds of ``model``'s run (every seed), scaled to this machine."""
        if (rate is not None and not self.rate_used
                and self.predicted("lgbm", "fit") >= LEARN_FROM_SECONDS):
            # the diagnostics' full-size LightGBM fit, used once
            lgbm_fit = rate * MODELS["lgbm"].cost(self.kind) / TRAIN_PREDICT_FACTOR
            self.ratios.append(lgbm_fit / self.predicted("lgbm", "fit"))
            self.rate_used = True
        scale = float(np.median(self.ratios)) if self.ratios else 1.0
        return self.overhead + scale * self.predicted(model) * self.rounds

    def diagnostics_estimate(self) -> float:
        """Rough wall seconds the five diagnostics will take, from the first default
        ensemble's run scaled to LightGBM's cost (0 before one has run)."""
        first = next((m for m in self.ran if m in DEFAULT_ENSEMBLES), None)
        if first is None:
            return 0.0
        lgbm_run = (self.seconds[first] / self.rounds * MODELS["lgbm"].cost(self.kind)
                    / MODELS[first].cost(self.kind))
        return DIAGNOSTICS_FIXED_SECONDS + DIAGNOSTICS_PER_LGBM_RUN * lgbm_run

    def run(self, order, budget, rate=None, defer=False) -> list[str]:
        """Run ``order`` (cheapest first) one model at a time within ``budget``.

        Parameters
        ----------
        order : list of str
            This stretch's models, cheapest first.
        budget : float or None
            Seconds the zoo may take, counted from ``started`` (None: no limit).
        rate : float or None
            ``seconds_per_cost`` of the diagnostics' LightGBM fit, once it is known.
        defer : bool
            The diagnostics still have to run after this stretch: a model that would not
            fit beside their estimated time (``diagnostics_estimate``) is deferred rather
            than skipped, and so is every costlier one of the stretch.

        Returns
        -------
        list of str
            The deferred models (empty unless ``defer``), for a later stretch.
        """
        deferred = []
        for model in order:
            required = model == "naive" or (model in DEFAULT_ENSEMBLES and not self.have_ensemble)
            if budget is not None and not required and self.sizes is not None:
                left = budget - (time.monotonic() - self.started)
                estimate = self.estimate(model, rate)
                if defer and (deferred or estimate > left - self.diagnostics_estimate()):
                    deferred.append(model)
                    self.say(f"budget: {model} waits until the diagnostics have run")
                    continue
                # once one model does not fit, no costlier one is started either
                if self.stopped or estimate > left:
                    self.stopped = True
                    self.skipped.append({"model": model, "estimate_seconds": round(estimate, 1)})
                    self.say(f"budget: skipping {model} (estimated {estimate:.1f} s, "
                             f"{max(left, 0):.1f} s left)")
                    continue
            self._run_one(model)
        return deferred

    def _run_one(self, model) -> None:
        t0 = time.monotonic()
        result = run_suite(self.suite, models=[model], seeds=self.seeds, out=self.out_run,
                           workers=self.workers, executor=self.executor,
                           scheduler=self.scheduler)
        seconds = time.monotonic() - t0
        if result.interrupted:  # Ctrl-C/SIGTERM: stop here, never report the rest as run
            raise KeyboardInterrupt
        self.failures += [{k: r.get(k) for k in ("model", "seed", "status", "error")}
                          for r in result.failures]
        summary = next(iter(result.tasks.values()))
        self.sizes = self.sizes or (summary["n_train"], summary["n_features"])
        ok = model in summary["models"]
        self.say(f"model {model}: {'ok' if ok else 'FAILED'} ({seconds:.1f} s)")
        if not ok:
            return
        self.ran.append(model)
        self.seconds[model] = seconds
        self.have_ensemble = self.have_ensemble or model in DEFAULT_ENSEMBLES
        if self.predicted(model) * self.rounds >= LEARN_FROM_SECONDS:
            self.ratios.append(max(seconds - self.overhead, 0.0)
                               / (self.predicted(model) * self.rounds))
        else:  # mostly bookkeeping: the latest such run is the fixed cost to expect
            self.overhead = seconds

    def overrun(self, budget) -> str | None:
        """A note when the zoo ran past ``budget`` (None: within it, or no budget)."""
        if budget is None or time.monotonic() - self.started <= budget:
            return None
        return ("the model zoo ran past its share of the budget: the naive floor and one "
                "default ensemble always run, and model times are predicted from the "
                "references' recorded fits, scaled by the models already run")


def reserve_seconds(task_type: str, metric, y_train, y_holdout, n_classes: int) -> float:
    """Rough seconds the placement (a 1000-resample bootstrap of 4 prediction sets) and the
    plots take after the zoo, from the time of one metric call on the holdout.

    Parameters
    ----------
    task_type : str
        ``regression``, ``binary`` or ``multiclass``.
    metric : Metric
        The task's metric (``tabpar.common.metrics.get_metric``).
    y_train, y_holdout : array
        The target's training and holdout values as the zoo sees them (class codes for a
        classification task).
    n_classes : int
        Classes of a classification task (at least 2).

    Returns
    -------
    float
        Seconds to keep out of the zoo's share of the budget.

    Examples
    --------
    >>> from tabpar.common.metrics import get_metric
    >>> reserve_seconds("regression", get_metric("rmse"), np.ones(8), np.ones(2), 2) >= 1.0
    True
    """
    y = np.asarray(y_holdout)
    guess = (np.full(len(y), float(np.mean(y_train))) if task_type == "regression"
             else np.full((len(y), n_classes), 1.0 / n_classes)
             if task_type == "multiclass" else np.full(len(y), 0.5))
    weights = np.ones(len(y))
    t0 = time.perf_counter()
    metric(y, guess, weights)
    return 1.0 + 4 * N_BOOTSTRAP * (time.perf_counter() - t0)
