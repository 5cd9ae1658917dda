"""Regression-test a preprocessing change across a suite (``tabpar compare``).

Per task, the candidate and the baseline procedure are run with the same models and seeds (other
seeds when both are the same procedure: an A/A run, seed offset ``AA_SEED_OFFSET``), on the same
split. The task's **delta** is the mean over models and seed pairs of the candidate's gain over
the baseline, divided by the baseline's gain over the naive floor: a direction-normalised,
unit-free number (positive = better; -0.1 = the candidate loses a tenth of what the baseline
gains over naive). Its 95% band adds two variances: the paired bootstrap over holdout rows (both
predictions rescored on the same resampled rows) and the spread of the per-seed deltas. Calls use
Holm-corrected p-values over the tasks compared (family-wise 5%), so a ten-task suite does not
raise a false alarm in one A/A run in five. The aggregate signed-rank test ranks the tasks'
standardised deltas (delta / its standard error), so the noisiest tasks do not dominate it.
"""
from __future__ import annotations

import json
import shutil
from datetime import datetime
from pathlib import Path

import numpy as np

from tabpar.common.errors import UserError
from tabpar.common.metrics import get_metric
from tabpar.common.text import count_of, format_p
from tabpar.data.log_scale import from_log_scale, to_log_scale
from tabpar.data.suite_values import check_seconds, check_seed_count, check_tolerance
from tabpar.data.suites import Task, load_suite
from tabpar.evaluation.comparison_result import (
    ALPHA,
    DEFAULT_MODELS,
    Comparison,
    TaskComparison,
)
from tabpar.evaluation.reference import check_format, published_root
from tabpar.evaluation.stats import (
    N_BOOTSTRAP,
    bootstrap_scores,
    holm,
    signed_rank_p,
)
from tabpar.execution.cache import load_arrays, prepare_task
from tabpar.execution.isolation import isolated_procedure
from tabpar.execution.provenance import library_versions, preparation_code_digest
from tabpar.execution.runner import run_suite
from tabpar.execution.store import (
    RUN_FILE,
    ResultsStore,
    align_to,
    atomic_write_text,
    inside_folder,
    load_results,
    read_predictions,
    read_run_meta,
)
from tabpar.models.zoo import check_models
from tabpar.procedure.variants import builtin

AA_SEED_OFFSET = 1000
N_BOOTSTRAP_LARGE = 250  # for holdouts over LARGE_HOLDOUT rows, to keep compare fast
LARGE_HOLDOUT = 20_000


def naive_prediction(task: Task, y_train: np.ndarray, n_classes: int):
    """The naive floor's constant prediction (mean, in log1p space for RMSLE; class prior)."""
    if task.type == "regression":
        return float(from_log_scale(np.mean(to_log_scale(y_train)))) if task.log_target \
            else float(np.mean(y_train))
    prior = np.bincount(y_train.astype(int), minlength=n_classes) / len(y_train)
    return prior[1] if task.type == "binary" else prior


def _seed_predictions(folder: Path, frame, task, model, seeds, row_id):
    """Predictions of ``task``/``model`` for each seed, aligned to ``row_id``."""
    out = []
    for seed in seeds:
        rows = frame[(frame["task"] == task) & (frame["model"] == model) &
                     (frame["seed"] == seed) & (frame["status"] == "ok")]
        if rows.empty or not isinstance(rows["predictions"].iloc[-1], str):
            return None
        aligned = align_to(*read_predictions(folder / rows["predictions"].iloc[-1],
                                             root=folder), row_id)
        if aligned is None:
            return None
        out.append(aligned)
    return out


