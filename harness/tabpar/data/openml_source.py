"""OpenML tasks as a source (``openml:TASK_ID``), through the optional ``openml`` package.

Rows, target and task type come from the OpenML task: ``openml.tasks.get_task``, then
``task.get_dataset()`` and ``dataset.get_data(target=task.target_name)``; the columns OpenML marks
as row ids or to be ignored are left out (the package's defaults), as the suite rules drop row
numbers. The suite file still names ``target`` and ``type``; loading checks they agree with the
OpenML task, so a suite never silently scores another target than it says.

Holdout: the suite's own holdout policy (DEVELOPERS.md, "Suite files"), not the task's OpenML
splits. Every tabpar task is then split by the same code, ``tabpar export`` and the references work
unchanged, and nothing is lost for comparability: OpenML's run evaluations average over every fold
of the task's estimation procedure (e.g. 10-fold cross-validation), which a single fold 0 would not
reproduce either. Placement against an OpenML leaderboard says so.

Cache: everything fetched goes under ``$TABPAR_OPENML_CACHE`` (default
``~/.cache/tabpar/openml``): the openml package's own downloads, and tabpar's copy of each task's
rows and description in ``tabpar/task-ID/``. The package is pointed there only for tabpar's own
calls, and its setting restored after each, so a user's own openml calls are unaffected. A task
found there is read without any network call, so a second run works offline; a torn copy is one
sentence naming the folder to delete. Before the first call to the server a short connection probe
(``PROBE_SECONDS``) checks it can be reached: without a network every OpenML path fails within
seconds with one sentence, instead of after the package's retries.
"""
from __future__ import annotations

import json
import os
import socket
import threading
import urllib.parse
import urllib.request
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.files import (
    atomic_folder,
    check_fields,
    read_state_json,
    read_state_parquet,
)
from tabpar.common.paths import OPENML_CACHE_ENV as CACHE_ENV
from tabpar.common.paths import openml_cache

# what tabpar's copy of a task's description must hold (task.json)
TASK_FIELDS = {"task_id": int, "type": str, "target": str, "class_labels": list,
               "dataset_id": int}
PROBE_SECONDS = 5.0  # a reachable server answers a TCP connect far faster than this
# OpenML's task type ids (openml.tasks.TaskType): 1 supervised classification, 2 regression
_CLASSIFICATION, _REGRESSION = 1, 2


def openml_cache_dir() -> Path:
    """The OpenML cache folder: $TABPAR_OPENML_CACHE, else ``tabpar/openml`` in the user's cache."""
    return openml_cache()


def parse_task_id(text) -> int:
    """The integer id of ``openml:ID`` / ``ID``; UserError for anything else."""
    raw = str(text).strip()
    raw = raw[len("openml:"):] if raw.startswith("openml:") else raw
    if not raw.isdigit() or int(raw) < 1:
        raise UserError(f"OpenML task id '{text}' is not a positive whole number; write it as "
                        f"on openml.org, e.g. openml:31.")
    return int(raw)


def import_openml():
    """The ``openml`` package; UserError when it is missing or fails to start.

    Imported as the package configures itself (its own cache folder, the user's config file),
    so a notebook user's own openml calls are unaffected; tabpar points it at its cache only
    during its own calls (``openml_session``). When the package cannot create its default
    folder (e.g. an unusable HOME), the import is retried with tabpar's cache folder.
    """
    try:
        import openml
    except ImportError:
        raise UserError("OpenML tasks and leaderboards need the openml package, which is not "
                        "installed; run pip install 'tabpar[openml]'.") from None
    except OSError:
        openml = _import_in(openml_cache_dir())
    return openml


def _import_in(root: Path):
    """``import openml`` with its folder set to ``root`` for that moment (a retry after the
    package failed to create its default folder)."""
    previous = os.environ.get("OPENML_CACHE_DIR")
    os.environ["OPENML_CACHE_DIR"] = str(root)
    try:
        import openml
    except OSError as exc:
        raise UserError(f"The openml package cannot create its cache folder ({exc.strerror}: "
                        f"{exc.filename or root}); set HOME or {CACHE_ENV} to a writable "
                        f"folder.") from None
    finally:
        if previous is None:
            os.environ.pop("OPENML_CACHE_DIR", None)
        else:
            os.environ["OPENML_CACHE_DIR"] = previous
    return openml


