"""The one prepare path: a split task's rows → a procedure fitted on the training rows →
float32 feature arrays, with the checks every procedure's output must pass (numeric, one row
per input row, finite) and the leakage guard for procedures that are not the built-in one."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.system import release_freed_memory
from tabpar.data.split import SplitTask
from tabpar.data.suites import Task
from tabpar.procedure.variants import Procedure, builtin, describe_failure


@dataclass
class PreparedArrays:
    """A task after the procedure: features (float32), target (numbers) and what produced them."""

    X_train: np.ndarray
    X_holdout: np.ndarray
    y_train: np.ndarray
    y_holdout: np.ndarray
    row_id: np.ndarray  # each holdout row's 0-based position in the source
    classes: list  # class labels in index order; [] for regression
    feature_names: list
    leakage: str | None  # why the procedure learns from holdout rows (None: it does not)


def dense(output):
    """A transformer's output as a NumPy array or sequence: sparse matrices and frames
    converted.

    >>> from scipy import sparse
    >>> dense(sparse.eye(2)).tolist()
    [[1.0, 0.0], [0.0, 1.0]]
    """
    if hasattr(output, "toarray"):  # scipy sparse
        output = output.toarray()
    if hasattr(output, "to_numpy"):
        output = output.to_numpy()
    return output


def as_features(output, n_rows: int, procedure: Procedure, task: Task, side: str):
    """A procedure's output as a float32 array; UserError when it is not numeric features."""
    output = dense(output)
    try:
        array = np.asarray(output, dtype=np.float32)
    except (TypeError, ValueError):
        raise UserError(f"Procedure '{procedure.name}' returned non-numeric features for the "
                        f"{side} rows of task '{task.name}'; return numbers only.") from None
    if array.ndim != 2 or array.shape[0] != n_rows:
        raise UserError(f"Procedure '{procedure.name}' returned shape {array.shape} for the "
                        f"{n_rows} {side} rows of task '{task.name}'; return one row per input "
                        f"row.")
    if np.isinf(array).any():
        raise UserError(f"Procedure '{procedure.name}' returned infinite values for task "
                        f"'{task.name}'; return finite numbers (NaN is allowed).")
    return array


def leakage_check(transformer, train, holdout, X_train, X_hold) -> str | None:
    """Why the fitted transformer learns from the rows it transforms, or None.

    A sound transformer maps each row by what it learned in fit alone: transforming the
    holdout in reverse order gives the same rows, and transforming training rows again after
    the holdout gives what it gave before.
    """
    reverse = np.asarray(dense(transformer.transform(holdout.iloc[::-1])),
                         dtype=np.float32)[::-1]
    if reverse.shape != X_hold.shape or not np.array_equal(reverse, X_hold, equal_nan=True):
        return ("its output for a holdout row depends on the other rows transformed with it, "
                "so it learns from the holdout rows")
    head = train.iloc[: min(len(train), 500)]
    again = np.asarray(dense(transformer.transform(head)), dtype=np.float32)
    if again.shape != X_train[: len(head)].shape or not np.array_equal(
            again, X_train[: len(head)], equal_nan=True):
        return ("transforming the holdout rows changed its output for training rows, so it "
                "learned from the holdout rows")
    return None


def check_finite(features, task: Task, row_ids) -> None:
    """UserError for an infinite value, or one beyond float32's range (``row_ids``: each row's
    position in the source)."""
    for name in features.columns:  # one column at a time: no copy of the whole table
        column = features[name]
        if not pd.api.types.is_float_dtype(column):  # only floats can hold infinity
            continue
        values = column.to_numpy(dtype=np.float64, na_value=np.nan)
        bad = np.isinf(values)
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise UserError(f"Column '{name}' of task '{task.name}' has an infinite value at "
                            f"row {int(row_ids[row])}; replace it with a finite number or leave "
                            f"it blank.")
        # the features are float32: a larger magnitude would become infinite there
        big = np.abs(values) > np.finfo(np.float32).max
        if big.any():
            row = int(np.flatnonzero(big)[0])
            raise UserError(f"Column '{name}' of task '{task.name}' has {values[row]:.4g} at row "
                            f"{int(row_ids[row])}, beyond the float32 range (±3.4e38) the "
                            f"features are stored in; rescale the column (e.g. to other units) "
                            f"or blank the value.")


