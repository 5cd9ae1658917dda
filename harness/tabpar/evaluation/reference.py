"""Published references: results folders under ``results/reference/NAME`` read for placement.

A reference is an ordinary results folder (run.json, jobs.jsonl, predictions/) plus
``provenance.json``; the per-task summaries here (naive floor, best and par of the default
ensembles, difficulty) are what every placement compares against.
"""
from __future__ import annotations

import json
import sys
import time
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.metrics import get_metric
from tabpar.common.paths import builtin_folder, refuse_inside_package
from tabpar.common.system import available_cores
from tabpar.common.text import close_matches
from tabpar.execution.provenance import library_versions
from tabpar.execution.runner import run_suite
from tabpar.execution.store import (
    RUN_FILE,
    STORE_FORMAT,
    ResultsStore,
    atomic_write_text,
    load_results,
    read_predictions,
    read_run_meta,
)
from tabpar.models.zoo import DEFAULT_ENSEMBLES


def published_root() -> Path:
    """The published results that ship with tabpar (package data; ``results/`` of a checkout)."""
    return builtin_folder("results")


def resolve_reference(reference: str | Path) -> Path:
    """A published reference name (``default``, ``quick``) or a results folder path."""
    text = str(reference)
    published = published_root() / "reference" / text
    if "/" not in text and (published / RUN_FILE).exists():
        return published
    path = Path(text)
    if (path / RUN_FILE).exists():
        return path
    names = sorted(p.name for p in (published_root() / "reference").glob("*") if p.is_dir())
    raise UserError(f"Unknown reference '{text}': it is neither a published reference "
                    f"({', '.join(names) or 'none published'}) nor a results folder with "
                    f"{RUN_FILE}.")


def published_names() -> list[str]:
    """The published references that ship with tabpar (``default``, ``quick``, ...): finished
    builds only (a build still running, or interrupted, has no provenance.json yet)."""
    folder = published_root() / "reference"
    return sorted(p.name for p in folder.glob("*")
                  if (p / RUN_FILE).is_file() and (p / "provenance.json").is_file())


MAX_LISTED_TASKS = 12  # an error names a reference's tasks when there are no more than this

# without a suite, the widest published reference: more tasks make a finer difficulty scale
WIDEST_FIRST = ("wide", "default")


def reference_for(suite: str | Path | None = None) -> str:
    """The one default-reference rule every command follows: a built-in suite is placed on the
    published reference of the same name; anything else (no suite, a suite file of your own)
    on the widest published reference (``wide`` once it is published, else ``default``).

    Examples
    --------
    >>> reference_for("quick"), reference_for("my_suite.toml") in WIDEST_FIRST
    ('quick', True)
    """
    published = published_names()
    name = None if suite is None else str(suite)
    if name in published:
        return name
    return next((n for n in WIDEST_FIRST if n in published), "default")


def references_for_rows(task: str, row_ids) -> list[str]:
    """The published references whose holdout of ``task`` is exactly ``row_ids`` (none, one,
    or several when a task is smaller than the quick suite's row cap).

    An exported split's row ids say which suite it came from (the quick suite's holdout is a
    sample of the default one's), so a predictions file can be placed without naming it.
    """
    wanted = set(int(i) for i in row_ids)
    found = []
    for name in published_names():
        ref = Reference(name)
        if task not in ref.tasks:
            continue
        ids, _ = ref.predictions(task, "naive")
        if set(int(i) for i in ids) == wanted:
            found.append(name)
    return found


def check_format(meta: dict, folder) -> None:
    """UserError unless a results folder's run.json is in the format this version reads."""
    if meta.get("format") != STORE_FORMAT:
        raise UserError(f"{folder} was written by an incompatible tabpar version (results format "
                        f"{meta.get('format')}, this one reads {STORE_FORMAT}); rebuild it with "
                        f"this version.")


def headroom_taken(metric_name: str, naive: float, best: float) -> float:
    """Share of the possible improvement over naive that ``best`` takes (1 = all of it).

    Loss metrics: ``1 - best/naive``; bounded scores: ``(best - naive) / (perfect - naive)``.
    """
    metric = get_metric(metric_name)
    if metric.bounded:
        room = metric.perfect - naive
        return float((best - naive) / room) if room != 0 else 0.0
    return float(1.0 - best / naive) if naive != 0 else 0.0


