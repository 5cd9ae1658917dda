"""Export a task's exact split so anyone can fit their own pipeline on the identical rows.

Writes ``train.csv`` (features + target), ``holdout.csv`` (features only), both with a
``row_id`` column (the row's 0-based position in the source as read, the id the predictions file
and the reference use), and ``task.json`` describing the target, metric, direction and how to submit.
"""
from __future__ import annotations

import io
import json
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.files import atomic_write_bytes, atomic_write_text
from tabpar.common.text import html_table
from tabpar.data.sources import LoadedTask
from tabpar.data.split import Split, load_and_split
from tabpar.data.suite_values import EXPORT_FORMATS
from tabpar.data.suites import Task

FORMATS = EXPORT_FORMATS


def _encode(frame: pd.DataFrame, fmt: str) -> bytes:
    if fmt == "parquet":
        return frame.to_parquet(index=False)
    buffer = io.StringIO()
    frame.to_csv(buffer, index=False, date_format="%Y-%m-%dT%H:%M:%S%z")
    return buffer.getvalue().encode("utf-8")


def split_frames(loaded: LoadedTask, split: Split) -> tuple[pd.DataFrame, pd.DataFrame]:
    """(train with target, holdout without target), each led by ``row_id`` (the row's
    0-based position in the source as read)."""
    frame = loaded.frame.copy()
    frame.insert(0, "row_id", loaded.row_ids)
    train = frame.iloc[split.train].reset_index(drop=True)
    holdout = frame.iloc[split.holdout].drop(columns=[loaded.task.target]).reset_index(drop=True)
    return train, holdout


def write_split(out: Path, loaded: LoadedTask, split: Split, fmt: str, description: dict) -> dict:
    """Write train/holdout files and task.json into ``out``; returns the task.json content."""
    if fmt not in FORMATS:
        raise UserError(f"Unknown export format '{fmt}'; use csv or parquet.")
    out = Path(out)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise UserError(f"Cannot create the export folder {out} ({exc.strerror}); choose "
                        f"another.") from None
    train, holdout = split_frames(loaded, split)
    atomic_write_bytes(out / f"train.{fmt}", _encode(train, fmt))
    atomic_write_bytes(out / f"holdout.{fmt}", _encode(holdout, fmt))
    atomic_write_text(out / "task.json", json.dumps(description, indent=2, default=str))
    return description


def place_command(task: Task, suite: str | Path | None) -> str:
    """The ``tabpar place`` command that places predictions for this split, verbatim."""
    from tabpar.data.suites import list_builtin_suites

    builtin = {path.stem for path in list_builtin_suites()}
    if suite is None or str(suite) == "default":
        return f"tabpar place {task.name} --predictions FILE"
    if str(suite) in builtin:
        return f"tabpar place {task.name} --suite {suite} --predictions FILE"
    return (f"tabpar reference build --suite {suite} --out REFERENCE (once), then tabpar place "
            f"{task.name} --suite {suite} --reference REFERENCE --predictions FILE")


def describe(task: Task, loaded: LoadedTask, split: Split, fmt: str,
             suite: str | Path | None = None, classes=None) -> dict:
    columns = [str(c) for c in (classes or [])]
    layout = ("columns row_id and one per class" if task.type == "multiclass"
              else "columns row_id and prediction")
    positive = None
    if task.type == "binary":
        positive = (f"1 ({task.derive_target.label or task.derive_target.column + ' >= ' + str(task.derive_target.at_least)})"
                    if task.derive_target else task.positive)
    submit = {
        "regression": "one row per holdout row_id with 'prediction' = the predicted target in "
                      "its original units",
        "binary": f"one row per holdout row_id with 'prediction' = the probability that "
                  f"'{task.target}' is the positive class {positive!r}",
        "multiclass": f"one row per holdout row_id and one column per class, named "
                      f"{', '.join(repr(c) for c in columns)}, holding that class's probability "
                      f"(each row summing to 1)",
    }[task.type]
    return {
        "task": task.name, "source": task.source, "target": task.target, "type": task.type,
        "metric": task.metric, "lower_is_better": task.lower_is_better,
        "positive_class": positive, "classes": columns if task.type == "multiclass" else None,
        "columns": (["row_id", *columns] if task.type == "multiclass"
                    else ["row_id", "prediction"]),
        "fingerprint": loaded.fingerprint,
        "holdout": split.description, "n_train": len(split.train),
        "n_holdout": len(split.holdout), "notes": loaded.notes + split.notes,
        "files": {"train": f"train.{fmt}", "holdout": f"holdout.{fmt}"},
        "how_to_submit": (f"Write a CSV or Parquet file with {layout}: {submit}. Then: "
                          f"{place_command(task, suite)}"),
        "target_transform": ("the metric is RMSLE: train on log1p(target) and submit "
                             "expm1(prediction)") if task.log_target else None,
    }


def export_task(task: Task, out: str | Path, fmt: str = "csv",
                suite: str | Path | None = None) -> dict:
    """Export ``task`` (of ``suite``, named in the printed next step) to ``out``; returns the
    task.json description."""
    if fmt not in FORMATS:
        raise UserError(f"Unknown export format '{fmt}'; use csv or parquet.")
    rows = load_and_split(task)
    return write_split(Path(out), rows.loaded, rows.split, fmt,
                       describe(task, rows.loaded, rows.split, fmt, suite,
                                rows.target.classes))


@dataclass
class ExportedSplit:
    """What ``export`` wrote: the folder and the task.json description of the split."""

    folder: Path
    description: dict

    def to_dict(self) -> dict:
        return {"folder": str(self.folder), **self.description}

    def __str__(self) -> str:
        d, folder = self.description, self.folder
        return (f"wrote {folder}/{d['files']['train']} ({d['n_train']:,} rows with target), "
                f"{folder}/{d['files']['holdout']} ({d['n_holdout']:,} rows without) and "
                f"task.json\n{d['metric']} ({'lower' if d['lower_is_better'] else 'higher'} is "
                f"better); {d['how_to_submit']}")

    def _repr_html_(self) -> str:
        return html_table({k: v for k, v in self.to_dict().items() if k != "files"},
                          caption=f"exported split of {self.description.get('task', '')}")


def export(task: str | Task, out: str | Path, suite: str | Path = "default",
           fmt: str = "csv") -> ExportedSplit:
    """Write a suite task's exact split: ``train`` (with the target), ``holdout`` (without)
    and ``task.json`` (metric, direction, how to submit predictions).

    Parameters
    ----------
    task : str or Task
        A task name of ``suite``, or a Task.
    out : path
        The folder to write (created if needed).
    suite : str or path
        A built-in suite name (``default``, ``quick``) or a suite file.
    fmt : {"csv", "parquet"}

    Returns
    -------
    ExportedSplit
        The folder and the description written to task.json.

    Examples
    --------
    >>> import tempfile, tabpar
    >>> split = tabpar.export("diamonds", tempfile.mkdtemp(), suite="quick")
    >>> split.description["n_holdout"], split.description["metric"]
    (600, 'rmsle')
    """
    if not isinstance(task, Task):
        from tabpar.data.suites import load_suite

        task = load_suite(suite).task(task)
    return ExportedSplit(folder=Path(out), description=export_task(task, out, fmt, suite))
