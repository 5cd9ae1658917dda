"""Diagnostics that tell a pipeline mistake from a hard dataset, on one task's own split.

Each diagnostic returns a ``Diagnostic``: ``name``, ``flag`` (True = something the user should
look at), ``numbers`` (in the units each key says) and one ``sentence``. They take a
``TaskData`` (the task's rows after load → target → split → the baseline procedure), built by
``task_data(task)``, so they can be used apart from ``tabpar calibrate``:

    from tabpar.owndata.diagnostics import task_data, leakage
    print(leakage(task_data(task)).sentence)

- ``leakage``: a fast model on one column alone reaching most of the full model's gain over the
  naive floor, or a column that predicts the target near-perfectly;
- ``shift``: how well a classifier tells holdout rows from training rows (cross-validated ROC
  AUC), the columns that drive it, and per-column unseen-category and missing-rate shifts;
- ``split_optimism``: for a time holdout, the same default model scored on a random split of
  the same size against the time holdout;
- ``learning_curve``: the default model's holdout score at 25 / 50 / 100 % of the training rows
  (the latest rows for a time split);
- ``conflicting_duplicates``: rows with identical features but different targets (a noise floor
  no model can pass).

"The default model" / "the fast model" is LightGBM at the zoo's settings (``zoo.build_model``),
the cheapest default ensemble. Scores are in the task metric's own units and direction.
"""
from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field, replace

import numpy as np
import pandas as pd

from tabpar.common.metrics import METRICS, get_metric
from tabpar.evaluation.placement import bootstrap_scores, half_width
from tabpar.procedure.baseline import CALENDAR_FIELDS, BaselinePrep
from tabpar.procedure.variants import builtin
from tabpar.evaluation.reference import headroom_taken
from tabpar.execution.runner import _predict, available_cores
from tabpar.data.sources import LoadedTask, load_task
from tabpar.data.split import Split, Target, encode_target, split_rows
from tabpar.data.suites import Holdout, Task
from tabpar.models.zoo import build_model

FAST_MODEL = "lgbm"
# thresholds (documented in README "Your own data"; each sentence states the numbers)
LEAK_SHARE = 0.9  # one column reaching this share of the full model's gain over naive
LEAK_HEADROOM = 0.95  # one column taking this share of the headroom: near-perfect
SHIFT_AUC = 0.7  # train-vs-holdout ROC AUC from which the two sides are clearly different
COLUMN_SHIFT = 0.10  # unseen-category share / missing-rate difference worth flagging
DUPLICATE_SHARE = 0.01  # share of rows in conflicting duplicate groups worth flagging
N_BOOT = 500  # bootstrap resamples for the diagnostics' bands (placement uses 1000)


def fmt(value, digits: int = 4, sign: bool = False) -> str:
    """A number for a sentence: ``digits`` significant digits, or whole and thousands-separated
    from 1,000 up (no exponent notation)."""
    if value is None or not np.isfinite(value):
        return "n/a"
    value = float(value)
    plus = "+" if sign and value > 0 else ""
    if abs(value) >= 1000:
        return f"{plus}{value:,.0f}"
    return f"{plus}{value:.{digits}g}"


@dataclass
class Diagnostic:
    """One diagnostic's answer. ``flag`` True = worth a look; ``numbers`` as the keys say."""

    name: str
    flag: bool
    numbers: dict
    sentence: str
    seconds: float = 0.0  # wall time it took

    def to_dict(self) -> dict:
        return asdict(self)

    def __str__(self) -> str:
        return f"[{'!' if self.flag else ' '}] {self.name}: {self.sentence}"


