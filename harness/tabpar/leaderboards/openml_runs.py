"""OpenML run evaluations as leaderboards: the measure a tabpar metric maps to, the download
(cached, so a later pull works offline and says so), the best run of each flow."""
from __future__ import annotations

import json
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.files import (
    atomic_write_bytes,
    atomic_write_text,
    check_fields,
    read_state_json,
    read_state_parquet,
)
from tabpar.common.metrics import get_metric
from tabpar.common.paths import OPENML_CACHE_ENV
from tabpar.data.openml_source import (
    OfflineError,
    openml_cache_dir,
    openml_session,
    openml_task_info,
    parse_task_id,
    server_calls,
)
from tabpar.execution.provenance import tabpar_version
from tabpar.leaderboards.store import (
    MIN_ENTRIES,
    Leaderboard,
    now_iso,
    refuse_existing,
    sanitise_name,
    save_leaderboard,
)

OPENML_MEASURES = {"roc_auc": "area_under_roc_curve", "accuracy": "predictive_accuracy",
                   "rmse": "root_mean_squared_error", "mae": "mean_absolute_error"}
_OPENML_DEFAULT = {"regression": "rmse", "binary": "roc_auc", "multiclass": "accuracy"}
_OPENML_COLUMNS = ("run_id", "task_id", "setup_id", "flow_id", "flow_name", "data_id",
                   "data_name", "function", "upload_time", "uploader", "value")




def openml_measure(metric: str) -> str:
    """The OpenML evaluation measure of a tabpar metric; UserError when there is none."""
    get_metric(metric)
    if metric not in OPENML_MEASURES:
        raise UserError(f"Metric '{metric}' has no OpenML run evaluation tabpar maps it to; use "
                        f"one of {', '.join(OPENML_MEASURES)}.")
    return OPENML_MEASURES[metric]


def _evaluations_cache(task_id: int, measure: str) -> tuple[Path, Path]:
    folder = openml_cache_dir() / "tabpar" / "evaluations"
    stem = f"task-{task_id}-{measure}"
    return folder / f"{stem}.parquet", folder / f"{stem}.json"


def fetch_openml_evaluations(task_id: int, measure: str) -> tuple[pd.DataFrame, dict]:
    """Every run evaluation of OpenML task ``task_id`` on ``measure``, and where it came from.

    Asks the server first (and caches the answer); when the server cannot be reached, the last
    cached answer is used and the returned dict says so (``from_cache``, ``fetched_at``).
    """
    import pandas as pd
    data_path, meta_path = _evaluations_cache(task_id, measure)
    what = f"the {measure} run evaluations of OpenML task {task_id}"
    try:
        with openml_session() as openml, server_calls(openml, what):
            frame = openml.evaluations.list_evaluations(
                function=measure, tasks=[task_id], size=None, output_format="dataframe")
            server, version = str(openml.config.server), str(getattr(openml, "__version__", ""))
    except OfflineError:
        if not (data_path.exists() and meta_path.exists()):
            raise
        fix = f"delete {data_path} and {meta_path}, and pull again with a network"
        info = read_state_json(meta_path, fix)
        check_fields(info, {"fetched_at": str}, str(meta_path), fix)
        cached = read_state_parquet(data_path, fix)
        if not {"run_id", "flow_id", "value"} <= set(cached.columns):
            raise UserError(f"The cached evaluations {data_path} lack run_id, flow_id or "
                            f"value; {fix}.")
        return cached, {**info, "from_cache": True}
    if frame is None or len(frame) == 0:
        raise UserError(f"OpenML lists no runs of task {task_id} evaluated on {measure}; "
                        f"choose another --metric or task.")
    missing = [c for c in ("run_id", "flow_id", "value") if c not in frame.columns]
    if missing:
        raise UserError(f"The openml package returned run evaluations without a '{missing[0]}' "
                        f"column; upgrade it with pip install -U openml.")
    frame = frame[[c for c in _OPENML_COLUMNS if c in frame.columns]].copy()
    frame["value"] = pd.to_numeric(frame["value"], errors="coerce")
    info = {"openml_task": task_id, "measure": measure, "server": server,
            "openml_version": version, "fetched_at": now_iso()}
    # kept so a later pull without a network can still answer, saying it is cached
    fix = f"set {OPENML_CACHE_ENV} to a writable folder with free space"
    atomic_write_bytes(data_path, frame.to_parquet(index=False), fix)
    atomic_write_text(meta_path, json.dumps(info, indent=2), fix)
    return frame, {**info, "from_cache": False}


