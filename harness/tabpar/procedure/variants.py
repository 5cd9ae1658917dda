"""Preprocessing procedures: the built-in baseline, its TOML variants, and user callables.

A procedure turns a task into an unfitted transformer that takes the task's feature frame and
returns numeric features. Three kinds of SPEC name one:

- ``builtin``: the baseline procedure (``BaselinePrep``);
- ``PATH.toml``: a variant of it, ``[variant]`` with ``name`` and any of ``calendar``,
  ``missing_flags``, ``fill``, ``one_hot_max_levels`` (see ``BaselinePrep``);
- ``module:function``: a function importable from the working folder or an installed package,
  called with one argument (a ``TaskColumns``) if it takes one, else with none, returning an
  unfitted scikit-learn transformer. This is the only way user code ever runs in tabpar.
"""
from __future__ import annotations

import hashlib
import importlib
import inspect
import json
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from tabpar.common.errors import UserError
from tabpar.common.files import read_bounded
from tabpar.data.suites import Task, tomllib
from tabpar.procedure.baseline import BaselinePrep

BUILTIN = "builtin"
VARIANT_KEYS = {"calendar": bool, "missing_flags": bool, "fill": str, "one_hot_max_levels": int}


@dataclass(frozen=True)
class TaskColumns:
    """What a user procedure may know about a task's columns."""

    task: str
    type: str
    date_columns: tuple
    ordinal: dict


@dataclass(frozen=True)
class Procedure:
    name: str  # as shown in reports and stored in result rows
    key: str  # identity for caching: changes when the procedure's definition changes
    build: Callable  # Task -> unfitted transformer
    user_code: bool  # True for module:function procedures


def task_columns(task: Task) -> TaskColumns:
    dates = tuple(task.dates) + ((task.assemble_date.name,) if task.assemble_date else ())
    return TaskColumns(task=task.name, type=task.type, date_columns=dates,
                       ordinal={k: list(v) for k, v in task.ordinal})


def _builtin_build(options: dict):
    def build(task: Task):
        cols = task_columns(task)
        return BaselinePrep(date_columns=list(cols.date_columns), ordinal=cols.ordinal,
                            **options)
    return build


def builtin() -> Procedure:
    return Procedure(name=BUILTIN, key=BUILTIN, build=_builtin_build({}), user_code=False)


def _variant(path: Path) -> Procedure:
    try:
        raw = tomllib.loads(read_bounded(path, "Variant file", fix="give a .toml file")
                            .decode("utf-8"))
    except UnicodeDecodeError:
        raise UserError(f"Variant file {path} is not UTF-8 text; save it as UTF-8.") from None
    except tomllib.TOMLDecodeError as exc:
        raise UserError(f"Variant file {path} is not valid TOML: {exc}; fix that line.") \
            from None
    table = raw.get("variant")
    if not isinstance(table, dict) or set(raw) != {"variant"}:
        raise UserError(f"Variant file {path} needs exactly one [variant] table.")
    options = {}
    for key, value in table.items():
        if key == "name":
            continue
        if key not in VARIANT_KEYS:
            raise UserError(f"Unknown field '{key}' in [variant] of {path}; allowed are name, "
                            f"{', '.join(VARIANT_KEYS)}.")
        kind = VARIANT_KEYS[key]
        if not isinstance(value, kind) or (kind is int and isinstance(value, bool)):
            raise UserError(f"'{key}' in [variant] of {path} must be a {kind.__name__}, not "
                            f"{value!r}.")
        options[key] = value
    if options.get("fill", "median") not in ("median", "mean"):
        raise UserError(f"'fill' in [variant] of {path} must be 'median' or 'mean'.")
    name = str(table.get("name", path.stem))
    key = "variant:" + json.dumps(options, sort_keys=True)
    return Procedure(name=name, key=key, build=_builtin_build(options), user_code=False)


def _callable(spec: str) -> Procedure:
    module_name, _, function_name = spec.partition(":")
    if not module_name or not function_name:
        raise UserError(f"'{spec}' is not a procedure SPEC; write builtin, a variant .toml "
                        f"path, or module:function.")
    if "" not in sys.path and "." not in sys.path:
        sys.path.insert(0, "")  # the working folder, as `python -m` would
    try:
        module = importlib.import_module(module_name)
    except ImportError as exc:
        raise UserError(f"Cannot import module '{module_name}' for procedure '{spec}' ({exc}); "
                        f"run from the folder that holds it or install its package.") from None
    function = getattr(module, function_name, None)
    if not callable(function):
        raise UserError(f"Module '{module_name}' has no function '{function_name}' for "
                        f"procedure '{spec}'.")
    try:
        source = Path(inspect.getsourcefile(module)).read_bytes()
    except (TypeError, OSError):
        source = b""
    digest = hashlib.sha256(source).hexdigest()[:12]
    takes_task = len(inspect.signature(function).parameters) >= 1

    def build(task: Task):
        made = function(task_columns(task)) if takes_task else function()
        if not (hasattr(made, "fit") and hasattr(made, "transform")):
            raise UserError(f"Procedure '{spec}' returned {type(made).__name__}, not a "
                            f"transformer with fit and transform; return an unfitted "
                            f"scikit-learn transformer.")
        return made

    return Procedure(name=spec, key=f"callable:{spec}:{digest}", build=build, user_code=True)


def resolve_procedure(spec: str) -> Procedure:
    """The procedure a SPEC names (see the module docstring)."""
    spec = str(spec)
    if spec == BUILTIN:
        return builtin()
    if spec.endswith(".toml"):
        path = Path(spec)
        if not path.is_file():
            raise UserError(f"Variant file {path} does not exist.")
        return _variant(path)
    return _callable(spec)