@dataclass
class TaskReference:
    """One task's reference numbers, in the task metric's units."""

    task: str
    metric: str
    lower_is_better: bool
    fingerprint: str
    scores: dict  # model → list of holdout scores, one per seed (ascending seed)
    means: dict  # model → mean over seeds
    naive: float
    best: float
    best_model: str
    par: float
    par_model: str  # the default ensemble whose mean is par (closest to it)
    seed_spread: float  # std over seeds of the best default's scores (0 for one seed)

    @property
    def difficulty(self) -> float:
        """``1 - headroom taken``: 0 = the best default is perfect, 1 = no better than naive."""
        return 1.0 - headroom_taken(self.metric, self.naive, self.best)


def _spread(scores: list) -> float:
    """Standard deviation over seeds; 0 for one seed, and for scores equal to the last bits
    (a model the seed does not change: its mean of equal floats can differ from them by
    rounding, which printed as a spread of 4e-18)."""
    if len(scores) < 2 or np.ptp(scores) <= 1e-12 * max(1.0, float(np.max(np.abs(scores)))):
        return 0.0
    return float(np.std(scores, ddof=1))


class Reference:
    """A results folder read as a reference."""

    def __init__(self, folder: str | Path):
        self.folder = resolve_reference(folder)
        self.meta = read_run_meta(self.folder)
        check_format(self.meta, self.folder)
        rows = load_results(self.folder)
        self.rows = rows[rows["status"] == "ok"] if not rows.empty else rows
        self._cache: dict = {}
        self._tasks: list | None = None

    @property
    def label(self) -> str:
        """How answers name this reference: "published reference 'quick'" or its folder."""
        published = published_root() / "reference" / self.folder.name
        if published.exists() and published.resolve() == self.folder.resolve():
            return f"published reference '{self.folder.name}'"
        return f"reference {self.folder}"

    @property
    def suite(self) -> str:
        return self.meta.get("suite", "")

    @property
    def tasks(self) -> list[str]:
        if self._tasks is None:  # read per task by every caller: worked out once
            present = set(self.rows["task"].unique()) if "task" in self.rows else set()
            self._tasks = [t for t in self.meta.get("tasks", {}) if t in present]
        return self._tasks

    def task(self, name: str) -> TaskReference:
        if name in self._cache:
            return self._cache[name]
        if name not in self.tasks:
            near = close_matches(name, self.tasks).strip()
            # a wide reference's 65 names make a wall of text: 'tabpar suites' lists them
            listed = (", ".join(self.tasks) if len(self.tasks) <= MAX_LISTED_TASKS else
                      f"{len(self.tasks)} of them: 'tabpar suites' lists them")
            raise UserError(f"Task '{name}' is not in the {self.label}; choose one of its "
                            f"tasks ({listed})" + (f": {near[0].lower()}{near[1:]}"
                                                   if near else "."))
        rows = self.rows[self.rows["task"] == name].sort_values(["model", "seed"])
        metric = get_metric(rows["metric"].iloc[0])
        scores = {m: g["score"].astype(float).tolist() for m, g in rows.groupby("model")}
        means = {m: float(np.mean(v)) for m, v in scores.items()}
        ensembles = {m: means[m] for m in DEFAULT_ENSEMBLES if m in means}
        if "naive" not in means or not ensembles:
            raise UserError(f"The reference {self.folder} lacks the naive floor or the default "
                            f"ensembles for task '{name}'; rebuild it with every model.")
        sign = 1 if metric.lower_is_better else -1
        best_model = min(ensembles, key=lambda m: sign * ensembles[m])
        par = float(np.median(list(ensembles.values())))
        par_model = min(ensembles, key=lambda m: abs(ensembles[m] - par))
        best_scores = scores[best_model]
        ref = TaskReference(
            task=name, metric=metric.name, lower_is_better=metric.lower_is_better,
            fingerprint=self.meta["tasks"][name]["fingerprint"], scores=scores, means=means,
            naive=means["naive"], best=ensembles[best_model], best_model=best_model, par=par,
            par_model=par_model,
            seed_spread=_spread(best_scores))
        self._cache[name] = ref
        return ref

    def predictions(self, task: str, model: str, seed: int | None = None):
        """(row_id, prediction) of one reference job (the lowest seed when not given)."""
        rows = self.rows[(self.rows["task"] == task) & (self.rows["model"] == model)]
        if seed is not None:
            rows = rows[rows["seed"] == seed]
        rows = rows.sort_values("seed")
        if rows.empty or not isinstance(rows["predictions"].iloc[0], str):
            raise UserError(f"The reference {self.folder} has no stored predictions for "
                            f"{task}/{model}; rebuild it.")
        return read_predictions(self.folder / rows["predictions"].iloc[0], root=self.folder)

    def difficulties(self) -> dict:
        """Task → difficulty (1 − headroom taken), for every task of the reference."""
        return {t: self.task(t).difficulty for t in self.tasks}


