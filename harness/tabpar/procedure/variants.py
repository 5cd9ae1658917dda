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

import contextlib
import hashlib
import importlib
import inspect
import json
import os
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from tabpar.common.errors import UserError
from tabpar.common.files import read_bounded
from tabpar.data.suites import Task, tomllib

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
        # imported here: the baseline pulls in pandas and scikit-learn, which a command that
        # only reads finished results never needs
        from tabpar.procedure.baseline import BaselinePrep
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
    if options.get("one_hot_max_levels", 0) < 0:
        raise UserError(f"'one_hot_max_levels' in [variant] of {path} is "
                        f"{options['one_hot_max_levels']}; write 0 (codes only) or more.")
    if options.get("fill", "median") not in ("median", "mean"):
        raise UserError(f"'fill' in [variant] of {path} must be 'median' or 'mean'.")
    name = str(table.get("name", path.stem))
    key = "variant:" + json.dumps(options, sort_keys=True)
    return Procedure(name=name, key=key, build=_builtin_build(options), user_code=False)


def import_from_working_folder(module_name: str):
    """Import ``module_name`` with the working folder first on ``sys.path``, as ``python -m``
    would, for this import only: a file in the working folder named like one of tabpar's own
    dependencies (``lightgbm.py``) must never be imported by tabpar afterwards. Prints of the
    module's top-level code go to stderr, so tabpar's stdout (``--json``) stays its own.

    >>> import_from_working_folder("json").__name__
    'json'
    """
    saved = list(sys.path)
    sys.path.insert(0, os.getcwd())
    try:
        with contextlib.redirect_stdout(sys.stderr):
            return importlib.import_module(module_name)
    finally:
        sys.path[:] = saved


def _callable(spec: str) -> Procedure:
    module_name, _, function_name = spec.partition(":")
    if not module_name or not function_name:
        raise UserError(f"'{spec}' is not a procedure SPEC; write builtin, a variant .toml "
                        f"path, or module:function.")
    try:
        module = import_from_working_folder(module_name)
    except ImportError as exc:
        if not (isinstance(exc, ModuleNotFoundError) and exc.name
                and (module_name + ".").startswith(exc.name + ".")):
            raise UserError(f"Module '{module_name}' of procedure '{spec}' failed while being "
                            f"imported ({describe_failure(exc)}); fix its imports.") from None
        raise UserError(f"Cannot import module '{module_name}' for procedure '{spec}' ({exc}); "
                        f"run from the folder that holds it or install its package.") from None
    except SyntaxError as exc:
        raise UserError(f"Module '{module_name}' of procedure '{spec}' has a syntax error at "
                        f"line {exc.lineno} of {exc.filename}; fix it.") from None
    except (Exception, SystemExit) as exc:
        raise UserError(f"Module '{module_name}' of procedure '{spec}' failed while being "
                        f"imported ({describe_failure(exc)}); fix its top-level code.") from None
    function = getattr(module, function_name, None)
    if not callable(function):
        found = sorted(n for n, v in vars(module).items()
                       if inspect.isfunction(v) and not n.startswith("_"))
        raise UserError(f"Module '{module_name}' has no function '{function_name}' for "
                        f"procedure '{spec}'; name one of its functions "
                        f"({', '.join(found) or 'none'}).")
    try:
        source = Path(inspect.getsourcefile(module)).read_bytes()
    except (TypeError, OSError):
        source = b""
    digest = hashlib.sha256(source).hexdigest()[:12]
    try:
        takes_task = len(inspect.signature(function).parameters) >= 1
    except (TypeError, ValueError):  # a builtin or C function without a signature
        takes_task = False

    def build(task: Task):
        try:
            with contextlib.redirect_stdout(sys.stderr):
                made = function(task_columns(task)) if takes_task else function()
        except (Exception, SystemExit) as exc:
            raise UserError(f"Procedure '{spec}' failed while building its transformer for "
                            f"task '{task.name}' ({describe_failure(exc)}); it must take one argument (a "
                            f"TaskColumns) or none and return an unfitted transformer.") \
                from None
        if not (hasattr(made, "fit") and hasattr(made, "transform")):
            raise UserError(f"Procedure '{spec}' returned {type(made).__name__}, not a "
                            f"transformer with fit and transform; return an unfitted "
                            f"scikit-learn transformer.")
        return made

    return Procedure(name=spec, key=f"callable:{spec}:{digest}", build=build, user_code=True)


def describe_failure(exc: BaseException) -> str:
    """What user code raised, in a few words for a message; ``sys.exit`` named as such.

    >>> describe_failure(SystemExit(0))
    'it called sys.exit(0)'
    """
    if isinstance(exc, SystemExit):
        return f"it called sys.exit({exc.code!r})"
    return f"{exc.__class__.__name__}: {exc}"[:300]


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
