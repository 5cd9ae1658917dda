"""Calibrate a score on one's own data (``tabpar calibrate``).

The user's table becomes a ``Task`` (source ``csv:PATH`` or ``parquet:PATH``) in a one-task
``Suite``; the model zoo runs on it through ``run_suite`` (one call per model, cheapest first,
within an optional time budget) into ``OUT/run``; the user's score is placed against that run
with ``place_task``, the task's difficulty is placed among the published default reference's
tasks, and the diagnostics in ``tabpar.owndata.diagnostics`` say which explanation — the pipeline or
the data — the evidence supports.

Every option left out is inferred and the inference is stated (``Calibration.inferred``):
the task type from the target (non-numeric or at most two distinct values → binary /
multiclass, else regression), the positive class of a binary target (the minority class), the
metric (the type's default), and the holdout (time on the first date column when one is named,
else random; 20 %).
"""
from __future__ import annotations

import json
import math
import re
import time
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

import numpy as np
import pandas as pd

from tabpar.owndata.diagnostics import fmt as _fmt
from tabpar.owndata.diagnostics import learning_curve_plot, run_diagnostics, task_data
from tabpar.common.errors import UserError
from tabpar.data.export import describe, write_split
from tabpar.common.metrics import DEFAULT_METRIC, get_metric
from tabpar.evaluation.placement import DEFAULT_TOLERANCE, Placement, place_task, read_predictions_file
from tabpar.evaluation.reference import Reference
from tabpar.execution.runner import (available_cores, connect_check, library_versions, load_arrays, prepare_task,
                     run_suite)
from tabpar.data.sources import _close, load_task, parse_dates, read_table
from tabpar.data.split import as_numbers, encode_target, split_rows
from tabpar.common.files import atomic_write_text
from tabpar.data.suites import TASK_TYPES, Holdout, Suite, Task
from tabpar.models.zoo import DEFAULT_ENSEMBLES, MODELS, check_models

HARD_PERCENTILE = 75.0  # difficulty percentile from which a dataset is called hard
EASY_PERCENTILE = 25.0
SUITE_NAME = "calibrate"
DEFAULT_FRACTION = 0.2
# the zoo also predicts the training rows; a diagnostic fit only predicts the holdout
TRAIN_PREDICT_FACTOR = 1.5


def _plain(value):
    return value.item() if isinstance(value, np.generic) else value


def _finite(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_finite(v) for v in value]
    return value


def _task_name(path: Path) -> str:
    name = re.sub(r"[^A-Za-z0-9_.-]", "_", path.stem).strip("._-") or "data"
    return name[:64]


# --- the task ------------------------------------------------------------------------------