@dataclass
class TaskData:
    """A task's rows as the baseline sees them: frame, target, split and prepared arrays."""

    task: Task
    loaded: LoadedTask
    target: Target
    split: Split
    prep: BaselinePrep  # fitted on the training rows
    X_train: np.ndarray
    X_holdout: np.ndarray
    sources: list  # the source column of each prepared feature
    threads: int = 1
    extra: dict = field(default_factory=dict)  # results one diagnostic leaves for others

    @property
    def metric(self):
        return get_metric(self.task.metric)

    @property
    def y_train(self) -> np.ndarray:
        return self.target.values[self.split.train]

    @property
    def y_holdout(self) -> np.ndarray:
        return self.target.values[self.split.holdout]

    @property
    def n_classes(self) -> int:
        return max(len(self.target.classes), 2)

    def date_features(self) -> np.ndarray:
        """Boolean mask of prepared features derived from a date column (calendar fields and
        the date's missing flag)."""
        dates = {c for c, role in self.prep.roles_.items() if role == "date"}
        return np.array([s in dates for s in self.sources], dtype=bool)


def feature_sources(prep: BaselinePrep) -> list[str]:
    """The source column of each of ``prep``'s output features, in output order."""
    out = []
    for col, role in prep.roles_.items():
        if role == "dropped":
            continue
        if role == "date":
            out += [col] * len(CALENDAR_FIELDS)
        elif role == "one_hot":
            out += [col] * len(prep.categories_[col])
        else:
            out.append(col)
    out += list(prep.flagged_)
    if len(out) != len(prep.feature_names_out_):  # the layout of prep.transform changed
        raise RuntimeError("feature_sources does not match BaselinePrep's output layout")
    return out


def _prepare(task: Task, frame: pd.DataFrame, fit_rows, other_rows):
    """The baseline procedure fitted on ``fit_rows`` of ``frame``; (prep, X_fit, X_other)."""
    features = frame.drop(columns=[task.target])
    prep = builtin().build(task).fit(features.iloc[fit_rows])
    return (prep, prep.transform(features.iloc[fit_rows]),
            prep.transform(features.iloc[other_rows]))


def task_data(task: Task, threads: int | None = None) -> TaskData:
    """Load, split and prepare ``task`` exactly as the runner does (UserError on bad input)."""
    loaded = load_task(task)
    target = encode_target(loaded)
    split = split_rows(loaded, target)
    prep, X_train, X_holdout = _prepare(task, loaded.frame, split.train, split.holdout)
    return TaskData(task=task, loaded=loaded, target=target, split=split, prep=prep,
                    X_train=X_train, X_holdout=X_holdout, sources=feature_sources(prep),
                    threads=threads or available_cores())


SMALL_FIT_ROWS = 25_000  # subsample fits up to this size run on one thread


def _fit_predict(data: TaskData, X_fit, y_fit, X_eval, model: str = FAST_MODEL, seed: int = 0):
    """Fit ``model`` (zoo settings) and predict ``X_eval`` in the metric's prediction form."""
    from threadpoolctl import threadpool_limits

    task = data.task
    # small fits: one thread, as LightGBM's threads cost more than they save there (and much
    # more when another process holds a core)
    threads = 1 if len(X_fit) <= SMALL_FIT_ROWS else data.threads
    estimator = build_model(model, task.type, seed, threads)
    with threadpool_limits(limits=threads):
        estimator.fit(X_fit, np.log1p(y_fit) if task.log_target else y_fit)
        prediction = _predict(estimator, X_eval, task.type, data.n_classes, task.log_target)
    return prediction, estimator


def _gain(metric, score, naive) -> float:
    return float(metric.gain(score, naive))


def _fits(data: TaskData, y) -> bool:
    """Whether a classifier can be fitted on labels ``y`` (needs two classes)."""
    return data.task.type == "regression" or len(np.unique(y)) >= 2


def _subsample(rows: np.ndarray, n: int, seed: int) -> np.ndarray:
    if len(rows) <= n:
        return np.asarray(rows)
    return np.sort(np.random.default_rng(seed).choice(rows, size=n, replace=False))


def _timed(function):
    def wrapper(data: TaskData, *args, **kwargs) -> Diagnostic:
        t0 = time.perf_counter()
        result = function(data, *args, **kwargs)
        result.seconds = round(time.perf_counter() - t0, 3)
        return result
    wrapper.__name__ = function.__name__
    wrapper.__doc__ = function.__doc__
    return wrapper


