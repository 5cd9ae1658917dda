"""Leaderboards: published scores for one task, stored so a score can be placed against them.

Two kinds: a file of entries a user brings (``import_leaderboard``) and the run evaluations of an
OpenML task (``pull_openml``). A stored leaderboard is two files in a store folder, each written
atomically: ``NAME.HASH.parquet`` (the entries, one row each, columns kept as they came, named
by their content so a replacement never overwrites the entries in use) and ``NAME.json``
(what placement needs: task, score column, direction, metric when known; and the
provenance: source, counts, dates, a checksum of the entries file).

The store folder is ``--store DIR``, else ``$TABPAR_LEADERBOARDS``, else
``$XDG_DATA_HOME/tabpar/leaderboards`` (default ``~/.local/share/tabpar/leaderboards``). Looking a
name up searches the store, then the repository's ``results/leaderboards/``, which holds only the
leaderboards the project publishes. Names become file names: anything but letters, digits,
``_``, ``-`` and ``.`` is replaced by ``-``, so nothing is ever written outside the store folder.

Ranking against a leaderboard is ``tabpar.leaderboards.placing``; OpenML run evaluations come
through ``tabpar.leaderboards.openml_runs``.
"""
from __future__ import annotations

import difflib
import hashlib
import json
import re
import warnings
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.files import (
    StateWarning,
    atomic_write_bytes,
    atomic_write_text,
    check_fields,
    open_regular,
    read_state_json,
    read_state_parquet,
)
from tabpar.common.metrics import Metric, get_metric
from tabpar.common.paths import LEADERBOARDS_ENV as STORE_ENV
from tabpar.common.paths import leaderboard_store
from tabpar.common.text import plain
from tabpar.evaluation.reference import published_root
from tabpar.execution.provenance import tabpar_version

FORMAT = 1  # bump when a change makes stored leaderboards unreadable
MIN_ENTRIES = 2
MAX_NAME = 100
_UNSAFE = re.compile(r"[^A-Za-z0-9_.-]+")

# tabpar metric → OpenML evaluation measure (names as the OpenML server lists them). R², RMSLE
# and log loss have no OpenML run evaluation to map to.
# columns of list_evaluations' DataFrame kept per run; the per-fold lists ("values") and
# per-class strings ("array_data") are left out, and so is the uploader's name (the id is kept)
def now_iso() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def store_dir(store: str | Path | None = None) -> Path:
    """The leaderboard store: ``store``, else $TABPAR_LEADERBOARDS, else the user's data folder."""
    return leaderboard_store(store)


def published_dir() -> Path:
    """The repository's ``results/leaderboards/`` (leaderboards the project publishes)."""
    return published_root() / "leaderboards"


def sanitise_name(name) -> str:
    """``name`` as a safe file stem: letters, digits, ``_ - .``; other runs of characters → ``-``."""
    clean = _UNSAFE.sub("-", str(name)).strip(".-")[:MAX_NAME].strip(".-")
    if not clean:
        raise UserError(f"The leaderboard name {str(name)!r} has no letters or digits; choose "
                        f"a name with --name.")
    return clean


def _paths(name: str, folder: Path) -> tuple[Path, Path]:
    """(entries, meta) paths of ``name`` inside ``folder``; never outside it."""
    folder = folder.resolve()
    data, meta = folder / f"{name}.parquet", folder / f"{name}.json"
    if data.resolve().parent != folder or meta.resolve().parent != folder:
        raise UserError(f"The leaderboard name '{name}' would leave the store {folder}; choose "
                        f"another with --name.")
    return data, meta


