"""A user's table and options as a ``Task``, with every option left out inferred and stated.

The task's source is ``csv:PATH`` or ``parquet:PATH``. The inference: the task type from the
target (non-numeric or at most two distinct values → binary / multiclass, else regression),
the positive class of a binary target (the minority class), the metric (the type's default),
and the holdout (time on the first date column when one is named, else random; 20 %).
"""
from __future__ import annotations

import re
import shlex
from pathlib import Path

from tabpar.common.errors import UserError
from tabpar.common.metrics import DEFAULT_METRIC, get_metric
from tabpar.common.text import close_matches, plain
from tabpar.data.export import describe, write_split
from tabpar.data.sources import parse_dates, read_table
from tabpar.data.split import load_and_split
from tabpar.data.suites import DEFAULT_HOLDOUT_FRACTION, TASK_TYPES, Holdout, Task
from tabpar.data.target import as_numbers

DEFAULT_FRACTION = DEFAULT_HOLDOUT_FRACTION


def _task_name(path: Path) -> str:
    name = re.sub(r"[^A-Za-z0-9_.-]", "_", path.stem).strip("._-") or "data"
    return name[:64]


def calibration_task(data, target: str, type: str | None = None, metric: str | None = None,
                     positive=None, dates=(), holdout: str | None = None,
                     holdout_fraction: float | None = None, holdout_rows: int | None = None,
                     cutoff: str | None = None, drop=()) -> tuple[Task, dict]:
    """The ``Task`` for the user's table, and what was inferred (field → value and reason).

    Raises UserError, naming the file, column or value, for every mistake that can be seen
    from the options and the table alone.

    Parameters
    ----------
    data : str or Path
        The table, ``.csv`` or ``.parquet``.
    target : str
        The column to predict.
    type, metric, positive : optional
        Task type (``regression``, ``binary``, ``multiclass``), metric name and the positive
        class of a binary target; inferred when None.
    dates : sequence of str
        Date columns; the first one orders a time holdout.
    holdout : str, optional
        ``"time"`` or ``"random"``; inferred when None.
    holdout_fraction, holdout_rows, cutoff : optional
        At most one: the share of rows held out (0–1, exclusive), their number, or (time
        holdout) the date from which rows are held out; 20 % when all are None.
    drop : sequence of str
        Columns to leave out.

    Returns
    -------
    (Task, dict)
        The task, and ``{field: {"value": ..., "reason": str}}`` for each inferred option.
    """
    import pandas as pd
    path = Path(data).expanduser().resolve()
    frame = read_table(path)
    where = path.name
    dates, drop = tuple(dates or ()), tuple(drop or ())
    for role, columns in (("target", (target,)), ("--date", dates), ("--drop", drop)):
        for col in columns:
            if col not in frame.columns:
                raise UserError(f"The {role} column '{col}' is not in {path}; its columns are "
                                f"{', '.join(map(str, list(frame.columns)[:12]))}"
                                f"{' ...' if frame.shape[1] > 12 else ''}."
                                f"{close_matches(col, frame.columns)}")
    if target in dates or target in drop:
        raise UserError(f"The target '{target}' is also listed under "
                        f"{'--date' if target in dates else '--drop'}; remove it there.")
    inferred: dict = {}
    values = frame[target]
    present = values.dropna()
    if present.empty:
        raise UserError(f"The target column '{target}' of {where} has no values (every row is "
                        f"missing); choose another target.")
    distinct = pd.unique(present)
    if len(distinct) < 2:
        raise UserError(f"The target column '{target}' of {where} is constant "
                        f"({plain(distinct[0])!r} on every row that has a value); there is "
                        f"nothing to predict; choose another target column.")
    numeric = (pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_bool_dtype(values))

    if type is None:
        if not numeric:
            type = "binary" if len(distinct) == 2 else "multiclass"
            why = (f"non-numeric target with {len(distinct)} distinct values")
        elif len(distinct) <= 2:
            type, why = "binary", "numeric target with only 2 distinct values"
        else:
            type = "regression"
            why = f"numeric target with {len(distinct):,} distinct values"
        inferred["type"] = {"value": type, "reason": why + "; pass --type to change"}
    elif type not in TASK_TYPES:
        raise UserError(f"--type '{type}' is unknown; use one of {', '.join(TASK_TYPES)}.")
    if type == "regression" and not numeric:
        row = as_numbers(values)[1]
        if row is not None:
            raise UserError(f"The regression target '{target}' of {where} has the non-numeric "
                            f"value {values.iloc[row]!r} at row {row}; choose a numeric target "
                            f"or pass --type binary or --type multiclass.")
    if type == "binary" and len(distinct) > 2:
        raise UserError(f"The binary target '{target}' of {where} has {len(distinct)} distinct "
                        f"values; pass --type multiclass, or make a two-class column.")
    if type == "multiclass" and len(distinct) > max(50, len(present) // 10):
        raise UserError(f"The multiclass target '{target}' of {where} has {len(distinct):,} "
                        f"distinct values, more than a class label would; pass --type "
                        f"regression if it is a number to predict.")

    if positive is not None and type != "binary":
        raise UserError(f"--positive is only for a binary target, and '{target}' is "
                        f"{'inferred as ' if 'type' in inferred else ''}{type}.")
    if type == "binary":
        if positive is None:
            counts = present.astype(str).value_counts()
            # the minority class; a tie goes to the value that sorts last as text
            minority = max(v for v in counts.index if counts[v] == counts.min())
            positive = next(plain(v) for v in distinct if str(v) == minority)
            inferred["positive"] = {
                "value": positive,
                "reason": (f"the minority class: {int(counts[minority]):,} of {len(present):,} "
                           f"rows; pass --positive to choose")}
        else:
            matches = [plain(v) for v in distinct if str(v) == str(positive)]
            if not matches:
                raise UserError(f"--positive {positive!r} is not a value of the target "
                                f"'{target}' in {where}; its values are "
                                f"{', '.join(repr(str(v)) for v in sorted(map(str, distinct)))}.")
            positive = matches[0]

    if metric is None:
        metric = DEFAULT_METRIC[type]
        inferred["metric"] = {"value": metric, "reason": f"the default for {type}; pass "
                                                         f"--metric to change"}
    get_metric(metric, type, where="--metric")

    for col in dates:
        if pd.api.types.is_numeric_dtype(frame[col]) and not pd.api.types.is_bool_dtype(
                frame[col]):
            raise UserError(f"The --date column '{col}' of {where} holds numbers, not dates; "
                            f"write its values as dates (ISO 8601, e.g. 2024-03-31) or leave "
                            f"it out of --date.")
    parsed = {col: parse_dates(frame[col], col, where)  # here, so a bad value's row is its
              for col in dates}                            # row in the file (= row_id)
    sizes = [k for k, v in (("--holdout-fraction", holdout_fraction),
                            ("--holdout-rows", holdout_rows), ("--cutoff", cutoff))
             if v is not None]
    if len(sizes) > 1:
        raise UserError(f"Give only one of --holdout-fraction, --holdout-rows and --cutoff, "
                        f"not {' and '.join(sizes)}.")
    if holdout is None:
        holdout = "time" if (dates or cutoff is not None) else "random"
        reason = (f"a date column was named, so the latest rows by '{dates[0]}' are held out"
                  if dates else "no --date given")
        inferred["holdout"] = {"value": holdout, "reason": reason + "; pass --holdout to "
                                                                     "change"}
    if holdout not in ("time", "random"):
        raise UserError(f"--holdout '{holdout}' is unknown; use time or random.")
    if holdout == "time" and not dates:
        raise UserError("A time holdout needs a date column to sort by; name it with --date "
                        "COL.")
    if cutoff is not None and holdout != "time":
        raise UserError("--cutoff needs a time holdout (--holdout time with --date COL).")
    if holdout_fraction is not None and not 0 < holdout_fraction < 1:
        raise UserError(f"--holdout-fraction must be between 0 and 1, not {holdout_fraction!r}.")
    if holdout_rows is not None and (int(holdout_rows) != holdout_rows or holdout_rows < 1):
        raise UserError(f"--holdout-rows must be a positive whole number, not "
                        f"{holdout_rows!r}.")
    if cutoff is not None:
        try:
            stamp = pd.Timestamp(cutoff)
        except (ValueError, TypeError):
            raise UserError(f"--cutoff {cutoff!r} is not a date; write it as ISO 8601, e.g. "
                            f"2024-03-31.") from None
        if stamp is pd.NaT:
            raise UserError(f"--cutoff {cutoff!r} is not a date; write it as ISO 8601.")
        if stamp.tzinfo is not None and parsed[dates[0]].dt.tz is None:
            raise UserError(f"--cutoff {cutoff!r} has a time zone but the date column "
                            f"'{dates[0]}' of {where} has none; give the cutoff without one.")
    if holdout_fraction is None and holdout_rows is None and cutoff is None:
        inferred.setdefault("holdout_size", {"value": DEFAULT_FRACTION,
                                             "reason": "the default share of rows; pass "
                                                       "--holdout-fraction, --holdout-rows or "
                                                       "--cutoff to change"})
    hold = Holdout(policy=holdout, date=dates[0] if holdout == "time" else None,
                   fraction=None if holdout_fraction is None else float(holdout_fraction),
                   rows=None if holdout_rows is None else int(holdout_rows),
                   cutoff=None if cutoff is None else str(cutoff), seed=0)
    if hold.date in drop:
        raise UserError(f"The holdout date column '{hold.date}' is also listed under --drop; "
                        f"remove it there.")
    kind = "parquet" if path.suffix.lower() in (".parquet", ".pq") else "csv"
    task = Task(name=_task_name(path), source=f"{kind}:{path}", target=target, type=type,
                metric=metric, holdout=hold, positive=positive, drop=drop, dates=dates,
                description=f"calibrate: {path.name}", base_dir=str(path.parent))
    return task, inferred


def task_options(task: Task) -> list[str]:
    """The ``tabpar calibrate`` options that define ``task`` with nothing left to infer.

    Parameters
    ----------
    task : Task
        A task made by ``calibration_task``.

    Returns
    -------
    list of str
        Command-line arguments (unquoted), e.g. ``["--target", "price", "--type", ...]``.
    """
    args = ["--target", task.target, "--type", task.type, "--metric", task.metric]
    if task.type == "binary":
        args += ["--positive", str(task.positive)]
    for col in task.dates:
        args += ["--date", col]
    for col in task.drop:
        args += ["--drop", col]
    h = task.holdout
    args += ["--holdout", h.policy]
    if h.rows is not None:
        args += ["--holdout-rows", str(h.rows)]
    elif h.cutoff is not None:
        args += ["--cutoff", h.cutoff]
    else:
        args += ["--holdout-fraction", f"{h.share:g}"]
    return args


def rerun_command(data: str, task: Task, given=()) -> str:
    """The shell command that reruns ``tabpar calibrate`` on ``data`` with nothing inferred.

    Parameters
    ----------
    data : str
        The table's path, as it should appear in the command.
    task : Task
        The task the options define.
    given : sequence of str
        What was placed: ``["--score", "0.81"]`` or ``["--predictions", "preds.csv"]``.

    Returns
    -------
    str
        ``tabpar calibrate DATA --target ... --score ...``, every argument quoted for a POSIX
        shell, so the line works when pasted.
    """
    return f"tabpar calibrate {shlex.quote(data)} " + " ".join(
        shlex.quote(str(a)) for a in [*task_options(task), *given])


def inferred_items(inferred: dict) -> list[str]:
    """One 'field = value (reason)' string per inferred option.

    Parameters
    ----------
    inferred : dict
        The second value ``calibration_task`` returns.

    Returns
    -------
    list of str
        In the order the options were inferred.
    """
    names = {"type": "type", "positive": "positive class", "metric": "metric",
             "holdout": "holdout", "holdout_size": "holdout size"}
    return [f"{names.get(k, k)} = {v['value']!r} ({v['reason']})" if k == "positive" else
            f"{names.get(k, k)} = {v['value']:g} ({v['reason']})" if k == "holdout_size" else
            f"{names.get(k, k)} = {v['value']} ({v['reason']})" for k, v in inferred.items()]


def inferred_text(inferred: dict) -> str:
    """What was inferred, on one line: the ``inferred_items`` of ``inferred`` (as
    ``calibration_task`` returns it) joined by " · ", or a phrase saying nothing was inferred.
    """
    return " · ".join(inferred_items(inferred)) or "nothing (every option was given)"


# --- export ---------------------------------------------------------------------------------

def export_split(data, target: str, out: str | Path, **options) -> dict:
    """Write the split ``calibrate`` would use: ``train.csv`` (with the target) and
    ``holdout.csv`` (without), both with ``row_id``, plus ``task.json``; returns task.json.

    Parameters
    ----------
    data, target, **options
        The table, the column to predict and the other arguments of ``calibration_task``
        (each option left out is inferred).
    out : str or Path
        The folder to write into.

    Returns
    -------
    dict
        The content of ``task.json``: the task's description, ``how_to_submit`` (ending in
        the ``tabpar calibrate`` command to run on a predictions file), ``inferred`` and
        ``options``.
    """
    task, inferred = calibration_task(data, target, **options)
    rows = load_and_split(task)
    loaded, split = rows.loaded, rows.split
    if "row_id" in loaded.frame.columns:
        raise UserError(f"{Path(data).name} already has a column 'row_id', the name the export "
                        f"gives each row's position; rename it, or leave it out with --drop "
                        f"row_id.")
    info = describe(task, loaded, split, "csv", classes=rows.target.classes)
    command = rerun_command(str(Path(data)), task) + " --predictions FILE"
    info["how_to_submit"] = (info["how_to_submit"].split(". Then:")[0]
                             + f". Then: {command}")
    info["inferred"] = inferred
    info["options"] = task_options(task)
    write_split(Path(out), loaded, split, "csv", info)
    return info
