"""The results store: one folder per run, append-only and crash-safe.

``OUT/jobs.jsonl`` holds one JSON object per finished job, written with a single ``write`` and
flushed to disk before the next job is recorded. A last line cut short by a crash is skipped
with a warning (and cut off before the next append); any other line that is not a job record is
refused with its line number, as is a ``run.json`` that is torn or of the wrong shape.
``OUT/predictions/TASK/MODEL-seedN.parquet`` holds each job's holdout predictions (``row_id``, ``prediction`` or one ``proba_K`` column per class). ``OUT/run.json`` describes the
run (suite, tasks, fingerprints) so a rerun can resume or refuse to mix.
"""
from __future__ import annotations

import json
import math
import os
import warnings
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.files import (
    NUMBER_OR_NULL,
    TEXT_OR_NULL,
    StateWarning,
    atomic_write_bytes,
    atomic_write_text,
    check_fields,
    open_regular,
    read_state_json,
    read_state_parquet,
)

JOBS_FILE = "jobs.jsonl"
RUN_FILE = "run.json"
LOCK_FILE = ".lock"
STORE_FORMAT = 1  # bump when a change makes old folders unreadable
# what every job row must hold, and of which JSON type; then the keys checked when present
# (rows copied between folders may lack them); other keys are free
JOB_FIELDS = {"task": str, "model": str, "seed": int, "status": str, "metric": str,
              "score": NUMBER_OR_NULL}
JOB_OPTIONAL = {"lower_is_better": bool, "train_score": NUMBER_OR_NULL,
                "fit_seconds": NUMBER_OR_NULL, "fingerprint": str, "error": TEXT_OR_NULL,
                "predictions": TEXT_OR_NULL}
RUN_FIELDS = {"format": int, "suite": str, "tasks": dict}


def read_job_rows(path: Path) -> list[dict]:
    """Every job row of a jobs file, each checked against ``JOB_FIELDS``.

    A last line without its newline is a write a crash cut short (or one still being written):
    it is skipped with a ``StateWarning``. Any other line that is not a job record (torn in the
    middle, another JSON type, a field of the wrong type, an ok job without a finite score) is
    a UserError naming the line and the fix. A missing file has no rows.
    """
    path = Path(path)
    if not os.path.lexists(path):
        return []
    fix_line = ("delete that line (its job runs again on the next run into this folder), or "
                "use another --out")
    rows = []
    with open_regular(path, "The jobs file", fix="delete it, or use another --out") as handle:
        for number, line in enumerate(handle, start=1):
            if not line.endswith(b"\n"):
                warnings.warn(f"line {number} of {path} is incomplete (a crash cut it short, or "
                              f"a run is still writing it); it is skipped, and its job runs "
                              f"again on the next run into that folder", StateWarning,
                              stacklevel=2)
                break
            if not line.strip():
                continue
            where = f"Line {number} of {path}"
            try:
                row = json.loads(line)
            except ValueError:
                raise UserError(f"{where} is torn or not JSON; {fix_line}.") from None
            if not isinstance(row, dict):
                raise UserError(f"{where} is not a JSON object; {fix_line}.")
            check_fields(row, {**JOB_FIELDS, **{k: v for k, v in JOB_OPTIONAL.items()
                                                if k in row}}, where, fix_line)
            if row["status"] == "ok" and not (row["score"] is not None
                                              and math.isfinite(row["score"])):
                raise UserError(f"{where} is an ok job without a finite score "
                                f"({row['score']!r}); {fix_line}.")
            rows.append(row)
    return rows


def read_run_meta(folder: str | Path) -> dict | None:
    """A results folder's ``run.json``, checked against ``RUN_FIELDS`` (None when absent)."""
    path = Path(folder) / RUN_FILE
    if not os.path.lexists(path):
        return None
    fix = "use another --out, or delete that folder to start it afresh"
    meta = read_state_json(path, fix)
    check_fields(meta, RUN_FIELDS, str(path), fix)
    for name, info in meta["tasks"].items():
        if not isinstance(info, dict) or not isinstance(info.get("fingerprint"), str):
            raise UserError(f"{path} describes task '{name}' without a data fingerprint; "
                            f"{fix}.")
    return meta