def _importance_by_column(estimator, sources) -> pd.Series:
    """LightGBM's total split gain per source column, as shares summing to 1 (descending)."""
    gains = np.asarray(estimator.booster_.feature_importance(importance_type="gain"), float)
    by_column = pd.Series(gains, index=sources).groupby(level=0).sum()
    total = by_column.sum()
    return (by_column / total if total > 0 else by_column).sort_values(ascending=False)


def _columns(names, limit=3) -> str:
    names = list(names)
    text = ", ".join(f"'{n}'" for n in names[:limit])
    return text + (f" and {len(names) - limit} more" if len(names) > limit else "")


# --- leakage -------------------------------------------------------------------------------

@_timed
def leakage(data: TaskData, rows: int = 5000, max_columns: int = 30, seed: int = 0) -> Diagnostic:
    """One column alone against all columns, with the fast model on a subsample.

    Only training rows are used, split at random (seeded): two thirds to fit on, one third to
    score on, at most ``rows`` each. A leak shows on any rows, and leaving the holdout out keeps
    a train/holdout shift from blurring the comparison. Date columns are in the full model but
    not tried alone: a date is known at prediction time, and inside a random split it would
    interpolate a trend (what a split does with time is ``split_optimism``'s question). With
    more than
    ``max_columns`` columns only the ones the full model uses most (split gain) are tried.
    Numbers: ``full_score``, ``naive_score`` (metric units); per column ``share`` = its gain
    over naive / the full model's gain (1 = all of it) and ``headroom`` = the share of the
    possible improvement over naive it takes (1 = perfect).
    """
    metric = data.metric
    order = np.random.default_rng(seed).permutation(len(data.X_train))
    cut = (2 * len(order)) // 3
    fit = _subsample(order[:cut], rows, seed)
    ev = _subsample(order[cut:], rows, seed + 1)
    X_fit, y_fit = data.X_train[fit], data.y_train[fit]
    X_ev, y_ev = data.X_train[ev], data.y_train[ev]
    if not _fits(data, y_fit):
        return Diagnostic("leakage", False, {}, "Not run: the subsample of training rows holds "
                                                "a single class.")
    naive_pred, _ = _fit_predict(data, X_fit, y_fit, X_ev, model="naive")
    naive = metric(y_ev, naive_pred)
    full_pred, full_model = _fit_predict(data, X_fit, y_fit, X_ev, seed=seed)
    full = metric(y_ev, full_pred)
    full_gain = _gain(metric, full, naive)
    noise = half_width(metric.gain(*bootstrap_scores(metric, y_ev, [full_pred, naive_pred],
                                                     n_boot=200, seed=seed).T))
    dates = {c for c, role in data.prep.roles_.items() if role == "date"}
    columns = [c for c in dict.fromkeys(data.sources) if c not in dates]
    tried_note = ""
    if len(columns) > max_columns:
        ranked = _importance_by_column(full_model, data.sources)
        columns = [c for c in ranked.index if c in set(columns)][:max_columns]
        tried_note = (f" (the {max_columns} columns the full model uses most, of "
                      f"{len(ranked)})")
    sources = np.asarray(data.sources, dtype=object)
    per_column = []
    for col in columns:
        mask = sources == col
        pred, _ = _fit_predict(data, X_fit[:, mask], y_fit, X_ev[:, mask], seed=seed)
        score = metric(y_ev, pred)
        share = _gain(metric, score, naive) / full_gain if full_gain > 0 else float("nan")
        per_column.append({"column": col, "score": float(score), "share": float(share),
                           "headroom": headroom_taken(metric.name, naive, score)})
    per_column.sort(key=lambda c: -c["headroom"])
    learnable = full_gain > noise
    leaks = [c for c in per_column
             if c["headroom"] >= LEAK_HEADROOM or (learnable and c["share"] >= LEAK_SHARE)]
    numbers = {"full_score": float(full), "naive_score": float(naive),
               "full_gain_noise": float(noise), "rows_fitted": int(len(fit)),
               "rows_scored": int(len(ev)), "columns_tried": len(columns),
               "columns": per_column[:10], "suspects": [c["column"] for c in leaks],
               "share_threshold": LEAK_SHARE, "headroom_threshold": LEAK_HEADROOM}
    top = per_column[0] if per_column else None
    if leaks:
        worst = leaks[0]
        who = (f"Column '{worst['column']}' alone reaches" if len(leaks) == 1 else
               f"Columns {_columns(c['column'] for c in leaks)} each reach on their own up to")
        sentence = (f"{who} {worst['share']:.0%} of the full model's gain over naive "
                    f"({metric.name} {fmt(worst['score'])} alone vs {fmt(full)} with every "
                    f"column, naive {fmt(naive)}; {worst['headroom']:.0%} of the headroom; "
                    f"scored on held-back training rows), so either a leak or a column that "
                    f"carries nearly all the signal: check that "
                    f"{'it is' if len(leaks) == 1 else 'they are'} known at prediction time and "
                    f"not computed from the target; drop a leaking column with --drop.")
    elif top is None:
        sentence = "No columns to test."
    else:
        skipped = "; date columns not tried alone" if dates else ""
        sentence = (f"No single column comes close to the full model: the strongest, "
                    f"'{top['column']}', reaches {top['share']:.0%} of its gain over naive "
                    f"(threshold {LEAK_SHARE:.0%}){tried_note}{skipped}.")
        if not learnable:
            sentence = (f"Not conclusive: the fast model with every column ({fmt(full)}) is "
                        f"not better than naive ({fmt(naive)}) beyond the noise (±{fmt(noise, 3)}), "
                        f"and no column alone predicts the target near-perfectly.")
    return Diagnostic("leakage", bool(leaks), numbers, sentence)