def best_run_per_flow(runs: pd.DataFrame, lower_is_better: bool) -> pd.DataFrame:
    """One row per flow: its best run (ties: the lowest run id), sorted best first."""
    ordered = runs.sort_values(["value", "run_id"], ascending=[lower_is_better, True],
                               kind="mergesort")
    return ordered.drop_duplicates("flow_id", keep="first").reset_index(drop=True)


def pull_openml(task_id, metric: str | None = None, name: str | None = None,
                store: str | Path | None = None,
                replace: bool = False) -> tuple[Leaderboard, Leaderboard]:
    """Store OpenML task ``task_id``'s run evaluations as two leaderboards.

    ``NAME`` (default ``openml-ID-METRIC``) keeps the best run of each flow, ``NAME-all-runs``
    every run with a value. ``metric`` (a tabpar name, mapped to an OpenML measure by
    ``OPENML_MEASURES``) defaults to the task's own measure when it maps, else rmse / roc_auc /
    accuracy by task type. Returns (best run per flow, all runs).
    """
    task_id = parse_task_id(task_id)
    info = openml_task_info(task_id)
    if metric is None:
        reverse = {v: k for k, v in OPENML_MEASURES.items()}
        metric = reverse.get(info.get("evaluation_measure"), _OPENML_DEFAULT[info["type"]])
    measure = openml_measure(metric)
    if info["type"] not in get_metric(metric).task_types:
        fits = [m for m in OPENML_MEASURES if info["type"] in get_metric(m).task_types]
        raise UserError(f"Metric '{metric}' does not fit OpenML task {task_id}, a "
                        f"{info['type']} task; use one of {', '.join(fits)}.")
    base = sanitise_name(name if name is not None else f"openml-{task_id}-{metric}")
    all_name = sanitise_name(f"{base}-all-runs")
    refuse_existing([base, all_name], store, replace)

    runs, fetched = fetch_openml_evaluations(task_id, measure)
    lower = get_metric(metric).lower_is_better
    scored = runs[runs["value"].notna() & np.isfinite(runs["value"].astype(float))]
    scored = scored.sort_values(["value", "run_id"], ascending=[lower, True],
                                kind="mergesort").reset_index(drop=True)
    if len(scored) < MIN_ENTRIES:
        raise UserError(f"OpenML task {task_id} has {len(scored)} run with a {measure} value; "
                        f"a leaderboard needs at least {MIN_ENTRIES}.")
    best = best_run_per_flow(scored, lower)
    common = {
        "kind": "openml", "task": f"openml:{task_id}", "score_column": "value",
        "lower_is_better": lower, "metric": metric, "direction_from": f"the metric {metric}",
        "n_runs": int(len(scored)), "n_flows": int(scored["flow_id"].nunique()),
        "n_runs_without_value": int(len(runs) - len(scored)),
        "openml_task": {**{k: info.get(k) for k in ("type", "target", "dataset_id",
                                                    "evaluation_measure",
                                                    "estimation_procedure")},
                        "dataset_name": info.get("dataset_name") or (
                            str(runs["data_name"].iloc[0]) if "data_name" in runs else None)},
        "source": {**fetched, "measure": measure},
        "tabpar": tabpar_version(),
    }
    best_board = save_leaderboard(best, {**common, "view": "best run per flow",
                              "n_entries": int(len(best)), "companion": all_name},
                       base, store, replace)
    all_board = save_leaderboard(scored, {**common, "view": "all runs", "n_entries": int(len(scored)),
                               "companion": base}, all_name, store, replace)
    return best_board, all_board
