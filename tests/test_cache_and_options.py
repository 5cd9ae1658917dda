"""The prepared-array cache commands, compare's reuse of the published reference's jobs, and
the library versions a run records and imports. (The executor options' errors are cases of the
bad-input matrix, tests/test_bad_input.py.)"""
import json
import shutil

import pytest
from tabpar.cli.main import main
from tabpar.evaluation import comparison
from tabpar.evaluation.comparison import compare
from tabpar.execution.provenance import library_versions
from tabpar.execution.runner import run_suite


def test_cache_info_lists_entries_and_clear_empties_it(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("TABPAR_CACHE", str(tmp_path / "cache"))
    run_suite("quick", tasks=["attrition"], models=["naive"], seeds=1, out=tmp_path / "run",
              workers=1)
    assert main(["cache", "info"]) == 0
    out = capsys.readouterr().out
    assert "attrition-" in out and "1 entries" in out and str(tmp_path / "cache") in out
    assert main(["cache", "clear"]) == 0
    assert "removed 1 cached entries" in capsys.readouterr().out
    assert main(["cache", "info"]) == 0
    assert "0 entries" in capsys.readouterr().out


def _as_published_reference(quick_run, root, monkeypatch, change=None):
    """The session's quick run (made by this code with these libraries) set up as the published
    quick reference under ``root``; ``change`` edits each of its job rows first."""
    reference = root / "reference" / "quick"
    shutil.copytree(quick_run.out, reference)
    if change is not None:
        jobs = reference / "jobs.jsonl"
        rows = [change(json.loads(line)) for line in jobs.read_text().splitlines()]
        jobs.write_text("".join(json.dumps(r, sort_keys=True) + "\n" for r in rows))
    monkeypatch.setattr(comparison, "published_root", lambda: root)
    return reference


@pytest.mark.parametrize("change, reused", [
    (None, 1),  # same data, library versions and preparing code: the job is reused
    (lambda r: {**r, "code": "0" * 16}, 0),  # other preparing code
    (lambda r: {**r, "versions": {**r["versions"], "scikit-learn": "0.0"}}, 0),  # other library
], ids=["everything-matches", "other-code", "other-versions"])
def test_compare_reuses_published_reference_jobs_only_when_everything_matches(
        change, reused, quick_run, tmp_path, monkeypatch):
    reference = _as_published_reference(quick_run, tmp_path / "published", monkeypatch, change)
    result = compare("builtin", suite="quick", tasks=["attrition"], models=["lgbm"], seeds=1,
                     out=tmp_path / "cmp", workers=1)
    assert result.reused_baseline_jobs == reused
    baseline = [json.loads(line) for line in open(tmp_path / "cmp" / "baseline" / "jobs.jsonl")]
    assert [(r["task"], r["model"], r["seed"]) for r in baseline] == [("attrition", "lgbm", 0)]
    if reused:  # the reference's own predictions file, copied
        name = baseline[0]["predictions"]
        assert (tmp_path / "cmp" / "baseline" / name).read_bytes() == \
            (reference / name).read_bytes()


def test_versions_are_the_installed_packages_and_a_run_imports_only_its_models_libraries(
        tmp_path):
    # reference: each library's own __version__ (the versions are read from package metadata)
    import subprocess
    import sys

    import lightgbm
    import numpy
    import pandas
    import sklearn
    import xgboost

    versions = library_versions()
    for name, module in (("numpy", numpy), ("pandas", pandas), ("scikit-learn", sklearn),
                         ("xgboost", xgboost), ("lightgbm", lightgbm)):
        assert versions[name] == module.__version__
    # a run of naive + LightGBM in one process never loads XGBoost (memory: about 18 MB)
    code = ("import sys; from tabpar.execution.runner import run_suite; "
            "run_suite('quick', tasks=['mlc_churn'], models=['naive', 'lgbm'], seeds=1, "
            f"out={str(tmp_path / 'out')!r}, workers=1); print('xgboost' in sys.modules)")
    shown = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                           check=True).stdout.split()
    assert shown[-1] == "False"