# --- shift ---------------------------------------------------------------------------------

@_timed
def shift(data: TaskData, rows: int = 10_000, folds: int = 3, seed: int = 0) -> Diagnostic:
    """How different the holdout rows are from the training rows.

    ``auc``: 3-fold cross-validated ROC AUC of the fast model telling holdout rows (positive)
    from training rows on the prepared features (0.5 = indistinguishable, 1 = fully separable);
    at most ``rows`` rows per side. For a time holdout the date-derived features are left out,
    since they separate the two sides by construction. ``drivers``: the columns the classifier
    uses most (share of split gain). ``unseen``: per category column, the share of holdout rows
    whose value never occurs in the training rows; ``missing``: per column, the holdout's
    missing share minus the training rows' (both 0–1).
    """
    from sklearn.model_selection import StratifiedKFold, cross_val_predict

    task, loaded, split = data.task, data.loaded, data.split
    keep = ~data.date_features() if task.holdout.policy == "time" else np.ones(
        len(data.sources), dtype=bool)
    left_out = sorted({s for s, k in zip(data.sources, keep) if not k})
    numbers: dict = {"auc": None, "drivers": [], "left_out": left_out}

    # per-column shifts on the raw values
    features = loaded.features
    train, hold = features.iloc[split.train], features.iloc[split.holdout]
    unseen, missing = [], []
    for col in features.columns:
        gap = float(hold[col].isna().mean() - train[col].isna().mean())
        if abs(gap) >= 0.005:
            missing.append({"column": col, "train": float(train[col].isna().mean()),
                            "holdout": float(hold[col].isna().mean()), "difference": gap})
        if data.prep.roles_.get(col) in ("category", "one_hot"):
            values = hold[col].dropna()
            if len(values):
                seen = data.prep.categories_[col]
                share = float((seen.get_indexer(values.to_numpy(dtype=object)) < 0).sum()
                              / len(hold))
                if share > 0:
                    unseen.append({"column": col, "share": share,
                                   "levels_in_training": int(len(seen))})
    unseen.sort(key=lambda c: -c["share"])
    missing.sort(key=lambda c: -abs(c["difference"]))
    numbers["unseen"] = unseen[:10]
    numbers["missing"] = missing[:10]

    auc = None
    if keep.any():
        a = _subsample(np.arange(len(data.X_train)), rows, seed)
        b = _subsample(np.arange(len(data.X_holdout)), rows, seed + 1)
        X = np.vstack([data.X_train[a][:, keep], data.X_holdout[b][:, keep]])
        y = np.r_[np.zeros(len(a), int), np.ones(len(b), int)]
        from threadpoolctl import threadpool_limits

        cv = StratifiedKFold(n_splits=folds, shuffle=True, random_state=seed)
        threads = 1 if len(X) <= SMALL_FIT_ROWS else data.threads
        model = build_model(FAST_MODEL, "binary", seed, threads)
        with threadpool_limits(limits=threads):
            proba = cross_val_predict(model, X, y, cv=cv, method="predict_proba")[:, 1]
            fitted = build_model(FAST_MODEL, "binary", seed, threads).fit(X, y)
        auc = METRICS["roc_auc"](y, proba)
        sources = [s for s, k in zip(data.sources, keep) if k]
        shares = _importance_by_column(fitted, sources)
        numbers["auc"] = float(auc)
        numbers["drivers"] = [{"column": c, "share": float(v)} for c, v in shares.head(5).items()
                              if v >= 0.01]
        numbers["rows_per_side"] = [int(len(a)), int(len(b))]

    column_flags = ([u["column"] for u in unseen if u["share"] >= COLUMN_SHIFT]
                    + [m["column"] for m in missing if abs(m["difference"]) >= COLUMN_SHIFT])
    flag = (auc is not None and auc >= SHIFT_AUC) or bool(column_flags)
    parts = []
    if auc is None:
        parts.append("No columns besides the dates to compare, so no classifier was fitted")
    else:
        drivers = ", ".join(f"'{d['column']}' ({d['share']:.0%})" for d in numbers["drivers"][:3])
        strength = ("clearly" if auc >= SHIFT_AUC else "slightly" if auc >= 0.6 else "hardly")
        parts.append(f"A classifier {strength} tells holdout rows from training rows: ROC AUC "
                     f"{auc:.2f} ({folds}-fold cross-validated; 0.5 = indistinguishable)"
                     + (f", driven by {drivers}" if drivers and auc >= 0.6 else ""))
    if left_out:
        parts.append(f"date-derived features of {_columns(left_out)} left out, as a time "
                     f"holdout separates them by construction")
    if unseen and unseen[0]["share"] >= COLUMN_SHIFT:
        u = unseen[0]
        parts.append(f"{u['share']:.0%} of holdout rows have a '{u['column']}' value never seen "
                     f"in training (coded 0 by the baseline)")
    if missing and abs(missing[0]["difference"]) >= COLUMN_SHIFT:
        m = missing[0]
        parts.append(f"'{m['column']}' is missing in {m['holdout']:.0%} of holdout rows vs "
                     f"{m['train']:.0%} of training rows")
    return Diagnostic("shift", bool(flag), numbers, "; ".join(parts) + ".")


