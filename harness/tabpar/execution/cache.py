"""The prepared-array cache: each task is loaded, split and prepared once per data, definition,
procedure and preparing code, and its arrays kept on disk for every job (and process) to
memory-map."""
from __future__ import annotations

import hashlib
import json
import shutil
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from tabpar.common.files import atomic_folder
from tabpar.common.paths import CACHE_ENV, cache_root
from tabpar.common.system import release_freed_memory
from tabpar.common.text import plain
from tabpar.data.source_index import (
    known_fingerprint,
    remember_fingerprint,
    source_identity,
)
from tabpar.data.suites import Task
from tabpar.execution.provenance import preparation_code_digest, tabpar_version
from tabpar.procedure.variants import Procedure, builtin

ARRAYS = ("X_train", "y_train", "X_holdout", "y_holdout", "row_id")
META_KEYS = {"fingerprint", "classes", "feature_names", "n_train", "n_holdout",
             "split_description", "notes", "procedure", "leakage", "sha256"}


@dataclass
class PreparedTask:
    """A task after load → split → baseline procedure, with its arrays on disk."""

    task: Task
    folder: Path  # holds X_train.npy, y_train.npy, X_holdout.npy, y_holdout.npy, row_id.npy
    fingerprint: str
    classes: list
    feature_names: list
    n_train: int
    n_holdout: int
    split_description: str
    notes: list = field(default_factory=list)
    procedure: str = "builtin"
    leakage: str | None = None  # why the procedure learns from holdout rows (None: it does not)

    def summary(self) -> dict:
        return {"fingerprint": self.fingerprint, "task_key": self.task.key(),
                "metric": self.task.metric, "type": self.task.type,
                "lower_is_better": self.task.lower_is_better, "n_train": self.n_train,
                "n_holdout": self.n_holdout, "n_features": len(self.feature_names),
                "split": self.split_description, "notes": self.notes,
                "classes": [str(c) for c in self.classes], "procedure": self.procedure,
                "leakage": self.leakage, "definition": self.task.definition()}


def _entry_folder(task: Task, fingerprint: str, procedure: Procedure,
                  cache_dir: Path | None) -> Path:
    key_text = json.dumps({"task": task.key(), "fingerprint": fingerprint,
                           "procedure": procedure.key, "tabpar": tabpar_version(),
                           "code": preparation_code_digest()}, sort_keys=True)
    key = hashlib.sha256(key_text.encode()).hexdigest()[:16]
    return cache_root(cache_dir) / "prepared" / f"{task.name}-{key}"


def _read_meta(folder: Path) -> dict | None:
    """A cache entry's metadata, or None when the entry is missing, torn or incomplete (it is
    then prepared again and replaced)."""
    try:
        meta = json.loads((folder / "meta.json").read_text())
    except (OSError, ValueError):
        return None
    if not isinstance(meta, dict) or set(meta) != META_KEYS:
        return None
    try:  # a truncated array (a full disk, a copy cut short) is rebuilt, not read as EOF
        arrays = load_arrays(folder)
    except (OSError, ValueError):
        return None
    n_train, n_holdout = meta["n_train"], meta["n_holdout"]
    if [len(arrays[name]) for name in ARRAYS] != [n_train, n_train, n_holdout, n_holdout,
                                                  n_holdout]:
        return None
    if meta["sha256"] != _arrays_digest(folder):  # arrays replaced or damaged since written
        return None
    meta.pop("sha256")
    return meta


def _arrays_digest(folder: Path) -> str:
    """SHA-256 of the entry's array files, in ``ARRAYS`` order."""
    digest = hashlib.sha256()
    for name in ARRAYS:
        with open(folder / f"{name}.npy", "rb") as handle:
            while chunk := handle.read(1 << 22):
                digest.update(chunk)
    return digest.hexdigest()