@contextmanager
def openml_session():
    """The ``openml`` package with its cache at ``openml_cache_dir()`` for the block; its own
    setting is restored afterwards, so later openml calls of the user land where they did."""
    openml = import_openml()
    previous = openml.config.get_config_as_dict()["cachedir"]
    openml.config.set_root_cache_directory(str(openml_cache_dir()))
    try:
        yield openml
    finally:
        openml.config.set_root_cache_directory(previous)


def _target_of(server_url: str) -> tuple[str, int]:
    """(host, port) a request to ``server_url`` first connects to: the proxy when one is set."""
    parts = urllib.parse.urlsplit(server_url)
    scheme = parts.scheme or "https"
    proxy = urllib.request.getproxies().get(scheme)
    if proxy and not urllib.request.proxy_bypass(parts.hostname or ""):
        proxied = urllib.parse.urlsplit(proxy if "//" in proxy else f"http://{proxy}")
        return proxied.hostname or "", proxied.port or 80
    return parts.hostname or "", parts.port or (443 if scheme == "https" else 80)


def _reach(host: str, port: int, timeout: float = PROBE_SECONDS) -> str | None:
    """None when a TCP connection to host:port opens within ``timeout`` seconds, else why not.

    Runs in a daemon thread so a stalled name lookup (which has no timeout) cannot hang us.
    """
    outcome: dict = {}

    def attempt():
        try:
            with socket.create_connection((host, port), timeout=timeout):
                outcome["ok"] = True
        except OSError as exc:
            outcome["error"] = exc.strerror or str(exc) or exc.__class__.__name__

    thread = threading.Thread(target=attempt, daemon=True)
    thread.start()
    thread.join(timeout + 1.0)
    if outcome.get("ok"):
        return None
    return outcome.get("error", f"no answer within {timeout:g} s")


class OfflineError(UserError):
    """The OpenML server could not be reached (callers with a cached copy may fall back)."""


def offline_error(what: str, host: str, reason: str) -> OfflineError:
    return OfflineError(f"Could not fetch {what}: the OpenML server {host} cannot be reached "
                     f"({reason}) and the cache folder {openml_cache_dir()} has nothing for it; "
                     f"connect to the network once, or set {CACHE_ENV} to a folder that already "
                     f"holds it.")


@contextmanager
def server_calls(openml, what: str):
    """Probe the server, then run the block; network and server failures become UserError."""
    host, port = _target_of(openml.config.server)
    reason = _reach(host, port)
    if reason is not None:
        raise offline_error(what, host, reason)
    import requests

    try:
        yield
    except UserError:
        raise
    except openml.exceptions.OpenMLServerException as exc:
        raise UserError(f"The OpenML server refused {what} ({exc.message}, code {exc.code}); "
                        f"check the id on openml.org.") from None
    except (requests.exceptions.RequestException, openml.exceptions.OpenMLServerError) as exc:
        raise offline_error(what, host, exc.__class__.__name__) from None
    except openml.exceptions.PyOpenMLError as exc:  # e.g. a private dataset
        reason = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
        raise UserError(f"The openml package could not fetch {what} "
                        f"({exc.__class__.__name__}{': ' + reason[:200] if reason else ''}); "
                        f"check the id on openml.org (a private dataset needs your API key "
                        f"in openml's configuration).") from None
    except OSError as exc:  # the cache folder, not the network
        raise UserError(f"Cannot write the OpenML cache folder {openml_cache_dir()} "
                        f"({exc.strerror}); set {CACHE_ENV} to a writable folder.") from None


def _task_folder(task_id: int) -> Path:
    return openml_cache_dir() / "tabpar" / f"task-{task_id}"


def _describe(task, task_id: int) -> dict:
    """The plain-data facts tabpar needs from an OpenMLTask."""
    type_id = getattr(task.task_type_id, "value", task.task_type_id)
    if type_id == _CLASSIFICATION:
        labels = [str(c) for c in (getattr(task, "class_labels", None) or [])]
        kind = "binary" if len(labels) == 2 else "multiclass"
    elif type_id == _REGRESSION:
        labels, kind = [], "regression"
    else:
        raise UserError(f"OpenML task {task_id} is a '{getattr(task, 'task_type', type_id)}' "
                        f"task; tabpar takes supervised classification and regression tasks "
                        f"only.")
    procedure = getattr(task, "estimation_procedure", None) or {}
    return {"task_id": task_id, "type": kind, "target": str(task.target_name),
            "class_labels": labels, "dataset_id": int(task.dataset_id),
            "evaluation_measure": getattr(task, "evaluation_measure", None),
            "estimation_procedure": procedure.get("type") if isinstance(procedure, dict)
            else None}