def calibration_task(data, target: str, type: str | None = None, metric: str | None = None,
                     positive=None, dates=(), holdout: str | None = None,
                     holdout_fraction: float | None = None, holdout_rows: int | None = None,
                     cutoff: str | None = None, drop=()) -> tuple[Task, dict]:
    """The ``Task`` for the user's table, and what was inferred (field → value and reason).

    Raises UserError, naming the file, column or value, for every mistake that can be seen
    from the options and the table alone.
    """
    path = Path(data).expanduser().resolve()
    frame = read_table(path)
    where = path.name
    dates, drop = tuple(dates or ()), tuple(drop or ())
    for role, columns in (("target", (target,)), ("--date", dates), ("--drop", drop)):
        for col in columns:
            if col not in frame.columns:
                raise UserError(f"The {role} column '{col}' is not in {path}; its columns are "
                                f"{', '.join(map(str, list(frame.columns)[:12]))}"
                                f"{' ...' if frame.shape[1] > 12 else ''}."
                                f"{_close(col, frame.columns)}")
    if target in dates or target in drop:
        raise UserError(f"The target '{target}' is also listed under "
                        f"{'--date' if target in dates else '--drop'}; remove it there.")
    inferred: dict = {}
    values = frame[target]
    present = values.dropna()
    if present.empty:
        raise UserError(f"The target column '{target}' of {where} has no values (every row is "
                        f"missing); choose another target.")
    distinct = pd.unique(present)
    if len(distinct) < 2:
        raise UserError(f"The target column '{target}' of {where} is constant "
                        f"({_plain(distinct[0])!r} on every row that has a value); there is "
                        f"nothing to predict; choose another target column.")
    numeric = (pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values))

    if type is None:
        if not numeric:
            type = "binary" if len(distinct) == 2 else "multiclass"
            why = (f"non-numeric target with {len(distinct)} distinct values")
        elif len(distinct) <= 2:
            type, why = "binary", "numeric target with only 2 distinct values"
        else:
            type = "regression"
            why = f"numeric target with {len(distinct):,} distinct values"
        inferred["type"] = {"value": type, "reason": why + "; pass --type to change"}
    elif type not in TASK_TYPES:
        raise UserError(f"--type '{type}' is unknown; use one of {', '.join(TASK_TYPES)}.")
    if type == "regression" and not numeric:
        row = as_numbers(values)[1]
        if row is not None:
            raise UserError(f"The regression target '{target}' of {where} has the non-numeric "
                            f"value {values.iloc[row]!r} at row {row}; choose a numeric target "
                            f"or pass --type binary or --type multiclass.")
    if type == "binary" and len(distinct) > 2:
        raise UserError(f"The binary target '{target}' of {where} has {len(distinct)} distinct "
                        f"values; pass --type multiclass, or make a two-class column.")
    if type == "multiclass" and len(distinct) > max(50, len(present) // 10):
        raise UserError(f"The multiclass target '{target}' of {where} has {len(distinct):,} "
                        f"distinct values, more than a class label would; pass --type "
                        f"regression if it is a number to predict.")

    if positive is not None and type != "binary":
        raise UserError(f"--positive is only for a binary target, and '{target}' is "
                        f"{'inferred as ' if 'type' in inferred else ''}{type}.")
    if type == "binary":
        if positive is None:
            counts = present.astype(str).value_counts()
            # the minority class; a tie goes to the value that sorts last as text
            minority = max(v for v in counts.index if counts[v] == counts.min())
            positive = next(_plain(v) for v in distinct if str(v) == minority)
            inferred["positive"] = {
                "value": positive,
                "reason": (f"the minority class: {int(counts[minority]):,} of {len(present):,} "
                           f"rows; pass --positive to choose")}
        else:
            matches = [_plain(v) for v in distinct if str(v) == str(positive)]
            if not matches:
                raise UserError(f"--positive {positive!r} is not a value of the target "
                                f"'{target}' in {where}; its values are "
                                f"{', '.join(repr(str(v)) for v in sorted(map(str, distinct)))}.")
            positive = matches[0]

    if metric is None:
        metric = DEFAULT_METRIC[type]
        inferred["metric"] = {"value": metric, "reason": f"the default for {type}; pass "
                                                         f"--metric to change"}
    get_metric(metric, type, where="--metric")

    for col in dates:
        if pd.api.types.is_numeric_dtype(frame[col]) and not pd.api.types.is_bool_dtype(
                frame[col]):
            raise UserError(f"The --date column '{col}' of {where} holds numbers, not dates; "
                            f"write its values as dates (ISO 8601, e.g. 2024-03-31) or leave "
                            f"it out of --date.")
    parsed = {col: parse_dates(frame[col], col, where)  # here, so a bad value's row is its
              for col in dates}                            # row in the file (= row_id)
    sizes = [k for k, v in (("--holdout-fraction", holdout_fraction),
                            ("--holdout-rows", holdout_rows), ("--cutoff", cutoff))
             if v is not None]
    if len(sizes) > 1:
        raise UserError(f"Give only one of --holdout-fraction, --holdout-rows and --cutoff, "
                        f"not {' and '.join(sizes)}.")
    if holdout is None:
        holdout = "time" if (dates or cutoff is not None) else "random"
        reason = (f"a date column was named, so the latest rows by '{dates[0]}' are held out"
                  if dates else "no --date given")
        inferred["holdout"] = {"value": holdout, "reason": reason + "; pass --holdout to "
                                                                     "change"}
    if holdout not in ("time", "random"):
        raise UserError(f"--holdout '{holdout}' is unknown; use time or random.")
    if holdout == "time" and not dates:
        raise UserError("A time holdout needs a date column to sort by; name it with --date "
                        "COL.")
    if cutoff is not None and holdout != "time":
        raise UserError("--cutoff needs a time holdout (--holdout time with --date COL).")
    if holdout_fraction is not None and not 0 < holdout_fraction < 1:
        raise UserError(f"--holdout-fraction must be between 0 and 1, not {holdout_fraction!r}.")
    if holdout_rows is not None and (int(holdout_rows) != holdout_rows or holdout_rows < 1):
        raise UserError(f"--holdout-rows must be a positive whole number, not "
                        f"{holdout_rows!r}.")
    if cutoff is not None:
        try:
            stamp = pd.Timestamp(cutoff)
        except (ValueError, TypeError):
            raise UserError(f"--cutoff {cutoff!r} is not a date; write it as ISO 8601, e.g. "
                            f"2024-03-31.") from None
        if stamp is pd.NaT:
            raise UserError(f"--cutoff {cutoff!r} is not a date; write it as ISO 8601.")
        if stamp.tzinfo is not None and parsed[dates[0]].dt.tz is None:
            raise UserError(f"--cutoff {cutoff!r} has a time zone but the date column "
                            f"'{dates[0]}' of {where} has none; give the cutoff without one.")
    if holdout_fraction is None and holdout_rows is None and cutoff is None:
        inferred.setdefault("holdout_size", {"value": DEFAULT_FRACTION,
                                             "reason": "the default share of rows; pass "
                                                       "--holdout-fraction, --holdout-rows or "
                                                       "--cutoff to change"})
    hold = Holdout(policy=holdout, date=dates[0] if holdout == "time" else None,
                   fraction=None if holdout_fraction is None else float(holdout_fraction),
                   rows=None if holdout_rows is None else int(holdout_rows),
                   cutoff=None if cutoff is None else str(cutoff), seed=0)
    if hold.date in drop:
        raise UserError(f"The holdout date column '{hold.date}' is also listed under --drop; "
                        f"remove it there.")
    kind = "parquet" if path.suffix.lower() in (".parquet", ".pq") else "csv"
    task = Task(name=_task_name(path), source=f"{kind}:{path}", target=target, type=type,
                metric=metric, holdout=hold, positive=positive, drop=drop, dates=dates,
                description=f"calibrate: {path.name}", base_dir=str(path.parent))
    return task, inferred


def task_options(task: Task) -> list[str]:
    """The ``tabpar calibrate`` options that define ``task`` with nothing left to infer."""
    args = ["--target", task.target, "--type", task.type, "--metric", task.metric]
    if task.type == "binary":
        args += ["--positive", str(task.positive)]
    for col in task.dates:
        args += ["--date", col]
    for col in task.drop:
        args += ["--drop", col]
    h = task.holdout
    args += ["--holdout", h.policy]
    if h.rows is not None:
        args += ["--holdout-rows", str(h.rows)]
    elif h.cutoff is not None:
        args += ["--cutoff", h.cutoff]
    else:
        args += ["--holdout-fraction", f"{h.share:g}"]
    return args


def _quote(arg: str) -> str:
    import shlex

    return shlex.quote(arg)


def inferred_items(inferred: dict) -> list[str]:
    """One 'field = value (reason)' string per inferred option."""
    names = {"type": "type", "positive": "positive class", "metric": "metric",
             "holdout": "holdout", "holdout_size": "holdout size"}
    return [f"{names.get(k, k)} = {v['value']!r} ({v['reason']})" if k == "positive" else
            f"{names.get(k, k)} = {v['value']:g} ({v['reason']})" if k == "holdout_size" else
            f"{names.get(k, k)} = {v['value']} ({v['reason']})" for k, v in inferred.items()]


def inferred_text(inferred: dict) -> str:
    """What was inferred, on one line."""
    return " · ".join(inferred_items(inferred)) or "nothing (every option was given)"


# --- export ---------------------------------------------------------------------------------

def export_split(data, target: str, out: str | Path, **options) -> dict:
    """Write the split ``calibrate`` would use: ``train.csv`` (with the target) and
    ``holdout.csv`` (without), both with ``row_id``, plus ``task.json``; returns task.json."""
    task, inferred = calibration_task(data, target, **options)
    loaded = load_task(task)
    if "row_id" in loaded.frame.columns:
        raise UserError(f"{Path(data).name} already has a column 'row_id', the name the export "
                        f"gives each row's position; rename it, or leave it out with --drop "
                        f"row_id.")
    split = split_rows(loaded, encode_target(loaded))
    info = describe(task, loaded, split, "csv")
    command = " ".join(["tabpar", "calibrate", _quote(str(Path(data)))]
                       + [_quote(a) for a in task_options(task)] + ["--predictions", "FILE"])
    info["how_to_submit"] = (info["how_to_submit"].split(". Then:")[0]
                             + f". Then: {command}")
    info["inferred"] = inferred
    info["options"] = task_options(task)
    write_split(Path(out), loaded, split, "csv", info)
    return info


# --- the zoo within a budget ----------------------------------------------------------------

def zoo_order(models=None, task_type: str = "regression") -> list[str]:
    """The models to run, cheapest first by ``MODELS[m].cost`` (naive is always included)."""
    names = check_models(models)
    if "naive" not in names:
        names = ["naive"] + names
    if not any(m in DEFAULT_ENSEMBLES for m in names):
        raise UserError(f"--models needs at least one default ensemble "
                        f"({', '.join(DEFAULT_ENSEMBLES)}): the baseline's par and best are "
                        f"measured with them.")
    return sorted(names, key=lambda m: MODELS[m].cost(task_type))


def _run_zoo(suite: Suite, order, seeds, out_run, workers, budget, started, rate, say,
             executor="local", scheduler=None):
    """Run ``order`` one model at a time; stop starting models the budget cannot hold.

    ``rate``: seconds per unit of ``MODELS[m].cost`` per round of seeds, first from the
    diagnostics' LightGBM fit, then from the most expensive model run so far.
    Returns (models run, skipped [{model, estimate_seconds}], failures, overrun note).
    """
    rounds = math.ceil(seeds / workers)
    kind = suite.tasks[0].type
    ran, skipped, failures = [], [], []
    have_ensemble, stopped = False, False
    for model in order:
        required = model == "naive" or (model in DEFAULT_ENSEMBLES and not have_ensemble)
        if budget is not None and not required and rate is not None:
            left = budget - (time.monotonic() - started)
            estimate = rate * MODELS[model].cost(kind) * rounds
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
        failures += [{k: r.get(k) for k in ("model", "seed", "status", "error")}
                     for r in result.failures]
        ok = any(m == model for m in next(iter(result.tasks.values()))["models"])
        say(f"model {model}: {'ok' if ok else 'FAILED'} ({seconds:.1f} s)")
        if ok:
            ran.append(model)
            have_ensemble = have_ensemble or model in DEFAULT_ENSEMBLES
        if MODELS[model].cost(kind) >= MODELS["linear"].cost(kind):
            rate = seconds / (MODELS[model].cost(kind) * rounds)
    overrun = None
    if budget is not None and time.monotonic() - started > budget:
        overrun = ("the model zoo ran past its share of the budget: the naive floor and one "
                   "default ensemble always run, and model times are estimated from the ones "
                   "already run scaled by the zoo's rough cost figures")
    return ran, skipped, failures, overrun


def _reserve_seconds(data_) -> float:
    """Rough seconds the placement (a 1000-resample bootstrap of 4 prediction sets) and the
    plots take after the zoo, from the time of one metric call on the holdout."""
    from tabpar.evaluation.placement import N_BOOTSTRAP

    metric, y = data_.metric, data_.y_holdout
    guess = (np.full(len(y), float(np.mean(data_.y_train))) if data_.task.type == "regression"
             else np.full((len(y), data_.n_classes), 1.0 / data_.n_classes)
             if data_.task.type == "multiclass" else np.full(len(y), 0.5))
    weights = np.ones(len(y))
    t0 = time.perf_counter()
    metric(y, guess, weights)
    return 1.0 + 4 * N_BOOTSTRAP * (time.perf_counter() - t0)


# --- the suite's difficulties ---------------------------------------------------------------

def suite_difficulties(reference: str = "default") -> tuple[dict | None, str | None, str]:
    """(task → difficulty, the reference folder, a note) for the published reference, falling
    back to ``quick`` while ``reference`` is missing or incomplete."""
    tried = []
    for name in dict.fromkeys([reference, "quick"]):
        try:
            ref = Reference(name)
            if not (Path(ref.folder) / "provenance.json").exists():
                raise UserError(f"the reference {ref.folder} is incomplete (no provenance.json)")
            return ref.difficulties(), str(ref.folder), (
                "" if not tried else f"{tried[0]}; difficulty is placed among the "
                                     f"'{name}' reference's tasks instead")
        except UserError as exc:
            tried.append(f"the '{name}' reference is not available ({str(exc).rstrip('.')})")
    return None, None, "; ".join(tried) + "; the dataset's difficulty cannot be placed"


def dataset_label(percentile: float | None) -> str:
    """hard (≥ 75), easy (≤ 25), else typical; 'unknown' without a suite reference."""
    if percentile is None:
        return "unknown"
    if percentile >= HARD_PERCENTILE:
        return "hard"
    if percentile <= EASY_PERCENTILE:
        return "easy"
    return "typical"


# --- the answer -----------------------------------------------------------------------------

@dataclass
class Calibration:
    """What ``calibrate`` found; ``str()`` is the text report, ``to_dict()`` the JSON one.

    Scores are in the task metric's units (``lower_is_better`` gives the direction); ``skill``
    is (naive − score) / (naive − best) on the loss scale (0 = naive floor, 1 = best default
    ensemble, None when the best default does not beat naive beyond the noise);
    ``difficulty_percentile`` is 0–100, higher = harder than more of the suite's tasks.
    """

    data: str
    task: Task
    out: Path
    inferred: dict
    split: str
    notes: list
    placement: Placement
    score_verdict: str
    dataset: str
    difficulty: float
    difficulty_percentile: float | None
    suite_reference: str | None
    suite_tasks: int
    skill: float | None
    par_skill: float | None
    baseline: dict  # model → {score, train_score, fit_seconds, seeds}
    diagnostics: list  # of Diagnostic
    answer: str
    n_holdout: int
    n_train: int
    seeds: int
    skipped: list = field(default_factory=list)
    failures: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    budget_seconds: float | None = None
    elapsed_seconds: float = 0.0
    files: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        """JSON-safe: numbers that are not finite become None."""
        p = self.placement
        return _finite(json.loads(json.dumps({
            "data": self.data, "target": self.task.target, "task": self.task.definition(),
            "options": task_options(self.task), "out": str(self.out),
            "inferred": self.inferred, "split": self.split, "notes": self.notes,
            "n_train": self.n_train, "n_holdout": self.n_holdout, "metric": p.metric,
            "lower_is_better": p.lower_is_better, "score": p.score, "paired": p.paired,
            "score_verdict": self.score_verdict, "verdict_message": p.message,
            "skill": self.skill, "skill_note": p.skill_note, "par_skill": self.par_skill,
            "noise": p.noise, "naive": p.naive, "par": p.par, "par_model": p.par_model,
            "best": p.best, "best_model": p.best_model, "baseline": self.baseline,
            "seeds": self.seeds, "dataset": self.dataset, "difficulty": self.difficulty,
            "difficulty_percentile": self.difficulty_percentile,
            "suite_reference": self.suite_reference, "suite_tasks": self.suite_tasks,
            "diagnostics": [d.to_dict() for d in self.diagnostics], "answer": self.answer,
            "skipped": self.skipped, "failures": self.failures, "warnings": self.warnings,
            "budget_seconds": self.budget_seconds, "elapsed_seconds": self.elapsed_seconds,
            "files": self.files,
        }, default=str)))

    # text forms ------------------------------------------------------------------------
    def _baseline_lines(self) -> list[str]:
        p = self.placement
        sign = 1 if p.lower_is_better else -1
        rows = sorted(self.baseline.items(), key=lambda kv: sign * kv[1]["score"])
        lines = [f"  {'model':<8} {'holdout':>12} {'train':>12} {'fit s':>8}"]
        for model, s in rows:
            tag = ("  (floor)" if model == "naive" else "  (linear)" if model == "linear"
                   else "  best" if model == p.best_model else "")
            lines.append(f"  {model:<8} {_fmt(s['score']):>12} {_fmt(s['train_score']):>12} "
                         f"{s['fit_seconds']:>8.2f}{tag}")
        for s in self.skipped:
            lines.append(f"  {s['model']:<8} {'skipped':>12}   (budget; estimated "
                         f"{s['estimate_seconds']:.0f} s)")
        return lines

    def __str__(self) -> str:
        p = self.placement
        direction = "lower is better" if p.lower_is_better else "higher is better"
        skill = "n/a" if self.skill is None else f"{self.skill:.2f}"
        par = "" if self.par_skill is None else f" (par's skill {self.par_skill:.2f})"
        pct = ("n/a" if self.difficulty_percentile is None
               else f"{self.difficulty_percentile:.0f}")
        lines = [f"tabpar calibrate — {Path(self.data).name}, target '{self.task.target}' "
                 f"({self.task.type}, {p.metric}: {direction})",
                 "inferred (check these):" + (" nothing, every option was given"
                                              if not self.inferred else "")]
        lines += [f"  {item}" for item in inferred_items(self.inferred)]
        lines += [f"split: {self.split}"]
        lines += [f"note: {n}" for n in self.notes]
        lines += ["",
                  f"score {_fmt(p.score)}  →  {self.score_verdict}",
                  f"  skill {skill}{par} · noise ±{_fmt(p.noise, 3)} (95% bootstrap over the "
                  f"{self.n_holdout:,} holdout rows{', paired with your predictions' if p.paired else ''})",
                  f"dataset: {self.dataset} — difficulty {self.difficulty:.2f} (1 − headroom the "
                  f"best default takes), "
                  + (f"percentile {pct} among the {self.suite_tasks} tasks of the suite "
                     f"reference (hard ≥ {HARD_PERCENTILE:.0f}, easy ≤ {EASY_PERCENTILE:.0f})"
                     if self.suite_tasks else "no suite reference to place it against"),
                  "",
                  f"baseline on your split ({self.seeds} seed{'s' if self.seeds > 1 else ''} "
                  f"per model; the suite's procedure):"]
        lines += self._baseline_lines()
        lines += ["", "diagnostics ([!] = look at this):"]
        lines += [f"  {d}" for d in self.diagnostics]
        lines += ["", f"answer: {self.answer}"]
        for w in self.warnings:
            lines.append(f"caution: {w}")
        if self.files:
            lines += ["", f"wrote {', '.join(self.files[k] for k in self.files if k != 'run')}; "
                          f"jobs in {self.files.get('run')}"]
        lines.append(f"rerun with nothing inferred: tabpar calibrate {_quote(self.data)} "
                     + " ".join(_quote(a) for a in task_options(self.task)))
        return "\n".join(lines)

    def markdown(self) -> str:
        p = self.placement
        skill = "n/a" if self.skill is None else f"{self.skill:.2f}"
        pct = ("n/a" if self.difficulty_percentile is None
               else f"{self.difficulty_percentile:.0f}")
        out = [f"# Calibration: {Path(self.data).name} → `{self.task.target}`", "",
               f"- **score**: {p.metric} {_fmt(p.score)} "
               f"({'lower' if p.lower_is_better else 'higher'} is better) → "
               f"**{self.score_verdict}**",
               f"- **dataset**: **{self.dataset}** (difficulty {self.difficulty:.2f}, "
               f"percentile {pct} among {self.suite_tasks} suite tasks)",
               f"- **skill**: {skill}; noise ±{_fmt(p.noise, 3)} (95% bootstrap over "
               f"{self.n_holdout:,} holdout rows)",
               f"- **split**: {self.split}",
               f"- **inferred**: {inferred_text(self.inferred)}", "",
               "## Answer", "", self.answer, "",
               "## Baseline on your split", "",
               "| model | holdout | train | fit s |", "|---|---:|---:|---:|"]
        sign = 1 if p.lower_is_better else -1
        for model, s in sorted(self.baseline.items(), key=lambda kv: sign * kv[1]["score"]):
            out.append(f"| {model} | {_fmt(s['score'])} | {_fmt(s['train_score'])} | "
                       f"{s['fit_seconds']:.2f} |")
        for s in self.skipped:
            out.append(f"| {s['model']} | skipped (budget) | | ~{s['estimate_seconds']:.0f} |")
        out += ["", "## Diagnostics", ""]
        for d in self.diagnostics:
            out.append(f"- **{d.name}** {'⚠ flagged' if d.flag else 'ok'}: {d.sentence}")
        if self.warnings:
            out += ["", "## Cautions", ""] + [f"- {w}" for w in self.warnings]
        out += ["", "## Files", ""]
        out += [f"- {k}: `{v}`" for k, v in self.files.items()]
        out += ["", "Rerun with nothing inferred:", "", "```",
                f"tabpar calibrate {_quote(self.data)} "
                + " ".join(_quote(a) for a in task_options(self.task)), "```", ""]
        return "\n".join(out)


def compose_answer(p: Placement, dataset: str, percentile: float | None, diagnostics: list,
                   par_skill: float | None, n_holdout: int, ensembles: list,
                   tolerance: float = DEFAULT_TOLERANCE) -> str:
    """One paragraph: is a weak score more likely the pipeline's or the data's, with numbers.

    Claims only differences outside the noise band; says so when the evidence is inconclusive.
    """
    d = {x.name: x for x in diagnostics}
    noise = f"±{_fmt(p.noise, 3)}"
    base = (f"on the same {n_holdout:,} holdout rows the standard baseline gets par "
            f"{_fmt(p.par)} (the median default ensemble) and best {_fmt(p.best)} "
            f"({p.best_model}) against a naive floor of {_fmt(p.naive)}")
    where = ("" if percentile is None else
             f"the dataset is {dataset} for the suite (difficulty percentile {percentile:.0f})")
    score = f"your {p.metric} {_fmt(p.score)}"
    if p.verdict == "worse-than-naive":
        lead = (f"The pipeline: {score} is worse than the naive floor ({_fmt(p.naive)}) by more "
                f"than the noise ({noise}), which no dataset explains; {base}. Look for "
                f"predictions misaligned with row_id, labels given instead of probabilities, "
                f"or a target transform not undone.")
    elif p.skill is None:
        lead = (f"The data: the standard baseline does not beat the naive floor beyond the "
                f"noise on this split (best {p.best_model} {_fmt(p.best)} vs naive "
                f"{_fmt(p.naive)}, {noise}), so a score near the floor — {score} — is what "
                f"these columns allow, not a fault of the pipeline"
                + (f"; {where}" if where else "") + ".")
    elif p.verdict == "below-baseline":
        lead = (f"More likely the pipeline: {base}, and {score} (skill {p.skill:.2f} against "
                f"par's {par_skill:.2f}) is below par by more than the noise ({noise}), so these "
                f"rows allow more than the pipeline gets"
                + (f"; that {where} does not explain the gap, because the baseline's "
                   f"numbers come from the same split"
                   if dataset == "hard" else (f"; {where}" if where else ""))
                + ". Usual causes: category codes learned separately on the holdout rows, a "
                  "target transform forgotten, rows shuffled against row_id, a leaky or random "
                  "validation split during tuning.")
    elif p.verdict == "above-baseline":
        lead = (f"Neither: {score} beats the best default ensemble ({p.best_model} "
                f"{_fmt(p.best)}) by more than the noise ({noise})"
                + (f"; {where}" if where else "") + ".")
    elif par_skill is not None and p.skill < par_skill - tolerance:
        lead = (f"Inconclusive: {score} (skill {p.skill:.2f}) is under par ({_fmt(p.par)}, "
                f"skill {par_skill:.2f}) but not by more than the noise of these "
                f"{n_holdout:,} holdout rows ({noise}), so the evidence supports neither the "
                f"pipeline nor the data as the cause; a larger holdout"
                + ("" if p.paired else " or a predictions file (for a paired band)")
                + " would settle it" + (f"; {where}" if where else "") + ".")
    elif dataset == "hard":
        lead = (f"The data, not the pipeline: {score} matches the standard baseline (skill "
                f"{p.skill:.2f}, par {par_skill:.2f}, differences inside the noise {noise}), "
                f"and {where}, so a weak-looking score is what these columns allow.")
    else:
        lead = (f"Not the pipeline: {score} matches the standard baseline (skill "
                f"{p.skill:.2f}, par {par_skill:.2f}, differences inside the noise {noise})"
                + (f"; {where}, so the score is about what default models get from these "
                   f"columns" if where else "") + ".")
    extra = []
    leak = d.get("leakage")
    if leak is not None and leak.flag:
        top = leak.numbers["columns"][0]
        suspects = leak.numbers["suspects"]
        names = ", ".join(repr(c) for c in suspects[:3])
        reach = (f"{'alone reaches' if len(suspects) == 1 else 'each alone reach up to'} "
                 f"{top['share']:.0%} of the full model's gain")
        if p.verdict in ("below-baseline", "at-baseline"):
            extra.append(f"Caution: {names} {reach}; if that is a leak of the target (not "
                         f"simply a dominant column), the baseline above is inflated by it, "
                         f"and a weaker score may only mean the pipeline (rightly) leaves it "
                         f"out.")
        else:
            extra.append(f"Check {names} for leakage ({'it' if len(suspects) == 1 else 'they'}"
                         f" {reach}).")
    sh = d.get("shift")
    if sh is not None and sh.flag:
        if sh.numbers.get("auc") is not None and sh.numbers["auc"] >= 0.7:
            drivers = ", ".join(x["column"] for x in sh.numbers["drivers"][:2])
            extra.append(f"The holdout rows differ from the training rows (train-vs-holdout "
                         f"ROC AUC {sh.numbers['auc']:.2f}"
                         + (f", mostly through {drivers}" if drivers else "")
                         + "); that limits the baseline as much as any pipeline — it is the "
                           "data or the choice of split.")
        else:
            extra.append("Some columns shift between training and holdout rows (see shift): "
                         "that limits any pipeline alike.")
    opt = d.get("split-optimism")
    if opt is not None and opt.flag:
        extra.append(f"A random split scores {_fmt(opt.numbers['random_score'])} against "
                     f"{_fmt(opt.numbers['time_score'])} on the time holdout: a validation score "
                     f"from a random split would have been optimistic.")
    curve = d.get("learning-curve")
    if curve is not None and curve.numbers.get("gain_last") is not None:
        points = curve.numbers["points"]
        if curve.flag:
            extra.append(f"The default model still improves with more rows "
                         f"({_fmt(points[-2]['score'])} → {_fmt(points[-1]['score'])} from "
                         f"{points[-2]['rows']:,} to {points[-1]['rows']:,} rows), so more data "
                         f"would likely help.")
        elif p.verdict != "below-baseline" and p.verdict != "worse-than-naive":
            extra.append("More rows of the same kind are unlikely to help (the learning curve "
                         "is flat within the noise).")
    dup = d.get("conflicting-duplicates")
    if dup is not None and dup.flag:
        floor = (f"an RMSE floor of {_fmt(dup.numbers['rmse_floor'])} in target units"
                 if "rmse_floor" in dup.numbers else
                 f"at least {dup.numbers['error_floor']:.1%} of rows misclassified")
        extra.append(f"{dup.numbers['conflicting_share']:.1%} of rows have identical features "
                     f"but different targets ({floor} over all rows), a floor no model passes.")
    missing = [m for m in DEFAULT_ENSEMBLES if m not in ensembles]
    if missing and p.verdict in ("at-baseline", "above-baseline"):
        extra.append(f"The baseline ran {len(ensembles)} of the {len(DEFAULT_ENSEMBLES)} default "
                     f"ensembles ({', '.join(ensembles)}); with the others par and best could "
                     f"be better.")
    return " ".join([lead] + extra)


def calibrate(data, target: str, type: str | None = None, metric: str | None = None,
              positive=None, dates=(), holdout: str | None = None,
              holdout_fraction: float | None = None, holdout_rows: int | None = None,
              cutoff: str | None = None, drop=(), score: float | None = None,
              predictions=None, seeds: int = 1, models=None, budget: float | None = None,
              out=None, workers: int | None = None, reference: str = "default",
              tolerance: float = DEFAULT_TOLERANCE, on_event=None, executor: str = "local",
              scheduler: str | None = None) -> Calibration:
    """Place ``score`` (or a ``predictions`` file: columns row_id, prediction) on the user's own
    table against the baseline procedure and zoo run on the same split.

    Writes ``OUT/run`` (the zoo's jobs), ``report.md``, ``report.json``, ``placement.png`` and
    ``learning_curve.png`` (default OUT: ``runs/calibrate-NAME-DATE-TIME``). Every mistake in
    the input raises UserError before anything is written. ``budget`` (seconds) bounds the wall
    time of the diagnostics and the zoo: models run cheapest first and a model whose estimated
    time does not fit is skipped (the naive floor and one default ensemble always run).
    ``executor="dask"`` runs the zoo's jobs on the Dask cluster at ``scheduler`` (the prepared
    arrays are sent to it); the diagnostics and the placement run in this process.
    """
    started = time.monotonic()
    say = on_event or (lambda message: None)
    if (score is None) == (predictions is None):
        raise UserError("Give exactly one of --score and --predictions (or --export-split DIR "
                        "to write the split first).")
    if score is not None and not (isinstance(score, (int, float)) and math.isfinite(score)):
        raise UserError(f"--score {score!r} is not a finite number; give your holdout score in "
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
    if predictions is not None and task.type == "multiclass":
        raise UserError(f"The target '{target}' is multiclass; --predictions takes one "
                        f"prediction column (a value or a positive-class probability), so give "
                        f"--score instead.")
    order = zoo_order(models, task.type)
    connect_check(scheduler, executor, None)  # after the data's checks, before any work
    say(f"preparing {task.name}")
    prepared = prepare_task(task)  # every load/split/prep mistake surfaces here, before OUT
    if predictions is not None:
        row_id = np.asarray(load_arrays(prepared.folder)["row_id"])
        read_predictions_file(Path(predictions), row_id, task.type, task.name)
    difficulties, suite_folder, suite_note = suite_difficulties(reference)
    out = Path(out) if out is not None else (
        Path("runs") / f"calibrate-{task.name}-{datetime.now():%Y%m%d-%H%M%S}")
    if (out / "report.json").exists():
        old = json.loads((out / "report.json").read_text(encoding="utf-8"))
        if old.get("task") != task.definition():
            raise UserError(f"{out} holds a calibration of other data or options; choose "
                            f"another --out.")

    data_ = task_data(task, threads=cores)
    diagnostics = run_diagnostics(data_, on_event=say)
    fit_seconds = {d.name: d for d in diagnostics}["learning-curve"].numbers.get("fit_seconds")
    rate = (None if fit_seconds is None
            else fit_seconds * TRAIN_PREDICT_FACTOR / MODELS["lgbm"].cost(task.type))
    zoo_budget = None
    if budget is not None:  # keep time for the placement's bootstrap and the plots
        zoo_budget = budget - _reserve_seconds(data_)
    suite = Suite(name=SUITE_NAME, path=Path(task.source.split(":", 1)[1]),
                  description="tabpar calibrate on the user's own data", tasks=[task])
    run_dir = out / "run"
    ran, skipped, failures, overrun = _run_zoo(suite, order, seeds, run_dir, workers,
                                               zoo_budget, started, rate, say,
                                               executor=executor, scheduler=scheduler)
    ensembles = [m for m in ran if m in DEFAULT_ENSEMBLES]
    if "naive" not in ran or not ensembles:
        raise RuntimeError(f"the naive floor or every default ensemble failed on {task.name}: "
                           f"{failures}")

    ref = Reference(run_dir)
    placement = place_task(task, ref, score=score, predictions=predictions,
                           tolerance=tolerance, difficulties=difficulties)
    tref = ref.task(task.name)
    metric_obj = get_metric(task.metric)
    gain_best = float(metric_obj.gain(tref.best, tref.naive))
    par_skill = (float(metric_obj.gain(tref.par, tref.naive)) / gain_best
                 if placement.skill is not None else None)
    dataset = dataset_label(placement.difficulty_percentile)
    baseline = {}
    rows = ref.rows[ref.rows["task"] == task.name]
    for model, group in rows.groupby("model"):
        baseline[model] = {"score": float(group["score"].mean()),
                           "train_score": float(group["train_score"].mean()),
                           "fit_seconds": float(group["fit_seconds"].mean()),
                           "seeds": int(len(group))}
    answer = compose_answer(placement, dataset, placement.difficulty_percentile, diagnostics,
                            par_skill, prepared.n_holdout, ensembles, tolerance)
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
    elapsed = time.monotonic() - started
    if budget is not None and elapsed > budget:
        warnings.append(f"the budget of {budget:g} s was exceeded ({elapsed:.1f} s so far)"
                        + (f"; {overrun}" if overrun else ""))
    if failures:
        warnings.append("some jobs failed: " + "; ".join(
            f"{f['model']} seed {f['seed']}: {f['error']}" for f in failures[:3]))

    calibration = Calibration(
        data=str(data), task=task, out=out, inferred=inferred,
        split=prepared.split_description, notes=list(prepared.notes), placement=placement,
        score_verdict=placement.verdict, dataset=dataset, difficulty=float(tref.difficulty),
        difficulty_percentile=placement.difficulty_percentile, suite_reference=suite_folder,
        suite_tasks=len(difficulties or {}), skill=placement.skill, par_skill=par_skill,
        baseline=baseline, diagnostics=diagnostics, answer=answer,
        n_holdout=prepared.n_holdout, n_train=prepared.n_train, seeds=seeds, skipped=skipped,
        failures=failures, warnings=warnings, budget_seconds=budget)
    _write_reports(calibration, data_)
    calibration.elapsed_seconds = round(time.monotonic() - started, 1)
    atomic_write_text(out / "report.json", json.dumps(
        {**calibration.to_dict(), "versions": library_versions()}, indent=2))
    return calibration


def _write_reports(calibration: Calibration, data_) -> None:
    from tabpar.report.plots import placement_plot

    out = calibration.out
    curve = next(d for d in calibration.diagnostics if d.name == "learning-curve")
    files = {"report": str(out / "report.md"), "json": str(out / "report.json"),
             "placement_plot": str(placement_plot(calibration.placement,
                                                  out / "placement.png"))}
    if curve.numbers.get("points"):
        files["learning_curve_plot"] = str(learning_curve_plot(
            curve, calibration.task.metric, out / "learning_curve.png",
            title=calibration.task.name))
    files["run"] = str(out / "run")
    calibration.files = files
    atomic_write_text(out / "report.md", calibration.markdown())
