"""A run's results as plain text: what ``tabpar run`` prints and ``str(RunResult)`` gives."""
from __future__ import annotations

from tabpar.common.metrics import get_metric
from tabpar.common.text import column_places, count_of, format_fixed
from tabpar.models.zoo import DEFAULT_ENSEMBLES

SHOWN_FAILURES = 8  # failed jobs listed under a run's tables


def run_text(result) -> str:
    """A run as text (what ``tabpar run`` prints and ``str(RunResult)`` gives): one table per
    task, models ranked by mean holdout score ± the spread over seeds, then the counts, where the
    results are and the jobs that did not finish.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> stats = {"mean": 0.75, "std": 0.0, "n": 1, "train_mean": 0.9, "fit_seconds": 0.1}
    >>> task = {"metric": "roc_auc", "split": "random holdout", "notes": [],
    ...         "models": {"naive": {**stats, "mean": 0.5}, "lgbm": stats}}
    >>> run = SimpleNamespace(tasks={"t": task}, jobs=2, ok=2, failed=0, reused=0, out="runs/x",
    ...                       failures=[], interrupted=False)
    >>> print(run_text(run).splitlines()[3].split())
    ['lgbm', '0.7500', '0.9000', '0.10', '1']
    """
    lines = []
    several_seeds = False
    for name, info in result.tasks.items():
        metric = get_metric(info["metric"])
        direction = "lower is better" if metric.lower_is_better else "higher is better"
        lines.append("")
        units = info.get("definition", {}).get("units", "") if metric.in_target_units else ""
        lines.append(f"{name} — {info['metric']}{' in ' + units if units else ''} "
                     f"({direction}); {info['split']}")
        for note in info["notes"]:
            lines.append(f"  note: {note}")
        lines.append(f"  {'model':<8} {'holdout':>22} {'train':>10} {'fit s':>8}  seeds")
        ranked = sorted(info["models"].items(),
                        key=lambda kv: kv[1]["mean"] * (1 if metric.lower_is_better else -1))
        # one number of decimals per column, so a column's numbers line up and compare
        places = column_places([s["mean"] for _, s in ranked]
                               + [s["train_mean"] for _, s in ranked])
        for model, s in ranked:
            several_seeds |= s["n"] > 1
            spread = f" ± {format_fixed(s['std'], places)}" if s["n"] > 1 else ""
            score = format_fixed(s["mean"], places) + spread
            tag = "" if model in DEFAULT_ENSEMBLES else "  (" + ("floor" if model == "naive"
                                                                else "linear") + ")"
            lines.append(f"  {model:<8} {score:>22} {format_fixed(s['train_mean'], places):>10} "
                         f"{s['fit_seconds']:>8.2f}  {s['n']}{tag}")
    lines.append("")
    lines.append(f"{count_of(result.jobs, 'job')}: {result.ok:,} ok, {result.failed:,} failed, "
                 f"{result.reused:,} reused from an earlier run; results in {result.out}")
    if several_seeds:
        lines.append("± is the standard deviation over seeds (0 for models the seed does not "
                     "change); the holdout band from finite rows comes with 'tabpar place'.")
    if result.failed:
        lines.append(f"{count_of(result.failed, 'job')} did not finish (a rerun with the same "
                     f"--out retries them; details in {result.out}/jobs.jsonl):")
        for row in result.failures[:SHOWN_FAILURES]:
            lines.append(f"  {row['task']}/{row['model']} seed {row['seed']}: {row['status']} — "
                         f"{row['error']}")
        if len(result.failures) > SHOWN_FAILURES:
            lines.append(f"  ... and {len(result.failures) - SHOWN_FAILURES} more")
    if result.interrupted:
        lines.append("Interrupted: every finished job is saved; run the same command again "
                     "(same --out) to resume.")
    return "\n".join(lines)