@dataclass
class Leaderboard:
    """A stored leaderboard: its entries and what they mean.

    ``scores`` are in the units of the leaderboard's score column; ``lower_is_better`` says their
    direction.
    """

    name: str
    path: Path  # the NAME.json file
    meta: dict
    entries: pd.DataFrame

    @property
    def task(self) -> str:
        return str(self.meta["task"])

    @property
    def score_column(self) -> str:
        return str(self.meta["score_column"])

    @property
    def lower_is_better(self) -> bool:
        return bool(self.meta["lower_is_better"])

    @property
    def metric(self) -> str | None:
        """The tabpar metric the scores are in, when known (None: only the direction is)."""
        return self.meta.get("metric")

    @property
    def kind(self) -> str:
        return str(self.meta.get("kind", "imported"))

    @property
    def scores(self) -> np.ndarray:
        return self.entries[self.score_column].to_numpy(dtype=float)

    def gain(self, score, reference):
        """Positive when ``score`` is better than ``reference`` (the leaderboard's direction).

        The same arithmetic as ``Metric.gain``, which reads only ``lower_is_better``; so the
        placement helpers that take a metric take a leaderboard too.
        """
        return Metric.gain(self, score, reference)

    @property
    def best(self) -> float:
        """The best entry's score (lowest when lower is better)."""
        s = self.scores
        return float(s.min() if self.lower_is_better else s.max())

    def ranked(self) -> np.ndarray:
        """Entry scores sorted best first."""
        s = np.sort(self.scores)
        return s if self.lower_is_better else s[::-1]

    def summary(self) -> dict:
        return _summary(self.meta, self.path)

    def __str__(self) -> str:
        s = self.summary()
        return (f"{s['name']}: task {s['task']}, {s['entries']} entries, {s['direction']}, "
                f"best {self.best:.4g} ({s['kind']}; {s['where']})")


def _direction(lower_is_better: bool) -> str:
    return "lower is better" if lower_is_better else "higher is better"


def _summary(meta: dict, path: Path) -> dict:
    return {"name": meta["name"], "task": meta["task"], "kind": meta.get("kind", "imported"),
            "view": meta.get("view", ""), "metric": meta.get("metric"),
            "score_column": meta["score_column"],
            "direction": _direction(bool(meta["lower_is_better"])),
            "entries": int(meta["n_entries"]), "created_at": meta.get("created_at", ""),
            "where": str(path.parent)}


def validate_scores(frame: pd.DataFrame, column: str, where: str) -> np.ndarray:
    """The score column as finite floats; UserError naming the first bad value otherwise."""
    import pandas as pd
    if column not in frame.columns:
        close = difflib.get_close_matches(str(column), [str(c) for c in frame.columns], n=3,
                                          cutoff=0.5)
        hint = f" (did you mean {', '.join(repr(c) for c in close)}?)" if close else ""
        shown = ", ".join(str(c) for c in list(frame.columns)[:12])
        raise UserError(f"{where} has no column '{column}'{hint}; its columns are {shown}, so "
                        f"pass the score column's name with --score-column.")
    raw = frame[column]
    if pd.api.types.is_bool_dtype(raw):
        raise UserError(f"Column '{column}' of {where} holds true/false values, not scores; "
                        f"choose the numeric score column.")
    values = pd.to_numeric(raw, errors="coerce")
    bad = values.isna().to_numpy()
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        kind = "missing" if pd.isna(raw.iloc[i]) else f"not a number ({plain(raw.iloc[i])!r})"
        raise UserError(f"The score in column '{column}' of {where} is {kind} at data row "
                        f"{i + 1}; fix or remove that entry.")
    values = values.to_numpy(dtype=float)
    if not np.isfinite(values).all():
        i = int(np.flatnonzero(~np.isfinite(values))[0])
        raise UserError(f"The score in column '{column}' of {where} is infinite ({values[i]}) "
                        f"at data row {i + 1}; fix or remove that entry.")
    if len(values) < MIN_ENTRIES:
        raise UserError(f"{where} has {len(values)} entry; a leaderboard needs at least "
                        f"{MIN_ENTRIES} to rank a score against.")
    return values


def _suite_metric(task: str, suite: str | Path | None) -> str | None:
    """The metric of ``task`` in ``suite`` (or in the built-in suites when they agree)."""
    from tabpar.data.suites import list_builtin_suites, load_suite

    if suite is not None:
        return load_suite(suite).task(task).metric
    metrics = {t.metric for path in list_builtin_suites() for t in load_suite(path).tasks
               if t.name == task}
    return metrics.pop() if len(metrics) == 1 else None