# --- split optimism -----------------------------------------------------------------------

def _noise_of(metric, y, prediction, seed) -> float:
    return half_width(bootstrap_scores(metric, y, [prediction], n_boot=N_BOOT, seed=seed)[:, 0])


@_timed
def split_optimism(data: TaskData, seed: int = 0) -> Diagnostic:
    """The default model on a random split of the same size vs on the time holdout.

    Numbers (metric units): ``time_score`` and ``random_score``, each with its 95% bootstrap
    half-width, ``gap`` = how much better the random split scores (positive = the random split
    looks better), ``noise`` = the two bands combined; ``time_headroom`` and
    ``random_headroom`` = share of the headroom over each split's own naive floor (0–1).
    Only for a time holdout (flag False otherwise).
    """
    task, metric = data.task, data.metric
    if task.holdout.policy != "time":
        return Diagnostic("split-optimism", False, {"applies": False},
                          "Not applicable: the holdout is random, so there is no time order "
                          "for a random split to ignore.")
    n_hold = len(data.split.holdout)
    random_task = replace(task, holdout=Holdout(policy="random", rows=n_hold, seed=seed))
    loaded = data.loaded
    shuffled = LoadedTask(task=random_task, frame=loaded.frame, fingerprint=loaded.fingerprint,
                          n_source_rows=loaded.n_source_rows, notes=[], row_ids=loaded.row_ids)
    rsplit = split_rows(shuffled, data.target)
    _, X_rt, X_rh = _prepare(task, loaded.frame, rsplit.train, rsplit.holdout)
    y_rt, y_rh = data.target.values[rsplit.train], data.target.values[rsplit.holdout]
    results = {}
    for label, (X_fit, y_fit, X_ev, y_ev) in {
            "time": (data.X_train, data.y_train, data.X_holdout, data.y_holdout),
            "random": (X_rt, y_rt, X_rh, y_rh)}.items():
        pred, _ = _fit_predict(data, X_fit, y_fit, X_ev, seed=seed)
        naive, _ = _fit_predict(data, X_fit, y_fit, X_ev, model="naive")
        score, naive_score = metric(y_ev, pred), metric(y_ev, naive)
        results[label] = {"score": float(score), "naive": float(naive_score),
                          "noise": _noise_of(metric, y_ev, pred, seed),
                          "headroom": headroom_taken(metric.name, naive_score, score)}
    t, r = results["time"], results["random"]
    gap = _gain(metric, r["score"], t["score"])
    noise = float(np.hypot(t["noise"], r["noise"]))
    flag = gap > noise
    numbers = {"applies": True, "time_score": t["score"], "time_noise": t["noise"],
               "random_score": r["score"], "random_noise": r["noise"], "gap": gap,
               "noise": noise, "time_headroom": t["headroom"],
               "random_headroom": r["headroom"], "time_naive": t["naive"],
               "random_naive": r["naive"]}
    head = (f"LightGBM at its defaults scores {fmt(r['score'])} on a random split of the same "
            f"size vs {fmt(t['score'])} on the time holdout ({metric.name})")
    if flag:
        sentence = (f"{head}: the random split looks better by {fmt(abs(gap), 3)}, beyond the noise "
                    f"(±{fmt(noise, 3)}), so a random validation split overstates what this model "
                    f"gets on later rows; validate on the latest rows instead.")
    elif gap < -noise:
        sentence = (f"{head}: the time holdout is the easier one here (by {fmt(abs(gap), 3)}, beyond "
                    f"±{fmt(noise, 3)}), so a random validation split would not flatter the score.")
    else:
        sentence = (f"{head}: the difference ({fmt(gap, 3, sign=True)}) is inside the noise (±{fmt(noise, 3)}), "
                    f"so there is no sign that a random validation split overstates skill.")
    return Diagnostic("split-optimism", bool(flag), numbers, sentence)