def _task_delta(task: Task, metric, y, naive, base_preds, cand_preds, rng, n_boot):
    """(delta, se_boot, se_seed, seed_df, base_score, cand_score) for one task.

    ``base_preds``/``cand_preds``: [model][seed] predictions. ``se_seed`` pools the seed variance
    of both sides (each side's per-seed score, averaged over models, varies by seed), with
    ``seed_df = 2 (K - 1)`` degrees of freedom; it is 0 for models the seed does not change.
    """
    base_scores = np.array([[metric(y, p) for p in seeds] for seeds in base_preds])
    cand_scores = np.array([[metric(y, p) for p in seeds] for seeds in cand_preds])
    naive_score = metric(y, np.broadcast_to(naive, (len(y),) + np.shape(naive)))
    scale = float(metric.gain(base_scores.mean(), naive_score))
    if not scale > 0:
        return None, None, None, None, base_scores.mean(), cand_scores.mean()
    # each side's normalised gain over naive per seed, averaged over models
    base_gain = (metric.gain(base_scores, naive_score) / scale).mean(axis=0)
    cand_gain = (metric.gain(cand_scores, naive_score) / scale).mean(axis=0)
    delta = float(cand_gain.mean() - base_gain.mean())
    k = len(base_gain)
    if k > 1:
        se_seed = float(np.sqrt((np.var(base_gain, ddof=1) + np.var(cand_gain, ddof=1)) / k))
        seed_df = 2 * (k - 1)
    else:
        se_seed, seed_df = 0.0, None
    # paired: every (candidate, baseline) pair of model and seed scored on the same resamples
    cand_flat = [c for cs in cand_preds for c in cs]
    base_flat = [p for bs in base_preds for p in bs]
    scores = bootstrap_scores(metric, y, cand_flat + base_flat, n_boot, seed=rng)
    m = len(cand_flat)
    boot = metric.gain(scores[:, :m], scores[:, m:]).mean(axis=1) / scale
    se_boot = float(np.nanstd(boot, ddof=1))
    return (delta, se_boot, se_seed, seed_df, float(base_scores.mean()),
            float(cand_scores.mean()))


def band_and_p(delta: float, se_boot: float, se_seed: float, seed_df):
    """(half-width of the 95% band, two-sided p) of a delta with two independent noise parts.

    Student's t with the seed part's degrees of freedom when seeds vary (few seeds make a poor
    variance estimate, and the normal quantile would call noise a difference); normal otherwise.
    """
    from scipy import stats
    se = float(np.hypot(se_boot, se_seed))
    if se == 0:
        return 0.0, (1.0 if delta == 0 else 0.0)
    if se_seed > 0 and seed_df:
        return (float(stats.t.ppf(0.975, seed_df) * se),
                float(2 * stats.t.sf(abs(delta) / se, seed_df)))
    return 1.959964 * se, float(2 * stats.norm.sf(abs(delta) / se))


def _seed_baseline_from_reference(suite_name: str, base_out: Path, tasks: list, models: list,
                                  seeds: int) -> int:
    """Copy matching jobs of the published reference into a new baseline folder."""
    ref = published_root() / "reference" / suite_name
    if not (ref / RUN_FILE).exists() or (base_out / RUN_FILE).exists():
        return 0
    meta = read_run_meta(ref)
    rows = load_results(ref)
    versions = library_versions()
    current = {t.name: prepare_task(t).fingerprint for t in tasks}
    keep = rows[(rows["status"] == "ok") & rows["task"].isin(list(current)) &
                rows["model"].isin(models) & rows["seed"].isin(range(seeds))]
    keep = keep[[meta["tasks"].get(t, {}).get("fingerprint") == current[t]
                 for t in keep["task"]]]
    keep = keep[[v == versions for v in keep["versions"]]]
    if "code" not in keep:
        return 0
    keep = keep[keep["code"] == preparation_code_digest()]  # same preparing code too
    if keep.empty:
        return 0
    store = ResultsStore(base_out)
    store.open_for_writing()
    try:
        for row in keep.to_dict("records"):
            row = {k: v for k, v in row.items() if not (isinstance(v, float) and np.isnan(v))}
            target = inside_folder(base_out, row["predictions"])
            target.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(inside_folder(ref, row["predictions"]), target)
            store.append(row)
    finally:
        store.close()
    return len(keep)


