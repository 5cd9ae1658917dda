"""How often the probes on a user's predictions name a mistake that is not there: every
default ensemble × seed × task of a published reference placed as if it were a user's
predictions file, against the reference without that run (par, best and the noise band from
the remaining runs).

Prints the share of placements that get any finding (target: 5% or less) with its exact 95%
binomial interval, every finding raised (task, model, seed, probe, sentence), and the seconds
the probes took per placement.

    python bench/probe_false_findings.py [--reference quick] [--tasks a,b]
"""
import argparse
import json
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _common import machine  # noqa: E402


def without_run(reference, task, model, seed, root: Path) -> Path:
    """A results folder holding every job of ``reference`` except (task, model, seed); the
    predictions folder is linked, not copied."""
    from tabpar.execution.store import JOBS_FILE, RUN_FILE, read_job_rows

    folder = root / f"{task}-{model}-{seed}"
    folder.mkdir()
    shutil.copy(reference / RUN_FILE, folder / RUN_FILE)
    rows = [r for r in read_job_rows(reference / JOBS_FILE)
            if not (r["task"] == task and r["model"] == model and r["seed"] == seed)]
    (folder / JOBS_FILE).write_text("".join(json.dumps(r) + "\n" for r in rows),
                                    encoding="utf-8")
    (folder / "predictions").symlink_to(reference / "predictions")
    return folder


def probe_seconds_at(n: int) -> tuple[float, list]:
    """Seconds ``run_probes`` takes on ``n`` holdout rows of a SYNTHETIC regression stand-in
    (RMSE; 10 numeric columns, 3 category columns, 1 date column) whose given predictions are
    below par, so every probe runs its full path."""
    from types import SimpleNamespace

    import numpy as np
    import pandas as pd
    from tabpar.common.metrics import METRICS
    from tabpar.evaluation.probes import ProbeContext, run_probes

    rng = np.random.default_rng(0)
    features = pd.DataFrame({f"x{i}": rng.normal(size=n) for i in range(10)})
    for i in range(3):
        features[f"c{i}"] = rng.choice([f"level{j}" for j in range(30)], n)
    features["when"] = pd.Timestamp("2020-01-01") + pd.to_timedelta(rng.integers(0, 900, n),
                                                                    unit="D")
    y = features["x0"].to_numpy() * 3 + rng.normal(size=n)
    models = {m: y + rng.normal(scale=1.0 + 0.05 * k, size=n)
              for k, m in enumerate(["rf", "et", "hgb", "xgb", "lgbm"])}
    metric = METRICS["rmse"]
    means = {m: metric(y, p) for m, p in models.items()}
    par_model = sorted(means, key=means.get)[2]
    best_model = min(means, key=means.get)
    bad = (features["c0"] == "level3").to_numpy()  # a mistake confined to one level
    given = models[par_model] + np.where(bad, rng.normal(scale=6.0, size=n), 0.0)
    ctx = ProbeContext(
        task=SimpleNamespace(type="regression", log_target=False, derive_target=None,
                             positive=None, holdout=SimpleNamespace(policy="random")),
        metric=metric, y=y, given=given, row_id=np.arange(n),
        reference={"par": models[par_model], "best": models[best_model]},
        par=means[par_model], best=means[best_model], best_model=best_model,
        par_model=par_model, ensemble_means=means, reference_scores=list(means.values()),
        file_order=np.arange(n), ensembles=models, features=lambda: features)
    start = time.perf_counter()
    found = run_probes(ctx)
    return time.perf_counter() - start, found


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--reference", default="quick")
    parser.add_argument("--tasks", default=None, help="comma-separated tasks (default: all)")
    parser.add_argument("--speed-rows", type=int, default=100_000,
                        help="also time the probes on this many synthetic rows (0: skip)")
    args = parser.parse_args()
    if args.speed_rows:
        seconds, found = probe_seconds_at(args.speed_rows)
        print(f"probes on {args.speed_rows:,} synthetic holdout rows: {seconds:.1f} s "
              f"(findings: {', '.join(f.probe for f in found) or 'none'})")
    from scipy import stats
    from tabpar.data.suites import load_suite
    from tabpar.evaluation import placement as placement_module
    from tabpar.evaluation.placement import place_task
    from tabpar.evaluation.reference import Reference, resolve_reference
    from tabpar.models.zoo import DEFAULT_ENSEMBLES

    source = resolve_reference(args.reference)
    full = Reference(source)
    suite = load_suite(full.suite)
    tasks = args.tasks.split(",") if args.tasks else full.tasks
    root = Path(tempfile.mkdtemp(prefix="tabpar-bench-probes-"))
    probe_seconds = []
    real = placement_module.probe_predictions

    def timed(*a, **k):
        start = time.perf_counter()
        out = real(*a, **k)
        probe_seconds.append(time.perf_counter() - start)
        return out

    placement_module.probe_predictions = timed  # time the probes apart from the placement
    placed, flagged, raised = 0, 0, []
    for task in tasks:
        rows = full.rows[(full.rows["task"] == task) & full.rows["model"].isin(DEFAULT_ENSEMBLES)]
        for _, job in rows.sort_values(["model", "seed"]).iterrows():
            folder = without_run(source, task, job["model"], int(job["seed"]), root)
            answer = place_task(suite.task(task), Reference(folder),
                                predictions=source / job["predictions"])
            placed += 1
            if answer.findings:
                flagged += 1
                for f in answer.findings:
                    raised.append((task, job["model"], int(job["seed"]), f.probe, f.sentence))
    shutil.rmtree(root, ignore_errors=True)
    low, high = stats.binomtest(flagged, placed).proportion_ci(0.95, method="exact")
    print(f"reference {source}: {placed} reference runs placed as a user's predictions")
    print(f"with any finding: {flagged} of {placed} = {flagged / placed:.1%} "
          f"(exact 95% interval {low:.1%}–{high:.1%}; target ≤ 5%)")
    for task, model, seed, probe, sentence in raised:
        print(f"  {task} {model} seed {seed}: [{probe}] {sentence}")
    print(f"probes: median {sorted(probe_seconds)[len(probe_seconds) // 2]:.2f} s, max "
          f"{max(probe_seconds):.2f} s per placement")
    print(f"machine: {machine()}")


if __name__ == "__main__":
    main()
