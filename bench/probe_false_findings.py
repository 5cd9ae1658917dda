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


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--reference", default="quick")
    parser.add_argument("--tasks", default=None, help="comma-separated tasks (default: all)")
    args = parser.parse_args()
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