# --- learning curve -----------------------------------------------------------------------

LEARNING_FRACTIONS = (0.25, 0.5, 1.0)


@_timed
def learning_curve(data: TaskData, fractions=LEARNING_FRACTIONS, seed: int = 0) -> Diagnostic:
    """The default model's holdout score when trained on shares of the training rows.

    For a time holdout the subsets are the latest training rows (nearest the holdout), else a
    seeded sample (nested: each subset holds the smaller ones). The baseline procedure is
    refitted on each subset. Numbers: per point ``rows``, ``score`` (metric units) and its 95%
    bootstrap ``noise``; ``gain_last`` = how much the last step improves the score (positive =
    better) with ``gain_last_noise`` (paired bootstrap over the same holdout rows);
    ``fit_seconds`` of the full-size fit. ``flag`` True = still improving beyond the noise, so
    more rows would likely help.
    """
    task, metric, split = data.task, data.metric, data.split
    train = np.asarray(split.train)
    if task.holdout.policy == "time":
        stamps = data.loaded.frame[task.holdout.date].to_numpy()[train]
        order = train[np.argsort(stamps, kind="stable")][::-1]  # latest first
    else:
        order = np.random.default_rng(seed).permutation(train)
    points, predictions = [], []
    for fraction in fractions:
        k = int(round(fraction * len(train)))
        rows = np.sort(order[:k])
        if k < 20 or not _fits(data, data.target.values[rows]):
            continue
        t0 = time.perf_counter()
        if fraction == 1.0:
            X_fit, X_ev = data.X_train, data.X_holdout
        else:
            _, X_fit, X_ev = _prepare(task, data.loaded.frame, rows, split.holdout)
        pred, _ = _fit_predict(data, X_fit, data.target.values[rows], X_ev, seed=seed)
        seconds = time.perf_counter() - t0
        score = metric(data.y_holdout, pred)
        points.append({"fraction": float(fraction), "rows": int(k), "score": float(score),
                       "noise": _noise_of(metric, data.y_holdout, pred, seed),
                       "seconds": round(seconds, 3)})
        predictions.append(pred)
    naive, _ = _fit_predict(data, data.X_train, data.y_train, data.X_holdout, model="naive")
    numbers = {"points": points, "naive_score": float(metric(data.y_holdout, naive)),
               "model": FAST_MODEL, "latest_rows": task.holdout.policy == "time",
               "fit_seconds": points[-1]["seconds"] if points else None}
    if len(points) < 2:
        return Diagnostic("learning-curve", False, numbers,
                          "Too few training rows for a learning curve.")
    boot = bootstrap_scores(metric, data.y_holdout, predictions[-2:], n_boot=N_BOOT, seed=seed)
    gain = _gain(metric, points[-1]["score"], points[-2]["score"])
    noise = half_width(metric.gain(boot[:, 1], boot[:, 0]))
    numbers.update(gain_last=gain, gain_last_noise=noise)
    curve = " → ".join(f"{fmt(p['score'])} ({p['rows']:,} rows)" for p in points)
    which = "latest " if task.holdout.policy == "time" else ""
    flag = gain > noise
    if flag:
        sentence = (f"LightGBM at its defaults on the {which}training rows: {curve}; still "
                    f"improving in the last step (by {fmt(abs(gain), 3)}, beyond the paired noise "
                    f"±{fmt(noise, 3)}), so more rows would likely help.")
    elif gain < -noise:
        sentence = (f"LightGBM at its defaults on the {which}training rows: {curve}; the full "
                    f"training set scores worse than half of it (by {fmt(abs(gain), 3)}, beyond "
                    f"±{fmt(noise, 3)}), a sign that older rows differ from the holdout's.")
    else:
        sentence = (f"LightGBM at its defaults on the {which}training rows: {curve}; flat in "
                    f"the last step ({fmt(gain, 3, sign=True)}, inside the paired noise ±{fmt(noise, 3)}), so "
                    f"more rows of the same kind are unlikely to help much.")
    return Diagnostic("learning-curve", bool(flag), numbers, sentence)