def build_reference(suite: str = "default", out: str | Path | None = None, seeds: int = 3,
                    workers: int | None = None, progress: bool = False, command: str = "",
                    replace: bool = False):
    """Run every model of the zoo × ``seeds`` on ``suite`` into ``out`` and write provenance.

    ``out`` is required and must lie outside the installed package (the published references
    in a checkout are rebuilt with ``--out results/reference/SUITE``). Resumable: finished
    jobs of an interrupted build in ``out`` are kept, and an interrupted build writes no
    ``provenance.json`` (it is not a reference until it finishes). A finished reference is
    only rebuilt in place with ``replace=True``: its ``provenance.json`` is removed first, jobs
    of the same data and preparing code are reused, and the rows the rebuild superseded are
    dropped from ``jobs.jsonl``. Returns the RunResult.
    """
    if out is None:
        raise UserError("Say where to write the reference with --out DIR (in a checkout, "
                        "results/reference/SUITE rebuilds a published one).")
    refuse_inside_package(out, "The reference folder")
    out = Path(out)
    if (out / "provenance.json").is_file() and not replace:
        raise UserError(f"{out} already holds a finished reference; pass --replace to rebuild "
                        f"it there (its jobs are reused where nothing changed), or choose "
                        f"another --out.")
    if replace:  # until the rebuild finishes, the folder is not a finished reference
        (out / "provenance.json").unlink(missing_ok=True)
    started = time.monotonic()
    result = run_suite(suite=suite, seeds=seeds, out=out, workers=workers, progress=progress)
    if result.interrupted:
        return result  # no provenance: the folder stays a build to resume
    store = ResultsStore(out)
    store.open_for_writing()
    try:  # rows a rebuild superseded (other preparing code, a failed try) are not published
        superseded = store.compact()
    finally:
        store.close()
    frame = load_results(out)
    provenance = {
        # wall time of this invocation; a resumed build adds the jobs it reused from before
        "build_seconds": round(time.monotonic() - started),
        "jobs_reused": int(result.reused),
        "rows_superseded": superseded,
        "command": command or " ".join(["tabpar"] + sys.argv[1:]),
        "created_at": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "suite": result.suite, "seeds": seeds, "cores": available_cores(),
        "versions": library_versions(),
        "fingerprints": {t: info["fingerprint"] for t, info in result.tasks.items()},
        "jobs": int(len(frame)), "ok": int((frame["status"] == "ok").sum()),
    }
    atomic_write_text(out / "provenance.json", json.dumps(provenance, indent=2))
    return result


def model_gain_shares(reference: Reference, against: Reference | None = None) -> pd.DataFrame:
    """Gain share of each model's mean score per task (0 = naive, 1 = best default), long format.

    ``against``: measure ``reference``'s models on the naive/best of another reference (to
    overlay a new run on the published one). Columns: task, model, score, gain_share, difficulty.
    """
    import pandas as pd
    base = against or reference
    rows = []
    for task in reference.tasks:
        if task not in base.tasks:
            continue
        b = base.task(task)
        metric = get_metric(b.metric)
        scale = float(metric.gain(b.best, b.naive))
        for model, mean in reference.task(task).means.items():
            gain_share = float(metric.gain(mean, b.naive)) / scale if scale > 0 else float("nan")
            rows.append({"task": task, "model": model, "score": mean, "gain_share": gain_share,
                         "difficulty": b.difficulty})
    return pd.DataFrame(rows)
