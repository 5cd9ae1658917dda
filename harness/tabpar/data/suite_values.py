"""Checks of the values a suite file gives (types, ranges, finiteness), each raising UserError
with one sentence that names the field, the file and the fix. ``suites`` uses them on every
field before a Task is made, so no unchecked value reaches the later stages."""
from __future__ import annotations

import math
from pathlib import Path

from tabpar.common.errors import UserError

EXPORT_FORMATS = ("csv", "parquet")  # the file formats an exported split can be written in

SEED_LIMIT = 2**32  # NumPy and the model libraries take seeds 0 .. 2**32 - 1


def check_keys(table: dict, allowed: set, where: str, path: Path) -> None:
    """UserError for a field of ``table`` that is not in ``allowed``.

    >>> check_keys({"name": "t"}, {"name", "source"}, "[[task]] t", Path("s.toml"))
    """
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise UserError(f"Unknown field '{unknown[0]}' in {where} of {path}; allowed fields are "
                        f"{', '.join(sorted(allowed))}.")


def check_positive_int(value, key, where, path):
    """None, or a whole number of at least 1 (UserError else).

    >>> check_positive_int(3000, "max_rows", "[suite]", Path("s.toml"))
    3000
    """
    if value is None:
        return None
    if not isinstance(value, int) or isinstance(value, bool) or value < 1:
        raise UserError(f"'{key}' in {where} of {path} must be a positive whole number, "
                        f"not {value!r}.")
    return value


def check_whole(value, key, where, path) -> int:
    """A whole number, not text or a bool (UserError else).

    >>> check_whole(0, "seed", "the holdout", Path("s.toml"))
    0
    """
    if not isinstance(value, int) or isinstance(value, bool):
        raise UserError(f"'{key}' in {where} of {path} must be a whole number, not {value!r}; "
                        f"write it without quotes, e.g. {key} = 0.")
    return value


def check_seed(value, key, where, path) -> int:
    """A random seed: a whole number from 0 to 2**32 - 1 (UserError else).

    >>> check_seed(0, "sample_seed", "[suite]", Path("s.toml"))
    0
    """
    value = check_whole(value, key, where, path)
    if not 0 <= value < SEED_LIMIT:
        raise UserError(f"'{key}' in {where} of {path} is {value}, but a seed must be between 0 "
                        f"and {SEED_LIMIT - 1}; write one in that range, e.g. {key} = 0.")
    return value


def check_column_name(value, key, where, path) -> str:
    """One column name as text, not a list or a number (UserError else).

    >>> check_column_name("sold_on", "date", "the holdout", Path("s.toml"))
    'sold_on'
    """
    if not isinstance(value, str) or not value:
        raise UserError(f"'{key}' in {where} of {path} must be one column name in quotes, not "
                        f"{value!r}.")
    return value


def check_cutoff(value, where, path) -> str:
    """A holdout cutoff as ISO 8601 text: a date or a date-time, with or without a UTC offset
    (``split`` checks the offset against the date column's own).

    >>> check_cutoff("2016-01-01", "task t", Path("s.toml"))
    '2016-01-01'
    """
    import datetime as dt

    import pandas as pd

    stamp = pd.NaT
    if isinstance(value, (str, dt.date)):  # not a TOML time of day: that is no date
        try:
            stamp = pd.Timestamp(str(value))
        except (ValueError, TypeError):
            pass
    if stamp is pd.NaT:
        raise UserError(f"The holdout cutoff {value!r} of {where} in {path} is not a date; write "
                        f"it as ISO 8601, e.g. cutoff = \"2016-01-01\".")
    return str(value)  # as before, so the keys of existing tasks do not change


def check_ordinal(value, where, path) -> tuple:
    """``ordinal`` as ((column, levels), ...): lists of distinct single values, in order.

    >>> check_ordinal({"grade": ["low", "high"]}, "task t", Path("s.toml"))
    (('grade', ('low', 'high')),)
    """
    bad = (f"'ordinal' of {where} in {path} must map column names to lists of distinct "
           f"levels in order, e.g. ordinal = {{ grade = [\"low\", \"mid\", \"high\"] }}")
    if not isinstance(value, dict):
        raise UserError(bad + ".")
    out = []
    for column, levels in value.items():
        if not isinstance(levels, list) or not levels:
            raise UserError(f"{bad}; fix '{column}'.")
        for level in levels:
            if not isinstance(level, (str, int, float)):
                raise UserError(f"{bad}; level {level!r} of '{column}' is not a single text or "
                                f"number.")
        repeated = [lv for i, lv in enumerate(levels) if lv in levels[:i]]
        if repeated:
            raise UserError(f"{bad}; '{column}' lists {repeated[0]!r} twice.")
        out.append((column, tuple(levels)))
    return tuple(out)


def check_str_list(value, key, where, path) -> tuple[str, ...]:
    """Column names as a tuple (one name alone is a list of one).

    >>> check_str_list("sold_on", "dates", "task t", Path("s.toml"))
    ('sold_on',)
    """
    if value is None:
        return ()
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise UserError(f"'{key}' in {where} of {path} must be a list of column names.")
    return tuple(value)


MAX_SEEDS = 1000  # seeds per model: more is never needed and would plan billions of jobs


def check_seed_count(seeds, offset: int = 0) -> int:
    """How many seeds per model a run uses: a whole number 1 .. MAX_SEEDS (UserError else).

    >>> check_seed_count(3)
    3
    """
    if not isinstance(seeds, int) or isinstance(seeds, bool) or not 1 <= seeds <= MAX_SEEDS:
        raise UserError(f"--seeds must be a whole number from 1 to {MAX_SEEDS}, not {seeds!r}; "
                        f"give fewer seeds, e.g. --seeds 3.")
    if offset + seeds > SEED_LIMIT:
        raise UserError(f"Seeds {offset} .. {offset + seeds - 1} go past the largest seed "
                        f"{SEED_LIMIT - 1}; give fewer seeds.")
    return seeds


def check_seconds(value, option: str):
    """A time limit in seconds: None (no limit) or a finite number above 0 (UserError else).

    >>> check_seconds(2.5, "--job-timeout")
    2.5
    """
    if value is None:
        return None
    if (not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value)
            or value <= 0):
        raise UserError(f"{option} must be a finite number of seconds above 0, not {value!r}; "
                        f"leave it out for no limit.")
    return value


def check_tolerance(value, option: str = "--tolerance") -> float:
    """A tolerance: a finite number >= 0 (UserError else), in the units the option names.

    >>> check_tolerance(0.01)
    0.01
    """
    if (not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value)
            or value < 0):
        raise UserError(f"{option} must be a finite number of 0 or more, not {value!r}; e.g. "
                        f"{option} 0.01.")
    return float(value)