def prepare_task(task: Task, cache_dir: Path | None = None,
                 procedure: Procedure | None = None) -> PreparedTask:
    """Load, split and prepare one task with ``procedure`` (default: the built-in baseline),
    or reuse its cached arrays.

    The source is read unless its file is unchanged since its fingerprint was taken
    (``tabpar.data.source_index``), so a change to the data (a new fingerprint) is never
    served stale arrays.
    """
    procedure = procedure or builtin()
    known = known_fingerprint(task, cache_dir)
    if known is not None:  # the warm path: no decompressing, no hashing
        folder = _entry_folder(task, known, procedure, cache_dir)
        meta = _read_meta(folder)
        if meta is not None and meta["fingerprint"] == known:
            return PreparedTask(task=task, folder=folder, **meta)
    identity = source_identity(task)  # before reading: a change during the read shows later
    # imported on a miss only: loading and preparing pull in pandas and scikit-learn, which a
    # run served wholly from the cache never needs
    from tabpar.data.sources import load_task
    from tabpar.data.split import split_loaded
    from tabpar.procedure.prepare import prepare_split

    loaded = load_task(task)
    remember_fingerprint(task, identity, loaded.fingerprint, cache_dir)
    folder = _entry_folder(task, loaded.fingerprint, procedure, cache_dir)
    meta = _read_meta(folder)
    if meta is not None:
        del loaded
        release_freed_memory()  # the source and task frames are gone: hand their pages back
        return PreparedTask(task=task, folder=folder, **meta)
    fingerprint, notes = loaded.fingerprint, loaded.notes
    rows = split_loaded(loaded)
    del loaded  # prepare_split drops the rows from ``rows`` once it has cut both sides
    prepared = prepare_split(task, rows, procedure)
    meta = {"fingerprint": fingerprint, "classes": [plain(c) for c in prepared.classes],
            "feature_names": prepared.feature_names, "n_train": len(prepared.y_train),
            "n_holdout": len(prepared.y_holdout), "split_description": rows.split.description,
            "notes": notes + rows.split.notes, "procedure": procedure.name,
            "leakage": prepared.leakage}
    if folder.exists():  # a torn entry: replace it whole
        shutil.rmtree(folder, ignore_errors=True)
    # never a half-written entry; another process's entry with the same key is identical
    with atomic_folder(folder, replace=False, fix=f"set {CACHE_ENV} to a writable folder with "
                       f"free space (tabpar cache clear frees this one)") as tmp:
        for name in ARRAYS:
            np.save(tmp / f"{name}.npy", getattr(prepared, name))
        # the folder is the atomic unit; the arrays' hash catches an entry replaced later
        (tmp / "meta.json").write_text(json.dumps({**meta, "sha256": _arrays_digest(tmp)}))
    return PreparedTask(task=task, folder=folder, **meta)


def cache_info(cache_dir: Path | None = None) -> dict:
    """What the prepared-array cache holds: folder, entries (task, MB), total MB."""
    root = cache_root(cache_dir) / "prepared"
    entries = []
    for folder in sorted(root.glob("*")) if root.is_dir() else []:
        if not (folder / "meta.json").exists():
            continue
        size = sum(f.stat().st_size for f in folder.iterdir() if f.is_file())
        meta = _read_meta(folder)  # None: torn (prepared again when next used)
        entries.append({"entry": folder.name, "task": folder.name.rsplit("-", 1)[0],
                        "procedure": meta["procedure"] if meta else "torn, rebuilt when used",
                        "rows": meta["n_train"] + meta["n_holdout"] if meta else 0,
                        "mb": size / 1e6})
    return {"folder": str(root), "entries": entries,
            "total_mb": sum(e["mb"] for e in entries)}


def cache_clear(cache_dir: Path | None = None) -> int:
    """Delete every prepared-array entry; returns how many were removed."""
    import shutil

    root = cache_root(cache_dir) / "prepared"
    removed = 0
    for folder in sorted(root.glob("*")) if root.is_dir() else []:
        shutil.rmtree(folder, ignore_errors=True)
        removed += 1
    return removed


def load_arrays(folder: Path) -> dict:
    """A cache entry's arrays, memory-mapped read-only (``ARRAYS`` are the keys).

    FileNotFoundError naming the entry when it was removed meanwhile (``tabpar cache clear``
    while a run used it): that job fails, and the next run prepares the entry again.
    """
    try:
        return {name: np.load(Path(folder) / f"{name}.npy", mmap_mode="r")
                for name in ARRAYS}
    except FileNotFoundError:
        raise FileNotFoundError(f"the prepared-array cache entry {folder} was removed while "
                                f"in use (tabpar cache clear?); run again to prepare it "
                                f"anew") from None