def compare(candidate: str, baseline: str = "builtin", suite: str = "quick", tasks=None,
            models=None, seeds: int = 3, tolerance: float = 0.0, out=None,
            workers: int | None = None, progress: bool = False, n_boot: int | None = None,
            seed: int = 0, executor: str = "local", scheduler: str | None = None,
            aa_seed_offset: int = AA_SEED_OFFSET, force: bool = False,
            job_timeout: float | None = None) -> Comparison:
    """Compare procedure ``candidate`` with ``baseline`` (a procedure SPEC or a results
    folder) on ``suite``. Deltas are unit-free, positive = the candidate is better.

    A module:function SPEC's code runs in a worker process, under ``job_timeout`` seconds per
    task (None: no limit) like a job, with its prints sent to stderr. Ctrl-C or SIGTERM stops
    the comparison with KeyboardInterrupt; finished jobs stay in ``out`` for a rerun."""
    tolerance = check_tolerance(tolerance)
    check_seconds(job_timeout, "--job-timeout")
    check_seed_count(seeds, aa_seed_offset)
    suite_obj = load_suite(suite)
    selected = suite_obj.select(tasks)
    models = check_models(models or list(DEFAULT_MODELS))
    models = [m for m in models if m != "naive"]  # the floor is computed directly
    if not models:
        raise UserError("--models needs at least one model other than naive.")
    cand_proc, cand_errors = isolated_procedure(candidate, selected, job_timeout)
    reused, base_errors = 0, {}
    out = Path(out) if out is not None else Path("runs") / (
        f"compare-{suite_obj.name}-{datetime.now().strftime('%Y%m%d-%H%M%S')}")
    base_dir = Path(baseline) if (Path(baseline) / RUN_FILE).exists() else None
    if base_dir is not None:
        base_meta = read_run_meta(base_dir)
        check_format(base_meta, base_dir)
        for task in selected:
            then = base_meta.get("tasks", {}).get(task.name, {}).get("fingerprint")
            now = prepare_task(task).fingerprint
            if then is not None and then != now and not force:
                raise UserError(f"The data of task '{task.name}' changed since the baseline "
                                f"{base_dir} was run (fingerprint {then} then, {now} now); "
                                f"rerun the baseline, or pass --force to compare anyway.")
        if base_meta.get("suite") != suite_obj.name:
            raise UserError(f"The baseline folder {base_dir} holds suite "
                            f"'{base_meta.get('suite')}', not '{suite_obj.name}'; pass --suite "
                            f"{base_meta.get('suite')}.")
        base_name = f"{base_dir} ({base_meta.get('procedure', 'builtin')})"
        aa = base_meta.get("procedure", "builtin") == cand_proc.name
    else:
        base_proc, base_errors = isolated_procedure(baseline, selected, job_timeout)
        base_name = base_proc.name
        aa = base_proc.key == cand_proc.key
        base_dir = out / "baseline"
        reused = (_seed_baseline_from_reference(suite_obj.name, base_dir, selected, models,
                                                seeds) if base_proc.key == builtin().key
                  else 0)
        base_run = run_suite(suite_obj, tasks=[t.name for t in selected
                                               if t.name not in base_errors],
                             models=models, seeds=seeds, out=base_dir, workers=workers,
                             progress=progress, procedure=base_proc, executor=executor,
                             scheduler=scheduler, job_timeout=job_timeout)
        if base_run.interrupted:  # never a report on part of the baseline
            raise KeyboardInterrupt
    cand_dir = out / "candidate"
    offset = aa_seed_offset if aa else 0
    cand_run = run_suite(suite_obj, tasks=[t.name for t in selected if t.name not in cand_errors],
                         models=models, seeds=seeds, out=cand_dir, workers=workers,
                         progress=progress, procedure=cand_proc, seed_offset=offset,
                         executor=executor, scheduler=scheduler, job_timeout=job_timeout)
    if cand_run.interrupted:
        raise KeyboardInterrupt
    errors = {**base_errors, **cand_errors, **cand_run.task_errors}
    if len(errors) == len(selected):
        raise UserError(f"{next(iter(errors.values()))} (it failed on every task compared).")
    base_rows, cand_rows = load_results(base_dir), load_results(cand_dir)
    base_seeds = sorted(set(base_rows["seed"]))[:seeds]
    cand_seeds = list(range(offset, offset + seeds))
    rng = np.random.default_rng(seed)
    results: list[TaskComparison] = []
    for task in selected:
        metric = get_metric(task.metric)
        if task.name in errors:
            results.append(TaskComparison(task.name, None, None, None, None, None, "error",
                                          metric=task.metric, note=errors[task.name]))
            continue
        prepared = prepare_task(task)
        arrays = load_arrays(prepared.folder)
        y, row_id = np.asarray(arrays["y_holdout"]), np.asarray(arrays["row_id"])
        naive = naive_prediction(task, np.asarray(arrays["y_train"]),
                                 max(2, len(prepared.classes)))
        base_preds = [_seed_predictions(base_dir, base_rows, task.name, m, base_seeds, row_id)
                      for m in models]
        cand_preds = [_seed_predictions(cand_dir, cand_rows, task.name, m, cand_seeds, row_id)
                      for m in models]
        pairs = [(b, c) for b, c in zip(base_preds, cand_preds) if b and c]
        if not pairs:
            results.append(TaskComparison(task.name, None, None, None, None, None, "error",
                                          metric=task.metric,
                                          note="no model finished on both sides"))
            continue
        boots = n_boot or (N_BOOTSTRAP_LARGE if len(y) > LARGE_HOLDOUT else N_BOOTSTRAP)
        delta, se_boot, se_seed, seed_df, b_score, c_score = _task_delta(
            task, metric, y, naive, [b for b, _ in pairs], [c for _, c in pairs], rng, boots)
        leak = _leakage_of(cand_dir, task.name)
        if delta is None:
            results.append(TaskComparison(task.name, None, None, None, None, None, "n/a",
                                          metric=task.metric, baseline_score=b_score,
                                          candidate_score=c_score, leakage=leak,
                                          note="the baseline does not beat the naive floor, "
                                               "so there is no scale for a delta"))
            continue
        half, p = band_and_p(delta, se_boot, se_seed, seed_df)
        results.append(TaskComparison(task.name, delta, delta - half, delta + half,
                                      p, None, "same", metric=task.metric,
                                      baseline_score=b_score, candidate_score=c_score,
                                      leakage=leak, se=float(np.hypot(se_boot, se_seed))))
    valid = [r for r in results if r.delta is not None]
    for r, adjusted in zip(valid, holm([r.p_value for r in valid]) if valid else []):
        r.p_holm = float(adjusted)
        if adjusted < ALPHA and abs(r.delta) >= tolerance:
            r.call = "better" if r.delta > 0 else "worse"
    deltas = np.array([r.delta for r in valid])
    median = float(np.median(deltas)) if len(deltas) else None
    p_all = signed_rank_p(deltas, tolerance, np.array([r.se for r in valid]))
    reasons = [f"{r.task} is worse by {abs(r.delta):.3f} in gain share (delta {r.delta:+.3f}, "
               f"Holm p {format_p(r.p_holm)})" for r in valid if r.call == "worse"]
    if median is not None and p_all is not None and median < -tolerance and p_all < ALPHA:
        reasons.append(f"median delta {median:+.3f} with Wilcoxon p {format_p(p_all)} across "
                       f"{count_of(len(deltas), 'task')}")
    leakage = [f"{r.task}: the candidate {r.leakage}" for r in results if r.leakage]
    comparison = Comparison(
        candidate=cand_proc.name, baseline=base_name, suite=suite_obj.name, aa=aa,
        models=models, seeds=seeds, tolerance=tolerance, tasks=results,
        wins=sum(r.call == "better" for r in results),
        ties=sum(r.call == "same" for r in results),
        losses=sum(r.call == "worse" for r in results), median_delta=median, p_value=p_all,
        regression=bool(reasons), reasons=reasons, leakage=leakage, out=str(out),
        reused_baseline_jobs=reused)
    atomic_write_text(out / "report.json", json.dumps(comparison.to_dict(), indent=2))
    atomic_write_text(out / "report.md", comparison.to_markdown())
    return comparison


def _leakage_of(folder: Path, task: str) -> str | None:
    meta = read_run_meta(folder)
    return meta.get("tasks", {}).get(task, {}).get("leakage")
