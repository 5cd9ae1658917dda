"""Plain-text rendering of the API's results for the terminal (what the commands print)."""
from __future__ import annotations

from pathlib import Path

from tabpar.common.metrics import get_metric

SHOWN_FAILURES = 8  # failed jobs listed under a run's tables


def render_run(result) -> str:
    """What 'tabpar run' prints: the RunResult's own text."""
    return str(result)


def render_suite(suite, path, rows: dict | None = None) -> str:
    """A suite's name and description, then each task: type, metric and direction, units,
    rows (from the suite's published reference, when there is one), holdout, source and
    description."""
    rows = rows or {}
    lines = [f"{suite.name}: {suite.description}  ({path})"]
    for t in suite.tasks:
        metric = get_metric(t.metric)
        better = "lower" if metric.lower_is_better else "higher"
        units = f" in {t.units}" if t.units and metric.in_target_units else ""
        cap = f", at most {t.max_rows:,} rows" if t.max_rows else ""
        size = (f"{rows[t.name][0] + rows[t.name][1]:,} rows" if t.name in rows
                else "rows: not in a published reference")
        lines.append(f"  {t.name:<12} {t.type:<10} {t.metric}{units} ({better} is better); "
                     f"{size}; {t.holdout.describe()}{cap}")
        lines.append(f"  {'':<12} {t.description or '(no description)'} [{t.source}]")
    return "\n".join(lines)


def _direction_and_submit(info: dict) -> str:
    return (f"{info['metric']} ({'lower' if info['lower_is_better'] else 'higher'} is better); "
            f"{info['how_to_submit']}")


def render_split(info: dict, data, folder, inferred: str) -> str:
    """What 'tabpar calibrate --export-split' inferred and wrote."""
    folder = Path(folder)
    return "\n".join([
        f"inferred: {inferred}",
        f"split: {info['holdout']}",
        (f"wrote {folder / 'train.csv'} ({info['n_train']:,} rows with '{info['target']}'), "
         f"{folder / 'holdout.csv'} ({info['n_holdout']:,} rows without) and task.json; row_id "
         f"is each row's 0-based position in {data}"),
        _direction_and_submit(info)])


def board_line(board) -> str:
    """One leaderboard in a line: name, task, entries, direction, best."""
    metric = f" ({board.metric})" if board.metric else ""
    return (f"leaderboard '{board.name}' for task {board.task}: {len(board.entries):,} "
            f"entries, {'lower' if board.lower_is_better else 'higher'} is better{metric}, "
            f"best {board.best:.4g}")


def render_import(board, requested_name) -> str:
    """What 'tabpar leaderboard import' stored."""
    lines = [f"stored {board_line(board)}",
             (f"  direction from {board.meta['direction_from']}; score column "
              f"'{board.score_column}'; other columns kept as they are")]
    if requested_name is not None and requested_name != board.name:
        lines.append(f"  the name '{requested_name}' became '{board.name}' (letters, digits, "
                     f"_ - . only)")
    lines.append(f"  files: {board.path.parent / board.meta['entries_file']} and {board.path}")
    return "\n".join(lines)


def render_pull(best, every) -> str:
    """What 'tabpar leaderboard pull-openml' fetched and stored."""
    meta, source = best.meta, best.meta["source"]
    dataset = meta["openml_task"].get("dataset_name")
    when = (f"the server could not be reached, so these are the evaluations cached on "
            f"{source['fetched_at']}" if source.get("from_cache")
            else f"fetched {source['fetched_at']}")
    lines = [(f"OpenML task {source['openml_task']}{f' ({dataset})' if dataset else ''}: "
              f"{meta['n_runs']:,} runs of {meta['n_flows']:,} flows on {source['measure']}; "
              f"{when}")]
    if meta["n_runs_without_value"]:
        lines.append(f"  {meta['n_runs_without_value']:,} runs without a value were left out")
    lines.append(f"  stored {board_line(best)} (best run per flow)")
    lines.append(f"  stored {board_line(every)} (all runs)")
    lines.append(f"  in {best.path.parent}")
    return "\n".join(lines)


def render_leaderboard_list(rows: list[dict]) -> str:
    """The stored and published leaderboards (at least one) as a table, then their folders."""
    width = max(len(r["name"]) for r in rows)
    lines = [f"{'name':<{width}}  {'task':<14} {'entries':>8}  direction (metric)            kind"]
    for r in rows:
        metric = f" ({r['metric']})" if r["metric"] else ""
        kind = r["kind"] + (f", {r['view']}" if r["view"] else "")
        lines.append(f"{r['name']:<{width}}  {r['task']:<14} {r['entries']:>8,}  "
                     f"{r['direction'] + metric:<29} {kind}")
    lines.extend(f"in {where}" for where in dict.fromkeys(r["where"] for r in rows))
    return "\n".join(lines)


def render_cache(info: dict, env: str) -> str:
    """The prepared-array cache's entries and size."""
    lines = [f"prepared-array cache: {info['folder']} (set {env} to move it)"]
    for e in info["entries"]:
        lines.append(f"  {e['entry']:<34} {e['procedure']:<20} {e['rows']:>9,} rows "
                     f"{e['mb']:>8.1f} MB")
    lines.append(f"  {len(info['entries'])} entries, {info['total_mb']:.1f} MB")
    return "\n".join(lines)
