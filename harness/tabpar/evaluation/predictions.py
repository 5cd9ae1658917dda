"""A user's predictions file, read and checked against the holdout it predicts.

Layouts (CSV or Parquet, one row per holdout row, any row order):

- regression: ``row_id``, ``prediction`` (the target in its original units);
- binary: ``row_id``, ``prediction`` (the probability of the positive class, 0..1);
- multiclass: ``row_id`` and one column per class, named by the class labels that ``tabpar
  export`` lists in task.json, each holding that class's probability; every row sums to 1
  (within ``SUM_TOLERANCE``).

Every mismatch is a UserError naming the file, the row or column, and the fix.
"""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.text import plain

# rows of class probabilities must sum to 1 within this: a CSV written with 3 decimals over 20
# classes can be off by 0.01 at most
SUM_TOLERANCE = 0.011


def _row_ids(frame: pd.DataFrame, path: Path, row_id: np.ndarray, task: str) -> np.ndarray:
    """The file's row ids as integers, checked to cover the holdout exactly once."""
    import pandas as pd
    ids = pd.to_numeric(frame["row_id"], errors="coerce")
    if ids.isna().any() or (ids % 1 != 0).any():
        bad = frame["row_id"][ids.isna() | (ids % 1 != 0)].iloc[0]
        raise UserError(f"{path} has a row_id that is not a whole number: {plain(bad)!r}.")
    if (ids.abs() >= 2**53).any():  # beyond int64 it would wrap to another (negative) number
        bad = frame["row_id"][ids.abs() >= 2**53].iloc[0]
        raise UserError(f"{path} has row_id {plain(bad)!r}, far beyond any row of task "
                        f"'{task}'; predict only the rows of holdout.csv.")
    ids = ids.astype(np.int64).to_numpy()
    dup = pd.Series(ids).duplicated()
    if dup.any():
        raise UserError(f"{path} lists row_id {ids[dup.to_numpy()][0]} more than once; give "
                        f"each holdout row exactly one prediction.")
    expected = set(row_id.tolist())
    unknown = [i for i in ids if i not in expected]
    if unknown:
        raise UserError(f"{path} has row_id {unknown[0]}, which is not a holdout row of task "
                        f"'{task}' (wrong task or a training row?); predict only the rows of "
                        f"holdout.csv.")
    missing = expected - set(ids.tolist())
    if missing:
        raise UserError(f"{path} lacks {len(missing):,} holdout rows of task '{task}' (e.g. "
                        f"row_id {min(missing)}); predict every row of holdout.csv.")
    return ids


def _numbers(frame: pd.DataFrame, column: str, path: Path, ids: np.ndarray) -> np.ndarray:
    """A column as finite floats; UserError at the first missing, non-numeric or infinite one."""
    import pandas as pd
    values = pd.to_numeric(frame[column], errors="coerce")
    bad = values.isna() | ~np.isfinite(values.to_numpy(dtype=float, na_value=np.nan))
    if bad.any():
        i = int(np.flatnonzero(bad.to_numpy())[0])
        raise UserError(f"{path} has a value in '{column}' that is missing, not numeric or "
                        f"infinite ({plain(frame[column].iloc[i])!r} for row_id {ids[i]}); "
                        f"fix it.")
    return values.to_numpy(dtype=float)


def class_columns(classes) -> list[str]:
    """The column names a multiclass predictions file uses: the class labels as text.

    Examples
    --------
    >>> class_columns(["setosa", "versicolor", 3])
    ['setosa', 'versicolor', '3']
    """
    return [str(c) for c in classes]


def read_predictions_file(path: Path, row_id: np.ndarray, task_type: str, task: str,
                          classes=None) -> np.ndarray:
    """The user's predictions aligned to ``row_id``: shape (n,) for regression and binary
    (target units; probability of the positive class), (n, k) for multiclass (probabilities,
    columns in ``classes`` order). UserError for every kind of mismatch.

    Parameters
    ----------
    path : Path
        The CSV or Parquet file (layouts in the module docstring).
    row_id : array of int
        The holdout's row ids, in the order the result should follow.
    task_type : {"regression", "binary", "multiclass"}
    task : str
        The task's name, for messages.
    classes : list, optional
        Multiclass: the class labels in the order the task encodes them.
    """
    import pandas as pd

    from tabpar.data.sources import read_table
    path = Path(path)
    frame = read_table(path)
    if "row_id" not in frame.columns:
        raise UserError(f"{path} has no 'row_id' column; every predictions file needs one "
                        f"(see task.json from 'tabpar export').")
    if task_type == "multiclass":
        return _multiclass(frame, path, row_id, task, class_columns(classes or []))
    if "prediction" not in frame.columns:
        raise UserError(f"{path} has no 'prediction' column; it needs columns row_id and "
                        f"prediction (see task.json from 'tabpar export').")
    ids = _row_ids(frame, path, row_id, task)
    values = _numbers(frame, "prediction", path, ids)
    if task_type == "binary" and ((values < 0) | (values > 1)).any():
        raise UserError(f"{path} has predictions outside 0..1, but task '{task}' needs the "
                        f"probability of the positive class.")
    return pd.Series(values, index=ids).loc[row_id].to_numpy()


def _multiclass(frame, path, row_id, task, columns) -> np.ndarray:
    import pandas as pd
    names = [str(c) for c in frame.columns]
    frame.columns = names
    missing = [c for c in columns if c not in names]
    if missing:
        raise UserError(f"{path} lacks the probability column(s) {', '.join(map(repr, missing))}"
                        f"; task '{task}' is multiclass and needs row_id plus one column per "
                        f"class: {', '.join(map(repr, columns))}.")
    extra = [c for c in names if c not in columns and c != "row_id"]
    if extra:
        raise UserError(f"{path} has column(s) {', '.join(map(repr, extra))} that are not "
                        f"classes of task '{task}'; keep row_id and the class columns "
                        f"{', '.join(map(repr, columns))} only.")
    ids = _row_ids(frame, path, row_id, task)
    proba = np.column_stack([_numbers(frame, c, path, ids) for c in columns])
    if ((proba < 0) | (proba > 1)).any():
        raise UserError(f"{path} has class probabilities outside 0..1; give each class's "
                        f"probability, not a score or a label.")
    off = np.abs(proba.sum(axis=1) - 1.0)
    if (off > SUM_TOLERANCE).any():
        i = int(np.argmax(off))
        raise UserError(f"{path}: the class probabilities of row_id {ids[i]} sum to "
                        f"{proba[i].sum():.4g}, not 1; give probabilities that sum to 1 on "
                        f"every row.")
    order = pd.Index(ids).get_indexer(row_id)
    return proba[order]
