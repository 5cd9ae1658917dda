"""Mistakes in the user's input: exit code 2 and one line "tabpar: error: ...", no traceback.

Suites and CSV files here are synthetic stand-ins written into tmp_path.
"""
from __future__ import annotations

import os
import subprocess
import sys

import pytest

from tabpar.cli.main import main

DATA = "size,rooms,price\n50,2,100\n70,3,150\n90,4,210\n"  # synthetic

SUITE = """
[suite]
name = "synthetic"

[[task]]
name = "homes"
source = "csv:{source}"
target = "{target}"
type = "regression"
metric = "{metric}"
"""

# (case id, extra `tabpar run` arguments, suite file fields or None, words the message names)
CASES = [
    ("unknown-suite", ["--suite", "no-such-suite"], None, "no-such-suite"),
    ("unknown-task", ["--suite", "quick", "--tasks", "no_such_task"], None, "no_such_task"),
    ("unknown-model", ["--suite", "quick", "--models", "naive,no_such_model"], None,
     "no_such_model"),
    ("csv-file-missing", [], {"source": "missing.csv", "target": "price", "metric": "rmse"},
     "missing.csv"),
    ("target-not-in-data", [], {"source": "homes.csv", "target": "sale_price",
                                "metric": "rmse"}, "sale_price"),
    ("unknown-metric", [], {"source": "homes.csv", "target": "price", "metric": "median_ae"},
     "median_ae"),
    ("zero-seeds", ["--suite", "quick", "--seeds", "0"], None, "--seeds"),
]


@pytest.mark.parametrize("case, args, fields, named", CASES, ids=[c[0] for c in CASES])
def test_user_mistake_gives_one_line_and_exit_code_2(case, args, fields, named, tmp_path,
                                                     write_suite, capsys):
    if fields is not None:
        path = write_suite(SUITE.format(**fields), files={"homes.csv": DATA})
        args = ["--suite", str(path)] + args
    code = main(["run", *args, "--out", str(tmp_path / "out"), "--quiet"])
    captured = capsys.readouterr()
    assert code == 2
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert lines[0].startswith("tabpar: error: ")
    assert named in lines[0]
    assert "Traceback" not in captured.err + captured.out
    assert not (tmp_path / "out" / "jobs.jsonl").exists()  # nothing was run


def test_user_mistake_through_the_console_script_has_no_traceback(tmp_path):
    proc = subprocess.run(
        [sys.executable, "-m", "tabpar.cli.main", "run", "--suite", "quick", "--models",
         "no_such_model", "--out", str(tmp_path / "out")],
        capture_output=True, text=True, cwd=tmp_path, env=dict(os.environ), timeout=300)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("tabpar: error: ")
    assert "no_such_model" in lines[0]
    assert proc.stdout == ""