def save_leaderboard(entries: pd.DataFrame, meta: dict, name: str, store, replace: bool) -> Leaderboard:
    folder = store_dir(store)
    data_path, meta_path = _paths(name, folder)
    try:
        payload = entries.to_parquet(index=False)
    except Exception as exc:  # pyarrow raises several types for columns it cannot store
        raise UserError(f"The entries of leaderboard '{name}' cannot be stored as Parquet "
                        f"({exc.__class__.__name__}: {str(exc).splitlines()[0]}); give every "
                        f"column values of one type.") from None
    digest = hashlib.sha256(payload).hexdigest()
    # the entries file is named by its content, so writing it never touches the entries the
    # current meta file points to; switching the meta file (one atomic rename) is the commit
    data_path = data_path.with_name(f"{name}.{digest[:12]}.parquet")
    previous = None
    if meta_path.exists():
        try:
            previous = json.loads(meta_path.read_text(encoding="utf-8")).get("entries_file")
        except (OSError, ValueError):
            previous = None
    meta = {"format": FORMAT, "name": name, **meta, "entries_file": data_path.name,
            "entries_sha256": digest, "created_at": now_iso()}
    fix = f"choose another store with --store or {STORE_ENV}, or free disk space there"
    try:
        folder.mkdir(parents=True, exist_ok=True)
        atomic_write_bytes(data_path, payload, fix)
        atomic_write_text(meta_path, json.dumps(meta, indent=2, default=str), fix)
    except OSError as exc:
        raise UserError(f"Cannot write to the leaderboard store {folder} ({exc.strerror}); "
                        f"choose another with --store or {STORE_ENV}.") from None
    if previous and previous != data_path.name:
        (folder / Path(previous).name).unlink(missing_ok=True)
    return Leaderboard(name=name, path=meta_path, meta=meta,
                       entries=entries.reset_index(drop=True))


def refuse_existing(names, store, replace: bool) -> None:
    folder = store_dir(store)
    for name in names:
        if not replace and _paths(name, folder)[1].exists():
            raise UserError(f"A leaderboard named '{name}' is already stored in {folder}; "
                            f"choose another --name, or pass --replace to overwrite it.")


def import_leaderboard(path: str | Path, task: str, score_column: str,
                       lower_is_better: bool | None = None, name: str | None = None,
                       store: str | Path | None = None, suite: str | Path | None = None,
                       replace: bool = False) -> Leaderboard:
    """Store the entries of a CSV / Parquet file as a leaderboard for ``task``.

    ``lower_is_better``: the scores' direction; when None, taken from the metric of ``task`` in
    ``suite`` (default: the built-in suites), and a UserError when the task is not known there.
    Nothing is written unless every score is a finite number and there are at least two.
    """
    from tabpar.data.sources import read_table
    path = Path(path)
    task = str(task).strip()
    if not task:
        raise UserError("Give the task the leaderboard is for with --task.")
    frame = read_table(path)
    validate_scores(frame, score_column, str(path))
    known = _suite_metric(task, suite)
    if lower_is_better is None:
        if known is None:
            raise UserError(f"Task '{task}' is not a task of a known suite, so the direction of "
                            f"'{score_column}' is unknown; pass --lower-is-better or "
                            f"--higher-is-better.")
        lower_is_better = get_metric(known).lower_is_better
        metric, direction_from = known, f"the metric of suite task '{task}' ({known})"
    else:
        flag = "--lower-is-better" if lower_is_better else "--higher-is-better"
        # a known task's metric is recorded only when the direction agrees with it
        agrees = known is not None and get_metric(known).lower_is_better == lower_is_better
        metric, direction_from = (known if agrees else None), flag
    name = sanitise_name(name if name is not None else path.stem)
    refuse_existing([name], store, replace)
    with open_regular(path, "File", fix="give a CSV or Parquet file") as handle:
        data = handle.read()  # for the checksum of what was imported
    meta = {"kind": "imported", "view": "as published", "task": task,
            "score_column": str(score_column), "lower_is_better": bool(lower_is_better),
            "metric": metric, "direction_from": direction_from, "n_entries": len(frame),
            "columns": [str(c) for c in frame.columns],
            "source": {"file": str(path.resolve()), "bytes": len(data),
                       "sha256": hashlib.sha256(data).hexdigest()},
            "tabpar": tabpar_version()}
    return save_leaderboard(frame, meta, name, store, replace)