def feature_names(transformer, n_features: int) -> list[str]:
    """The transformer's output names, or ``f0, f1, ...`` when it cannot tell."""
    if hasattr(transformer, "get_feature_names_out"):
        try:
            return [str(n) for n in transformer.get_feature_names_out()]
        except Exception:  # a user transformer may not support it after all
            pass
    return [f"f{i}" for i in range(n_features)]


def prepare_split(task: Task, rows: SplitTask, procedure: Procedure | None = None) -> PreparedArrays:
    """Fit ``procedure`` (default: the built-in baseline) on the training rows of ``rows`` and
    transform both sides.

    Takes the rows over: ``rows.loaded`` is dropped as soon as the two sides are cut out of it,
    so a large task's frame is not held twice (memory). A user procedure's failure becomes a
    UserError naming it; a procedure other than the built-in one is checked for learning from
    the holdout rows (``PreparedArrays.leakage``).
    """
    procedure = procedure or builtin()
    loaded, split, target = rows.loaded, rows.split, rows.target
    features = loaded.features
    if features.shape[1] == 0:
        raise UserError(f"Task '{task.name}' has no feature columns left after its drops and "
                        f"its target; keep at least one column to predict from.")
    check_finite(features, task, loaded.row_ids)
    train, holdout = features.iloc[split.train], features.iloc[split.holdout]
    row_id = loaded.row_ids[split.holdout]
    rows.loaded = None
    del features, loaded  # the task's rows now live in train and holdout only (memory)
    release_freed_memory()
    check_leakage = procedure.key != builtin().key  # the built-in one is tested, not checked
    try:
        transformer = procedure.build(task)
        X_train = as_features(transformer.fit_transform(train), len(train), procedure, task,
                              "training")
        if not check_leakage:
            train = None  # not needed again: free its rows before the holdout is prepared
        X_hold = as_features(transformer.transform(holdout), len(holdout), procedure, task,
                             "holdout")
        if X_train.shape[1] != X_hold.shape[1]:
            raise UserError(f"Procedure '{procedure.name}' made {X_train.shape[1]} features for "
                            f"the training rows but {X_hold.shape[1]} for the holdout rows of "
                            f"task '{task.name}'; it must learn its columns in fit.")
        leakage = (leakage_check(transformer, train, holdout, X_train, X_hold) if check_leakage
                   else None)
    except UserError:
        raise
    except (Exception, SystemExit) as exc:  # user code may also call sys.exit
        if not procedure.user_code:
            raise
        raise UserError(f"Procedure '{procedure.name}' failed on task '{task.name}' "
                        f"({describe_failure(exc)}); fix it so that fit and transform return "
                        f"numeric features.") from None
    return PreparedArrays(X_train=X_train, X_holdout=X_hold,
                          y_train=target.values[split.train],
                          y_holdout=target.values[split.holdout], row_id=row_id,
                          classes=list(target.classes),
                          feature_names=feature_names(transformer, X_train.shape[1]),
                          leakage=leakage)


def fit_on_rows(task: Task, features: pd.DataFrame, fit_rows, other_rows,
                procedure: Procedure | None = None):
    """The procedure (default: built-in) fitted on ``fit_rows`` of ``features`` (positions);
    returns (fitted transformer, X_fit, X_other), for analyses that re-split a task's rows."""
    transformer = (procedure or builtin()).build(task)
    X_fit = transformer.fit_transform(features.iloc[fit_rows])
    return transformer, X_fit, transformer.transform(features.iloc[other_rows])