class ResultsStore:
    """Reads and appends the results of one run folder."""

    def __init__(self, folder: str | Path):
        self.folder = Path(folder)
        self.jobs_path = self.folder / JOBS_FILE
        self._lock_handle = None

    # --- folder lifecycle -------------------------------------------------------------
    def open_for_writing(self) -> None:
        """Create the folder and take its lock; UserError if unwritable or already in use."""
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
            probe = self.folder / f".write-test-{os.getpid()}"
            probe.write_bytes(b"")
            probe.unlink()
        except OSError as exc:
            raise UserError(f"Cannot write to the output folder {self.folder} "
                            f"({exc.strerror}); choose another with --out.") from None
        import fcntl

        try:
            handle = open(self.folder / LOCK_FILE, "a+")
        except OSError as exc:
            raise UserError(f"Cannot open the lock file {self.folder / LOCK_FILE} "
                            f"({exc.strerror}); delete it (when no tabpar process is writing "
                            f"there), or choose another --out.") from None
        if os.path.lexists(self.jobs_path) and not self.jobs_path.is_file():
            handle.close()
            raise UserError(f"{self.jobs_path} is not a regular file; delete it, or choose "
                            f"another --out.")
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            handle.close()
            raise UserError(f"Another tabpar process is writing to {self.folder}; wait for it "
                            f"to finish or choose another --out.") from None
        handle.seek(0)
        handle.truncate()
        handle.write(str(os.getpid()))
        handle.flush()
        self._lock_handle = handle

    def close(self) -> None:
        if self._lock_handle is not None:
            self._lock_handle.close()
            self._lock_handle = None

    # --- run description --------------------------------------------------------------
    def read_meta(self) -> dict | None:
        return read_run_meta(self.folder)

    def write_meta(self, meta: dict) -> None:
        atomic_write_text(self.folder / RUN_FILE, json.dumps(meta, indent=2, sort_keys=True),
                          fix="free disk space and run again with the same --out")

    # --- jobs -------------------------------------------------------------------------
    def rows(self) -> list[dict]:
        return read_job_rows(self.jobs_path)

    def append(self, row: dict) -> None:
        """Append one job's row as a single line, flushed and synced before returning."""
        line = (json.dumps(row, sort_keys=True, default=_json_default,
                           allow_nan=False) + "\n").encode("utf-8")
        try:
            with open(self.jobs_path, "ab") as handle:
                _cut_torn_tail(handle)
                handle.write(line)
                handle.flush()
                os.fsync(handle.fileno())
        except OSError as exc:
            raise UserError(f"Cannot record a finished job in {self.jobs_path} "
                            f"({exc.strerror}); free disk space and run again with the same "
                            f"--out (finished jobs are kept).") from None

    def compact(self) -> int:
        """Keep only the latest row of each (task, model, seed), as every reader counts them,
        and return how many superseded rows were dropped (for a published reference rebuilt in
        place, whose old rows would otherwise travel with it). Needs the folder's lock."""
        if self._lock_handle is None:
            raise RuntimeError("compact() needs open_for_writing() first")
        rows = self.rows()
        latest = {(r["task"], r["model"], r["seed"]): r for r in rows}
        dropped = len(rows) - len(latest)
        if dropped:
            text = "".join(json.dumps(r, sort_keys=True, default=_json_default,
                                      allow_nan=False) + "\n" for r in latest.values())
            atomic_write_text(self.jobs_path, text,
                              fix="free disk space and build again with the same --out")
        return dropped

    # --- predictions ------------------------------------------------------------------
    def predictions_path(self, task: str, model: str, seed: int) -> Path:
        return self.folder / "predictions" / task / f"{model}-seed{seed}.parquet"

    def write_predictions(self, task: str, model: str, seed: int, row_id: np.ndarray,
                          prediction: np.ndarray) -> str:
        """Store holdout predictions; returns the path relative to the run folder."""
        import pyarrow as pa
        import pyarrow.parquet as pq

        frame = predictions_frame(row_id, prediction)
        path = self.predictions_path(task, model, seed)
        sink = pa.BufferOutputStream()  # pyarrow directly: pandas' to_parquet costs more
        # row ids are sorted (a time holdout's are consecutive): delta encoding stores them
        # in a fraction of a byte each, where a dictionary took about three (row ids were 40%
        # of the published references' size)
        pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), sink,
                       compression="zstd", use_dictionary=False,
                       column_encoding={"row_id": "DELTA_BINARY_PACKED"})
        atomic_write_bytes(path, sink.getvalue().to_pybytes(),
                           fix="free disk space and run again with the same --out")
        return str(path.relative_to(self.folder))


# predictions are stored as float32: half the size of float64 (the published references ship in
# the wheel), and its 7 significant digits are far finer than any holdout's noise; scores are
# computed from the full-precision predictions before they are stored
PREDICTION_DTYPE = np.float32