# what a stored leaderboard's meta file must hold, and of which JSON type
META_FIELDS = {"format": int, "name": str, "task": str, "score_column": str,
               "lower_is_better": bool, "n_entries": int, "entries_file": str,
               "entries_sha256": str}


def _read_meta(meta_path: Path) -> dict:
    """A leaderboard's meta file, checked against ``META_FIELDS`` (so ``"no"`` is never read
    as a direction)."""
    fix = "import or pull it again with --replace, or delete it"
    meta = read_state_json(meta_path, fix, what=f"The leaderboard {meta_path}")
    check_fields(meta, META_FIELDS, f"The leaderboard {meta_path}", fix)
    if meta["format"] != FORMAT:
        raise UserError(f"The leaderboard {meta_path} was stored in format {meta['format']}, "
                        f"this tabpar reads {FORMAT}; {fix}.")
    return meta


def _read(meta_path: Path) -> Leaderboard:
    meta = _read_meta(meta_path)
    fix = "import or pull it again with --replace"
    entries_path = meta_path.parent / Path(meta["entries_file"]).name
    try:
        with open_regular(entries_path, "The entries file", fix=fix) as handle:
            payload = handle.read()
    except UserError:
        raise UserError(f"The entries file {entries_path} of leaderboard {meta_path} is missing "
                        f"or not a file; {fix}.") from None
    if hashlib.sha256(payload).hexdigest() != meta.get("entries_sha256"):
        raise UserError(f"The entries of leaderboard {meta_path} do not match its meta file "
                        f"(changed, or an interrupted write); {fix}.")
    entries = read_state_parquet(entries_path, fix)
    if meta["score_column"] not in entries.columns:
        raise UserError(f"The entries of leaderboard {meta_path} lack its score column "
                        f"'{meta['score_column']}'; {fix}.")
    return Leaderboard(name=meta["name"], path=meta_path, meta=meta, entries=entries)


def _folders(store) -> list[Path]:
    """The store, then the published folder (once, when the store is the published folder)."""
    folders = [store_dir(store), published_dir()]
    return folders[:1] if folders[0].resolve() == folders[1].resolve() else folders


def load_leaderboard(name: str, store: str | Path | None = None) -> Leaderboard:
    """A stored leaderboard by name: the store first, then the published ones."""
    clean = sanitise_name(name)
    for folder in _folders(store):
        meta_path = _paths(clean, folder)[1]
        if meta_path.is_file():
            return _read(meta_path)
    names = sorted({s["name"] for s in list_leaderboards(store)})
    listing = f"stored ones are {', '.join(names)}" if names else "none is stored yet"
    raise UserError(f"No leaderboard named '{clean}' in {store_dir(store)} or "
                    f"{published_dir()}; {listing} (tabpar leaderboard list), or add one with "
                    f"tabpar leaderboard import.")


def list_leaderboards(store: str | Path | None = None) -> list[dict]:
    """Summaries (name, task, kind, metric, direction, entries, where) of every stored and
    published leaderboard; the store's first."""
    found = []
    for folder in _folders(store):
        for meta_path in sorted(folder.glob("*.json")) if folder.is_dir() else []:
            try:
                found.append(_summary(_read_meta(meta_path), meta_path))
            except UserError as exc:  # listed without it; loading it by name says the same
                warnings.warn(f"{exc} (left out of the list)", StateWarning, stacklevel=2)
    return found