def learning_curve_plot(diagnostic: Diagnostic, metric_name: str, path, title: str = ""):
    """Draw a ``learning_curve`` result: score vs training rows with 95% bands, naive line."""
    from tabpar.report.plots import _figure, _save

    points = diagnostic.numbers.get("points", [])
    fig, ax = _figure(7, 4.2)
    rows = [p["rows"] for p in points]
    scores = [p["score"] for p in points]
    ax.errorbar(rows, scores, yerr=[p["noise"] for p in points], color="#D55E00", marker="o",
                capsize=4, linewidth=1.8, label="LightGBM at its defaults (± 95% bootstrap)")
    ax.axhline(diagnostic.numbers["naive_score"], color="#999999", linestyle=":",
               linewidth=1.5, label=f"naive floor {fmt(diagnostic.numbers['naive_score'])}")
    if len(rows) > 1:
        ax.set_xscale("log", base=2)
    ax.set_xticks(rows)
    ax.set_xticklabels([f"{r:,}\n({p['fraction']:.0%})" for r, p in zip(rows, points)])
    ax.minorticks_off()
    metric = get_metric(metric_name)
    arrow = "lower is better" if metric.lower_is_better else "higher is better"
    ax.set_ylabel(f"{metric_name} on the holdout ({arrow})")
    which = "latest training rows" if diagnostic.numbers.get("latest_rows") else \
        "training rows (seeded sample)"
    ax.set_xlabel(f"{which} used to fit")
    gain, noise = diagnostic.numbers.get("gain_last"), diagnostic.numbers.get("gain_last_noise")
    verdict = ("still improving: more rows would likely help" if diagnostic.flag else
               "full set worse than half of it" if gain is not None and gain < -noise else
               "last step within the noise: more rows unlikely to help much")
    ax.set_title(f"{title + ': ' if title else ''}learning curve — {verdict}", fontsize=11)
    if gain is not None:
        # the bars are each point's own band; the verdict uses the narrower paired band
        better = "better" if gain > 0 else "worse"
        ax.plot([], [], " ", label=f"last step: {fmt(abs(gain), 3)} {better} ± {fmt(noise, 3)} "
                                   f"(paired bootstrap, same holdout rows)")
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=1,
              frameon=False)
    return _save(fig, path)