def _get_data(dataset, target: str) -> tuple[pd.DataFrame, pd.Series]:
    import pandas as pd
    X, y, _, _ = dataset.get_data(target=target)  # a DataFrame by default since openml 0.15
    if not isinstance(X, pd.DataFrame):
        raise UserError(f"The openml package returned the data of dataset {dataset.dataset_id} "
                        f"as {type(X).__name__}, not a DataFrame; upgrade it with pip install "
                        f"-U openml.")
    return X, pd.Series(y, name=target)


def _fetch_task(task_id: int, with_rows: bool) -> None:
    """Download task ``task_id`` (and its rows) into the cache; one folder, renamed when whole."""
    what = f"OpenML task {task_id}" + (" and its rows" if with_rows else "")
    with openml_session() as openml, server_calls(openml, what):
        task = openml.tasks.get_task(task_id, download_splits=False, download_data=False,
                                     download_qualities=False)
        info = _describe(task, task_id)
        frame = None
        if with_rows:
            dataset = task.get_dataset()
            X, y = _get_data(dataset, info["target"])
            if info["target"] in X.columns:
                X = X.drop(columns=[info["target"]])
            frame = X.reset_index(drop=True)
            frame[info["target"]] = y.reset_index(drop=True)
            info.update(dataset_name=str(dataset.name),
                        dataset_version=getattr(dataset, "version", None), n_rows=len(frame))
    info["fetched_at"] = datetime.now(timezone.utc).isoformat(timespec="seconds")
    folder = _task_folder(task_id)
    try:
        # the folder appears complete or not at all
        with atomic_folder(folder, fix=f"set {CACHE_ENV} to a writable folder") as tmp:
            if frame is not None:
                frame.to_parquet(tmp / "rows.parquet", index=False)
            (tmp / "task.json").write_text(json.dumps(info, indent=2), encoding="utf-8")
    except UserError:
        if not (folder / "task.json").exists():  # else another process cached it first
            raise


def openml_task_info(task_id) -> dict:
    """What tabpar knows of an OpenML task: type (regression / binary / multiclass), target,
    class labels, dataset id, evaluation measure; from the cache when it is there."""
    task_id = parse_task_id(task_id)
    path = _task_folder(task_id) / "task.json"
    if not path.exists():
        _fetch_task(task_id, with_rows=False)
    info = read_state_json(path, _refetch(task_id))
    check_fields(info, TASK_FIELDS, str(path), _refetch(task_id))
    return info


def _refetch(task_id: int) -> str:
    return f"delete the folder {_task_folder(task_id)} so it is downloaded again"


def load_openml(what: str) -> pd.DataFrame:
    """The rows of OpenML task ``what`` (its id), target column included, from the cache when
    there, else downloaded into it. Returned as read back from the cache, so the first and later
    runs see identical rows (and fingerprints)."""
    task_id = parse_task_id(what)
    rows = _task_folder(task_id) / "rows.parquet"
    if not rows.exists():
        _fetch_task(task_id, with_rows=True)
    return read_state_parquet(rows, _refetch(task_id))


def check_openml_task(task) -> None:
    """UserError unless the suite task's target, type and positive class match the OpenML task."""
    info = openml_task_info(task.source)
    where = f"task '{task.name}' (source {task.source})"
    if task.derive_target is not None:  # the suite makes its own target from a column
        return
    if task.target != info["target"]:
        raise UserError(f"{where} sets target '{task.target}', but the OpenML task predicts "
                        f"'{info['target']}'; set target = \"{info['target']}\".")
    if task.type != info["type"]:
        raise UserError(f"{where} sets type '{task.type}', but the OpenML task is "
                        f"{info['type']}; set type = \"{info['type']}\".")
    labels = info["class_labels"]
    if task.type == "binary" and labels and str(task.positive) not in labels:
        raise UserError(f"{where} sets positive = '{task.positive}', which is not a class of "
                        f"the OpenML task ({', '.join(labels)}); choose one of them.")
