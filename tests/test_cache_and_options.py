"""The prepared-array cache commands, the executor options' errors, and compare's reuse of the
published reference's jobs."""
import json

import pytest

from tabpar.cli.main import main
from tabpar.evaluation.comparison import compare
from tabpar.evaluation.reference import published_root
from tabpar.execution.runner import library_versions, preparation_code_digest, run_suite


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


@pytest.mark.parametrize("argv,words", [
    (["--scheduler", "tcp://127.0.0.1:1"], "--scheduler needs --executor dask"),
    (["--executor", "dask"], "--executor dask needs --scheduler"),
])
def test_executor_options_that_cannot_work_are_one_sentence(argv, words, tmp_path, capsys):
    code = main(["run", "--suite", "quick", "--tasks", "attrition", "--models", "naive",
                 "--seeds", "1", "--out", str(tmp_path / "out")] + argv)
    err = capsys.readouterr().err
    assert code == 2 and words in err and "Traceback" not in err
    assert not (tmp_path / "out").exists()


def test_compare_reuses_the_published_reference_when_everything_matches(tmp_path):
    reference = published_root() / "reference" / "quick"
    rows = [json.loads(line) for line in open(reference / "jobs.jsonl")]
    row = next(r for r in rows if r["task"] == "attrition" and r["model"] == "lgbm")
    same = row["versions"] == library_versions() and row.get("code") == preparation_code_digest()
    result = compare("builtin", suite="quick", tasks=["attrition"], models=["lgbm"], seeds=2,
                     out=tmp_path, workers=1)
    # reused only when library versions and the preparing code are those the reference used
    assert result.reused_baseline_jobs == (2 if same else 0)


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