# --- conflicting duplicates ---------------------------------------------------------------

@_timed
def conflicting_duplicates(data: TaskData) -> Diagnostic:
    """Rows whose feature values are all identical but whose targets differ.

    Numbers: ``duplicate_rows`` (rows sharing their features with another row),
    ``conflicting_rows`` and ``conflicting_share`` (0–1) of rows in groups with more than one
    target value; a floor no model can beat on those rows: for classification
    ``error_floor`` (share of all rows that must be misclassified), for regression
    ``rmse_floor`` (target units, over all rows: the within-group spread).
    """
    features = data.loaded.features
    y = data.target.values
    n = len(y)
    if features.shape[1] == 0:
        return Diagnostic("conflicting-duplicates", False, {}, "No feature columns.")
    keys = pd.util.hash_pandas_object(features, index=False).to_numpy()
    frame = pd.DataFrame({"key": keys, "y": y})
    groups = frame.groupby("key")["y"]
    size = groups.transform("size").to_numpy()
    distinct = groups.transform("nunique").to_numpy()
    conflicting = distinct > 1
    numbers = {"duplicate_rows": int((size > 1).sum()), "conflicting_rows": int(conflicting.sum()),
               "conflicting_share": float(conflicting.mean()), "rows": n}
    if data.task.type == "regression":
        spread = (frame["y"] - groups.transform("mean")).to_numpy()
        floor = float(np.sqrt(np.mean(spread ** 2)))
        numbers["rmse_floor"] = floor
        floor_text = f"an RMSE floor of {fmt(floor)} over all rows (target units)"
    else:
        top = frame.groupby(["key", "y"]).size().groupby(level=0).max()
        wrong = n - int(top.sum())
        numbers["error_floor"] = wrong / n
        floor_text = f"at least {wrong / n:.1%} of all rows misclassified by any model"
    flag = numbers["conflicting_share"] >= DUPLICATE_SHARE
    if numbers["conflicting_rows"] == 0:
        sentence = (f"No rows share every feature value while differing in the target "
                    f"({numbers['duplicate_rows']:,} rows are duplicates with the same target).")
    else:
        share = numbers["conflicting_share"]
        sentence = (f"{numbers['conflicting_rows']:,} rows ({share:.2%}) "
                    f"have identical features but different targets: {floor_text}"
                    + (", a noise floor no pipeline can pass." if flag else
                       f", too few to limit the score (flagged from {DUPLICATE_SHARE:.0%})."))
    return Diagnostic("conflicting-duplicates", bool(flag), numbers, sentence)


ALL = (leakage, shift, split_optimism, learning_curve, conflicting_duplicates)


def run_diagnostics(data: TaskData, on_event=None) -> list[Diagnostic]:
    """Every diagnostic on ``data``, in a fixed order."""
    say = on_event or (lambda message: None)
    out = []
    for function in ALL:
        result = function(data)
        say(f"diagnostic {result.name}: {'FLAG' if result.flag else 'ok'} ({result.seconds:.1f} s)")
        out.append(result)
    return out