def predictions_frame(row_id: np.ndarray, prediction: np.ndarray) -> pd.DataFrame:
    """The stored form of a job's holdout predictions: row_id, then ``prediction`` (one value
    per row) or ``proba_0 … proba_{k-1}`` (multiclass), as ``PREDICTION_DTYPE``."""
    import pandas as pd
    prediction = np.asarray(prediction)
    data = {"row_id": np.asarray(row_id, dtype=np.int64)}
    if prediction.ndim == 1:
        data["prediction"] = prediction.astype(PREDICTION_DTYPE)
    else:
        for k in range(prediction.shape[1]):
            data[f"proba_{k}"] = prediction[:, k].astype(PREDICTION_DTYPE)
    return pd.DataFrame(data)


def read_predictions(path: Path, root: Path | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(row_id, prediction) from a stored predictions file; prediction is (n,) or (n, k).

    ``root``: the results folder the file must lie in (a path a jobs line gives is refused when
    it leads elsewhere, e.g. ``../../``). A missing, torn or foreign file is a UserError.
    """
    path = Path(path)
    fix = "rerun its job (delete its line in jobs.jsonl and run again), or rebuild the folder"
    if root is not None:
        _refuse_outside(root, path, path)
    frame = read_state_parquet(path, fix, what=f"The predictions file {path}")
    if "row_id" not in frame or not ("prediction" in frame or any(
            str(c).startswith("proba_") for c in frame.columns)):
        raise UserError(f"The predictions file {path} lacks row_id or prediction columns; "
                        f"{fix}.")
    row_id = frame["row_id"].to_numpy()
    # computed on in float64, whatever precision the file holds
    if "prediction" in frame:
        return row_id, frame["prediction"].to_numpy(dtype=np.float64)
    cols = sorted((c for c in frame.columns if c.startswith("proba_")),
                  key=lambda c: int(c.split("_")[1]))
    return row_id, frame[cols].to_numpy(dtype=np.float64)


def inside_folder(folder: str | Path, path: str | Path) -> Path:
    """``folder / path``; UserError when it leads outside ``folder`` (e.g. ``../../x`` in a
    jobs line), so a results folder never makes tabpar read or write elsewhere."""
    target = Path(folder) / path
    _refuse_outside(folder, target, path)
    return target


def _refuse_outside(folder: str | Path, target: Path, given) -> None:
    folder = Path(folder)
    if folder.resolve() not in target.resolve().parents:
        raise UserError(f"The predictions path {given} leads outside the results folder "
                        f"{folder}; delete that job's line in {folder / JOBS_FILE} (it runs "
                        f"again), or rebuild the folder.")


def align_to(ids: np.ndarray, prediction: np.ndarray, row_id: np.ndarray):
    """``prediction`` (stored in ``ids`` order) reordered to ``row_id``; None if any is absent."""
    import pandas as pd
    position = pd.Index(ids).get_indexer(row_id)
    if (position < 0).any():
        return None
    return np.asarray(prediction)[position]


def _cut_torn_tail(handle) -> None:
    """Cut a last line a crash left without its newline off the jobs file open in ``handle``
    (append mode, under the folder's lock), so it never sits between two records."""
    end = handle.seek(0, os.SEEK_END)
    if end == 0:
        return
    with open(handle.name, "rb") as check:
        check.seek(max(0, end - (1 << 20)))
        tail = check.read()
    if tail.endswith(b"\n"):
        return
    cut = tail.rfind(b"\n")
    if cut < 0 and end > len(tail):  # a torn line over 1 MiB long: not ours, leave it
        return
    handle.truncate(end - len(tail) + cut + 1)


def _json_default(value):
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating,)):
        return float(value)
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"not JSON serialisable: {type(value)}")


def load_results(folder: str | Path) -> pd.DataFrame:
    """A results folder's jobs as a DataFrame, one row per job (later rows win on reruns).

    Columns include task, model, seed, metric, lower_is_better, score (holdout), train_score,
    fit_seconds, predict_seconds, n_train, n_holdout, fingerprint, status, error, started_at.
    """
    import pandas as pd
    folder = Path(folder)
    path = folder / JOBS_FILE
    if not path.exists():
        raise UserError(f"{folder} is not a tabpar results folder (no {JOBS_FILE}); give the "
                        f"folder a 'tabpar run' wrote.")
    rows = read_job_rows(path)
    frame = pd.DataFrame(rows)
    if frame.empty:
        return frame
    return frame.drop_duplicates(["task", "model", "seed"], keep="last").reset_index(drop=True)
