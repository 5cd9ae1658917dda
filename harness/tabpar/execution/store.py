"""The results store: one folder per run, append-only and crash-safe.

``OUT/jobs.jsonl`` holds one JSON object per finished job, written with a single ``write`` and
flushed to disk before the next job is recorded; a line cut short by a crash is never read as a
result. ``OUT/predictions/TASK/MODEL-seedN.parquet`` holds each job's holdout predictions
(``row_id``, ``prediction`` or one ``proba_K`` column per class). ``OUT/run.json`` describes the
run (suite, tasks, fingerprints) so a rerun can resume or refuse to mix.
"""
from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.files import atomic_write_bytes, atomic_write_text

JOBS_FILE = "jobs.jsonl"
RUN_FILE = "run.json"
LOCK_FILE = ".lock"
STORE_FORMAT = 1  # bump when a change makes old folders unreadable


def read_job_rows(path: Path) -> list[dict]:
    """Every complete, valid JSON line of a jobs file (torn or foreign lines are skipped)."""
    rows = []
    try:
        with open(path, "rb") as handle:
            for line in handle:
                if not line.endswith(b"\n"):
                    break  # the last write was cut short
                try:
                    row = json.loads(line)
                except ValueError:
                    continue
                if isinstance(row, dict) and "task" in row and "status" in row:
                    rows.append(row)
    except FileNotFoundError:
        pass
    return rows


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

        handle = open(self.folder / LOCK_FILE, "a+")
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
        path = self.folder / RUN_FILE
        if not path.exists():
            return None
        try:
            return json.loads(path.read_text(encoding="utf-8"))
        except ValueError:
            raise UserError(f"{path} is not valid JSON, so {self.folder} is not a readable "
                            f"tabpar results folder; choose another --out.") from None

    def write_meta(self, meta: dict) -> None:
        atomic_write_text(self.folder / RUN_FILE, json.dumps(meta, indent=2, sort_keys=True))

    # --- jobs -------------------------------------------------------------------------
    def rows(self) -> list[dict]:
        return read_job_rows(self.jobs_path)

    def append(self, row: dict) -> None:
        """Append one job's row as a single line, flushed and synced before returning."""
        line = (json.dumps(row, sort_keys=True, default=_json_default,
                           allow_nan=False) + "\n").encode("utf-8")
        with open(self.jobs_path, "ab") as handle:
            if handle.tell() > 0:
                with open(self.jobs_path, "rb") as check:
                    check.seek(-1, os.SEEK_END)
                    if check.read(1) != b"\n":
                        line = b"\n" + line  # end a torn line left by a crash first
            handle.write(line)
            handle.flush()
            os.fsync(handle.fileno())

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
        pq.write_table(pa.Table.from_pandas(frame, preserve_index=False), sink,
                       compression="zstd")
        atomic_write_bytes(path, sink.getvalue().to_pybytes())
        return str(path.relative_to(self.folder))


def predictions_frame(row_id: np.ndarray, prediction: np.ndarray) -> pd.DataFrame:
    prediction = np.asarray(prediction)
    data = {"row_id": np.asarray(row_id, dtype=np.int64)}
    if prediction.ndim == 1:
        data["prediction"] = prediction.astype(np.float64)
    else:
        for k in range(prediction.shape[1]):
            data[f"proba_{k}"] = prediction[:, k].astype(np.float64)
    return pd.DataFrame(data)


def read_predictions(path: Path) -> tuple[np.ndarray, np.ndarray]:
    """(row_id, prediction) from a stored predictions file; prediction is (n,) or (n, k)."""
    frame = pd.read_parquet(path)
    row_id = frame["row_id"].to_numpy()
    if "prediction" in frame:
        return row_id, frame["prediction"].to_numpy()
    cols = sorted((c for c in frame.columns if c.startswith("proba_")),
                  key=lambda c: int(c.split("_")[1]))
    return row_id, frame[cols].to_numpy()


def align_to(ids: np.ndarray, prediction: np.ndarray, row_id: np.ndarray):
    """``prediction`` (stored in ``ids`` order) reordered to ``row_id``; None if any is absent."""
    position = pd.Index(ids).get_indexer(row_id)
    if (position < 0).any():
        return None
    return np.asarray(prediction)[position]


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
